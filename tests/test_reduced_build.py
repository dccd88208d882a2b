"""The candidate list built from flat arrays, and the box bound of h (issue 11, the reduced search).

References: the per-piece shapely form of the candidate list (``tests/candidates_shapely.py``,
shapely's GEOS intersections) is the reference of the flat build; ``np.interp``/``np.union1d``
(:func:`specmap.distance.paths.sample_path`) of the compiled resampling; the stability theorem
[CDFFL13] written out in the test (h(p) <= h(q) + the two sup-norm moves of F*) and F* at
sampled points of each box (closed form, :func:`specmap.strip.star_values`) of the box bound;
h evaluated at lines (gudhi diagrams) of the statement that the box bound bounds h.
"""

from __future__ import annotations

import candidates_shapely as ref
import numpy as np
import pytest
from gridgen import random_grid
from scipy.spatial import cKDTree
from test_distance import ellipsoid_pair, shapes

from specmap.distance.boxes import BoxBound, box_star_range
from specmap.distance.candidates import CROSSING, special_candidates
from specmap.distance.evaluator import LineEvaluator
from specmap.distance.kernels import near_line_bound, sample_paths
from specmap.distance.paths import sample_path
from specmap.special import special_set
from specmap.strip import Window, default_window, star_values

W = Window((0.05, 0.95), (-1.0, 1.0))


def _atlas(seed: int, n_f: int, n_g: int, resolution: int = 41, pairs: str = "roles"):
    gf, gg = random_grid(seed, n_f, "f"), random_grid(seed + 50, n_g, "g")
    C = {c.id: c for grid in (gf, gg) for c in grid.contours}
    return special_set(gf, gg, W, resolution=resolution, pairs=pairs), C


def test_compiled_resampling_is_the_per_path_numpy_one():
    # reference: sample_path (np.union1d of vertex arc lengths and a linspace, np.interp), path by path
    rng = np.random.default_rng(7)
    paths = [rng.uniform(0, 1, (int(rng.integers(1, 9)), 2)) for _ in range(60)]
    paths.append(np.array([[0.2, 0.2], [0.2, 0.2], [0.5, 0.1]]))  # a zero-length segment
    off = np.r_[0, np.cumsum([len(p) for p in paths])]
    got, pid = sample_paths(np.concatenate(paths), off, 1 / 37)
    for k, p in enumerate(paths):
        np.testing.assert_array_equal(got[pid == k], sample_path(p, 1 / 37))


def test_compiled_near_line_bound_is_the_numpy_form_bit_for_bit():
    # reference: the numpy form LocalBound.many had (gather, |difference|, max, two sums, min),
    # written out here; NaN propagates as in numpy's max and min
    rng = np.random.default_rng(4)
    L, nf, ng, groups, k, near = 40, 57, 33, 3, 9, 6
    Ff, Fg = rng.normal(size=(L, nf)), rng.normal(size=(L, ng))
    H = rng.uniform(size=(L, groups))
    idx = np.stack([rng.permutation(L)[:near] for _ in range(k)])
    Sf, Sg = rng.normal(size=(k, nf)), rng.normal(size=(k, ng))
    Ff[idx[2, 1], 5] = np.nan
    move = np.abs(Ff[idx] - Sf[:, None, :]).max(axis=2)
    move += np.abs(Fg[idx] - Sg[:, None, :]).max(axis=2)
    want = (H[idx] + move[:, :, None]).min(axis=1)
    got = near_line_bound(Ff, Fg, H, idx, Sf, Sg)
    assert np.array_equal(want, got, equal_nan=True) and np.isnan(got[2]).all()
    clean = ~(idx == idx[2, 1]).any(axis=1)  # rows whose near lines miss the NaN
    assert clean.any() and np.isfinite(got[clean]).all()


