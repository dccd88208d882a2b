"""Paths of the special set in the normalised window: extraction from shapely geometry, resampling.

The window [a_lo, a_hi] x [b_lo, b_hi] is mapped to the unit square so that a
``spacing`` means the same fraction of the window along a and b.
"""

from __future__ import annotations

import math

import numpy as np

from specmap.strip import Window


def geometry_paths(geom) -> list[np.ndarray]:
    """Coordinate arrays (n, 2) of the 1-d parts of a shapely geometry (polygons: their rings)."""
    if geom is None or geom.is_empty:
        return []
    t = geom.geom_type
    if t in ("LineString", "LinearRing"):
        return [np.asarray(geom.coords, float)[:, :2]]
    if t == "Point":
        return [np.asarray(geom.coords, float)[:, :2]]
    if t == "Polygon":
        return [np.asarray(r.coords, float)[:, :2] for r in (geom.exterior, *geom.interiors)]
    if hasattr(geom, "geoms"):
        return [p for g in geom.geoms for p in geometry_paths(g)]
    return []


def normalise(pts: np.ndarray, window: Window) -> np.ndarray:
    """Line parameters (a, b) -> unit-square coordinates of ``window``."""
    wa = window.a[1] - window.a[0]
    wb = window.b[1] - window.b[0]
    return (np.asarray(pts, float) - [window.a[0], window.b[0]]) / [wa, wb]


def denormalise(pts: np.ndarray, window: Window) -> np.ndarray:
    """Unit-square coordinates of ``window`` -> line parameters (a, b)."""
    wa = window.a[1] - window.a[0]
    wb = window.b[1] - window.b[0]
    return np.asarray(pts, float) * [wa, wb] + [window.a[0], window.b[0]]


def sample_path(norm: np.ndarray, spacing: float) -> np.ndarray:
    """Samples of a (normalised) path: its vertices and a point every ``spacing`` of arc length."""
    if len(norm) == 1:
        return norm.copy()
    seg = np.sqrt(np.add.reduce(np.diff(norm, axis=0) ** 2, axis=1))
    cum = np.empty(len(norm))
    cum[0] = 0.0
    np.cumsum(seg, out=cum[1:])
    t = np.union1d(cum, np.linspace(0.0, cum[-1], max(2, math.ceil(cum[-1] / spacing) + 1)))
    out = np.empty((len(t), 2))
    out[:, 0] = np.interp(t, cum, norm[:, 0])
    out[:, 1] = np.interp(t, cum, norm[:, 1])
    return out
