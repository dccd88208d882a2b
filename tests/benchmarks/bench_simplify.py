"""What persistence-sensitive simplification (specmap.simplify) does to noisy scans and real scans.

    python tests/benchmarks/bench_simplify.py

Writes tests/benchmarks/results_simplify.md. Noisy scans (tests/scangen.py) at three noise
levels, f and g two different ellipsoids with (x, y) as the map; per level and shape: Pareto
contours of the PL grid (grids.piecewise, proper / half-lines) of the smooth, the noisy and the
simplified pair, delta, the measured sup change and the time of three treatments:

- ``persistence``: simplify_pair at delta = 2 ||noise||_inf (by stability every finite pair of a
  noisy coordinate function is shorter than that; the smooth one has none), with the aligned
  layout of filled regions (default) and with the harmonic one;
- ``auto (persistence)``: auto_delta with a budget of 60 contours per grid (each field alone);
- ``tube+persistence``: smooth_within at tau = ||noise||_inf, then simplify_pair at ||noise||_inf;
- ``auto (joint)``: what ``simplify = "auto"`` runs, simplify_values(..., "auto"): the joint
  simplification of specmap.jacobi_smooth (tube smoothing, fold straightening, persistence at
  2 tau) with the smallest measured change that meets the budget within 5 % of the value range.

Then a sampled matching-distance estimate (max over a 9 x 9 grid of lines of the bottleneck in
degrees 0 and 1, the same lines for every pair) of the smooth, the noisy and the simplified pairs,
with the interval D' +- (sup change of f + sup change of g) [CDFFL13] and whether it holds the
smooth pair's value. Then the real scans fetched by studies/data/fetch_scans.py, when present.
With ``--pairs``, the two scan studies with ``simplify = "auto"`` through the command line
(studies/simplified/scans_auto.toml: cow + bone; studies/simplified/bunny_auto.toml: the 28k-vertex bunny with maps
(x, y) and (x, z)): seconds of ``grid`` (the simplification is in it), ``map`` (its exit status
and first line) and ``distance --method dense``, the certified width 2 (s_f + s_g) of the
measured sup changes and its ratio to D per degree.

    python tests/benchmarks/bench_simplify.py [--pairs]
"""

from __future__ import annotations

import json
import resource
import subprocess
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from scangen import noisy_scan  # noqa: E402

from specmap.grids.piecewise import piecewise_grid  # noqa: E402
from specmap.simplify import auto_delta, simplify_pair, simplify_values, smooth_within  # noqa: E402
from specmap.slices import SliceEngine, bottleneck  # noqa: E402

BUDGET = 60
LEVEL = 20  # 4002 vertices
AMPLITUDES = (0.005, 0.01, 0.03)
LINES_A = np.linspace(0.05, 0.95, 9)
LINES_B = np.linspace(-2.5, 2.5, 9)
SCANS = HERE.parents[1] / "studies" / "data" / "scans"


def contours(V: np.ndarray, T: np.ndarray, F: np.ndarray) -> tuple[int, int]:
    """(proper contours, half-lines) of the PL extended Pareto grid."""
    c = Counter(k.kind for k in piecewise_grid(V, T, F).contours)
    return c["proper"], c["vertical"] + c["horizontal"]


def fmt(pc: tuple[int, int]) -> str:
    return f"{pc[0] + pc[1]} ({pc[0]} + {pc[1]})"


def treatments(V: np.ndarray, T: np.ndarray, F: np.ndarray, noise: float | None, delta0: float):
    """[(name, values, delta, sup change per component, seconds, note)]."""
    out = []
    t = time.perf_counter()
    d = 2.0 * noise * (1 + 1e-9) if noise is not None else delta0
    p = simplify_pair(T, F[:, 0], F[:, 1], d)
    out.append(("persistence", p.values, d, p.sup_change, time.perf_counter() - t, "aligned layout"))
    t = time.perf_counter()
    p = simplify_pair(T, F[:, 0], F[:, 1], d, align=False)
    out.append(("persistence", p.values, d, p.sup_change, time.perf_counter() - t, "harmonic layout"))

    def count(a: np.ndarray, b: np.ndarray) -> int:
        return sum(contours(V, T, np.c_[a, b]))

    t = time.perf_counter()
    r = auto_delta(T, F[:, 0], F[:, 1], count, BUDGET)
    vals = r.pair.values if r.pair is not None else F
    sup = r.pair.sup_change if r.pair is not None else (0.0, 0.0)
    note = f"met={r.met}, {r.evaluations} counts"
    out.append(("auto (persistence)", vals, r.delta, sup, time.perf_counter() - t, note))
    t = time.perf_counter()
    tau = noise if noise is not None else delta0 / 2
    S = np.c_[smooth_within(T, F[:, 0], tau), smooth_within(T, F[:, 1], tau)]
    q = simplify_pair(T, S[:, 0], S[:, 1], tau)
    sup = tuple(float(x) for x in np.abs(q.values - F).max(axis=0))
    out.append(("tube+persistence", q.values, 2 * tau, sup, time.perf_counter() - t, f"tau={tau:.3g}"))
    t = time.perf_counter()
    vals, rec = simplify_values(T, F, "auto", count, budget=BUDGET)
    sup = tuple(float(x) for x in np.abs(vals - F).max(axis=0))  # measured again here
    tube = rec["tube"]
    note = (
        f"met={rec['met']}, {rec['tried']} tried, tau={tube:.3g}" if tube else f"met={rec['met']}, unchanged"
    )
    out.append(("auto (joint)", vals, rec["delta"], sup, time.perf_counter() - t, note))
    return out


