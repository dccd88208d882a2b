"""Bad-input corpus of issue 14: each case is a one-line error with exit status 2, or a correct result.

Source of each expectation: the project's error contract (specmap/errors.py: one line
``file: field: problem; fix``, exit 2, no traceback) and issue 14's list of cases; messages
are checked for the file and field they must name, not for exact wording.
"""

from __future__ import annotations

import json
import os
import stat
import subprocess
from pathlib import Path

import pytest

from specmap.errors import ExpressionError
from specmap.expr import compile_expr
from tests.test_cli_errors import assert_user_error as _one_line_error
from tests.test_cli_errors import run_cli

HEAD = '[study]\nname = "t"\nseed = 1\n'


def assert_user_error(proc: subprocess.CompletedProcess, *needles: str) -> None:
    """The shared one-line check of tests/test_cli_errors.py, plus the line's prefix."""
    _one_line_error(proc, *needles)
    assert proc.stderr.strip().startswith("specmap: error:"), proc.stderr


# --------------------------------------------------------------------------- 1. expressions


@pytest.mark.parametrize("text", ["x + y # + 100*z", "# x", "x#"])
def test_hash_in_expression_is_rejected(text: str) -> None:
    # Issue 14: '#' silently dropped the rest of the text; it must be refused.
    with pytest.raises(ExpressionError, match="#") as info:
        compile_expr(text, file="s.toml", field="f.map[0]")
    assert "s.toml" in str(info.value) and "f.map[0]" in str(info.value)


def test_hash_in_study_map_one_line_exit_2(tmp_path: Path) -> None:
    body = (
        '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y # + 100*z"]\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\n'
    )
    (tmp_path / "s.toml").write_text(HEAD + body)
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "s.toml", "f.map", "#")


# --------------------------------------------------------------------------- 2. grid files


def _grid(**extra: object) -> dict:
    g = {"format": "specmap-grid/1", "contours": [{"id": "p0", "kind": "proper", "points": [[0, 1], [1, 0]]}]}
    g.update(extra)
    return g


def _run_grid_file(tmp_path: Path, text: str) -> subprocess.CompletedProcess:
    (tmp_path / "g.json").write_text(text)
    (tmp_path / "s.toml").write_text(HEAD + '[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n')
    return run_cli(["grid", "s.toml"], tmp_path)


BIG = "1" + "0" * 399  # a 400-digit integer

GRID_CASES = {
    "tolerance_string": (json.dumps(_grid(tolerance="0.1")), ["tolerance"]),
    "tolerance_list": (json.dumps(_grid(tolerance=[0.1])), ["tolerance"]),
    "tolerance_huge_int": (json.dumps(_grid()).replace("{", '{"tolerance": ' + BIG + ", ", 1), ["tolerance"]),
    "meta_list": (json.dumps(_grid(meta=[1, 2])), ["meta", "object"]),
    "meta_string": (json.dumps(_grid(meta="x")), ["meta", "object"]),
    "coordinate_400_digits": (
        json.dumps(_grid()).replace("[0, 1]", "[0, " + BIG + "]"),
        ["contours[0].points", "1e+12"],
    ),
    "coordinate_1e308": (
        json.dumps(_grid()).replace("[0, 1]", "[0, 1e308]"),
        ["contours[0].points", "1e+12"],
    ),
    # 1e308 made the tolerance infinite and so accepted an increasing contour (issue 14)
    "increasing_with_1e308": (
        json.dumps(
            {
                "format": "specmap-grid/1",
                "contours": [
                    {"id": "p0", "kind": "proper", "points": [[0, 0], [1, 1]]},
                    {"id": "v0", "kind": "vertical", "start": [1e308, 0]},
                ],
            }
        ),
        ["contours[1].start", "1e+12"],
    ),
    "nested_1e5": (
        '{"format": "specmap-grid/1", "contours": ' + "[" * 100_000 + "]" * 100_000 + "}",
        ["g.json", "nested"],
    ),
}


@pytest.mark.parametrize("case", sorted(GRID_CASES))
def test_bad_grid_file_one_line_exit_2(case: str, tmp_path: Path) -> None:
    text, needles = GRID_CASES[case]
    proc = _run_grid_file(tmp_path, text)
    assert_user_error(proc, "g.json", *needles)
    assert not (tmp_path / "results").exists()


def test_grid_file_tolerance_number_accepted() -> None:
    # A finite numeric tolerance and an object meta are kept as given (the specmap-grid/1 contract).
    from specmap.grids.model import grid_from_json

    g = grid_from_json(_grid(tolerance=0.25, meta={"a": 1}), file="g.json")
    assert g.tolerance == 0.25 and g.meta == {"a": 1}


# --------------------------------------------------------------------------- 4. files: modes


@pytest.mark.parametrize("mask", [0o022, 0o077, 0o002])
def test_result_files_honour_umask(mask: int, tmp_path: Path) -> None:
    # Expected mode: 0o666 & ~umask, what open(path, "w") gives (POSIX creat semantics).
    from specmap.io import append_jsonl, write_json, write_text

    old = os.umask(mask)
    try:
        paths = [write_json(tmp_path / "a.json", {"x": 1}), write_text(tmp_path / "b.txt", "t")]
        append_jsonl(tmp_path / "c.jsonl", {"x": 1})
        paths.append(tmp_path / "c.jsonl")
    finally:
        os.umask(old)
    for p in paths:
        assert stat.S_IMODE(p.stat().st_mode) == 0o666 & ~mask, p
    assert [q.name for q in tmp_path.iterdir() if q.name.startswith(".")] == []


# --------------------------------------------------------------------------- 5. report inputs

STUDY_JSON = {
    "name": "t",
    "study_file": "s.toml",
    "seed": 1,
    "window": {"a": [0, 1], "b": [-1, 1]},
    "commands": [],
}

REPORT_CASES = {
    # file, content, needles (the file and the field the report must name)
    "special_list": ("special.json", "[]", ["special.json", "(root)", "list"]),
    "special_no_counts": (
        "special.json",
        json.dumps({"components": [], "total_area": 0.0}),
        ["special.json", "counts"],
    ),
    "special_counts_list": (
        "special.json",
        json.dumps({"counts": [], "components": [], "total_area": 0.0}),
        ["special.json", "counts"],
    ),
    "distance_empty": ("distance.json", "{}", ["distance.json", "value"]),
    "grid_no_contours": (
        "grid_f.json",
        json.dumps({"format": "specmap-grid/1"}),
        ["grid_f.json", "contours"],
    ),
    "summary_list": ("perturb/summary.json", "[1]", ["summary.json", "(root)"]),
    "runs_line_list": ("perturb/runs.jsonl", "[1, 2]\n", ["runs.jsonl", "line 1"]),
}


@pytest.mark.parametrize("case", sorted(REPORT_CASES))
def test_bad_result_file_report_one_line_exit_2(case: str, tmp_path: Path) -> None:
    name, content, needles = REPORT_CASES[case]
    root = tmp_path / "res"
    (root / "perturb").mkdir(parents=True)
    (root / "study.json").write_text(json.dumps(STUDY_JSON))
    if name == "perturb/runs.jsonl":
        (root / "perturb" / "summary.json").write_text(json.dumps({"runs": 1}))
    (root / name).write_text(content)
    proc = run_cli(["report", str(root)], tmp_path)
    assert_user_error(proc, *needles)
    assert not (root / "report.pdf").exists()
