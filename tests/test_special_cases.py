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
    pairs = [(p, q) for i, p in enumerate(ids) for q in ids[i + 1:]]
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


@pytest.mark.parametrize("condition,pairs,a_exact", [
    # math.md 5 / checks.md: s_v = (x0 - b)/a, s_h = (y0 + b)/(1 - a), so
    # d_v = 1/a, d_h = 1/(1-a): equal at a = 1/2; 1/a = 2/(1-a) at a = 1/3; 1/(1-a) = 2/a at 2/3.
    ("equal", (("f:v0", "f:v1"), ("g:h0", "g:h1")), 0.5),
    ("half", (("f:v0", "f:v1"), ("g:h0", "g:h1")), 1 / 3),
    ("half", (("g:h0", "g:h1"), ("f:v0", "f:v1")), 2 / 3),
])
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
    assert set(d) >= {"window", "tolerance", "pairs", "method", "resolution", "components", "total_area",
                      "area_fraction", "counts", "stats"}
    for c in d["components"]:
        assert set(c) == {"id", "kind", "area", "length", "bbox", "ties"}
    gj = json.loads(json.dumps(cross_atlas.to_geojson()))
    assert gj["type"] == "FeatureCollection" and len(gj["features"]) == len(d["components"])
    from specmap.special import atlas_from_json

    back = atlas_from_json(d)
    assert back.counts == d["counts"] and len(back.components) == len(d["components"])
