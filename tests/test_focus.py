"""The focused special set of the reduced search (specmap.special.focus, specmap.distance.node_bounds).

References: the whole atlas is the reference of the focused one (a tie's detection reads its two
pairs only); numpy array formulas are the reference of the compiled cost ranges; the stability
theorem [CDFFL13] is the reference of the node bounds (h evaluated at the nodes must not exceed
them); the dense sweep is an independent reference of the focused reduced search's value.
"""

from __future__ import annotations

import numpy as np
import pytest
from gridgen import random_grid
from test_distance import ellipsoid_pair, shapes

from specmap.distance import matching_distance
from specmap.distance.evaluator import LineEvaluator
from specmap.distance.focused import focused_source
from specmap.distance.node_bounds import node_upper_bounds
from specmap.grids.piecewise import piecewise_grid
from specmap.special import special_set
from specmap.special.evaluate import sample_contours
from specmap.special.focus import PairCosts, focus_pairs, pair_costs
from specmap.special.lattice import Lattice
from specmap.special.pairs import pair_table
from specmap.strip import Window, default_window, push_scale

W = Window((0.05, 0.95), (-1.0, 1.0))


def pair_costs_arrays(table, lattice: Lattice) -> PairCosts:
    """The cost ranges of pair_costs by numpy array formulas (the reference of the compiled pass)."""
    import warnings

    A, B = lattice.mesh()
    s, met = sample_contours(table.contours, A, B)
    m = push_scale(lattice.av)[None, None, :]
    i, j = table.first, table.second
    d = np.where(met[i] & met[j], np.abs(s[i] - s[j]) * m, np.nan)
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN rows: pairs met at no node
        lo, hi = np.nanmin(d, axis=(1, 2)), np.nanmax(d, axis=(1, 2))
        da = np.nanmax(np.abs(np.diff(d, axis=2)), axis=(1, 2)) if d.shape[2] > 1 else 0.0
        db = np.nanmax(np.abs(np.diff(d, axis=1)), axis=(1, 2)) if d.shape[1] > 1 else 0.0
    margin = np.nan_to_num(np.fmax(da, db), nan=0.0)
    return PairCosts(lo - margin, hi + margin, margin)


@pytest.mark.parametrize("seed", [1, 5])
def test_compiled_ranges_match_array_formulas(seed):
    # reference: the chunked numpy formulas of pair_costs_arrays (min, max, largest neighbour step)
    t = pair_table(random_grid(seed, 7, "f"), random_grid(seed + 50, 6, "g"), "all")
    lat = Lattice.of(W, 17, 13)
    a, b = pair_costs(t, lat), pair_costs_arrays(t, lat)
    np.testing.assert_allclose(a.lo, b.lo, rtol=1e-12, atol=1e-12, equal_nan=True)
    np.testing.assert_allclose(a.hi, b.hi, rtol=1e-12, atol=1e-12, equal_nan=True)
    np.testing.assert_allclose(a.margin, b.margin, rtol=1e-12, atol=1e-12)


def _pieces(atlas):
    return {(p.tie, p.kind): p.geometry for p in atlas.pieces}


def test_subset_atlas_has_only_ties_of_its_pairs():
    # reference: the pair ids of the full table; a subset atlas must never report a tie of a dropped pair
    gf, gg = random_grid(3, 6, "f"), random_grid(9, 6, "g")
    t = pair_table(gf, gg, "all")
    keep = np.arange(0, t.n_pairs, 2)
    sub = special_set(gf, gg, W, resolution=31, reading="contours", keep=keep)
    kept_ids = {tuple(sorted(t.pair_ids(int(p)))) for p in keep}
    assert sub.pieces
    assert all({tuple(sorted(q)) for q in p.tie.pairs} <= kept_ids for p in sub.pieces)
    assert sub.stats["pairs_kept"] == keep.size and sub.stats["pairs_total"] == t.n_pairs


def test_unbounded_band_changes_nothing():
    # a band (-inf, inf) keeps every item on every edge: the same atlas as no band
    gf, gg = random_grid(4, 6, "f"), random_grid(8, 5, "g")
    a = special_set(gf, gg, W, resolution=25)
    b = special_set(gf, gg, W, resolution=25, band=(-np.inf, np.inf))
    assert _pieces(a).keys() == _pieces(b).keys()