def sampled_distance(Tf: np.ndarray, Ff: np.ndarray, Tg: np.ndarray, Fg: np.ndarray) -> float:
    ef, eg = SliceEngine(Tf, Ff), SliceEngine(Tg, Fg)
    best = 0.0
    for a in LINES_A:
        for b in LINES_B:
            df, dg = ef.diagrams(a, b, (0, 1)), eg.diagrams(a, b, (0, 1))
            best = max(best, *(bottleneck(df[k], dg[k]) for k in (0, 1)))
    return best


def noisy_section() -> list[str]:
    rows = [
        "## Noisy scans (tests/scangen.py, 4002 vertices each; f: radii (2, 1.2, 1), g: (2, 1.3, 0.9))",
        "",
        "Contours as total (proper + half-lines). The smooth pair has f {sf}, g {sg} contours.",
        "",
        "| noise sd | shape | ‖noise‖∞ | noisy | treatment | δ | sup change (f1, f2) | contours after | time (s) | note |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    dist = [
        "",
        "Sampled matching distance (max over 81 lines of the bottleneck in degrees 0, 1; "
        "a lower estimate of D, the same lines for all pairs):",
        "",
        "| noise sd | D smooth | D noisy | treatment | D' simplified | interval D' ± (s_f + s_g) | holds D smooth |",
        "|---|---|---|---|---|---|---|",
    ]
    smooth_counts = {}
    for amp in AMPLITUDES:
        fs = noisy_scan((2.0, 1.2, 1.0), LEVEL, amp, seed=1)
        gs = noisy_scan((2.0, 1.3, 0.9), LEVEL, amp, seed=2)
        res = {}
        for label, s in (("f", fs), ("g", gs)):
            smooth_counts[label] = fmt(contours(s.vertices, s.triangles, s.smooth_values))
            noisy = fmt(contours(s.vertices, s.triangles, s.values))
            res[label] = treatments(s.vertices, s.triangles, s.values, s.noise_sup, 0.0)
            for name, vals, d, sup, sec, note in res[label]:
                after = fmt(contours(s.vertices, s.triangles, vals))
                rows.append(
                    f"| {amp:g} | {label} | {s.noise_sup:.4f} | {noisy} | {name} | {d:.4f} | "
                    f"{sup[0]:.4f}, {sup[1]:.4f} | {after} | {sec:.2f} | {note} |"
                )
        d0 = sampled_distance(fs.triangles, fs.smooth_values, gs.triangles, gs.smooth_values)
        dn = sampled_distance(fs.triangles, fs.values, gs.triangles, gs.values)
        for (name, vf, _, supf, _, note), (_, vg, _, supg, _, _) in zip(res["f"], res["g"], strict=True):
            name = f"{name} ({note})" if "layout" in note else name
            d1 = sampled_distance(fs.triangles, vf, gs.triangles, vg)
            w = max(supf) + max(supg)
            holds = "yes" if d1 - w <= d0 <= d1 + w else "no"
            dist.append(
                f"| {amp:g} | {d0:.4f} | {dn:.4f} | {name} | {d1:.4f} | "
                f"[{d1 - w:.4f}, {d1 + w:.4f}] | {holds} |"
            )
    rows[2] = rows[2].format(sf=smooth_counts["f"], sg=smooth_counts["g"])
    return rows + dist


