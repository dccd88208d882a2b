"""The run-set store of a perturbation study: files, fingerprints, the lock, resuming.

Layout of a result folder (``DIR`` below is the study's result folder)::

    DIR/perturb/settings.json            settings and fingerprint of the current run set
    DIR/perturb/runs.jsonl               one line per finished run (this run set only)
    DIR/perturb/summary.json             summary of the run set (and of the sweep, if any)
    DIR/perturb/runs-<fp>.jsonl          earlier run sets with other settings, moved aside
    DIR/perturb/settings-<fp>.json
    DIR/perturb/sweep/size-<size>/...    the same files for every size of a sweep

Run sets and fingerprints. A run set is identified by a fingerprint: a hash of the model,
size, seed, window, special-set options (pairs, resolution, method, tol), distance options,
and of the two base grids. Every line of ``runs.jsonl`` carries it. When a study is rerun
with other settings, the current ``runs.jsonl`` and ``settings.json`` are moved aside to
``runs-<old fp>.jsonl`` / ``settings-<old fp>.json`` and a new run set starts; when the
settings return to an earlier fingerprint its file is moved back and resumed. Run sets are
never mixed.

Resuming. Only the parent process writes. Each finished run is appended as one line
(:func:`specmap.io.append_jsonl`: one ``write``, flushed, fsynced) as soon as it arrives.
A rerun skips run indices already present; a torn last line (a kill during the write) is
truncated away before appending, and corrupt or repeated lines elsewhere are dropped by one
atomic rewrite (:func:`tidy_runs`). A kill loses at most the runs in flight. A lock file
(``.lock``, ``flock``) keeps two drivers off the same run set.
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import json
import os
import time
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import Any

from specmap.errors import StudyError
from specmap.grids.model import Grid
from specmap.io import append_jsonl, read_json, read_jsonl, to_plain, write_json, write_text
from specmap.perturb.run import TIME_FIELDS, PerturbBase, PerturbSettings


def _grid_hash(grid: Grid) -> str:
    text = json.dumps(to_plain(grid.to_json()["contours"]), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def fingerprint(base: PerturbBase, settings: PerturbSettings) -> str:
    """16 hex digits identifying a run set: settings (except ``runs``), window and both grids."""
    data = settings.to_json()
    data.pop("runs")
    if not (settings.distance and settings.model == "function"):
        for key in ("distance_method", "degrees", "dense_resolution"):
            data.pop(key)
    data["window"] = base.window.to_json()
    data["grids"] = [_grid_hash(base.grid_f), _grid_hash(base.grid_g)]
    text = json.dumps(data, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def repair_tail(path: Path) -> int:
    """Truncate a torn last line (bytes after the last newline); return the bytes removed."""
    if not path.exists():
        return 0
    size = path.stat().st_size
    if size == 0:
        return 0
    with path.open("rb+") as fh:
        fh.seek(-1, os.SEEK_END)
        if fh.read(1) == b"\n":
            return 0
        # Scan backwards for the last newline.
        pos, chunk = size, 4096
        keep = 0
        while pos > 0:
            start = max(0, pos - chunk)
            fh.seek(start)
            buf = fh.read(pos - start)
            i = buf.rfind(b"\n")
            if i >= 0:
                keep = start + i + 1
                break
            pos = start
        fh.truncate(keep)
        fh.flush()
        os.fsync(fh.fileno())
    return size - keep


def load_runs(path: Path, fp: str | None = None) -> dict[int, dict[str, Any]]:
    """Complete records of a runs file by run index (first wins), optionally of one fingerprint."""
    out: dict[int, dict[str, Any]] = {}
    for rec in read_jsonl(path):
        if not isinstance(rec, dict) or "run" not in rec:
            continue
        if fp is not None and rec.get("fingerprint") != fp:
            continue
        out.setdefault(int(rec["run"]), rec)
    return out


def tidy_runs(path: Path, fp: str) -> dict[int, dict[str, Any]]:
    """The complete records of run set ``fp`` in ``path`` (:func:`load_runs`), with the file tidied.

    A torn last line is truncated (:func:`repair_tail`). Lines that are not a record (bad
    JSON, not an object, no ``run``) and repeats of a (fingerprint, run) already seen are
    dropped by rewriting the file atomically, keeping every other line byte for byte; such runs
    are then computed again and appended once.
    """
    repair_tail(path)
    if not path.exists():
        return {}
    lines = path.read_bytes().splitlines(keepends=True)
    keep, seen = [], set()
    for raw in lines:
        try:
            rec = json.loads(raw)
        except ValueError:
            continue
        if not isinstance(rec, dict) or "run" not in rec:
            continue
        try:
            key = (rec.get("fingerprint"), int(rec["run"]))
        except (TypeError, ValueError):
            continue
        if key not in seen:
            seen.add(key)
            keep.append(raw)
    if len(keep) != len(lines):
        write_text(path, b"".join(keep).decode())
    return load_runs(path, fp)


def write_summary(folder: Path, summary: dict[str, Any]) -> None:
    """Write ``summary.json`` of a run set (the one place it is written)."""
    write_json(folder / "summary.json", summary)


def switch_run_set(folder: Path, fp: str, settings_json: dict[str, Any]) -> None:
    """Make ``runs.jsonl`` hold the run set ``fp``: move another set aside, bring ``fp`` back."""
    folder.mkdir(parents=True, exist_ok=True)
    runs, sett = folder / "runs.jsonl", folder / "settings.json"
    old_fp = None
    if sett.is_file():
        with contextlib.suppress(ValueError, OSError):
            old_fp = read_json(sett).get("fingerprint")
    if old_fp is None and runs.exists():
        first = next(iter(read_jsonl(runs)), None)
        old_fp = first.get("fingerprint") if first else None
    if old_fp != fp:
        if runs.exists():
            if old_fp is None:
                old_fp = "unknown-" + time.strftime("%Y%m%d%H%M%S")
            aside = folder / f"runs-{old_fp}.jsonl"
            if aside.exists():  # same old set moved aside before: merge, keeping each run once
                repair_tail(runs)
                have = load_runs(aside)
                for idx, rec in sorted(load_runs(runs).items()):
                    if idx not in have:
                        append_jsonl(aside, rec)
                runs.unlink()
            else:
                os.replace(runs, aside)
            if sett.is_file():
                os.replace(sett, folder / f"settings-{old_fp}.json")
        back = folder / f"runs-{fp}.jsonl"
        if back.exists():
            os.replace(back, runs)
            with contextlib.suppress(FileNotFoundError):
                (folder / f"settings-{fp}.json").unlink()
    write_json(sett, settings_json)


@contextlib.contextmanager
def locked(folder: Path) -> Iterator[None]:
    folder.mkdir(parents=True, exist_ok=True)
    fd = os.open(folder / ".lock", os.O_RDWR | os.O_CREAT, 0o644)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise StudyError(
                "another perturbation study is writing this folder",
                file=str(folder),
                field="perturb",
                fix="wait for it to finish or use another --out folder",
            ) from None
        yield
    finally:
        os.close(fd)


def records_without_time(records: Iterable[dict[str, Any]]) -> list[dict[str, Any]]:
    """Records sorted by run index with timing fields removed (for reproducibility checks)."""
    out = [{k: v for k, v in r.items() if k not in TIME_FIELDS} for r in records]
    return sorted(out, key=lambda r: int(r["run"]))
