"""Curve movement and patch change are measured apart (issues 13 item 4 and 15).

Source: closed forms derived in the test: two parallel segments at distance t have Hausdorff
distance t; a square patch of side q in a window of area A that vanishes changes q^2 / A of it.
"""

from __future__ import annotations

import pytest
import shapely

from specmap.perturb.geometry import curve_movement, patch_change, set_hausdorff
from specmap.perturb.summary import summarize_runs
from specmap.strip import Window

W = Window((0.0, 1.0), (0.0, 1.0))
STEP = W.diameter / 256  # the sampling spacing of set_hausdorff


def _set(dy: float, patch: bool):
    parts = [shapely.LineString([(0.1, 0.2 + dy), (0.9, 0.2 + dy)])]
    if patch:
        parts.append(shapely.box(0.4, 0.5, 0.6, 0.7))
    return shapely.GeometryCollection(parts)


def test_curve_moving_alone():
    assert curve_movement(_set(0.0, False), _set(0.03, False), W) == pytest.approx(0.03, abs=STEP)
    assert patch_change(_set(0.0, False), _set(0.03, False), W) == 0.0


def test_vanishing_patch_is_not_curve_movement():
    base, moved = _set(0.0, True), _set(0.0, False)
    assert curve_movement(base, moved, W) == pytest.approx(0.0, abs=STEP)
    assert patch_change(base, moved, W) == pytest.approx(0.04)  # 0.2 x 0.2 of a unit window
    # the old measure mixes the two: the patch's far corner is ~0.3 from the curve
    assert set_hausdorff(base, moved, W) > 0.25


def test_no_curve_gives_none():
    assert curve_movement(shapely.box(0.1, 0.1, 0.2, 0.2), _set(0.0, False), W) is None


def _record(i: int, distance: dict | None) -> dict:
    return {
        "run": i,
        "seed": i,
        "model": "grid",
        "size": 0.01,
        "applied": [0.01, 0.01],
        "total_area": 0.0,
        "counts": {"curve": 1, "patch": 0, "point": 0},
        "has_patch": False,
        "hausdorff": 0.01,
        "curve_movement": 0.01 * (i + 1),
        "patch_change": 0.0,
        "distance": distance,
        "stability_ok": None if distance is None else True,
    }


def test_summary_says_not_tracked_when_distance_is_off():
    base = {"total_area": 0.0, "counts": {"curve": 1, "patch": 0, "point": 0}}
    s = summarize_runs(
        [_record(i, None) for i in range(3)], base=base, size=0.01, model="grid", window_area=1.0
    )
    assert s["stability_violations"] is None
    assert s["curve_movement"]["mean"] == pytest.approx(0.02) and s["curve_movement"]["max"] == pytest.approx(
        0.03
    )
