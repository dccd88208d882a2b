"""Bad-input corpus of issue 14: each case is a one-line error with exit status 2, or a correct result.

Source of each expectation: the project's error contract (specmap/errors.py: one line
``file: field: problem; fix``, exit 2, no traceback) and issue 14's list of cases; messages
are checked for the file and field they must name, not for exact wording.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from specmap.errors import ExpressionError
from specmap.expr import compile_expr

HEAD = '[study]\nname = "t"\nseed = 1\n'


def run_cli(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "specmap", "--quiet", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=300)


def assert_user_error(proc: subprocess.CompletedProcess, *needles: str) -> None:
    assert proc.returncode == 2, proc.stderr
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, proc.stderr
    assert "Traceback" not in proc.stderr
    assert lines[0].startswith("specmap: error:"), lines[0]
    for n in needles:
        assert n in lines[0], (n, lines[0])


# --------------------------------------------------------------------------- 1. expressions


@pytest.mark.parametrize("text", ["x + y # + 100*z", "# x", "x#"])
def test_hash_in_expression_is_rejected(text: str) -> None:
    # Issue 14: '#' silently dropped the rest of the text; it must be refused.
    with pytest.raises(ExpressionError, match="#") as info:
        compile_expr(text, file="s.toml", field="f.map[0]")
    assert "s.toml" in str(info.value) and "f.map[0]" in str(info.value)


def test_hash_in_study_map_one_line_exit_2(tmp_path: Path) -> None:
    body = ('[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y # + 100*z"]\n'
            '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\n')
    (tmp_path / "s.toml").write_text(HEAD + body)
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "s.toml", "f.map", "#")
