"""Special-set atlas on cases with closed forms (checks.md, math.md section 5)."""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from specmap.grids.model import Contour, Grid
from specmap.special import Tie, special_set
from specmap.strip import Window

W = Window((0.1, 0.9), (-1.0, 1.0))
LOW = -20.0  # half-line starts far below/left: every line of W meets them (derived below)


def verticals(prefix, xs):
    return Grid(tuple(Contour(f"{prefix}:v{k}", "vertical", [x, LOW]) for k, x in enumerate(xs)))


def horizontals(prefix, ys):
    return Grid(tuple(Contour(f"{prefix}:h{k}", "horizontal", [LOW, y]) for k, y in enumerate(ys)))


def test_all_met_in_window():
    # math.md 5: x = x0 is met when the line's height there, (1-a)/a (x0-b) - b, is >= LOW;
    # on W with x0 in [0, 3] the minimum is at a = 0.1, x0 - b = -1: -9 - 1 = -10 > LOW.
    a, b = np.meshgrid(np.linspace(*W.a, 50), np.linspace(*W.b, 50))
    for x0 in (0.0, 3.0):
        assert np.all((1 - a) / a * (x0 - b) - b >= LOW)
        # horizontal y = y0 met when b + a/(1-a) (y0 + b) >= LOW (same bound by symmetry)
        assert np.all(b + a / (1 - a) * (x0 + b) >= LOW)


def test_four_equally_spaced_verticals_one_patch():
    # checks.md: x = 0, 1 (f) and 2, 3 (g): the equal-difference condition holds on the
    # whole window -> one patch with the window's area.
    atlas = special_set(verticals("f", [0, 1]), verticals("g", [2, 3]), W, resolution=31)
    assert atlas.counts() == {"curve": 0, "patch": 1, "point": 0}
    assert atlas.total_area == pytest.approx(W.area, rel=5e-3)
    assert atlas.to_json()["area_fraction"] == pytest.approx(1.0, rel=5e-3)


def test_generic_jitter_of_all_four_leaves_no_area():
    # checks.md: moving all four generically leaves no patch (differences 1/a * generic
    # constants never tie identically; s_i = (x_i - b)/a, so d = |x_i - x_j|/a).
    atlas = special_set(verticals("f", [0.0123, 1.0371]), verticals("g", [2.0517, 2.9719]), W, resolution=31)
    assert atlas.total_area == 0.0
    assert atlas.counts()["patch"] == 0


def test_jitter_of_one_keeps_only_remaining_equal_spacings():
    # checks.md: move x = 3 to 3.0371. Derivation: d_ij = |x_i - x_j| / a, so a tie holds
    # identically iff |x_i - x_j| = |x_k - x_l| (equal) or = 2 |x_k - x_l| (half). With
    # 0, 1, 2, 3.0371 that leaves: {0,1}={1,2}, {0,2}=2{0,1}, {0,2}=2{1,2}.
    xs = {"f:v0": 0.0, "f:v1": 1.0, "g:v0": 2.0, "g:v1": 3.0371}
    atlas = special_set(verticals("f", [0, 1]), verticals("g", [2, 3.0371]), W, resolution=31)
    ids = sorted(xs)
    expected = set()
    pairs = [(p, q) for i, p in enumerate(ids) for q in ids[i + 1 :]]
    for P in pairs:
        for Q in pairs:
            if P == Q:
                continue
            dP = abs(xs[P[0]] - xs[P[1]])
            dQ = abs(xs[Q[0]] - xs[Q[1]])
            if P < Q and abs(dP - dQ) < 1e-12:
                expected.add(Tie.make(P, Q, "equal"))
            if abs(dP - 2 * dQ) < 1e-12:
                expected.add(Tie.make(P, Q, "half"))
    got = {p.tie for p in atlas.pieces if p.kind == "patch"}
    assert got == expected and len(expected) == 3
    assert atlas.total_area == pytest.approx(W.area, rel=5e-3)


@pytest.fixture(scope="module")
def cross_atlas():
    return special_set(verticals("f", [0, 1]), horizontals("g", [0, 1]), W, resolution=41)


