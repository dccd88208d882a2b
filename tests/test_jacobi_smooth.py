"""Joint simplification of a mesh map (specmap.jacobi_smooth) and ``simplify = "auto"``.

Sources:
- stability of the matching distance [Cerri, Di Fabio, Ferri, Frosini, Landi 2013]: per line r(a, b)
  the bottleneck distance of the slice diagrams moves by at most ||f - f'||_inf + ||g - g'||_inf
  (the normalised slice function is 1-Lipschitz in f), so a max over a fixed set of lines moves by
  at most that much too [Cohen-Steiner, Edelsbrunner, Harer 2007 for the bottleneck stability];
- the certificate: f - f' is PL on the same triangles, so ||f - f'||_inf is the max over the
  vertices, recomputed here from the arrays;
- the noisy-scan generator (tests/scangen.py): the smooth pair is the same triangulation without
  noise and ||noisy - smooth||_inf is known in the test;
- PL Pareto edges [Edelsbrunner, Harer 2004], counted by specmap.grids.piecewise (Simulation of
  Simplicity), not by the greedy kernel under test.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scangen import noisy_scan

from specmap.grids.piecewise import pareto_edges, piecewise_grid
from specmap.jacobi_smooth import auto_joint, joint_simplify, straighten_folds
from specmap.simplify import simplify_values
from specmap.slices import SliceEngine, bottleneck

LINES_A = np.linspace(0.1, 0.9, 5)
LINES_B = np.linspace(-2.0, 2.0, 5)
SCANS = Path(__file__).resolve().parents[1] / "studies" / "data" / "scans"


def contours(V: np.ndarray, T: np.ndarray, F: np.ndarray) -> int:
    return len(piecewise_grid(V, T, F).contours)


def sampled(Tf: np.ndarray, Ff: np.ndarray, Tg: np.ndarray, Fg: np.ndarray) -> float:
    """max over a fixed 5 x 5 set of lines of the bottleneck distance in degrees 0 and 1."""
    ef, eg = SliceEngine(Tf, Ff), SliceEngine(Tg, Fg)
    best = 0.0
    for a in LINES_A:
        for b in LINES_B:
            df, dg = ef.diagrams(a, b, (0, 1)), eg.diagrams(a, b, (0, 1))
            best = max(best, *(bottleneck(df[k], dg[k]) for k in (0, 1)))
    return best


def test_certificate_is_the_measured_sup_change() -> None:
    s = noisy_scan(level=10, amplitude=0.03, seed=3)
    for tau in (0.002, 0.01, 0.04):
        p = joint_simplify(s.triangles, s.values, tau)
        change = np.abs(p.values - s.values).max(axis=0)  # recomputed from the arrays
        assert p.sup_change == (float(change[0]), float(change[1]))
        assert max(p.sup_change) <= p.bound == 4 * tau  # tube tau + box tau + persistence 2 tau


def test_fold_straightening_stays_in_its_box_and_removes_pareto_edges() -> None:
    s = noisy_scan(level=12, amplitude=0.02, seed=4)
    T, F = s.triangles, s.values
    tau = s.noise_sup / 2
    G = straighten_folds(T, F, tau)
    assert np.abs(G - F).max() <= tau
    before, after = int(pareto_edges(T, F).sum()), int(pareto_edges(T, G).sum())
    assert after < 0.75 * before, (before, after)  # measured: about half go on this scan
    assert np.array_equal(straighten_folds(T, F, 0.0), F)  # an empty box changes nothing


@pytest.mark.parametrize("amplitude", [0.005, 0.01, 0.03])
def test_auto_on_noisy_scans(amplitude: float) -> None:
    budget = 8  # the smooth pair has 6 contours per grid; the noisy f has 10, 34, 120 here
    fs = noisy_scan((2.0, 1.2, 1.0), 10, amplitude, seed=1)
    gs = noisy_scan((2.0, 1.3, 0.9), 10, amplitude, seed=2)
    out, sup = [], []
    for s in (fs, gs):
        V, T = s.vertices, s.triangles

        def count(a: np.ndarray, b: np.ndarray, V=V, T=T) -> int:
            return contours(V, T, np.c_[a, b])

        vals, rec = simplify_values(T, s.values, "auto", count, budget=budget)
        assert rec["met"] and contours(V, T, vals) == rec["contours_after"] <= budget
        assert rec["contours_before"] == contours(V, T, s.values)
        change = float(np.abs(vals - s.values).max())  # the certificate, recomputed
        assert change == max(rec["sup_change"]) <= rec["cap"] == 0.05 * float(np.ptp(s.values, axis=0).max())
        out.append(vals)
        sup.append(change)
    w = sup[0] + sup[1]
    d_simp = sampled(fs.triangles, out[0], gs.triangles, out[1])
    d_noisy = sampled(fs.triangles, fs.values, gs.triangles, gs.values)
    d_smooth = sampled(fs.triangles, fs.smooth_values, gs.triangles, gs.smooth_values)
    assert d_simp - w - 1e-12 <= d_noisy <= d_simp + w + 1e-12  # [CDFFL13]: the pair given
    noise = fs.noise_sup + gs.noise_sup
    assert d_simp - w - noise - 1e-12 <= d_smooth <= d_simp + w + noise + 1e-12  # the smooth pair


def test_auto_out_of_reach_keeps_the_fewest_within_the_cap() -> None:
    s = noisy_scan(level=8, amplitude=0.02, seed=5)
    V, T = s.vertices, s.triangles
    cap = 0.05 * float(np.ptp(s.values, axis=0).max())

    def count(a: np.ndarray, b: np.ndarray) -> int:
        return contours(V, T, np.c_[a, b])

    res = auto_joint(T, s.values, count, 3, cap)  # 4 half-lines at least on a sphere: out of reach
    assert not res.met and res.pair is not None
    assert res.count_after == min(c for _, _, c in res.tried) == count(*res.pair.values.T)
    assert all(t <= cap / 4 for t, _, _ in res.tried)
    assert max(res.pair.sup_change) <= cap
    met = auto_joint(T, s.values, count, res.count_after, cap)  # now reachable
    assert met.met and met.count_after <= res.count_after
    assert max(met.pair.sup_change) == min(x for _, x, c in met.tried if c <= res.count_after)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["cow.ply", "bone.ply", "bunny.obj"])
def test_auto_on_real_scans(name: str) -> None:
    if not (SCANS / name).is_file():
        pytest.skip(f"{name} not fetched (python3 studies/data/fetch_scans.py [--large])")
    from specmap.shapes.meshes import read_mesh

    V, T, _ = read_mesh(SCANS / name)
    F = V[:, :2].copy()

    def count(a: np.ndarray, b: np.ndarray) -> int:
        return contours(V, T, np.c_[a, b])

    vals, rec = simplify_values(T, F, "auto", count, budget=60)
    assert float(np.abs(vals - F).max()) == max(rec["sup_change"]) <= rec["cap"]
    assert rec["contours_after"] == count(*vals.T) < rec["contours_before"]
