"""Benchmark (issue 16 item 7): reduced search vs dense sweep when f and g live on different meshes.

The pair is our own: f = (x, y) on an ellipsoid with radii (1, 0.7, 0.5) (sphere points rotated
with seed 1, level L) and g = (x, y) on an ellipsoid with radii (1.2, 0.6, 0.5) (seed 2, level
L - 1): different vertex sets and triangulations, so only bounds that need no shared mesh prune.
Both grids are closed forms (the equator's Pareto arcs and the half-lines of the axis points,
as in tests/test_certify.py). Each method runs with a fresh evaluator (no shared lines).

Run ``python tests/benchmarks/bench_meshes.py [level] [--out FILE]``; prints one markdown row per
method and writes them to ``tests/benchmarks/results_meshes.md`` (or FILE). With PYTHONPATH set to
an older checkout the same script gives the "before" figures.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from meshgen import ellipsoid_mesh  # noqa: E402

import specmap.grids  # noqa: E402,F401  (import order: grids before shapes)
from specmap.distance import matching_distance  # noqa: E402
from specmap.grids.model import Contour, Grid  # noqa: E402
from specmap.shapes.model import Shape  # noqa: E402


def ellipse_grid(r1: float, r2: float, prefix: str) -> Grid:
    """Closed-form extended Pareto grid of (x, y) on an ellipsoid with semi-axes r1, r2 in x, y."""
    th = np.linspace(0.0, np.pi / 2, 400)
    cs = [
        Contour(f"{prefix}:p0", "proper", np.c_[-r1 * np.cos(th), -r2 * np.sin(th)]),
        Contour(f"{prefix}:p1", "proper", np.c_[r1 * np.sin(th), r2 * np.cos(th)]),
    ]
    cs += [Contour(f"{prefix}:v{i}", "vertical", [s * r1, 0.0]) for i, s in enumerate((-1, 1))]
    cs += [Contour(f"{prefix}:h{i}", "horizontal", [0.0, s * r2]) for i, s in enumerate((-1, 1))]
    return Grid(tuple(cs))


def main(argv: list[str]) -> None:
    level = int(argv[0]) if argv and not argv[0].startswith("-") else 8
    out = Path(argv[argv.index("--out") + 1]) if "--out" in argv else HERE / "results_meshes.md"
    Vf, Tf = ellipsoid_mesh((1.0, 0.7, 0.5), level, seed=1)
    Vg, Tg = ellipsoid_mesh((1.2, 0.6, 0.5), level - 1, seed=2)
    sf = Shape("f", "mesh", Vf, Tf, Vf[:, :2].copy())
    sg = Shape("g", "mesh", Vg, Tg, Vg[:, :2].copy())
    grids = (ellipse_grid(1.0, 0.7, "f"), ellipse_grid(1.2, 0.6, "g"))
    commit = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True, text=True).stdout
    rows = []
    for method in ("reduced", "dense"):
        t0 = time.perf_counter()
        res = matching_distance(sf, sg, method=method, degrees=(0, 1, 2), grids=grids, position_lines=0)
        sec = time.perf_counter() - t0
        block = res.reduced if method == "reduced" else res.dense
        lines = block["lines"] if block else res.meta["lines_total"]
        vals = " / ".join(f"{res.by_degree[k]['value']:.4f}" for k in (0, 1, 2))
        cert = "".join("y" if res.by_degree[k].get("certified") else "n" for k in (0, 1, 2))
        rows.append(
            f"| {method} | {len(Vf)} + {len(Vg)} | {vals} | {lines} | {res.meta['lines_total']} | "
            f"{sec:.1f} | {cert} |"
        )
        print(rows[-1], flush=True)
    head = (
        f"Pair: (x, y) on two ellipsoids, different triangulations, level {level}; code at {commit.strip()}\n\n"
        "| method | vertices | D_0 / D_1 / D_2 | lines (stage) | lines (all) | seconds | certified 0,1,2 |\n"
        "|---|---|---|---|---|---|---|\n"
    )
    out.write_text(head + "\n".join(rows) + "\n")


if __name__ == "__main__":
    main(sys.argv[1:])