def real_section() -> list[str]:
    names = [n for n in ("cow.ply", "bone.ply", "bunny.obj") if (SCANS / n).is_file()]
    if not names:
        return ["## Real scans", "", "Not fetched (run `python3 studies/data/fetch_scans.py --large`)."]
    from specmap.shapes.meshes import read_mesh

    rows = [
        "## Real scans (studies/data/fetch_scans.py; map (x, y); persistence at δ = 5 % of the "
        "larger value range, tube+persistence at τ = δ / 2 each)",
        "",
        "| scan | vertices | contours | treatment | δ | sup change (f1, f2) | contours after | time (s) | note |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    for name in names:
        V, T, _ = read_mesh(SCANS / name)
        F = V[:, :2].copy()
        before = fmt(contours(V, T, F))
        delta0 = 0.05 * float(max(np.ptp(F[:, 0]), np.ptp(F[:, 1])))
        for tname, vals, d, sup, sec, note in treatments(V, T, F, None, delta0):
            rows.append(
                f"| {name} | {len(V)} | {before} | {tname} | {d:.4f} | {sup[0]:.4f}, {sup[1]:.4f} | "
                f"{fmt(contours(V, T, vals))} | {sec:.2f} | {note} |"
            )
    return rows


PAIRS = ("scans_auto.toml", "bunny_auto.toml")


def cli(*args: str) -> tuple[int, float, str]:
    """Run ``specmap ARGS`` in a child process: (exit status, seconds, stderr)."""
    t = time.perf_counter()
    code = "import sys; from specmap.cli import main; main(sys.argv[1:])"
    done = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True)
    return done.returncode, time.perf_counter() - t, done.stderr


def pairs_section() -> list[str]:
    studies = HERE.parents[1] / "studies"
    rows = [
        '## Scan pairs with simplify = "auto" through the command line (budget 60, cap 5 % of the value range)',
        "",
        "| study | contours f, g (before -> after, met) | s_f, s_g | grid (s) | map | distance dense (s) "
        "| D_0 / D_1 | width 2(s_f + s_g) | width / D_0, D_1 | peak RSS (children) |",
        "|---|---|---|---:|---|---:|---|---:|---|---:|",
    ]
    for name in PAIRS:
        study = studies / "simplified" / name
        if not all((studies / "data" / "scans" / m).is_file() for m in ("cow.ply", "bone.ply", "bunny.obj")):
            rows.append(f"| {name} | not fetched | | | | | | | | |")
            continue
        with tempfile.TemporaryDirectory() as tmp:
            out = str(Path(tmp) / "out")
            code_g, sec_g, _ = cli("grid", str(study), "--out", out)
            code_m, sec_m, err_m = cli("map", str(study), "--out", out)
            code_d, sec_d, _ = cli("distance", str(study), "--method", "dense", "--out", out)
            if code_g or code_d:
                rows.append(f"| {name} | failed: grid {code_g}, distance {code_d} | | | | | | | | |")
                continue
            recs = [
                json.loads((Path(out) / f"grid_{s}.json").read_text())["meta"]["simplification"] for s in "fg"
            ]
            dist = json.loads((Path(out) / "distance.json").read_text())
        sups = [max(r["sup_change"]) for r in recs]
        width = 2.0 * sum(sups)
        by = dist["by_degree"]
        vals = [by[k]["value"] for k in sorted(by)]
        counts = ", ".join(
            f"{r['contours_before']} -> {r['contours_after']} ({'met' if r['met'] else 'not met'})"
            for r in recs
        )
        last = [line for line in err_m.splitlines() if "error" in line]
        mapped = (
            "done"
            if code_m == 0
            else f"exit {code_m}: " + (last[0].split(": map: ", 1)[-1][:90] + "..." if last else "")
        )
        ratio = ", ".join(f"{100 * width / v:.1f} %" for v in vals)
        rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1e6
        rows.append(
            f"| {name} | {counts} | {sups[0]:.4f}, {sups[1]:.4f} | {sec_g:.1f} | {mapped} ({sec_m:.1f} s) | {sec_d:.1f} "
            f"| {' / '.join(f'{v:.4f}' for v in vals)} | {width:.4f} | {ratio} | {rss:.2f} GB |"
        )
    return rows


def main() -> None:
    t0 = time.perf_counter()
    parts = [
        "# Persistence-sensitive simplification: contours, δ, sup change, time (one run)",
        "",
        f"Budget for `auto`: {BUDGET} contours per grid. 2 cores.",
        "",
    ]
    parts += noisy_section() + [""] + real_section()
    if "--pairs" in sys.argv[1:]:
        parts += [""] + pairs_section()
    parts += ["", f"Total run time {time.perf_counter() - t0:.0f} s."]
    text = "\n".join(parts) + "\n"
    (HERE / "results_simplify.md").write_text(text)
    print(text)


if __name__ == "__main__":
    main()
