"""Audits of a distance result: the dense sweep against the reduced search, diagram points against the grid."""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np

from specmap.distance.result import DenseSweep, point_json
from specmap.slices import SliceEngine
from specmap.strip import Window, line_parameter, push_scale


def theorem_audit(dense: DenseSweep, by_degree: dict[int, dict[str, Any]], degrees: Sequence[int],
                  vmax: float, tolerance: float) -> dict[str, Any]:
    """How far the dense sweep exceeds the reduced search (main theorem [EFQT23, FMQT]: it should not).

    Compares each certified degree with its dense value, and the max over degrees
    ``vmax`` with the dense maximum; warns when the largest gap exceeds ``tolerance``.

    Returns
    -------
    dict ``{"theorem_gap", "gap", "degree", "line"}`` (``degree`` and ``line`` None when
    no gap is finite or NaN-free).

    Warns
    -----
    UserWarning
        When the gap exceeds the tolerance.
    """
    out: dict[str, Any] = {"theorem_gap": False, "gap": 0.0}
    # certified degrees against their dense values, and the max over degrees
    gaps = [(dense.best[j][0] - by_degree[k]["value"], dense.best[j][1], k)
            for j, k in enumerate(degrees) if by_degree[k]["certified"]]
    dbest = max(range(len(degrees)), key=lambda j: dense.best[j][0])
    gaps.append((dense.best[dbest][0] - vmax, dense.best[dbest][1], degrees[dbest]))
    gaps = [g for g in gaps if not math.isnan(g[0])]  # inf: the reduced search found nothing
    if gaps:
        gap, line, k = max(gaps, key=lambda g: g[0])
        out.update(gap=float(gap), degree=k, line=point_json(line))
        if gap > tolerance:
            out["theorem_gap"] = True
            # stacklevel 3: the caller of matching_distance
            warnings.warn(f"dense sweep exceeds the reduced search by {gap:.4g} > tolerance {tolerance:.3g} "
                          f"in degree {k} at (a, b) = ({line[0]:.4g}, {line[1]:.4g})", stacklevel=3)
    return out


def position_audit(shape_f, shape_g, grids, window: Window, *, tolerance: float, lines: int = 20,
                   seed: int = 0) -> dict[str, Any]:
    """How many finite diagram coordinates sit at push coordinates of the grid [CEF19].

    For ``lines`` lines drawn uniformly in the window (fixed seed), every finite
    coordinate (birth, finite death) of Dgm_k F*_f is compared with the push
    coordinates min(a, 1-a) s of the contours of Γ(f) met by the line (the same
    for g); the deviation is the distance to the nearest one.

    Returns
    -------
    dict ``{"fraction_explained", "max_deviation", "lines", "coordinates", "tolerance"}``

    References
    ----------
    .. [CEF19] Cerri, Ethier, Frosini, J. Appl. Comput. Topol. 3 (2019): position
       of diagram points on the extended Pareto grid.
    """
    rng = np.random.default_rng(seed)
    A = rng.uniform(*window.a, lines)
    B = rng.uniform(*window.b, lines)
    devs = []
    for shape, grid in zip((shape_f, shape_g), grids, strict=True):
        eng = SliceEngine.from_shape(shape)
        for a, b in zip(A, B, strict=True):
            push = np.array([line_parameter(c, a, b) for c in grid.contours], dtype=float) * float(push_scale(a))
            push = push[np.isfinite(push)]
            d = eng.diagrams(a, b)
            coords = np.concatenate([v.ravel() for v in d.values()])
            coords = coords[np.isfinite(coords)]
            if not len(coords):
                continue
            if not len(push):
                devs.extend([math.inf] * len(coords))
                continue
            devs.extend(np.abs(coords[:, None] - push[None, :]).min(axis=1).tolist())
    devs_a = np.asarray(devs, dtype=float)
    return {"fraction_explained": float(np.mean(devs_a <= tolerance)) if len(devs_a) else 1.0,
            "max_deviation": float(devs_a.max()) if len(devs_a) else 0.0,
            "lines": int(lines), "coordinates": int(len(devs_a)), "tolerance": float(tolerance)}
