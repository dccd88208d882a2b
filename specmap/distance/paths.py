"""Paths of the special set in the normalised window: extraction from shapely geometry, resampling.

The window [a_lo, a_hi] x [b_lo, b_hi] is mapped to the unit square so that a
``spacing`` means the same fraction of the window along a and b.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping, Sequence

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


class FlatPaths(Sequence[np.ndarray]):
    """Many paths in one array: path k is ``coords[off[k]:off[k + 1]]`` (no object per path)."""

    def __init__(self, coords: np.ndarray, off: np.ndarray) -> None:
        self.coords = coords
        self.off = off

    def __len__(self) -> int:
        return len(self.off) - 1

    def __getitem__(self, k):
        if isinstance(k, slice):
            return [self[i] for i in range(*k.indices(len(self)))]
        return self.coords[self.off[k] : self.off[k + 1]]


class PathsOf(Mapping[int, list[int]]):
    """Piece index -> indices of its paths, from the owner of each path (non-decreasing)."""

    def __init__(self, owner: np.ndarray) -> None:
        self.owner = owner
        self._keys = np.unique(owner)

    def __getitem__(self, piece: int) -> list[int]:
        lo, hi = np.searchsorted(self.owner, [piece, piece + 1])
        if lo == hi:
            raise KeyError(piece)
        return list(range(int(lo), int(hi)))

    def __iter__(self) -> Iterator[int]:
        return iter(int(k) for k in self._keys)

    def __len__(self) -> int:
        return len(self._keys)
