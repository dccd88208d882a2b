"""Persistence-sensitive simplification (specmap.simplify) checked against gudhi's lower-star persistence.

Sources:
- gudhi (reference library): persistence of the lower-star filtration of the mesh, computed here from
  a SimplexTree built in the test, independent of specmap's union-find sweeps;
- Betti numbers of closed surfaces (sphere 1, 0, 1; torus 1, 2, 1; a disjoint union adds them);
- PL Morse theory [Banchoff 1967]: for a function injective on vertices, every PL minimum starts a
  0-dimensional class, every maximum ends a 1-dimensional class or starts the 2-dimensional one,
  every saddle (with multiplicity) ends a 0-dimensional class or starts a 1-dimensional one;
- stability of persistence diagrams [Cohen-Steiner, Edelsbrunner, Harer 2007]:
  bottleneck(Dgm f, Dgm f') <= ||f - f'||_inf;
- closed forms for the noisy-scan generator (tests/scangen.py): points on the ellipsoid, the Euler
  characteristic of the sphere, one PL minimum and maximum of a linear function on a convex polyhedron,
  the sampling error of a standard deviation.
"""

from __future__ import annotations

from pathlib import Path

import gudhi
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meshgen import ellipsoid_mesh, torus_mesh
from scangen import noisy_scan

from specmap.grids.piecewise import piecewise_grid, pl_critical_vertices
from specmap.simplify import (
    auto_delta,
    candidate_deltas,
    make_injective,
    persistence_values,
    simplify_function,
    simplify_pair,
    simplify_values,
    smooth_within,
)

SPHERE = ellipsoid_mesh((1.0, 1.0, 1.0), 9)
TORUS = torus_mesh(2.0, 0.7, 36, 14)


def diagrams(T: np.ndarray, f: np.ndarray) -> list[np.ndarray]:
    """gudhi lower-star persistence of f on the mesh, dimensions 0, 1, 2 (zero-length pairs dropped)."""
    st_ = gudhi.SimplexTree()
    st_.insert_batch(np.arange(len(f))[None, :], f)
    E = np.unique(np.sort(np.concatenate([T[:, [0, 1]], T[:, [1, 2]], T[:, [0, 2]]]), axis=1), axis=0)
    st_.insert_batch(E.T, f[E].max(axis=1))
    st_.insert_batch(np.sort(T, axis=1).T, f[T].max(axis=1))
    st_.compute_persistence(persistence_dim_max=True)  # default min_persistence drops zero-length pairs
    return [np.asarray(st_.persistence_intervals_in_dimension(d)).reshape(-1, 2) for d in range(3)]


def finite(d: np.ndarray) -> np.ndarray:
    return d[np.isfinite(d[:, 1])]


def essential(D: list[np.ndarray]) -> list[int]:
    return [int((~np.isfinite(d[:, 1])).sum()) for d in D]


def noisy_field(V: np.ndarray, seed: int, amp: float) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x, y, z = V.T
    return x + 0.3 * np.sin(4 * y + seed) + amp * rng.normal(size=len(V))


def check_simplified(
    T: np.ndarray, f: np.ndarray, delta: float, betti: list[int], align: np.ndarray | None = None
) -> None:
    s = simplify_function(T, f, delta, align=align)
    g = s.values
    assert len(np.unique(g)) == len(g)  # injective on vertices (the stated symbolic rule)
    change = float(np.abs(g - f).max())
    assert s.sup_change == pytest.approx(change, abs=0.0)
    assert change <= delta
    D = diagrams(T, g)
    pers = np.concatenate([finite(d)[:, 1] - finite(d)[:, 0] for d in D])
    assert (pers >= delta).all(), (delta, np.sort(pers)[:3])  # gudhi: no finite pair below delta
    assert essential(D) == betti  # Betti numbers of the surface kept
    assert s.short_pairs_left == 0


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("delta", [0.02, 0.1, 0.4, 3.0])
def test_sphere_random_fields(seed: int, delta: float) -> None:
    V, T = SPHERE
    check_simplified(T, noisy_field(V, seed, 0.05), delta, [1, 0, 1])  # sphere: Betti 1, 0, 1


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("delta", [0.02, 0.1, 0.4, 3.0])
def test_torus_random_fields(seed: int, delta: float) -> None:
    V, T = TORUS
    check_simplified(T, noisy_field(V, seed, 0.05), delta, [1, 2, 1])  # torus: Betti 1, 2, 1


