"""Every patch says why it is there (issue 13 item 4): reasons from the grids, tested on grids built for them.

Source: closed forms derived in the test (math.md section 5): a vertical half-line at x0 is met by
r(a, b) at line parameter s = (x0 - b)/a, so two vertical pairs differ by Δx/a and Δx'/a and a tie
|Δx| = k |Δx'| holds on the whole region where the four are met (a patch). For cross pairs the
branch x_f + x_f' = x_g + x_g' (a common midpoint) is the central-symmetry reason, the other
branch equal spacing. A generic pair has no patch (its special set has measure zero, [EFQT23]).
"""

from __future__ import annotations

import pytest

from specmap.grids.model import Contour, Grid
from specmap.special import special_set
from specmap.strip import Window
from tests.gridgen import random_pair

WINDOW = Window((0.1, 0.9), (-3.0, 3.0))


def _verticals(prefix: str, xs: list[float]) -> Grid:
    return Grid(tuple(Contour(f"{prefix}:v{i}", "vertical", [x, -50.0]) for i, x in enumerate(xs)))


def _reasons(atlas) -> list[dict]:
    return [r for c in atlas.components if c.kind == "patch" for r in c.reasons]


def test_common_centre_is_central_symmetry():
    # f's extremes -1, 1 and g's -2, 2 share the centre 0: |(-1) - (-2)| = |1 - 2| identically
    atlas = special_set(_verticals("f", [-1.0, 1.0]), _verticals("g", [-2.0, 2.0]), WINDOW, resolution=31)
    rs = _reasons(atlas)
    assert atlas.counts()["patch"] >= 1
    sym = [r for r in rs if r["kind"] == "central_symmetry"]
    assert sym and all(r["component"] == "first" for r in sym)
    assert {"f:v0", "f:v1", "g:v0", "g:v1"} == set(sym[0]["contours"])
    # the half tie |Δx_g| = 4 = 2 |Δx_f| is equal spacing (same-grid pairs)
    assert any(r["kind"] == "equal_spacing" for r in rs)
    assert not any(r["kind"] == "unexplained" for r in rs)


def test_translated_spacing_is_equal_spacing():
    # f at 0, 1 and g at 3, 4: equal gaps, different midpoints (0.5 against 3.5): no symmetry
    atlas = special_set(_verticals("f", [0.0, 1.0]), _verticals("g", [3.0, 4.0]), WINDOW, resolution=31)
    rs = _reasons(atlas)
    assert rs and all(r["kind"] == "equal_spacing" for r in rs)
    assert all(r["breaks_at"] >= atlas.tolerance for r in rs)


def test_breaking_the_spacing_removes_the_patch():
    base = special_set(_verticals("f", [0.0, 1.0]), _verticals("g", [3.0, 4.0]), WINDOW, resolution=31)
    eps = 1e3 * max(r["breaks_at"] for r in _reasons(base))  # far above the predicted threshold
    moved = special_set(_verticals("f", [0.0, 1.0]), _verticals("g", [3.0, 4.0 + eps]), WINDOW, resolution=31)
    # every identity involving g:v1 is broken; the one among f:v0, f:v1, g:v0 (|1 - 3| = 2 |0 - 1|) stays
    assert any("g:v1" in r["contours"] for r in _reasons(base))
    assert not any("g:v1" in r["contours"] for r in _reasons(moved))
    assert any(set(r["contours"]) == {"f:v0", "f:v1", "g:v0"} for r in _reasons(moved))


@pytest.mark.parametrize("seed", [1, 2])
def test_generic_pair_has_no_patch(seed):
    gf, gg = random_pair(seed, 8)
    atlas = special_set(gf, gg, Window((0.05, 0.95), (-1.0, 1.0)), resolution=41)
    assert atlas.counts()["patch"] == 0 and _reasons(atlas) == []


def test_reasons_are_in_the_json():
    atlas = special_set(_verticals("f", [-1.0, 1.0]), _verticals("g", [-2.0, 2.0]), WINDOW, resolution=31)
    comp = next(c for c in atlas.to_json()["components"] if c["kind"] == "patch")
    assert {"kind", "contours", "component", "breaks_at"} <= set(comp["reasons"][0])


