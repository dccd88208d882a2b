"""Benchmark: perturbation run sets with 1 and 2 joblib jobs (target speed-up >= 1.7x).

Run ``python tests/benchmarks/bench_perturb.py [--runs 20] [--resolution 121]``. It times the
same run set (same seeds, fresh folders) with ``jobs=1`` and ``jobs=2``, checks that both give
identical records, and writes a markdown table to ``tests/benchmarks/results_perturb.md``.

Workloads
---------
``mesh``: "function" model on an ellipsoid mesh (PL grids recomputed in every run, then the
special set). ``grid``: "grid" model on a grid of half-lines and proper arcs (special set only).
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from specmap.grids.model import Contour, Grid
from specmap.perturb import PerturbSettings, make_base, run_study
from specmap.perturb.store import load_runs, records_without_time
from specmap.shapes.model import Shape
from specmap.strip import Window, default_window

OUT = Path(__file__).with_name("results_perturb.md")


def mesh_workload(resolution: int, vertices: int):
    from specmap.expr import compile_map
    from specmap.grids import pareto_grid
    from specmap.shapes.surfaces import make_surface

    surface = make_surface("ellipsoid", (2.0, 1.0, 1.0))
    V, T = surface.mesh(vertices)
    f = Shape("f", "mesh", V, T, compile_map(["x", "y"]).values(V))
    g = Shape("g", "mesh", V, T, compile_map(["x + 0.3*z", "y - 0.2*x*z"]).values(V))
    window = default_window(f.value_bounds(), g.value_bounds())
    settings = PerturbSettings(model="function", size=0.02, runs=0, seed=3, resolution=resolution)
    return (pareto_grid(f), pareto_grid(g)), window, (f, g), settings


def grid_workload(resolution: int):
    t = np.linspace(0.0, 1.0, 30)

    def arc(cx, cy, r):
        return np.stack([cx + r * np.sin(0.5 * np.pi * t), cy + r * np.cos(0.5 * np.pi * t)], axis=1)

    gf = Grid(
        (
            Contour("f:v0", "vertical", [[0.0, -3.0]]),
            Contour("f:v1", "vertical", [[1.0, -3.0]]),
            Contour("f:h0", "horizontal", [[-3.0, 0.5]]),
            Contour("f:p0", "proper", arc(-1.0, -1.0, 1.5)),
        )
    )
    gg = Grid(
        (
            Contour("g:v0", "vertical", [[2.0, -3.0]]),
            Contour("g:v1", "vertical", [[3.0, -3.0]]),
            Contour("g:h0", "horizontal", [[-3.0, 1.5]]),
            Contour("g:p0", "proper", arc(0.0, -0.5, 1.2)),
        )
    )
    window = Window((0.1, 0.9), (-2.0, 2.0))
    settings = PerturbSettings(model="grid", size=1e-3, runs=0, seed=3, resolution=resolution)
    return (gf, gg), window, None, settings


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=20)
    ap.add_argument("--resolution", type=int, default=121)
    ap.add_argument("--vertices", type=int, default=1500)
    ap.add_argument("--workload", choices=("mesh", "grid"), default="mesh")
    ap.add_argument("--out", type=Path, default=OUT)
    args = ap.parse_args(argv)
    if args.workload == "mesh":
        grids, window, shapes, settings = mesh_workload(args.resolution, args.vertices)
    else:
        grids, window, shapes, settings = grid_workload(args.resolution)
    settings = PerturbSettings(**{**settings.to_json(), "runs": args.runs, "degrees": settings.degrees})
    load_before = os.getloadavg()[0]
    t0 = time.perf_counter()
    base = make_base(grids, window, shapes=shapes, settings=settings)
    t_base = time.perf_counter() - t0
    rows, records = [], {}
    with tempfile.TemporaryDirectory() as tmp:
        for jobs in (1, 2):
            folder = Path(tmp) / f"jobs{jobs}"
            t0 = time.perf_counter()
            run_study(base, settings, folder, jobs=jobs)
            wall = time.perf_counter() - t0
            records[jobs] = records_without_time(load_runs(folder / "runs.jsonl").values())
            rows.append((jobs, wall))
    same = records[1] == records[2]
    t1 = rows[0][1]
    lines = [
        "# Perturbation run sets: 1 vs 2 joblib jobs",
        "",
        f"Command: `python tests/benchmarks/bench_perturb.py --workload {args.workload} --runs {args.runs} "
        f"--resolution {args.resolution}"
        + (f" --vertices {args.vertices}`" if args.workload == "mesh" else "`"),
        f"Machine: {platform.processor() or platform.machine()}, {os.cpu_count()} CPUs, Python "
        f"{sys.version.split()[0]}. Base special set computed once ({t_base:.2f} s, "
        f"{base.counts}). Records identical for 1 and 2 jobs: {same}.",
        f"Load average (1 min) before / after: {load_before:.2f} / {os.getloadavg()[0]:.2f} "
        "(above ~0.5 other work shared the CPUs and the speed-up is understated).",
        "",
        "| jobs | runs | wall time (s) | runs per minute | speed-up |",
        "|---:|---:|---:|---:|---:|",
    ]
    for jobs, wall in rows:
        lines.append(
            f"| {jobs} | {args.runs} | {wall:.2f} | {60 * args.runs / wall:.1f} | {t1 / wall:.2f}x |"
        )
    text = "\n".join(lines) + "\n"
    args.out.write_text(text)
    print(text)
    return 0 if same else 1


if __name__ == "__main__":
    raise SystemExit(main())