@pytest.mark.parametrize(
    "condition,pairs,a_exact",
    [
        # math.md 5 / checks.md: s_v = (x0 - b)/a, s_h = (y0 + b)/(1 - a), so
        # d_v = 1/a, d_h = 1/(1-a): equal at a = 1/2; 1/a = 2/(1-a) at a = 1/3; 1/(1-a) = 2/a at 2/3.
        ("equal", (("f:v0", "f:v1"), ("g:h0", "g:h1")), 0.5),
        ("half", (("f:v0", "f:v1"), ("g:h0", "g:h1")), 1 / 3),
        ("half", (("g:h0", "g:h1"), ("f:v0", "f:v1")), 2 / 3),
    ],
)
def test_vertical_against_horizontal_lines(cross_atlas, condition, pairs, a_exact):
    piece = [p for p in cross_atlas.pieces if p.tie == Tie(pairs, condition)]
    assert len(piece) == 1 and piece[0].kind == "curve"
    xy = shapely.get_coordinates(piece[0].geometry)
    assert np.max(np.abs(xy[:, 0] - a_exact)) < 1e-9
    # the curve spans the window in b (all four met everywhere)
    assert xy[:, 1].min() == pytest.approx(W.b[0], abs=1e-9)
    assert xy[:, 1].max() == pytest.approx(W.b[1], abs=1e-9)
    assert piece[0].geometry.length == pytest.approx(W.b[1] - W.b[0], abs=1e-8)


def test_json_and_geojson_contract(cross_atlas):
    import json

    d = json.loads(json.dumps(cross_atlas.to_json()))
    assert set(d) >= {
        "window",
        "tolerance",
        "pairs",
        "method",
        "resolution",
        "components",
        "total_area",
        "area_fraction",
        "counts",
        "stats",
    }
    for c in d["components"]:
        assert set(c) == {"id", "kind", "area", "length", "bbox", "ties"}
    gj = json.loads(json.dumps(cross_atlas.to_geojson()))
    assert gj["type"] == "FeatureCollection" and len(gj["features"]) == len(d["components"])
    from specmap.special import atlas_from_json

    back = atlas_from_json(d)
    assert back.counts == d["counts"] and len(back.components) == len(d["components"])


# ---------------------------------------------------------------------------------------------
# role rules (specmap.special.pairs is their one home): checked against the cost kinds of
# math.md section 5, written out here. A cross pair (one contour of each grid) stands for two
# matched points and costs |c|; a same-grid pair for a point sent to the diagonal, |c| / 2.
# An equal tie |c_P| = |c_Q| ties two costs iff both pairs have the same kind; a half tie
# |c_big| = 2 |c_small| ties two costs iff |c_big| / 2 (same grid) = |c_small| (cross).
# ---------------------------------------------------------------------------------------------
def _cost_kinds_tie(condition, big_cross, small_cross):
    if condition == "equal":
        return big_cross == small_cross
    return (not big_cross) and small_cross


@pytest.mark.parametrize("mode", ["all", "roles"])
def test_pair_rules_follow_the_cost_kinds(mode):
    from specmap.special.pairs import doubled_pairs, equal_allowed, half_allowed, kernel_flags, pair_table

    table = pair_table(verticals("f", [0, 1, 2]), verticals("g", [3, 4]), mode)
    n = table.n_pairs
    p, q = (x.ravel() for x in np.meshgrid(np.arange(n), np.arange(n), indexing="ij"))
    cross = [table.pair_ids(k)[0][0] != table.pair_ids(k)[1][0] for k in range(n)]  # from the ids
    for cond, rule in (("equal", equal_allowed), ("half", half_allowed)):
        want = [
            pp != qq and (mode == "all" or _cost_kinds_tie(cond, cross[pp], cross[qq]))
            for pp, qq in zip(p.tolist(), q.tolist(), strict=True)
        ]
        assert rule(table, p, q).tolist() == want
    # doubled items: every pair under "all"; under "roles" exactly the cross pairs
    assert doubled_pairs(table).tolist() == ([True] * n if mode == "all" else cross)
    pair_class, equal_ok, half_ok, doubled = kernel_flags(table)
    assert (
        pair_class.tolist() == [int(c) for c in cross] and doubled.tolist() == doubled_pairs(table).tolist()
    )
    assert equal_ok.shape == half_ok.shape == (2, 2)


