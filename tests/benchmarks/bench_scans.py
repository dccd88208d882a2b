"""Benchmark (issue 11): the reduced search on the scan pair without its whole map, against the dense sweep.

The pair is ``studies/scans.toml`` (two open scanned meshes with their coordinate functions;
``python3 studies/data/fetch_scans.py`` fetches them). Its whole special-set map does not fit
in memory, so the reduced search maps only the ties whose cost can lie between the slope-one
value and an upper bound of D (:func:`specmap.distance.focused.focused_source`), and its
special-set pass stops at ``special_max_lines``. Each method runs with a fresh evaluator in
the same process (no shared lines); peak memory is the process's maxrss after each method.

Run ``python tests/benchmarks/bench_scans.py [--lines N] [--out FILE]``; prints one markdown
row per method and writes them to ``tests/benchmarks/results_scans.md`` (or FILE).
"""

from __future__ import annotations

import resource
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]


def main(argv: list[str]) -> None:
    from specmap.pipeline import StudyRun
    from specmap.study import load_study

    out = (
        Path(argv[argv.index("--out") + 1])
        if "--out" in argv
        else Path(__file__).with_name("results_scans.md")
    )
    lines = int(argv[argv.index("--lines") + 1]) if "--lines" in argv else None
    study = load_study(ROOT / "studies" / "scans.toml")
    rows = [
        "| method | value D_0 / D_1 | bounds of max D | certified | lines | seconds | peak RSS |",
        "|---|---|---|---|---:|---:|---:|",
    ]
    for method in ("dense", "reduced"):
        run = StudyRun(study, "/tmp/specmap-bench-scans", show_progress=False)
        settings = run.distance_settings(method=method)
        if lines is not None:
            settings = replace(settings, special_max_lines=lines)
        t = time.perf_counter()
        with np.errstate(all="ignore"):
            res = run.distance(settings)
        sec = time.perf_counter() - t
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6
        by = res.by_degree
        vals = " / ".join(f"{by[k]['value']:.4f}" for k in sorted(by))
        bounds = max((by[k]["bounds"] for k in by), key=lambda b: b[1])
        cert = ", ".join(f"D_{k} {'yes' if by[k]['certified'] else 'no'}" for k in sorted(by))
        blk = res.reduced or res.dense or {}
        n = blk.get("lines", "")
        rows.append(
            f"| {method} | {vals} | [{bounds[0]:.4f}, {bounds[1]:.4f}] | {cert} | {n} | {sec:.1f} | {rss:.2f} GB |"
        )
        print(rows[-1], flush=True)
        if method == "reduced" and res.reduced is not None:
            print(
                "focus:",
                res.reduced.get("focus", {})
                and {k: v for k, v in res.reduced["focus"].items() if k != "node_bounds"},
            )
            print(
                "left:", res.reduced.get("left"), "candidate seconds:", res.reduced.get("candidate_seconds")
            )
    out.write_text("\n".join(rows) + "\n")


if __name__ == "__main__":
    main(sys.argv[1:])
