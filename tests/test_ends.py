"""The strip's ends: the bound of sup h_k over a < a0 and a > 1 - a0 (issue 16 item 4).

Sources named beside each check:
- "closed form, derived here": g = f + (c, 0) on one mesh. Below (a <= 1/2, t = a / (1 - a)),
  F*_g - F*_f = max(x + c - b, t (y + b)) - max(x - b, t (y + b)) lies in [0, c], so h_0 <= c by
  stability [CDFFL13]; at b = b- every vertex has t (y + b) <= 0 <= x - b, so F* = x - b and the
  essential H0 births differ by c: sup of h_0 over the lower end strip is exactly c. Above
  (t = (1 - a) / a), F*_g - F*_f lies in [0, t c] and at b = b- it is t c at every vertex: sup of
  h_0 over the upper end strip is t0 c, t0 = a0 / (1 - a0), reached at the window's edge.
- "brute force in the test": h recomputed on lines of the end strips with fresh slice engines and
  the bottleneck of specmap.slices (itself tested against brute force and persim).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from meshgen import ellipsoid_mesh

from specmap.distance import matching_distance
from specmap.distance.ends import end_bounds, end_strip_bound
from specmap.distance.evaluator import LineEvaluator
from specmap.shapes.model import Shape
from specmap.slices import SliceEngine, bottleneck
from specmap.strip import Window, default_window, value_bounds

V, T = ellipsoid_mesh((1.0, 0.8, 0.6), 4, seed=3)
F = V[:, :2].copy()


def _brute_h(vf, vg, a, b, k):
    ef, eg = SliceEngine(T, vf), SliceEngine(T, vg)
    return bottleneck(ef.diagrams(a, b, (k,))[k], eg.diagrams(a, b, (k,))[k])


@pytest.mark.parametrize("c", [0.1, 0.25])
def test_translation_in_f1_closed_form(c):
    # closed form, derived here (module docstring): sup below = c, sup above = t0 c.
    vg = F + [c, 0.0]
    ev = LineEvaluator(SliceEngine(T, F), SliceEngine(T, vg), (0,))
    w = default_window(value_bounds(F), value_bounds(vg))
    tol = 1e-3
    below, above = end_bounds(ev, F, vg, w, [c], tolerance=tol, max_lines=300)
    t0 = w.a[0] / (1 - w.a[0])
    assert c - 1e-9 <= below.bound[0] <= c + tol
    assert below.best[0] == pytest.approx(c, abs=1e-9)
    assert t0 * c - 1e-9 <= above.bound[0] <= c + tol  # covered against the window's value c
    assert above.best[0] <= t0 * c + 1e-9
    # the bound is an upper bound: brute force on lines inside the end strips stays below it
    rng = np.random.default_rng(0)
    for a, b in zip(rng.uniform(0, w.a[0], 6), rng.uniform(*w.b, 6), strict=True):
        assert _brute_h(F, vg, a, b, 0) <= below.bound[0] + 1e-12
        assert _brute_h(F, vg, 1 - a, b, 0) <= above.bound[0] + 1e-12


def test_bound_is_an_upper_bound_on_a_nonlinear_pair():
    # brute force in the test: sup over sampled end lines <= the bound, for every degree.
    x, y = F.T
    vg = np.c_[x, y + 0.5 * x**2]
    ev = LineEvaluator(SliceEngine(T, F), SliceEngine(T, vg), (0, 1, 2))
    w = default_window(value_bounds(F), value_bounds(vg))
    below, above = end_bounds(ev, F, vg, w, [0.0, 0.0, 0.0], tolerance=1e-3, max_lines=80)
    rng = np.random.default_rng(1)
    for a, b in zip(rng.uniform(0, w.a[0], 5), rng.uniform(*w.b, 5), strict=True):
        for k in (0, 1, 2):
            assert _brute_h(F, vg, a, b, k) <= below.bound[k] + 1e-12
            assert _brute_h(F, vg, 1 - a, b, k) <= above.bound[k] + 1e-12


def test_ends_that_exceed_the_window_fail_the_check():
    # A window a in [0.55, 0.9] leaves out a = 1/2, where h_0 of this pair is larger (brute force
    # below): the lower end strip (a < 0.55) must not be covered, and the certificate says so.
    x, y = F.T
    vg = np.c_[x, y + 0.5 * x**2]
    w0 = default_window(value_bounds(F), value_bounds(vg))
    w = Window((0.55, 0.9), w0.b)
    ev = LineEvaluator(SliceEngine(T, F), SliceEngine(T, vg), (0,))
    A, B = w.mesh(12, 41)
    inside = float(np.max(ev(A, B)[0]))
    bv = np.linspace(*w.b, 81)
    outside = max(_brute_h(F, vg, 0.45, b, 0) for b in bv)
    tol = 1e-3
    assert outside > inside + 10 * tol  # the case is built so: the ends hold more than the window
    s = end_strip_bound(ev, F, vg, w, [inside], side="below", tolerance=tol, max_lines=120)
    assert s.bound[0] >= outside - 1e-12 and s.best[0] > inside + tol
    # through matching_distance: not certified, and the reason names the ends
    sf, sg = Shape("f", "mesh", V, T, F), Shape("g", "mesh", V, T, vg)
    res = matching_distance(sf, sg, method="dense", degrees=(0,), window=w, dense_resolution=9, tolerance=tol)
    e = res.by_degree[0]
    assert e["ends"]["covered"] is False and e["certified"] is False
    assert "strip's ends" in e["why_not"]
    assert e["bounds"][1] >= outside - 1e-12 and e["bounds"][0] >= e["ends"]["best"] - 1e-12
    js = res.to_json()["by_degree"]["0"]["ends"]
    assert set(js) >= {"a_below", "a_above", "method", "covered"}


def test_empty_end_strip_and_infinite_value():
    # closed form: a window reaching a = 0 has no lower end strip; an infinite D_k is covered.
    ev = LineEvaluator(SliceEngine(T, F), SliceEngine(T, F), (0,))
    w = Window((0.0, 0.98), (-1.0, 1.0))
    s = end_strip_bound(ev, F, F, w, [0.0], side="below", tolerance=1e-3)
    assert s.lines == 0 and s.bound == [-math.inf]
    from specmap.distance.ends import EndStrip, ends_entry

    empty = EndStrip("above", [1.0], [1.0], [(0.99, 0.0)], 1, 1)
    assert ends_entry(0, math.inf, s, empty, 1e-3)["covered"] is True
    assert ends_entry(0, 0.5, s, empty, 1e-3)["covered"] is False


def test_uncovered_ends_become_searched_when_the_strip_search_closes():
    # the contract of specmap.distance.branch.apply_strip (issue 16 item 4): an end the bound does not
    # cover is searched by the whole-strip branch and bound; a closed search of width <= tol covers it
    # and certifies the degree, an open one leaves it uncovered with its numbers in why_not.
    from specmap.distance.branch import apply_strip

    def entry():
        ends = {"a_below": 0.5, "a_above": 0.2, "method": "bound", "covered": False, "best": 0.1}
        why = "the strip's ends a < 0.02 and a > 0.98 are not covered"
        return {"value": 0.3, "bounds": [0.3, 0.5], "certified": False, "why_not": why, "ends": ends}

    closed = {"bounds": [0.3005, 0.302], "closed": True, "lines": 900, "best_at": [0.01, 0.0]}
    e = entry()
    apply_strip(e, closed, 0.003, (0.02, 0.98))
    assert e["ends"]["method"] == "searched" and e["ends"]["covered"] is True
    assert e["certified"] is True and e["why_not"] is None and e["bounds"] == [0.3005, 0.302]
    assert e["ends"]["a_below"] == 0.302
    open_ = {"bounds": [0.3, 0.4], "closed": False, "lines": 900, "best_at": [0.01, 0.0]}
    e = entry()
    apply_strip(e, open_, 0.003, (0.02, 0.98))
    assert e["ends"]["method"] == "searched" and e["ends"]["covered"] is False
    assert e["certified"] is False and "900-line budget: bound 0.4 against best 0.3" in e["why_not"]
    assert e["bounds"] == [0.3, 0.4]


@pytest.mark.parametrize("form", ["below", "above"])
def test_cell_moves_against_brute_force_on_a_fine_grid(form):
    # brute force in the test (the derivations of specmap.distance.ends, DEVELOPERS "Derivations"):
    # on a 41 x 41 grid of lines of a cell, max_v |F*(p) - F*(q)| (plain), with the unit shift
    # kappa(p) = -(beta_p - beta_q) (shifted) and with phi_p(s) = max(s - d, 0) from the lower-beta
    # corner (clipped) never exceed the functions' values; the shifted sup is exact (closed form: a max of a
    # constant and a bilinear function is extreme at corners), so the grid, which holds the corners,
    # reaches it; the plain sup is reached within the grid's spacing times the rate 1 + |y + beta|.
    from specmap.distance.ends import _clipped_move, _plain_move, _shifted_move, end_a
    from specmap.strip import star_values

    x, y = F.T
    v = np.c_[x + 0.2 * y**2, y - 0.3 * x]
    cell = (form, 0.0 if form == "below" else 0.05, 0.4, -0.6, 0.2)
    _, t0, t1, b0, b1 = cell
    s = 1.0 if form == "below" else -1.0
    tg, bg = np.meshgrid(np.linspace(t0, t1, 41), np.linspace(b0, b1, 41))
    for q in ((form, t0, b0), (form, t1, b1), (form, t0, b1)):
        fq = star_values(v, float(end_a(form, q[1])), q[2])
        plain = shifted = 0.0
        for t, b in zip(tg.ravel(), bg.ravel(), strict=True):
            fp = star_values(v, float(end_a(form, t)), b)
            plain = max(plain, float(np.abs(fp - fq).max()))
            shifted = max(shifted, float(np.abs(fp + s * (b - q[2]) - fq).max()))
        assert plain <= _plain_move(form, v, cell, fq) + 1e-12
        assert shifted == pytest.approx(_shifted_move(form, v, cell, q, fq), abs=1e-12)
        rate = 1.0 + float(np.abs(y).max() + np.abs(x).max() + 1.0)
        assert _plain_move(form, v, cell, fq) <= plain + rate * max(t1 - t0, b1 - b0) / 40 + 1e-12
    # the clipped map from the lower-beta corner (t_q = t0 or t1)
    lower = b0 if form == "below" else b1
    for tq in (t0, t1):
        fq = star_values(v, float(end_a(form, tq)), lower)
        worst = 0.0
        for t, b in zip(tg.ravel(), bg.ravel(), strict=True):
            d = s * (b - lower)  # beta_p - beta_q >= 0
            fp = star_values(v, float(end_a(form, t)), b)
            worst = max(worst, float(np.abs(fp - np.maximum(fq - d, 0.0)).max()))
        assert worst <= _clipped_move(form, v, cell, tq, fq) + 1e-12
