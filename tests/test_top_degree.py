"""D_2 of two closed connected surfaces in closed form (specmap.distance.top_degree, issue 13 item 1).

Sources named beside each check:
- "closed form, derived here": on a closed connected orientable surface Dgm_2 of a lower-star
  filtration is the one point (max F, inf) (simplicial homology of a 2-complex: no 3-simplices, so
  no 2-class dies; a proper subcomplex carries no 2-cycle), so h_2(p) = |max F*_f(p) - max F*_g(p)|;
  max over the vertices of max(x - beta, t (y + beta)) is max(max x - beta, t (max y + beta)) for t >= 0;
- "CDFFL13 stability, closed form derived here": g = f + (c, c) on one mesh gives D_2 = |c|
  (F*_g = F*_f + c on a = 1/2, |F*_g - F*_f| <= |c| on every line);
- "brute force in the test": h_2 of the slices (gudhi, through the evaluator) at random lines.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_distance import FakeAtlas, ellipsoid_pair, shapes

from specmap.distance import LineEvaluator, matching_distance
from specmap.distance.slope_one import slope_one_search
from specmap.distance.top_degree import METHOD, fold_top, slope_one_top_cap, top_h, top_sup
from specmap.grids.model import Contour, Grid
from specmap.strip import default_window

GRID = Grid((Contour("f:v0", "vertical", [0.0, 0.0]),))
GRIDS = (GRID, GRID.relabelled("g"))


def _rough_pair():
    V, T, f = ellipsoid_pair(300)
    rng = np.random.default_rng(3)
    w = rng.normal(size=(3, 2))
    return shapes(V, T, f, f + 0.2 * np.sin(2.5 * V @ w + rng.uniform(0, 6, 2)))


def test_closed_form_equals_the_slices_and_its_sup_bounds_them():
    # closed form, derived here: top_h is h_2 of the slices at random lines (brute force, both forms,
    # near both ends of the strip); the swept sup is above every one of them and within tol of its
    # own best line, whose slice agrees.
    sf, sg = _rough_pair()
    w = default_window(sf.value_bounds(), sg.value_bounds())
    tol = 1e-3
    rng = np.random.default_rng(11)
    a = np.r_[rng.uniform(0.01, 0.99, 40), 1e-4, 1 - 1e-4, 0.5]
    b = np.r_[rng.uniform(*w.b, 40), w.b[0], w.b[1], 0.0]
    ev = LineEvaluator(sf, sg, (2,))
    H = ev(a, b)[0]
    assert np.allclose(H, top_h(sf.values, sg.values, a, b), atol=1e-12)
    sup = top_sup(sf.values, sg.values, w.b, tol)
    assert sup.bound >= H.max() - 1e-12
    assert 0 <= sup.bound - sup.best <= tol
    assert 0 < sup.at[0] < 1 and w.b[0] <= sup.at[1] <= w.b[1]
    assert ev(np.array([sup.at[0]]), np.array([sup.at[1]]))[0][0] == pytest.approx(sup.best, abs=1e-12)
    # and above a dense brute-force scan of the closed form itself (a sup, reached anywhere)
    A, B = np.meshgrid(np.linspace(1e-6, 1 - 1e-6, 801), np.linspace(*w.b, 801))
    assert sup.bound >= top_h(sf.values, sg.values, A.ravel(), B.ravel()).max() - 1e-12


def test_translation_closed_form():
    # CDFFL13 stability, closed form derived here: g = f + (c, c) gives D_2 = |c|, and |M_f - M_g|
    # equals |c| on a = 1/2 at every b.
    V, T, f = ellipsoid_pair(300)
    c = 0.15
    sf, sg = shapes(V, T, f, f + c)
    w = default_window(sf.value_bounds(), sg.value_bounds())
    sup = top_sup(sf.values, sg.values, w.b, 1e-3)
    assert sup.best - 1e-12 <= c <= sup.bound + 1e-12 and sup.bound - sup.best <= 1e-3
    assert np.allclose(top_h(sf.values, sg.values, 0.5, np.linspace(*w.b, 9)), c, atol=1e-12)


def test_slope_one_top_cap_is_the_exact_interval_max():
    # closed form, derived here: on a = 1/2, |M_f - M_g| is piecewise linear with its kinks at
    # (max f1 - max f2) / 2; the cap equals a fine scan's max (to the scan's step times 2) and is
    # above the slices' h_2 there (brute force).
    sf, sg = _rough_pair()
    cap, kinks = slope_one_top_cap(sf.values, sg.values)
    assert len(kinks) in (1, 2)
    ev = LineEvaluator(sf, sg, (2,))
    for lo, hi in ((-1.5, 1.5), (-0.3, 0.2), (kinks[0] - 0.1, kinks[0] + 0.1)):
        x = np.linspace(lo, hi, 4001)
        scan = top_h(sf.values, sg.values, 0.5, x).max()
        assert scan - 1e-12 <= cap(lo, hi) <= scan + 2 * 2 * (hi - lo) / 4000 + 1e-12
        xs = np.linspace(lo, hi, 9)
        assert ev(np.full(9, 0.5), xs)[0].max() <= cap(lo, hi) + 1e-12


def test_slope_one_search_closes_the_top_degree_with_the_cap():
    # brute force in the test: the certified bound is above h_2 on a fine scan of a = 1/2; with the
    # closed-form cap the search closes in far fewer lines than the Lipschitz bound alone.
    sf, sg = _rough_pair()
    w = default_window(sf.value_bounds(), sg.value_bounds())
    tol = 1e-4
    ev = LineEvaluator(sf, sg, (0, 2))
    plain = slope_one_search(ev, w, [[1]], tolerance=tol, max_lines=60, batch=4)
    ev2 = LineEvaluator(sf, sg, (0, 2))
    capped = slope_one_search(ev2, w, [[1]], tolerance=tol, max_lines=60, batch=4, top=1)
    assert capped.certified_groups == [True] and plain.certified_groups == [False]
    assert capped.lines < plain.lines
    x = np.linspace(*w.b, 601)
    scan = LineEvaluator(sf, sg, (2,))(np.full(x.shape, 0.5), x)[0]
    assert capped.bound[0] >= scan.max() - 1e-12 and capped.bound[0] - capped.best[0] <= tol


def test_matching_distance_certifies_degree_2_by_the_closed_form():
    # closed form, derived here: the dense sweep alone leaves D_2 open (its cell error bound); the
    # closed form closes it over the whole strip, ends included, with no strip search (budget 0), and
    # the interval holds a brute-force max of the slices' h_2 at random lines.
    from specmap.settings import DistanceSettings

    sf, sg = _rough_pair()
    s = DistanceSettings(method="dense", degrees=(2,), dense_resolution=9, position_lines=0, strip_budget=0.0)
    res = matching_distance(sf, sg, settings=s, atlas=FakeAtlas((), ()), grids=GRIDS)
    e = res.by_degree[2]
    assert e["certified"] is True and e["why_not"] is None, e
    assert e["strip"]["method"] == METHOD and e["strip"]["closed"] is True
    lo, hi = e["bounds"]
    assert hi - lo <= res.tolerance * (1 + 1e-9)
    assert e["ends"]["covered"] is True
    rng = np.random.default_rng(5)
    a, b = rng.uniform(0.001, 0.999, 60), rng.uniform(*res.window.b, 60)
    H = LineEvaluator(sf, sg, (2,))(a, b)[0]
    assert H.max() <= hi + 1e-12
    assert res.meta["top_degree"]["agrees"] is True and res.meta["top_degree"]["new_lines"] <= 2


def test_fold_top_leaves_the_degree_alone_when_the_slices_disagree():
    # built to fail: the evaluator's slices are of another pair than the shapes' values, so the
    # closed form does not hold for them; nothing is folded and the degree stays open.
    sf, sg = _rough_pair()
    other_f, other_g = shapes(sf.vertices, sf.triangles, sf.values * 1.1, sg.values)
    w = default_window(sf.value_bounds(), sg.value_bounds())
    ev = LineEvaluator(other_f, other_g, (2,))
    entry = {"value": 0.1, "at": [0.5, 0.0], "bounds": [0.1, 0.5], "certified": False, "why_not": "open"}
    by_degree = {2: dict(entry)}
    meta = fold_top(ev, sf, sg, w, by_degree, (2,), 1e-3)
    assert meta is not None and meta["agrees"] is False
    assert by_degree[2] == entry
    # and an open mesh (one triangle removed) is not a closed surface: no closed form at all
    open_f, open_g = shapes(sf.vertices, sf.triangles[1:], sf.values, sg.values)
    assert fold_top(ev, open_f, open_g, w, {2: dict(entry)}, (2,), 1e-3) is None