@settings(max_examples=25, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    amp=st.sampled_from([0.005, 0.1, 1.0]),
    delta=st.floats(0.001, 2.0),
    torus=st.booleans(),
    aligned=st.booleans(),
)
def test_hypothesis_fields(seed: int, amp: float, delta: float, torus: bool, aligned: bool) -> None:
    V, T = TORUS if torus else SPHERE
    companion = noisy_field(V[:, [1, 2, 0]], seed + 1, amp) if aligned else None
    check_simplified(T, noisy_field(V, seed, amp), delta, [1, 2, 1] if torus else [1, 0, 1], companion)


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("delta", [0.05, 0.3])
def test_aligned_layout(seed: int, delta: float) -> None:
    # the layout that follows a companion function keeps every guarantee (gudhi checks above)
    for V, T, betti in ((*SPHERE, [1, 0, 1]), (*TORUS, [1, 2, 1])):
        check_simplified(T, noisy_field(V, seed, 0.1), delta, betti, noisy_field(V[:, [1, 2, 0]], seed, 0.1))


def test_two_components() -> None:
    # a disjoint union of a sphere and a torus: Betti numbers add (2, 2, 2)
    Vs, Ts = SPHERE
    Vt, Tt = TORUS
    V = np.concatenate([Vs, Vt + 10.0])
    T = np.concatenate([Ts, Tt + len(Vs)])
    check_simplified(T, noisy_field(V, 3, 0.1), 0.2, [2, 2, 2])


def test_unchanged_without_short_pairs() -> None:
    V, T = SPHERE
    f = noisy_field(V, 11, 0.05)
    D = diagrams(T, f)
    shortest = min(float((finite(d)[:, 1] - finite(d)[:, 0]).min()) for d in D if len(finite(d)))
    s = simplify_function(T, f, 0.99 * shortest)  # gudhi: no pair below delta, so f' = f
    assert np.array_equal(s.values, f)
    assert s.sup_change == 0.0
    # delta = 0 never changes anything
    assert np.array_equal(simplify_function(T, f, 0.0).values, f)


def test_height_on_convex_sphere_is_kept() -> None:
    # a linear function on a convex polyhedron has one PL minimum and one maximum (no pair at all)
    V, T = SPHERE
    f = V @ np.array([0.3, -0.5, 0.8])
    s = simplify_function(T, f, 10.0)
    assert np.array_equal(s.values, f)
    assert s.critical_before == s.critical_after == {"min": 1, "saddle": 0, "max": 1}


@pytest.mark.parametrize("mesh,delta", [(SPHERE, 0.05), (TORUS, 0.05), (SPHERE, 0.3)])
def test_critical_counts_match_gudhi(mesh, delta: float) -> None:
    # PL Morse theory: minima = 0-dim points; maxima = finite 1-dim + 2-dim points;
    # saddles (with multiplicity) = finite 0-dim + all 1-dim points (gudhi diagram sizes)
    V, T = mesh
    f = noisy_field(V, 5, 0.05)
    s = simplify_function(T, f, delta)
    for values, counts in ((f, s.critical_before), (s.values, s.critical_after)):
        D = diagrams(T, values)
        assert counts["min"] == len(D[0])
        assert counts["max"] == len(finite(D[1])) + len(D[2])
        assert counts["saddle"] == len(finite(D[0])) + len(D[1])
    assert sum(s.critical_after.values()) < sum(s.critical_before.values())


def test_stability_bound() -> None:
    # [CEH07]: the bottleneck distance between the diagrams is at most the sup-norm change
    V, T = TORUS
    f = noisy_field(V, 2, 0.1)
    s = simplify_function(T, f, 0.15)
    Df, Dg = diagrams(T, f), diagrams(T, s.values)
    for a, b in zip(Df, Dg, strict=True):
        assert gudhi.bottleneck_distance(finite(a), finite(b)) <= s.sup_change + 1e-12


def test_ties_are_broken_within_budget() -> None:
    V, T = SPHERE
    f = np.round(noisy_field(V, 4, 0.2), 1)  # many exact ties
    assert len(np.unique(f)) < len(f)
    check_simplified(T, f, 0.25, [1, 0, 1])
    g = make_injective(f, 1e-3)
    assert len(np.unique(g)) == len(g) and float(np.abs(g - f).max()) < 1e-3
    order_f = np.lexsort((np.arange(len(f)), f))  # (value, index) order kept
    assert np.array_equal(np.argsort(g, kind="stable"), order_f)


def test_persistence_values_match_gudhi() -> None:
    V, T = TORUS
    f = noisy_field(V, 7, 0.05)
    ours = persistence_values(T, f)
    D = diagrams(T, f)
    ref = np.sort(np.concatenate([finite(d)[:, 1] - finite(d)[:, 0] for d in D]))
    np.testing.assert_allclose(ours[ours > 0], ref, rtol=0, atol=1e-12)


