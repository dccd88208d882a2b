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


def test_patch_change_agrees_with_the_predicted_threshold():
    # Closed form (special/reasons.py, math.md section 5): vertical half-lines f at 0, 1 and g at 3.3, 4.3
    # have equal spacing (|1 - 0| = |4.3 - 3.3|), so their tie holds on the whole window (one patch) and
    # every identity involves g:v1; moving g:v1 by eps changes the tied difference by eps. The prediction
    # breaks_at = max(defect, atlas tolerance): below it the perturbation study's patch change
    # (atlas_digest + patch_change, as in specmap.perturb.run) is 0, far above it the patch is gone
    # (change = the whole patch). Measured between: at 2 x breaks_at about 29% of the patch survives,
    # none at 7 x on this window (the residual is compared in line parameter units, s = (x - b)/a).
    from specmap.grids.model import Contour, Grid
    from specmap.perturb.run import atlas_digest
    from specmap.special import special_set

    window = Window((0.1, 0.9), (-3.0, 3.0))

    def grids(eps: float):
        f = Grid(tuple(Contour(f"f:v{i}", "vertical", [x, -50.0]) for i, x in enumerate((0.0, 1.0))))
        g = Grid(tuple(Contour(f"g:v{i}", "vertical", [x, -50.0]) for i, x in enumerate((3.3, 4.3 + eps))))
        return f, g

    base = special_set(*grids(0.0), window, resolution=31)
    reasons = [r for c in base.components if c.kind == "patch" for r in c.reasons]
    assert reasons and all(r["kind"] == "equal_spacing" and "g:v1" in r["contours"] for r in reasons)
    eps = max(r["breaks_at"] for r in reasons)
    area0, _, geom0 = atlas_digest(base)
    assert area0 > 0
    below = special_set(*grids(0.5 * eps), window, resolution=31)
    area_b, counts_b, geom_b = atlas_digest(below)
    assert counts_b["patch"] == 1 and patch_change(geom_b, geom0, window) == pytest.approx(0.0, abs=1e-12)
    above = special_set(*grids(10 * eps), window, resolution=31)
    area_a, counts_a, geom_a = atlas_digest(above)
    assert counts_a["patch"] == 0 and area_a == 0.0
    assert patch_change(geom_a, geom0, window) == pytest.approx(area0 / window.area, rel=1e-9)
