"""SIGTERM is handled like Ctrl-C: one line on stderr, no traceback, exit status 143 (128 + 15).

Source: the POSIX shell convention for a process ended by a signal (128 + signal number) and the
project's error contract (issue 14: SIGTERM used to leave a traceback and running workers).
"""

from __future__ import annotations

import signal
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def test_sigterm_during_a_map_is_a_clean_exit(tmp_path: Path) -> None:
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "specmap",
            "map",
            str(REPO / "studies" / "ring.toml"),
            "--out",
            str(tmp_path / "r"),
        ],
        cwd=REPO,
        stderr=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
    )
    time.sleep(8.0)  # past the imports, inside the grid or atlas stage
    assert proc.poll() is None, "the map finished before the signal: use a longer study"
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 143, err
    assert "Traceback" not in err, err
    assert "terminated" in err.splitlines()[-1]
