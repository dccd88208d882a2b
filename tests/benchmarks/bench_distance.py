"""Benchmark: reduced search vs dense sweep for the matching distance.

Run ``python tests/benchmarks/bench_distance.py [vertices] [jobs] [--repeat N]`` for a rough pair
(two non-linear maps on one ellipsoid mesh, PL grids), or
``python tests/benchmarks/bench_distance.py studies/demo.toml [jobs] [--repeat N]`` for the demo
study's pair (its own grids, window and mesh). With ``--repeat N`` the atlas, the reduced search and
the dense sweep are each run N times (fresh evaluators, no shared lines) and the median seconds
are reported (the machine may be shared: single timings are noisy). Builds the extended Pareto grids and special-set atlas, then
runs the dense sweep and the reduced search separately (no shared lines) and writes a markdown
table to ``tests/benchmarks/results_distance.md``.

Targets: value difference <= 1e-3 of the functions' range; >= 20x fewer slices; >= 10x less time.
The reduced time is the whole ``matching_distance`` call given the grids and atlas (slope-one line,
candidates, bounds, slices, polish); the atlas build time is reported separately and the time
ratio is given with and without it. A third row, a fine scan of the slope-one line (401 lines), is
an independent lower bound of D that shows how rough h is on this mesh.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np

import specmap.grids  # noqa: F401  (import order: grids before shapes)
from specmap.distance import h_values, matching_distance, value_range
from specmap.grids.piecewise import piecewise_grid
from specmap.shapes.model import Shape
from specmap.shapes.surfaces import Ellipsoid
from specmap.special import special_set
from specmap.strip import default_window

OUT = Path(__file__).with_name("results_distance.md")
MARK = "<!-- analysis (hand-written, kept across runs) -->"


def demo_pair(n: int) -> tuple[Shape, Shape]:
    V, T = Ellipsoid((1.6, 1.0, 0.8)).mesh(n)
    x, y, z = V.T
    f = np.c_[x + 0.35 * z**2, y + 0.25 * x * z]
    g = np.c_[x + 0.3 * np.sin(1.5 * z) + 0.1 * y, y - 0.2 * z**2 + 0.1 * x]
    return Shape("f", "mesh", V, T, f), Shape("g", "mesh", V, T, g)


def study_pair(path: str):
    """Shapes, grids (timed) and window of a study file."""
    from specmap.pipeline import StudyRun
    from specmap.study import load_study

    study = load_study(path)
    run = StudyRun(study, show_progress=False)
    sf, sg = run.shapes
    t = time.perf_counter()
    gf, gg = run.grids
    t_grid = time.perf_counter() - t
    desc = f"study {study.name}: f = {study.f.describe()}; g = {study.g.describe()}"
    return sf, sg, gf, gg, run.window, t_grid, desc


def _timed(fun, repeat: int):
    """(last result, median seconds, all seconds) of ``repeat`` calls of ``fun``."""
    secs, out = [], None
    for _ in range(max(1, repeat)):
        t = time.perf_counter()
        out = fun()
        secs.append(time.perf_counter() - t)
    return out, statistics.median(secs), secs


def main(n: int | str = 1500, jobs: int = 1, repeat: int = 1) -> str:
    if isinstance(n, str):
        sf, sg, gf, gg, w, t_grid, desc = study_pair(n)
        out = OUT.with_name("results_distance_" + Path(n).stem + ".md")
    else:
        sf, sg = demo_pair(n)
        t = time.perf_counter()
        gf = piecewise_grid(sf.vertices, sf.triangles, sf.values, label="f")
        gg = piecewise_grid(sg.vertices, sg.triangles, sg.values, label="g")
        t_grid = time.perf_counter() - t
        w = default_window(sf.value_bounds(), sg.value_bounds())
        out = OUT
        desc = (
            f"ellipsoid (1.6, 1, 0.8), {len(sf.values)} vertices; f = (x + 0.35 z^2, y + 0.25 x z), "
            "g = (x + 0.3 sin 1.5z + 0.1 y, y - 0.2 z^2 + 0.1 x)"
        )
    atlas, t_atlas, atlas_all = _timed(lambda: special_set(gf, gg, w), repeat)
    rng = value_range(sf, sg)
    red, red_s, red_all = _timed(
        lambda: matching_distance(
            sf,
            sg,
            method="reduced",
            atlas=atlas,
            grids=(gf, gg),
            window=w,
            jobs=jobs,
            certify="max",
            position_lines=0,
        ),
        repeat,
    )
    den, den_s, den_all = _timed(
        lambda: matching_distance(
            sf, sg, method="dense", window=w, jobs=jobs, dense_resolution=41, position_lines=0
        ),
        repeat,
    )
    t = time.perf_counter()
    bs = np.linspace(*w.b, 401)
    scan = h_values(sf, sg, 0.5, bs).max(axis=0)
    scan_s = time.perf_counter() - t
    i_scan = int(np.argmax(scan))
    diff = red.value - den.value
    pr = red.reduced["pruned"]
    ss = red.reduced["slope_search"] or {
        "lines": 0,
        "certified": None,
        "bound": [float("nan")],
        "best": [float("nan")],
    }
    lines = [
        "# Matching distance: reduced search vs dense sweep",
        "",
        f"Pair: {desc}; {len(sf.values)} vertices; degrees 0, 1, 2; jobs = {jobs}.",
        f"Grids: {len(gf.contours)} + {len(gg.contours)} contours ({t_grid:.1f} s); atlas: "
        f"{len(atlas.pieces)} tie pieces, {len(atlas.components)} components ({t_atlas:.1f} s, not in the "
        f"reduced time below). Value range {rng:.4g}; tolerance {red.tolerance:.3g}.",
        f"Reduced time = the whole call given grids and atlas; of it {red.reduced['candidate_seconds']:.2f} s "
        f"build the candidate list (no diagrams).",
        "",
        "| method | value | at (a, b) | reached on | slices | seconds |",
        "|---|---|---|---|---|---|",
        f"| dense 41 x 41 + refinement | {den.value:.6f} | ({den.at[0]:.4f}, {den.at[1]:.4f}) | "
        f"degree {den.dense['degree']} | {den.dense['lines']} | {den_s:.1f} |",
        f"| reduced (certify max) | {red.value:.6f} | ({red.at[0]:.4f}, {red.at[1]:.4f}) | "
        f"{red.reached_on} {red.component or ''} | {red.reduced['lines']} | {red_s:.1f} |",
        f"| slope-one scan, 401 lines (reference) | {scan[i_scan]:.6f} | (0.5000, {bs[i_scan]:.4f}) | "
        f"slope-one | 401 | {scan_s:.1f} |",
        "",
        f"- value difference reduced - dense: {diff:+.3g} = {diff / rng:+.2e} of the range "
        f"(target |diff| <= 1e-3 of the range; the dense sampling error bound is {den.dense['error_bound']:.3g})",
        f"- slices: {den.dense['lines'] / max(red.reduced['lines'], 1):.2f}x fewer (target >= 20x)",
        f"- time: {den_s / max(red_s, 1e-9):.2f}x less without the atlas, "
        f"{den_s / max(red_s + t_atlas, 1e-9):.2f}x with it (target >= 10x)",
        f"- candidates: {pr['candidates_total']} ({pr['crossings']} crossings) from {pr['ties_live']} live ties; "
        f"evaluated {pr['candidates_evaluated']}; pruned below_best {pr['below_best']}, above_bound "
        f"{pr['above_bound']}, line_bound {pr['line_bound']}, local_bound {pr['local_bound']}; ties pruned "
        f"for roles {pr['roles']}, not met {pr['not_met']}; early stop: {pr['early_stop']}",
        f"- slope-one part of the reduced search: {red.reduced['slope_one']}",
        f"- slope-one branch and bound (Lipschitz 2 in b, tolerance {red.tolerance / 2:.3g}): "
        f"{ss['lines']} of the {red.reduced['lines']} reduced slices, certified {ss['certified']}, "
        f"max over b of h(1/2, b) <= {ss['bound'][0]:.6f} (best {ss['best'][0]:.6f})",
        f"- timings (s, {len(red_all)} runs each, medians above): atlas {_secs(atlas_all)}; reduced "
        f"{_secs(red_all)}; dense {_secs(den_all)}",
        "",
    ]
    text = "\n".join(lines)
    old = out.read_text() if out.exists() else ""
    if MARK in old:  # keep the hand-written analysis of the figures
        text += "\n" + old[old.index(MARK) :]
    out.write_text(text)
    return text


def _secs(xs) -> str:
    return ", ".join(f"{x:.2f}" for x in xs)


if __name__ == "__main__":
    argv = sys.argv[1:]
    repeat = 1
    if "--repeat" in argv:
        i = argv.index("--repeat")
        repeat = int(argv[i + 1])
        del argv[i : i + 2]
    args = [x if x.endswith(".toml") else int(x) for x in argv]
    print(main(*args, repeat=repeat))