def test_simplify_pair() -> None:
    V, T = SPHERE
    f1, f2 = noisy_field(V, 1, 0.05), noisy_field(V[:, [1, 2, 0]], 2, 0.05)
    p = simplify_pair(T, f1, f2, 0.1)
    assert p.values.shape == (len(V), 2)
    assert max(p.sup_change) <= 0.1
    for col, f in zip(p.values.T, (f1, f2), strict=True):
        D = diagrams(T, col)
        assert min(float((finite(d)[:, 1] - finite(d)[:, 0]).min(initial=np.inf)) for d in D) >= 0.1
        assert not np.array_equal(col, f)


def _critical_total(T: np.ndarray):
    def count(f1: np.ndarray, f2: np.ndarray) -> int:
        return sum(sum(pl_critical_vertices(T, f).counts().values()) for f in (f1, f2))

    return count


def test_auto_delta_is_smallest_candidate() -> None:
    # brute force over every candidate threshold (written in the test): the first that meets the budget
    V, T = ellipsoid_mesh((1.0, 1.0, 1.0), 5)
    f1, f2 = noisy_field(V, 1, 0.05), noisy_field(V[:, [1, 2, 0]], 2, 0.05)
    count = _critical_total(T)
    budget = 12
    res = auto_delta(T, f1, f2, count, budget)
    cands = candidate_deltas(T, f1, f2)
    counts = [count(*simplify_pair(T, f1, f2, float(d)).values.T) for d in cands]
    first = next(i for i, c in enumerate(counts) if c <= budget)
    assert res.met and res.count_after <= budget < res.count_before
    assert res.delta == cands[first]
    assert res.evaluations < len(cands)  # bisection, not a scan


def test_auto_delta_budget_already_met_and_unreachable() -> None:
    V, T = SPHERE
    f1, f2 = V[:, 0], V[:, 1]
    res = auto_delta(T, f1, f2, _critical_total(T), 4)  # 1 min + 1 max each: already 4
    assert res.met and res.delta == 0.0 and res.pair is None
    g1 = noisy_field(V, 3, 0.05)
    res = auto_delta(T, g1, f2, _critical_total(T), 3)  # a sphere needs >= 2 critical points per function
    assert not res.met and res.count_after == 4  # the fewest possible: 1 minimum + 1 maximum each


def test_pareto_contours_drop() -> None:
    # the PL grid of the simplified pair has fewer contours (grids.piecewise, unchanged)
    V, T = SPHERE
    f1, f2 = noisy_field(V, 1, 0.05), noisy_field(V[:, [1, 2, 0]], 2, 0.05)
    before = len(piecewise_grid(V, T, np.c_[f1, f2]).contours)
    after = len(piecewise_grid(V, T, simplify_pair(T, f1, f2, 0.2).values).contours)
    assert after < before


# --------------------------------------------------------------------------- the noisy-scan generator


def test_scan_is_seeded() -> None:
    a, b, c = noisy_scan(amplitude=0.01, seed=3), noisy_scan(amplitude=0.01, seed=3), noisy_scan(seed=4)
    assert np.array_equal(a.vertices, b.vertices) and np.array_equal(a.triangles, b.triangles)
    assert not np.array_equal(a.vertices, c.vertices)


def test_scan_without_noise_is_the_smooth_surface() -> None:
    s = noisy_scan(radii=(2.0, 1.2, 1.0), level=8, amplitude=0.0, seed=1)
    # on the ellipsoid sum (x_i / r_i)^2 = 1 (closed form)
    np.testing.assert_allclose(((s.vertices / np.array(s.radii)) ** 2).sum(axis=1), 1.0, atol=1e-12)
    n, m = len(s.vertices), len(s.triangles)
    edges = np.unique(
        np.sort(
            np.concatenate([s.triangles[:, [0, 1]], s.triangles[:, [1, 2]], s.triangles[:, [0, 2]]]), axis=1
        ),
        axis=0,
    )
    assert n - len(edges) + m == 2  # Euler characteristic of the sphere
    a, b, c = (s.vertices[s.triangles[:, k]] for k in range(3))
    assert ((np.cross(b - a, c - a) * (a + b + c)).sum(axis=1) > 0).all()  # outward oriented
    # a linear function on a convex polyhedron: one PL minimum, one maximum [Banchoff 1967]
    for k in range(2):
        assert pl_critical_vertices(s.triangles, s.values[:, k]).counts() == {"min": 1, "saddle": 0, "max": 1}
    assert s.noise_sup == 0.0


def test_scan_noise_amplitude() -> None:
    s = noisy_scan(level=14, amplitude=0.02, seed=5)
    d = s.vertices - s.smooth_vertices
    # sample standard deviation of 3n = 5886 normal draws: relative error ~ 1/sqrt(2 * 5886) = 0.9 %
    assert abs(d.std() / 0.02 - 1.0) < 0.05
    assert abs(d.mean()) < 5 * 0.02 / np.sqrt(d.size)
    assert np.array_equal(s.values, s.vertices[:, [0, 1]])