def test_band_drops_pairs_outside_it():
    # closed form (derived in the doctest of focus_pairs): vertical half-lines, |c| = x-distance
    gf, gg = random_grid(2, 6, "f"), random_grid(6, 6, "g")
    t = pair_table(gf, gg, "roles")
    wide = focus_pairs(t, W, 21, (-np.inf, np.inf))
    narrow = focus_pairs(t, W, 21, (0.3, 0.4))
    assert set(narrow.kept) < set(wide.kept)
    assert narrow.below + narrow.above + narrow.unmet + narrow.kept.size == t.n_pairs


def test_node_bounds_are_upper_bounds_of_h():
    # stability [CDFFL13]: h(p) <= h(q) + ||F*_f(p) - F*_f(q)|| + ||F*_g(p) - F*_g(q)|| (+ edge terms)
    V, T, f = ellipsoid_pair(150)
    g = f + np.c_[0.2 * np.sin(3 * V[:, 2]), 0.1 * V[:, 0]]
    sf, sg = shapes(V, T, f, g)
    w = default_window(sf.value_bounds(), sg.value_bounds())
    ev = LineEvaluator(sf, sg, (0,))
    qa, qb = np.meshgrid(np.linspace(*w.a, 4), np.linspace(*w.b, 4))
    Hq = ev(qa.ravel(), qb.ravel())[0]
    av, bv = np.linspace(*w.a, 7), np.linspace(*w.b, 6)
    bounds = (sf.value_bounds(), sg.value_bounds())
    nb = node_upper_bounds(ev.val_f, ev.val_g, bounds, w, av, bv, np.c_[qa.ravel(), qb.ravel()], Hq)
    A, B = np.meshgrid(av, bv)
    H = ev(A.ravel(), B.ravel())[0].reshape(A.shape)
    assert np.all(H <= nb.upper + 1e-9)
    assert nb.edge_a > 0 and nb.edge_b > 0


def test_focused_reduced_search_agrees_with_the_whole_map_and_the_dense_sweep():
    # references: the reduced search on the whole map, and the dense sweep (no special set)
    V, T, f = ellipsoid_pair(160)
    x, y, z = V.T
    g = np.c_[x + 0.3 * np.sin(1.5 * z) + 0.1 * y, y - 0.2 * z**2 + 0.1 * x]
    sf, sg = shapes(V, T, f, g)
    gf, gg = piecewise_grid(V, T, f, label="f"), piecewise_grid(V, T, g, label="g")
    w = default_window(sf.value_bounds(), sg.value_bounds())
    kw = dict(degrees=(0,), grids=(gf, gg), window=w, position_lines=0)
    with np.errstate(all="ignore"):
        whole = matching_distance(sf, sg, method="reduced", atlas=special_set(gf, gg, w, resolution=41), **kw)
        focused = matching_distance(
            sf, sg, method="both", atlas=focused_source(gf, gg, w, resolution=41), dense_resolution=15, **kw
        )
    tol = focused.tolerance
    assert focused.reduced["value"] == pytest.approx(whole.reduced["value"], abs=tol)
    assert focused.dense["value"] <= focused.reduced["value"] + tol
    fo = focused.reduced["focus"]
    assert fo["pairs_kept"] < fo["pairs_total"] and fo["node_bounds"]["lines"] > 0


def test_focused_set_too_large_for_its_budget_is_refused_in_one_line():
    # reference: the probe count itself; a budget below the base bytes cannot hold any atlas
    from specmap.special.focus import focused_special_set
    from specmap.special.preflight import AtlasTooLargeError

    gf, gg = random_grid(4, 6, "f"), random_grid(8, 5, "g")
    with pytest.raises(AtlasTooLargeError) as info:
        focused_special_set(gf, gg, W, (-np.inf, np.inf), resolution=21, budget=1.0)
    line = info.value.one_line()
    assert "\n" not in line and "over the budget" in line and "dense method" in line
    # and a budget of machine size maps it
    atlas = focused_special_set(gf, gg, W, (-np.inf, np.inf), resolution=21, budget=1e12)
    assert atlas.stats["focus"]["probe_crossings"] >= 0
