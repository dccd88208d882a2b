"""The points reading of special values removes the pencils through crossings and junctions (issue 16 item 3).

Source: [EFQT23] (Ethier, Frosini, Quercioli, Tombari 2023) define special values through pairs
of *points* of r(a, b) ∩ (Γ(f) ∪ Γ(g)); where two contours meet the line in one point, the
per-contour tie |s_α − s_β| = |s_α − s_δ| is one pair of points twice. Closed form, derived
here: the lines r(a, b): x = a s + b, y = (1 − a) s − b through a point (x0, y0) satisfy
y0 = (1 − a)(x0 − b)/a − b, i.e. b = (1 − a) x0 − a y0, a straight segment in the strip (the
pencil). With the contours reading, ties hold along the whole pencil; with the points reading,
no traced curve runs along it. (A junction carries such a pencil when both contours are met on
one side of it: here a proper contour's lower-right end where a vertical half-line starts
upwards. A crossing always does.)
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from specmap.grids.model import Contour, Grid
from specmap.special import special_set
from specmap.strip import Window

WINDOW = Window((0.1, 0.9), (-1.5, 1.5))
CROSSING = (0.4, 0.2)  # f:v0 (x = 0.4) crosses g:h0 (y = 0.2)
JUNCTION = (1.0, 0.0)  # f:p0 ends (lower right) where f:v2 starts upwards


def _grids() -> tuple[Grid, Grid]:
    f = Grid(
        (
            Contour("f:v0", "vertical", [0.4, -5.0]),
            Contour("f:p0", "proper", [[-1.0, 1.5], [1.0, 0.0]]),
            Contour("f:v2", "vertical", [1.0, 0.0]),
        )
    )
    g = Grid((Contour("g:h0", "horizontal", [-5.0, 0.2]), Contour("g:v1", "vertical", [2.0, -5.0])))
    return f, g


def _on_pencil(geom, point: tuple[float, float], tol: float = 1e-7) -> list[float]:
    """For each curve part: the fraction of its vertices on the pencil b = (1 - a) x0 - a y0."""
    x0, y0 = point
    out = []
    for part in shapely.get_parts(geom):
        if part.geom_type != "LineString":
            continue
        c = np.asarray(part.coords)
        if len(c) < 3:
            continue
        out.append(float(np.mean(np.abs(c[:, 1] - ((1 - c[:, 0]) * x0 - c[:, 0] * y0)) < tol)))
    return out


@pytest.fixture(scope="module")
def atlases():
    f, g = _grids()
    return {r: special_set(f, g, WINDOW, resolution=61, reading=r) for r in ("points", "contours")}


@pytest.mark.parametrize("point", [CROSSING, JUNCTION], ids=["crossing", "junction"])
def test_contours_reading_keeps_the_pencil(atlases, point):
    fractions = [
        x for p in atlases["contours"].pieces if p.kind == "curve" for x in _on_pencil(p.geometry, point)
    ]
    assert max(fractions, default=0.0) > 0.9


@pytest.mark.parametrize("point", [CROSSING, JUNCTION], ids=["crossing", "junction"])
def test_points_reading_drops_the_pencil(atlases, point):
    fractions = [
        x for p in atlases["points"].pieces if p.kind == "curve" for x in _on_pencil(p.geometry, point)
    ]
    assert max(fractions, default=0.0) < 0.5


def test_points_reading_keeps_the_other_branch(atlases):
    # The midpoint branch s_beta + s_delta = 2 s_alpha is special in both readings: every curve of the
    # points reading is also (as a set) in the contours reading, and the removal is counted.
    pts = shapely.union_all([p.geometry for p in atlases["points"].pieces])
    cts = shapely.union_all([p.geometry for p in atlases["contours"].pieces])
    assert pts.difference(cts.buffer(1e-9)).length < 1e-9
    assert atlases["points"].stats["coincident_curves_removed"] > 0
    assert atlases["contours"].stats["coincident_curves_removed"] == 0
    assert len(atlases["points"].pieces) > 0


def test_unknown_reading_is_refused():
    f, g = _grids()
    with pytest.raises(ValueError, match="reading"):
        special_set(f, g, WINDOW, resolution=11, reading="pairs")


def test_study_reading_reaches_the_atlas(tmp_path):
    # the [map] reading of a study file is what the pipeline's atlas uses
    from specmap.pipeline import StudyRun
    from specmap.study import load_study

    f, g = _grids()
    (tmp_path / "f.json").write_text(__import__("json").dumps(f.to_json()))
    (tmp_path / "g.json").write_text(__import__("json").dumps(g.to_json()))
    for reading in ("points", "contours"):
        (tmp_path / "s.toml").write_text(
            f'[study]\nname = "r"\n[f]\ngrid = "f.json"\n[g]\ngrid = "g.json"\n'
            f'[window]\na = [0.1, 0.9]\nb = [-1.5, 1.5]\n[map]\nresolution = 61\nreading = "{reading}"\n'
        )
        run = StudyRun(load_study(tmp_path / "s.toml"), tmp_path / "out", show_progress=False)
        assert run.study.map.reading == reading
        assert run.atlas().stats["reading"] == reading
