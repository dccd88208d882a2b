"""The line budget of the reduced search's special-set pass, and its vectorised local bound.

References: the stability theorem [CDFFL13] written out in the test (h(p) <= h(q) + the two
sup-norm moves of F*) is the reference of the vectorised bound; values of h at evaluated lines
(any line's h is a lower bound of D) and the dense sweep are the references of the interval a
budget-stopped pass reports.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from test_distance import ellipsoid_pair, shapes

from specmap.distance import matching_distance
from specmap.distance.bounds import LocalBound
from specmap.grids.piecewise import piecewise_grid
from specmap.settings import DistanceSettings
from specmap.special import special_set
from specmap.strip import default_window, star_values


def _pair():
    V, T, f = ellipsoid_pair(160)
    x, y, z = V.T
    g = np.c_[x + 0.3 * np.sin(1.5 * z) + 0.1 * y, y - 0.2 * z**2 + 0.1 * x]
    return V, T, f, g


def test_vectorised_local_bound_is_the_stability_bound_of_all_lines():
    # closed form: with near >= the lines held, the bound is min over q of h(q) + |F*_f move| + |F*_g move|
    V, T, f, g = _pair()
    w = default_window(np.r_[f.min(axis=0), f.max(axis=0)], np.r_[g.min(axis=0), g.max(axis=0)])
    rng = np.random.default_rng(3)
    qa, qb = rng.uniform(*w.a, 7), rng.uniform(*w.b, 7)
    hq = rng.uniform(0.1, 0.5, (7, 2))
    local = LocalBound(f, g, w, near=50)
    local.add(qa, qb, hq)
    pa, pb = rng.uniform(*w.a, 9), rng.uniform(*w.b, 9)
    got = local.many(pa, pb).max(axis=1)
    for i in range(9):
        mf = [np.abs(star_values(f, pa[i], pb[i]) - star_values(f, qa[k], qb[k])).max() for k in range(7)]
        mg = [np.abs(star_values(g, pa[i], pb[i]) - star_values(g, qa[k], qb[k])).max() for k in range(7)]
        ref = max(min(hq[k, j] + mf[k] + mg[k] for k in range(7)) for j in range(2))
        assert got[i] == pytest.approx(ref, rel=1e-12)
        assert got[i] == pytest.approx(float(local(pa[i], pb[i]).max()), rel=1e-12)


def test_a_pass_stopped_by_its_budget_reports_an_interval_that_holds():
    V, T, f, g = _pair()
    sf, sg = shapes(V, T, f, g)
    gf, gg = piecewise_grid(V, T, f, label="f"), piecewise_grid(V, T, g, label="g")
    w = default_window(sf.value_bounds(), sg.value_bounds())
    atlas = special_set(gf, gg, w, resolution=31)
    kw = dict(grids=(gf, gg), window=w, atlas=atlas)
    with np.errstate(all="ignore"):
        both = DistanceSettings(method="both", degrees=(0,), dense_resolution=9, position_lines=0)
        full = matching_distance(sf, sg, settings=both, **kw)
        cut = matching_distance(sf, sg, settings=replace(both, method="reduced", special_max_lines=1), **kw)
    assert full.reduced["left"] is None
    # the whole pass needs more lines than the budget, so the budget must stop it
    assert full.reduced["pruned"]["candidates_evaluated"] > 1 + 4
    left = cut.reduced["left"]
    assert left is not None and left["candidates"] > 0 and left["budget"] == 1
    lo, hi = cut.by_degree[0]["bounds"]
    tol = full.tolerance
    # h at any line is a lower bound of D: the full search's and the dense sweep's values lie below hi
    assert full.reduced["value"] <= hi + tol and full.dense["value"] <= hi + tol
    assert lo <= full.reduced["value"] + tol
    assert cut.by_degree[0]["certified"] is False
    assert "budget" in cut.by_degree[0]["why_not"]


STUDY = """[study]
name = "fb"
seed = 1
[f]
surface = "ellipsoid"
radii = [2, 1, 1]
map = ["x", "y"]
resolution = 150
[g]
surface = "ellipsoid"
radii = [2, 1, 1]
map = ["x + 0.2*z*z", "y + 0.1*z"]
resolution = 150
[map]
resolution = 21
[distance]
dense_resolution = 5
degrees = [0]
special_max_lines = 2500
"""


def test_a_map_too_large_for_memory_sends_the_distance_to_the_focused_set(tmp_path, monkeypatch):
    # reference: the same study's reduced search on its whole map (the focused set keeps every tie
    # whose cost can be D, so the value must agree to the tolerance)
    from specmap.pipeline import StudyRun
    from specmap.special import preflight
    from specmap.study import load_study

    (tmp_path / "s.toml").write_text(STUDY)
    study = load_study(tmp_path / "s.toml")
    assert study.distance.special_max_lines == 2500  # the study key is read
    whole = StudyRun(study, tmp_path / "whole", show_progress=False)
    settings = whole.distance_settings(method="reduced")
    with np.errstate(all="ignore"):
        ref = whole.distance(settings)

    def refuse(*args, **kw):
        raise preflight.AtlasTooLargeError("too large for the test", file="s.toml", field="map", fix="none")

    monkeypatch.setattr(preflight, "plan_atlas", refuse)
    run = StudyRun(study, tmp_path / "focused", show_progress=False)
    with np.errstate(all="ignore"):
        got = run.distance(settings)
    assert ref.reduced["focus"] is None and got.reduced["focus"] is not None
    assert got.value == pytest.approx(ref.value, abs=ref.tolerance)