def _arc_and_vertical(prefix: str, scale=(1.0, 1.0), shift=(0.0, 0.0), x_vertical: float = 1.5) -> Grid:
    import numpy as np

    th = np.linspace(0.0, np.pi / 2, 200)
    arc = np.c_[-np.cos(th), -0.8 * np.sin(th)] * scale + shift  # non-increasing: x grows, y falls
    return Grid(
        (Contour(f"{prefix}:p0", "proper", arc), Contour(f"{prefix}:v0", "vertical", [x_vertical, -50.0]))
    )


def test_coincident_proper_contours_give_an_unexplained_patch():
    # closed form, derived here: f and g with the same proper arc and the same vertical half-line have
    # c_{f:p0} - c_{f:v0} = c_{g:p0} - c_{g:v0} on every line meeting them (the same points), so the
    # equal tie holds on an open set: a patch. It involves a proper contour, for which reasons.py claims
    # no closed form: kind "unexplained" (and no reason of another kind is invented for it).
    atlas = special_set(_arc_and_vertical("f"), _arc_and_vertical("g"), WINDOW, resolution=31)
    rs = _reasons(atlas)
    assert atlas.counts()["patch"] >= 1 and rs
    assert all(r["kind"] == "unexplained" for r in rs)
    assert {"f:p0", "f:v0", "g:p0", "g:v0"} == set(rs[0]["contours"])
    # a generic change of g's arc and half-line (scaled, moved): the identity and the patch are gone
    moved = special_set(
        _arc_and_vertical("f"),
        _arc_and_vertical("g", scale=(1.0, 1.3), shift=(0.25, 0.1), x_vertical=2.1),
        WINDOW,
        resolution=31,
    )
    assert moved.counts()["patch"] == 0 and _reasons(moved) == []


def test_unexplained_patch_breaks_at_the_probed_size():
    # built for it (coincident proper arcs and half-lines, as above): the tie has no closed form, so its
    # breaks_at comes from the perturbation probe (specmap.special.probe: one contour moved by (eps, eps)).
    # The prediction is then tested by re-detecting the special set with g's arc moved (closed form of
    # the move, derived here: the grid changes by eps in sup norm): at breaks_at and 10 x breaks_at the
    # patch is gone, at a tenth of it (below the atlas tolerance) it stays.
    import dataclasses

    def moved(eps: float):
        g = _arc_and_vertical("g")
        cs = tuple(dataclasses.replace(c, points=c.points + eps) if c.id == "g:p0" else c for c in g.contours)
        return special_set(_arc_and_vertical("f"), Grid(cs), WINDOW, resolution=31)

    atlas = special_set(_arc_and_vertical("f"), _arc_and_vertical("g"), WINDOW, resolution=31)
    rs = _reasons(atlas)
    assert rs and all(r["kind"] == "unexplained" for r in rs)
    for r in rs:
        assert r["probe"] is not None and r["probe"]["lines"] > 0
        assert atlas.tolerance <= r["breaks_at"] < 1e3 * atlas.tolerance
        assert r["probe"]["moved"] in r["contours"]
    br = max(r["breaks_at"] for r in rs)
    assert moved(br / 10).counts()["patch"] >= 1
    assert moved(br).counts()["patch"] == 0 and moved(10 * br).counts()["patch"] == 0


def test_unexplained_without_geometry_is_not_probed():
    # the reason read without its patch (no geometry): breaks_at stays None and the probe None, and
    # the report sentence says "not probed" (specmap.report.summary.reason_sentence)
    from specmap.report.summary import reason_sentence
    from specmap.special.pairs import Tie
    from specmap.special.reasons import tie_reason

    f, g = _arc_and_vertical("f"), _arc_and_vertical("g")
    cs = {c.id: c for c in (*f.contours, *g.contours)}
    r = tie_reason(Tie((("f:p0", "f:v0"), ("g:p0", "g:v0")), "equal"), cs, 1e-9)
    assert r["kind"] == "unexplained" and r["breaks_at"] is None and r["probe"] is None
    text = reason_sentence({"components": [{"kind": "patch", "reasons": [r]}]})
    assert "not probed" in text
    atlas = special_set(f, g, WINDOW, resolution=31)
    probed = reason_sentence(atlas.to_json())
    assert "perturbation probe" in probed and "not probed" not in probed