def test_tie_code_and_grid_of_from_ids():
    from specmap.special import pairs as pr

    assert (pr.grid_of("f:p0"), pr.grid_of("g:2:v1"), pr.grid_of("v0")) == ("f", "g", None)
    fg, ff, gg = ("f:v0", "g:v0"), ("f:v0", "f:v1"), ("g:v0", "g:v1")
    # math.md 5 (see _cost_kinds_tie): equal ties of one kind; half ties same-grid over cross, read
    # either way round (HALF_Q: the second pair is the same-grid one)
    assert pr.tie_code(Tie(((fg), ("f:v1", "g:v1")), "equal")) == pr.EQUAL_CROSS
    assert pr.tie_code(Tie((ff, gg), "equal")) == pr.EQUAL_SAME
    assert pr.tie_code(Tie((ff, fg), "equal")) is None
    assert pr.tie_code(Tie((ff, fg), "half")) == pr.HALF_P
    assert pr.tie_code(Tie((fg, ff), "half")) == pr.HALF_Q
    assert pr.tie_code(Tie((fg, ("f:v1", "g:v1")), "half")) is None
    assert pr.tie_code(Tie((ff, gg), "half")) is None
    assert pr.tie_code(Tie((ff, fg), "equal"), roles=False) == pr.ANY_EQUAL
    assert pr.tie_code(Tie((("v0", "v1"), fg), "half")) == pr.ANY_HALF  # no grid prefix: roles unknown


def test_costs_from_differences_closed_forms():
    from specmap.special import pairs as pr

    # math.md 5: cross pairs cost d, same-grid pairs d / 2; (lo, hi) bracket the two sides
    codes = [pr.EQUAL_CROSS, pr.EQUAL_SAME, pr.ANY_EQUAL, pr.HALF_P, pr.HALF_Q, pr.ANY_HALF, pr.HALF_P]
    dp = [1.0, 1.0, 1.0, 2.0, 0.9, 2.0, 0.5]
    dq = [1.2, 1.2, 1.2, 0.9, 2.0, 0.9, 0.9]
    lo, hi = pr.costs_from_differences(codes, dp, dq)
    # half: min / max of d_big / 2 and d_small (2.0 / 2 = 1 against 0.9); HALF_P with d_P < d_Q: NaN
    np.testing.assert_allclose(lo[:6], [1.0, 0.5, 0.5, 0.9, 0.9, 0.9])
    np.testing.assert_allclose(hi[:6], [1.2, 0.6, 1.2, 1.0, 1.0, 1.0])
    assert np.isnan(lo[6]) and np.isnan(hi[6])


def test_tie_costs_on_vertical_lines():
    from specmap.special.pairs import tie_costs

    # push coordinates at a = 1/2, b = 0 are the abscissae (math.md 2): 0, 1 (f), 0.5, 1.5 (g)
    C = {
        "f:v0": Contour("f:v0", "vertical", [0.0, -10.0]),
        "f:v1": Contour("f:v1", "vertical", [1.0, -10.0]),
        "g:v0": Contour("g:v0", "vertical", [0.5, -10.0]),
        "g:v1": Contour("g:v1", "vertical", [1.5, -10.0]),
    }
    lo, hi = tie_costs(Tie((("f:v0", "g:v0"), ("f:v1", "g:v1")), "equal"), C, 0.5, 0.0)
    assert (float(lo), float(hi)) == pytest.approx((0.5, 0.5))  # two matching costs 0.5
    lo, hi = tie_costs(Tie((("f:v0", "f:v1"), ("f:v1", "g:v0")), "half"), C, 0.5, 0.0)
    assert (float(lo), float(hi)) == pytest.approx((0.5, 0.5))  # diagonal 1 / 2 = matching 0.5
    lo, hi = tie_costs(Tie((("f:v0", "f:v1"), ("f:v0", "g:v0")), "equal"), C, 0.5, 0.0)
    assert np.isnan(lo) and np.isnan(hi)  # mixed equal tie: no tie of costs
