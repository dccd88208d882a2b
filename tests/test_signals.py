"""SIGTERM is handled like Ctrl-C: one line on stderr, no traceback, exit status 143 (128 + 15).

Source: the POSIX shell convention for a process ended by a signal (128 + signal number) and the
project's error contract (issue 14: SIGTERM used to leave a traceback and running workers).
"""

from __future__ import annotations

import json
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


def _perturb_study(folder: Path, runs: int) -> Path:
    """A small function-model study (built here): a run takes a fraction of a second."""
    study = folder / "s.toml"
    study.write_text(
        '[study]\nname = "t"\nseed = 1\n'
        '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nresolution = 200\nmap = ["x", "y"]\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nresolution = 200\nmap = ["x", "y + 0.3*z"]\n'
        "[map]\nresolution = 21\n"
        f'[perturb]\nmodel = "function"\nsize = 0.01\nruns = {runs}\n'
    )
    return study


def _process_tree(pid: int) -> list:
    """The live descendants of ``pid``: psutil when installed, else the PPid lines of /proc."""
    try:
        import psutil
    except ImportError:  # pragma: no cover - psutil is in the test extras
        psutil = None
    if psutil is not None:
        return psutil.Process(pid).children(recursive=True)
    parent = {}
    for status in Path("/proc").glob("[0-9]*/status"):
        try:
            fields = dict(ln.split(":\t", 1) for ln in status.read_text().splitlines() if ":\t" in ln)
            parent[int(status.parent.name)] = int(fields["PPid"])
        except (OSError, KeyError, ValueError):
            continue
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        kids = [c for c, pp in parent.items() if pp == p]
        out += kids
        todo += kids
    return out


def _alive(procs: list, timeout: float) -> list:
    """Those of ``procs`` still running after ``timeout`` seconds (zombies count as ended)."""
    deadline = time.monotonic() + timeout
    while True:
        alive = []
        for p in procs:
            pid = p if isinstance(p, int) else p.pid
            try:
                state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
            except OSError:
                continue  # gone
            if state != "Z":
                alive.append(pid)
        if not alive or time.monotonic() > deadline:
            return alive
        time.sleep(0.2)


def test_sigterm_during_perturb_ends_the_workers_and_the_run_set_resumes(tmp_path: Path) -> None:
    # Issue 14 section 4: SIGTERM to the main process left the joblib workers running. Expected:
    # exit 143, every descendant process ended, the finished runs kept, and a rerun completing the
    # run set with each run index exactly once (the records written before the signal unchanged).
    runs = 5
    study = _perturb_study(tmp_path, runs)
    store = tmp_path / "r" / "perturb" / "runs.jsonl"
    cmd = [sys.executable, "-m", "specmap", "--quiet", "perturb", str(study), "--out", str(tmp_path / "r")]
    proc = subprocess.Popen([*cmd, "--jobs", "2"], cwd=tmp_path, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if store.exists() and store.read_text().count("\n") >= 1:
            break
        time.sleep(0.1)
    assert proc.poll() is None, "the study finished before the signal: use more runs"
    workers = _process_tree(proc.pid)
    assert len(workers) >= 2, workers  # two joblib workers (and their helpers) are running
    proc.send_signal(signal.SIGTERM)
    err = proc.communicate(timeout=120)[1]
    assert proc.returncode == 143, err
    assert "Traceback" not in err and "terminated" in err.splitlines()[-1], err
    assert _alive(workers, timeout=30.0) == [], "worker processes outlived the SIGTERM"
    before = [json.loads(ln) for ln in store.read_text().splitlines()]
    assert 1 <= len(before) < runs
    done = subprocess.run(cmd, cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    after = [json.loads(ln) for ln in store.read_text().splitlines()]
    assert sorted(r["run"] for r in after) == list(range(runs))
    assert after[: len(before)] == before