def test_shared_extreme_is_equal_values():
    # closed form, derived here: f's half-line f:v0 and g's g:v0 both at x = 0 (an extreme value shared by
    # f1 and g1) have s = (0 - b)/a on every line, so every tie |s_s - s_u| = |s_s - s_w| with {u, w} =
    # {f:v0, g:v0} holds identically: kind "equal_values" (the contours reading keeps these ties; the
    # points reading drops them as coincidence branches, issue 13 item 4's "shared extremes").
    from specmap.report.summary import reason_sentence

    atlas = special_set(
        _verticals("f", [0.0, 1.0]), _verticals("g", [0.0, 2.7]), WINDOW, resolution=31, reading="contours"
    )
    rs = _reasons(atlas)
    assert atlas.counts()["patch"] == 1 and rs
    assert all(r["kind"] == "equal_values" for r in rs)
    for r in rs:
        (shared,) = set(r["contours"][:2]) & set(r["contours"][2:])
        others = {c for c in r["contours"] if c != shared}
        assert others == {"f:v0", "g:v0"} and r["breaks_at"] >= atlas.tolerance
    assert "coincidence" in reason_sentence(atlas.to_json())
    # 0, 1 against 0, 2.7 has no spacing or symmetry, so with the coincidences dropped: no patch
    plain = special_set(_verticals("f", [0.0, 1.0]), _verticals("g", [0.0, 2.7]), WINDOW, resolution=31)
    assert plain.counts()["patch"] == 0


def test_the_shipped_ladder_study_patch_has_its_reason_and_threshold():
    # The shipped grid-file study studies/ladder.toml (its own grid files, window and resolution): its
    # patch is explained in closed form, and its threshold holds both ways. Closed form, derived here:
    # the files hold vertical half-lines at 0, 1 (f) and 2, 3 (g), read back below; every tie among
    # them that holds on an open set is an equal spacing (|dx| = |dx'| or |dx| = 2 |dx'|, defect 0),
    # so breaks_at = the atlas tolerance. Moving the four by eps (0, 0.37, 1, 2.71) leaves every
    # defect between 0.26 eps and 3.42 eps (all 15 differences and doubled differences, by hand), i.e.
    # at least 0.26 eps / 0.45 in line parameters (a <= 0.45 in the window): at eps = 100 breaks_at
    # every identity is broken (no patch); at eps = breaks_at / 100 none is (the patch stays).
    import dataclasses
    from pathlib import Path

    from specmap.grids.model import read_grid
    from specmap.study import load_study

    st = load_study(Path(__file__).resolve().parents[1] / "studies" / "ladder.toml")
    gf, gg = read_grid(st.f.path, prefix="f"), read_grid(st.g.path, prefix="g")
    xs = {c.id: float(c.points[0][0]) for c in (*gf.contours, *gg.contours) if c.kind == "vertical"}
    assert xs == {"f:v0": 0.0, "f:v1": 1.0, "g:v0": 2.0, "g:v1": 3.0}
    atlas = special_set(gf, gg, st.window, resolution=st.map.resolution)
    patches = [c for c in atlas.components if c.kind == "patch"]
    assert patches and all(c.reasons for c in patches)  # every patch has its reasons
    rs = _reasons(atlas)
    assert {r["kind"] for r in rs} == {"equal_spacing"} and all(set(r["contours"]) <= set(xs) for r in rs)
    assert len(rs) == atlas.to_json()["stats"]["ties_with_patches"]  # one reason per tie held on a patch
    br = max(r["breaks_at"] for r in rs)
    assert br == pytest.approx(atlas.tolerance, rel=1e-12)

    def moved(eps: float) -> int:
        step = {"f:v0": 0.0, "f:v1": 0.37, "g:v0": 1.0, "g:v1": 2.71}

        def grid(g: Grid) -> Grid:
            return Grid(
                tuple(
                    dataclasses.replace(c, points=c.points + [eps * step[c.id], 0.0]) if c.id in step else c
                    for c in g.contours
                )
            )

        return special_set(grid(gf), grid(gg), st.window, resolution=st.map.resolution).counts()["patch"]

    assert moved(br / 100) >= 1 and moved(100 * br) == 0