@pytest.mark.parametrize("amplitude", [0.02, 0.05, 0.1])
def test_scan_simplifies_to_the_smooth_topology(amplitude: float) -> None:
    s = noisy_scan(level=12, amplitude=amplitude, seed=2)
    T = s.triangles
    bound = 2.0 * s.noise_sup  # stability [CEH07]: the smooth pair has no finite pair at all
    for k in range(2):
        D = diagrams(T, s.values[:, k])
        pers = np.concatenate([finite(d)[:, 1] - finite(d)[:, 0] for d in D])
        assert len(pers) > 0 and pers.max() <= bound
    delta = bound * (1 + 1e-9)
    p = simplify_pair(T, s.values[:, 0], s.values[:, 1], delta)
    for part in (p.f1, p.f2):
        assert part.critical_before["min"] > 1
        assert part.critical_after == {"min": 1, "saddle": 0, "max": 1}  # the smooth function's counts
        assert part.sup_change <= delta
    # triangle inequality: the simplified pair is within delta + noise of the smooth pair
    assert np.abs(p.values - s.smooth_values).max() <= delta + s.noise_sup


def test_smooth_within_tube() -> None:
    s = noisy_scan(level=12, amplitude=0.05, seed=6)
    f = s.values[:, 0]
    tau = s.noise_sup  # the smooth coordinate function lies in this tube
    g = smooth_within(s.triangles, f, tau)
    assert np.abs(g - f).max() <= tau  # clipped into the tube after every sweep
    assert np.array_equal(smooth_within(s.triangles, f, 0.0), f)  # an empty tube changes nothing
    before = sum(pl_critical_vertices(s.triangles, f).counts().values())
    after = sum(pl_critical_vertices(s.triangles, g).counts().values())
    assert after < before / 2
    # a constant is a fixed point of neighbour averaging (up to rounding of the weights 1/deg)
    np.testing.assert_allclose(smooth_within(s.triangles, np.full(len(f), 2.5), 1.0), 2.5, rtol=0, atol=1e-12)


SCANS = Path(__file__).resolve().parents[1] / "studies" / "data" / "scans"


@pytest.mark.parametrize("name", ["cow.ply", "bone.ply"])
def test_real_scans(name: str) -> None:
    # fetched by studies/data/fetch_scans.py; skipped where they were not fetched
    if not (SCANS / name).is_file():
        pytest.skip(f"{name} not fetched (python3 studies/data/fetch_scans.py)")
    from specmap.shapes.meshes import read_mesh

    V, T, _ = read_mesh(SCANS / name)
    for k in range(2):
        f = V[:, k]
        delta = 0.05 * float(np.ptp(f))
        check_simplified(T, f, delta, [1, 0, 1])  # both scans are closed genus-0 surfaces


def test_simplify_values_record() -> None:
    V, T = SPHERE
    F = np.c_[noisy_field(V, 1, 0.05), noisy_field(V[:, [1, 2, 0]], 2, 0.05)]

    def count(a: np.ndarray, b: np.ndarray) -> int:
        return len(piecewise_grid(V, T, np.c_[a, b]).contours)

    out, meta = simplify_values(T, F, 0.1, count)
    pair = simplify_pair(T, F[:, 0], F[:, 1], 0.1)
    assert np.array_equal(out, pair.values)
    assert meta["delta"] == 0.1 and meta["sup_change"] == list(pair.sup_change)
    assert meta["contours_before"] == count(*F.T) and meta["contours_after"] == count(*out.T)
    assert meta["budget"] is None and meta["met"] is None
    assert max(meta["sup_change"]) == float(np.abs(out - F).max()) <= 0.1  # measured, within delta
    out0, meta0 = simplify_values(T, F, 0.0, count)
    assert out0 is F or np.array_equal(out0, F)
    assert meta0["contours_after"] == meta0["contours_before"] and meta0["sup_change"] == [0.0, 0.0]
    # "auto" is the joint simplification (tests/test_jacobi_smooth.py), within 5% of the value range
    budget = (meta["contours_before"] + meta["contours_after"]) // 2
    outa, metaa = simplify_values(T, F, "auto", count, budget=budget)
    assert metaa["met"] and metaa["contours_after"] <= budget and metaa["budget"] == budget
    assert metaa["contours_after"] == count(*outa.T) and metaa["method"] == "joint"
    assert max(metaa["sup_change"]) == float(np.abs(outa - F).max()) <= metaa["cap"]
    with pytest.raises(ValueError):
        simplify_values(T, F, "fast", count)
