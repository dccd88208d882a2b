"""Grid JSON contract (design.md) and the coordinate swap (math.md section 6)."""

from __future__ import annotations

import numpy as np
import pytest

from specmap.errors import GridFileError
from specmap.grids.model import Contour, Grid, grid_from_json
from specmap.strip import line_parameter


def test_json_round_trip() -> None:
    g = Grid(
        (
            Contour("f:p0", "proper", [[0, 1], [1, 0]]),
            Contour("f:v0", "vertical", [[2, -1]]),
            Contour("f:h0", "horizontal", [[-1, 3]]),
        ),
        route="file",
    )
    back = grid_from_json(g.to_json())
    assert [c.id for c in back.contours] == ["f:p0", "f:v0", "f:h0"]
    for c, d in zip(g.contours, back.contours, strict=True):
        assert c.kind == d.kind and np.array_equal(c.points, d.points)


def test_prefix_relabels() -> None:
    g = grid_from_json(
        {"format": "specmap-grid/1", "contours": [{"id": "v0", "kind": "vertical", "start": [0, 0]}]},
        prefix="g",
    )
    assert g.contours[0].id == "g:v0"


@pytest.mark.parametrize(
    "bad, field",
    [
        ({"format": "other", "contours": []}, "format"),
        ({"format": "specmap-grid/1", "contours": []}, "contours"),
        ({"format": "specmap-grid/1", "contours": [{"kind": "diagonal", "start": [0, 0]}]}, "kind"),
        ({"format": "specmap-grid/1", "contours": [{"kind": "vertical", "start": [0]}]}, "start"),
    ],
)
def test_bad_grid_names_field(bad, field) -> None:
    with pytest.raises(GridFileError) as err:
        grid_from_json(bad, file="x.json")
    assert field in err.value.one_line() and "x.json" in err.value.one_line()


def test_swap_maps_lines_to_reflected_parameters() -> None:
    # math.md 6: exchanging coordinates maps r(a, b) to r(1 - a, -b); the meeting parameter s is kept.
    rng = np.random.default_rng(0)
    pts = np.c_[np.cumsum(rng.random(5)), -np.cumsum(rng.random(5))] + [-2, 2]
    for c in (
        Contour("p", "proper", pts),
        Contour("v", "vertical", [[0.3, -2]]),
        Contour("h", "horizontal", [[-2, 0.1]]),
    ):
        a = rng.uniform(0.05, 0.95, 50)
        b = rng.uniform(-2, 2, 50)
        s1 = line_parameter(c, a, b)
        s2 = line_parameter(c.swapped(), 1 - a, -b)
        assert np.allclose(s1, s2, equal_nan=True)