def _star(V: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """F*(a, b) at the vertices by its definition [CDFFL13]: min(a, 1 - a) max((v1 - b) / a, (v2 + b) / (1 - a))."""
    a, b = a[:, None], b[:, None]
    return np.minimum(a, 1 - a) * np.maximum((V[None, :, 0] - b) / a, (V[None, :, 1] + b) / (1 - a))


def test_coarse_moves_never_below_the_vertex_sup_norm():
    # closed form in the test: the sup over vertices of |F*(p) - F*(q)| from the definition of F*
    from specmap.distance.bounds import _extremes, coarse_moves

    rng = np.random.default_rng(8)
    for _ in range(100):
        V = rng.normal(size=(40, 2)) * rng.uniform(0.1, 5)
        a, aq = rng.uniform(0.02, 0.98, 25), rng.uniform(0.02, 0.98, 25)
        b = rng.uniform(-3, 3, 25)
        bq = b + rng.normal(size=25) * rng.uniform(1e-3, 1)
        exact = np.abs(_star(V, a, b) - _star(V, aq, bq)).max(axis=1)
        got = coarse_moves(_extremes(V), a[:, None], b[:, None], aq[:, None], bq[:, None])[:, 0]
        assert (got >= exact).all()
    # and equal when only the offset moves on a = 1/2 and one term is active at every vertex
    V = np.c_[np.linspace(5, 6, 9), np.zeros(9)]
    a = np.array([0.5])
    exact = np.abs(_star(V, a, np.array([0.0])) - _star(V, a, np.array([0.1]))).max()
    got = coarse_moves(_extremes(V), a[:, None], np.zeros((1, 1)), a[:, None], np.full((1, 1), 0.1))
    assert np.isclose(got[0, 0], exact, rtol=1e-9) and np.isclose(exact, 0.1)


def test_local_bound_refute_decides_as_the_vertex_bound():
    # the O(1) pre-test only ever refutes lines the vertex-wise bound refutes, and the others
    # get the vertex-wise bound bit for bit
    from specmap.distance.bounds import LocalBound

    rng = np.random.default_rng(3)
    vf, vg = rng.normal(size=(60, 2)), rng.normal(size=(45, 2)) * 1.3
    lb = LocalBound(vf, vg, W)
    qa, qb = rng.uniform(*W.a, 50), rng.uniform(*W.b, 50)
    lb.add(qa, qb, rng.uniform(0.2, 0.6, size=(50, 2)))
    a, b = rng.uniform(*W.a, 400), rng.uniform(*W.b, 400)
    exact = lb.many(a, b)
    tol = 1e-3
    lo = exact.max(axis=1) + rng.uniform(-0.5, 1.5, 400)
    got = lb.many(a, b, (lo, tol))
    refuted_exact = lo > exact.max(axis=1) + tol
    refuted_got = lo > got.max(axis=1) + tol
    assert np.array_equal(refuted_exact, refuted_got)
    coarse = ~(got == exact).all(axis=1)  # rows given the O(1) bound
    assert coarse.any() and refuted_got[coarse].all() and (got[coarse] >= exact[coarse]).all()


@pytest.mark.parametrize("seed,n_f,n_g,floor", [(1, 7, 6, None), (4, 8, 7, 0.5), (11, 6, 9, None)])
def test_flat_build_gives_the_shapely_candidates(seed, n_f, n_g, floor):
    # reference: the per-piece shapely build (GEOS intersections of the tie geometries)
    atlas, C = _atlas(seed, n_f, n_g)
    kw = {}
    if floor is not None:
        hi = special_candidates(atlas, C, W).hi
        kw = dict(floor=float(np.quantile(hi, floor)), tolerance=1e-4)
    new = special_candidates(atlas, C, W, **kw)
    old = ref.special_candidates(atlas, C, W, **kw)
    assert {k: v for k, v in new.pruned.items() if k in old.pruned} == old.pruned
    assert new.live == old.live and new.below_floor >= old.below_floor
    # curve samples: the same candidates in the same order
    for key in ("a", "b", "lo", "hi", "piece", "origin"):
        np.testing.assert_array_equal(
            getattr(new, key)[new.origin != CROSSING], getattr(old, key)[old.origin != CROSSING]
        )
    # crossings: every GEOS crossing is found at the same point (1e-9) with the same costs, except
    # on stretches where two ties' curves coincide (three contours' ties coincide identically), where
    # GEOS reports rounding-dependent points along the stretch: those must lie on such a stretch
    mo, mn = old.origin == CROSSING, new.origin == CROSSING
    assert mo.sum() > 10
    tree = cKDTree(np.c_[new.a[mn], new.b[mn], new.piece[mn] * 10.0])
    dist, idx = tree.query(np.c_[old.a[mo], old.b[mo], old.piece[mo] * 10.0])
    found = dist < 1e-9
    np.testing.assert_allclose(
        new.hi[mn][idx[found]], old.hi[mo][found], rtol=0, atol=1e-8
    )  # points 1e-9 apart
    assert found.mean() > 0.95
    for k in np.nonzero(~found)[0]:
        assert _on_coincident_stretch(atlas.pieces, int(old.piece[mo][k]), old.a[mo][k], old.b[mo][k])
    assert new.crossings >= 0.97 * old.crossings


def _on_coincident_stretch(pieces, u: int, a: float, b: float) -> bool:
    """Another tie sharing a pair with piece u has its curve within 1e-9 of u's near (a, b)."""
    import shapely

    x = shapely.Point(a, b)
    disk = x.buffer(1e-3)
    pairs = {tuple(sorted(p)) for p in pieces[u].tie.pairs}
    gu = pieces[u].geometry.intersection(disk)
    for v, p in enumerate(pieces):
        if v == u or not pairs & {tuple(sorted(q)) for q in p.tie.pairs} or p.geometry.distance(x) > 1e-9:
            continue
        gv = p.geometry.intersection(disk)
        if gu.buffer(1e-9).contains(gv) or gv.buffer(1e-9).contains(gu):
            return True
    return False


def test_paths_for_the_polish_are_the_pieces_paths():
    # reference: the shapely build's paths and their owner pieces
    atlas, C = _atlas(3, 6, 6)
    new, old = special_candidates(atlas, C, W), ref.special_candidates(atlas, C, W)
    assert len(new.paths) == len(old.paths) and sorted(new.paths_of) == sorted(old.paths_of)
    for ip, ks in old.paths_of.items():
        assert new.paths_of[ip] == ks
        for k in ks:
            np.testing.assert_allclose(new.paths[k], old.paths[k], rtol=0, atol=1e-15)


def _bounded_pair():
    V, T, f = ellipsoid_pair(150)
    x, y, z = V.T
    g = np.c_[x + 0.3 * np.sin(1.5 * z) + 0.1 * y, y - 0.2 * z**2 + 0.1 * x]
    return V, T, f, g


def test_box_star_range_holds_f_star_over_the_box():
    # closed form: F* at random points of each box lies in [lower, sup]; the sup is met at a corner
    V, T, f, g = _bounded_pair()
    rng = np.random.default_rng(5)
    for a0, b0 in [(0.1, -0.5), (0.45, 0.2), (0.49, -1.0), (0.7, 0.4)]:
        a1, b1 = a0 + 0.08, b0 + 0.3  # (0.45, 0.53) and (0.49, 0.57) straddle a = 1/2
        hi, lo = box_star_range(f, [a0], [a1], [b0], [b1])
        pa, pb = rng.uniform(a0, a1, 400), rng.uniform(b0, b1, 400)
        F = star_values(f[None], pa[:, None], pb[:, None])
        assert np.all(F <= hi + 1e-12) and np.all(F >= lo - 1e-12)
        corners = star_values(f[None], np.array([[a0], [a0], [a1], [a1]]), np.array([[b0], [b1], [b0], [b1]]))
        np.testing.assert_allclose(hi[0], corners.max(axis=0), rtol=0, atol=1e-12)


def test_box_bound_is_above_the_stability_bound_and_h_in_its_box():
    # references: the stability bound [CDFFL13] written out at sampled points of each box, and h there
    V, T, f, g = _bounded_pair()
    sf, sg = shapes(V, T, f, g)
    w = default_window(sf.value_bounds(), sg.value_bounds())
    ev = LineEvaluator(sf, sg, (0,))
    rng = np.random.default_rng(2)
    qa, qb = rng.uniform(*w.a, 12), rng.uniform(*w.b, 12)
    hq = ev(qa, qb)[0]
    box = BoxBound(f, g, w, side=6, near=12)
    box.add(qa, qb, hq[:, None])
    ids = np.arange(36)
    up = box.box_upper(ids)[:, 0]
    for k in ids[::5]:
        i, j = k % 6, k // 6
        pa = w.a[0] + (w.a[1] - w.a[0]) * (i + rng.uniform(0, 1, 5)) / 6
        pb = w.b[0] + (w.b[1] - w.b[0]) * (j + rng.uniform(0, 1, 5)) / 6
        for a, b in zip(pa, pb, strict=True):
            mf = np.abs(star_values(f, a, b)[None] - star_values(f[None], qa[:, None], qb[:, None])).max(
                axis=1
            )
            mg = np.abs(star_values(g, a, b)[None] - star_values(g[None], qa[:, None], qb[:, None])).max(
                axis=1
            )
            assert up[k] >= float(np.min(hq + mf + mg)) - 1e-12
        assert np.all(ev(pa, pb)[0] <= up[k] + 1e-9)
    # the cached form gives each line its box's bound
    np.testing.assert_allclose(box.at(qa, qb), up[box.box_of(qa, qb)])


def test_bound_at_build_drops_exactly_the_refuted_candidates():
    # reference: the list built without the bound, filtered by the same rule afterwards
    atlas, C = _atlas(4, 8, 7)

    def bound(a, b):
        return 0.3 + 0.2 * np.sin(7 * a) * np.cos(3 * b)

    full = special_candidates(atlas, C, W)
    cut = special_candidates(atlas, C, W, bound=bound, upper=0.9, tolerance=1e-4)
    refuted = full.lo > bound(full.a, full.b) + 1e-4
    above = full.lo > 0.9 + 1e-4
    keep = ~refuted & ~above
    for key in ("a", "b", "lo", "hi", "piece", "origin"):
        np.testing.assert_array_equal(getattr(cut, key), getattr(full, key)[keep])
    assert cut.pruned["above_bound"] == above.sum()
    assert cut.pruned["box_bound"] == (refuted & ~above).sum()
