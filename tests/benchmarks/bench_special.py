"""Benchmark of the special-set atlas (run: python tests/benchmarks/bench_special.py).

(a) naive vs sweep detection on a random 24-contour pair at equal resolution:
    speed ratio and Hausdorff distance between the refined crossing sets;
(b) time and output size for N = 10, 20, 40 contours at the default
    resolution; N = 80 is projected (its output needs more memory than the
    24 GB of this machine).
Writes the markdown table to tests/benchmarks/results_special.md.
"""

from __future__ import annotations

import os
import resource
import sys
import time
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from gridgen import random_pair  # noqa: E402

from specmap.special import special_set  # noqa: E402
from specmap.special.compute import default_tolerance  # noqa: E402
from specmap.special.detect import find_crossings, sample  # noqa: E402
from specmap.special.lattice import Lattice  # noqa: E402
from specmap.special.pairs import pair_table  # noqa: E402
from specmap.special.reference import naive_crossings  # noqa: E402
from specmap.special.trace import refine  # noqa: E402
from specmap.strip import default_window  # noqa: E402

BUDGET_S = float(os.environ.get("SPECMAP_BENCH_BUDGET", "1200"))


def hausdorff(x, y) -> float:
    return float(max(cKDTree(y).query(x)[0].max(), cKDTree(x).query(y)[0].max()))


def main() -> None:
    lines = [
        "# specmap special-set benchmark",
        "",
        f"cpus: {os.cpu_count()}; python {sys.version.split()[0]}",
        "",
    ]
    res_a = int(os.environ.get("SPECMAP_BENCH_RES_A", "121"))
    f, g = random_pair(24, 24)
    w = default_window(f.bbox(), g.bbox())
    table = pair_table(f, g, "all")
    samples = sample(table, Lattice.of(w, res_a, res_a))
    tol = default_tolerance(f, g)
    out = {}
    for method in ("naive", "sweep"):
        t = time.perf_counter()
        detect = naive_crossings if method == "naive" else find_crossings
        codes, edges, st = detect(table, samples, tol=tol, snap=1e-3 * tol)
        dt = time.perf_counter() - t
        pts = refine(table, samples, codes, edges, snap=1e-3 * tol)
        out[method] = (dt, st, pts)
    cell = float(np.hypot((w.a[1] - w.a[0]) / (res_a - 1), (w.b[1] - w.b[0]) / (res_a - 1)))
    hd = hausdorff(out["sweep"][2], out["naive"][2])
    lines += [
        f"## (a) naive vs sweep detection, 24 contours, resolution {res_a} x {res_a}",
        "",
        "| method | detect s | examined item pairs / ties x edges | crossings |",
        "|---|---|---|---|",
    ]
    for method in ("naive", "sweep"):
        dt, st, _ = out[method]
        lines.append(f"| {method} | {dt:.2f} | {st['candidate_item_pairs']} | {st['crossings']} |")
    ratio = out["naive"][0] / out["sweep"][0]
    lines += [
        "",
        f"detection speed ratio naive/sweep: {ratio:.1f}x; "
        f"same crossings: {out['naive'][1]['crossings'] == out['sweep'][1]['crossings']}; "
        f"Hausdorff(refined crossings) = {hd:.2e} (cell {cell:.2e}); "
        f"item pairs examined: {out['naive'][1]['candidate_item_pairs'] / out['sweep'][1]['candidate_item_pairs']:.0f}x fewer",
        "",
        "sweep = compiled loop over the edges of each row (numba, specmap/special/compiled/sweep.py); naive = the "
        "reference, vectorised numpy over every allowed tie x every edge of a row.",
        "",
    ]
    print("\n".join(lines), flush=True)
    lines += [
        "## (b) scaling at the default resolution 121 x 121 (sweep, pairs=all)",
        "",
        "| N contours | seconds | detect s | trace s | components s | crossings | tie curves | "
        "ties with curves | components | peak RSS GB |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    last, last_n = 0.0, 0
    measured: dict[int, tuple[int, int, float]] = {}
    for n in (10, 20, 40, 80):
        if n == 80 and os.environ.get("SPECMAP_BENCH_N80") != "1":
            lines.append(
                f"| {n} | not run: its output needs more than the 24 GB of this machine (projection "
                "below); SPECMAP_BENCH_N80=1 forces it | | | | | | | | |"
            )
            print(lines[-1], flush=True)
            continue
        if last > BUDGET_S / 16:
            lines.append(f"| {n} | skipped (N={last_n} took {last:.0f} s; output ~N^4) | | | | | | | | |")
            print(lines[-1], flush=True)
            continue
        f, g = random_pair(100 + n, n)
        w = default_window(f.bbox(), g.bbox())
        t = time.perf_counter()
        at = special_set(f, g, w)
        last, last_n = time.perf_counter() - t, n
        st = at.stats
        measured[n] = (
            st["crossings"],
            st["tie_curves"],
            resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20,
        )
        lines.append(
            f"| {n} | {last:.1f} | {st['detect_s']:.1f} | {st['trace_s']:.1f} | {st['components_s']:.1f} | "
            f"{st['crossings']} | {st['tie_curves']} | {st['ties_with_curves']} | {len(at.components)} | "
            f"{resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20:.1f} |"
        )
        print(lines[-1], flush=True)
    lines += [
        "",
        f"budget: SPECMAP_BENCH_BUDGET={BUDGET_S:.0f} s; a size is skipped when the previous one took "
        f"more than budget / 16 (the next size costs ~16x: output ~N^4).",
        "",
    ]
    if 20 in measured and 40 in measured and 80 not in measured:
        (c20, t20, _), (c40, t40, m40) = measured[20], measured[40]
        lines += [
            "",
            f"N = 80 projected from the measured doubling 20 -> 40 (not run): about {c40 * c40 / c20 / 1e6:.0f} M "
            f"crossings, {t40 * t40 / t20 / 1e6:.1f} M tie curves, {m40 * c40 / c20:.0f} GB at the N = 40 "
            "memory per crossing -- beyond this machine.",
        ]
    (HERE / "results_special.md").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
