"""Benchmark: the demo's distance stage before and after closing issue 13 on it, same run.

Run ``python tests/benchmarks/bench_demo_certify.py [study.toml]`` (default: the demo study).
In one process, with the study's atlas built once (its time reported apart) and a fresh slice
evaluator per computation (no line is shared between them), it times
:func:`specmap.distance.matching_distance` with the study's grids, window and atlas:

- **before**: the study's settings with ``certify = "max"`` and the closed form of degree 2
  (:mod:`specmap.distance.top_degree`, in the slope-one search and over the whole strip) switched
  off: what the demo ran before this change;
- **after, max**: ``certify = "max"`` with the closed form (the default of every study);
- **after**: the study's own settings (the demo sets ``certify = "each"``);
- **baseline**: the dense sweep alone on 41 x 41 lines of the window, degrees 0-2 (issue 13's
  "today's dense sweep"), timed first; every row gives its time as a multiple of it.

Per computation: lines, seconds, and per degree the interval and whether it is certified (else the
reason). Writes ``results_demo_certify.md`` next to this file.
"""

from __future__ import annotations

import dataclasses
import os
import sys
import time
from contextlib import contextmanager
from pathlib import Path

import specmap.grids  # noqa: F401  (import order: grids before shapes)
from specmap.distance import compose, matching_distance, reduced
from specmap.distance.dense import dense_sweep
from specmap.distance.evaluator import LineEvaluator
from specmap.pipeline import StudyRun
from specmap.study import load_study

OUT = Path(__file__).with_name("results_demo_certify.md")
DEMO = Path(__file__).parents[2] / "studies" / "demo.toml"


@contextmanager
def without_closed_form():
    """The distance stage as before: no closed form of h_2 (slope-one cap and whole-strip sweep)."""
    saved = compose.fold_top, reduced._top_index
    compose.fold_top = lambda *a, **k: None  # type: ignore[assignment]
    reduced._top_index = lambda ev: None  # type: ignore[assignment]
    try:
        yield
    finally:
        compose.fold_top, reduced._top_index = saved


def _row(name: str, res, seconds: float, dense_s: float) -> str:
    cells = []
    for k, e in sorted(res.by_degree.items()):
        lo, hi = e["bounds"]
        state = "yes" if e["certified"] else f"no ({e['why_not']})"
        cells.append(f"D_{k} in [{lo:.5f}, {hi:.5f}] {state}")
    return (
        f"| {name} | {res.meta['lines_total']} | {seconds:.1f} | {seconds / dense_s:.2f} | "
        + "; ".join(cells)
        + " |"
    )


def main(path: str | Path = DEMO) -> str:
    study = load_study(str(path))
    run = StudyRun(study, show_progress=False)
    sf, sg = run.shapes
    base = run.study.distance
    load0 = os.getloadavg()[0]
    t = time.perf_counter()
    atlas = run.distance_atlas(base)
    atlas_s = time.perf_counter() - t
    ev = LineEvaluator(sf, sg, tuple(base.degrees))
    t = time.perf_counter()
    dense = dense_sweep(ev, run.window, resolution=41, bounds=(sf.value_bounds(), sg.value_bounds()))
    dense_s = time.perf_counter() - t
    dense_row = (
        f"| dense sweep alone, 41 x 41 (baseline) | {dense.lines} | {dense_s:.1f} | 1.00 | "
        + "; ".join(
            f"D_{k} in [{dense.best[j][0]:.5f}, {dense.upper(j):.4f}] no" for j, k in enumerate(base.degrees)
        )
        + " |"
    )
    print(dense_row, flush=True)
    runs = [
        ("before (certify max, no closed form of h_2)", dataclasses.replace(base, certify="max"), True),
        ("after, certify max", dataclasses.replace(base, certify="max"), False),
        (f"after, the study's settings (certify {base.certify})", base, False),
    ]
    rows, secs = [], []
    for name, s, old in runs:
        t = time.perf_counter()
        if old:
            with without_closed_form():
                res = matching_distance(sf, sg, settings=s, window=run.window, atlas=atlas, grids=run.grids)
        else:
            res = matching_distance(sf, sg, settings=s, window=run.window, atlas=atlas, grids=run.grids)
        secs.append(time.perf_counter() - t)
        rows.append(_row(name, res, secs[-1], dense_s))
        print(rows[-1], flush=True)
    load1 = os.getloadavg()[0]
    text = "\n".join(
        [
            f"# Distance stage of {Path(path).name}: before and after (same run)",
            "",
            f"Shared 2-core machine: load average {load0:.1f} at the start, "
            f"{load1:.1f} at the end. One process, one job; the atlas is built once "
            f"({atlas_s:.1f} s, not in the rows) and each row has a fresh slice evaluator.",
            "",
            "| computation | lines | seconds | x dense time | per degree |",
            "|---|---:|---:|---:|---|",
            dense_row,
            *rows,
            "",
            f"Same-run ratio after / before: {secs[2] / secs[0]:.2f} (study's settings), "
            f"{secs[1] / secs[0]:.2f} (certify max).",
            "",
        ]
    )
    OUT.write_text(text)
    return text


if __name__ == "__main__":
    main(*sys.argv[1:2])
