"""Filtering lines r(a, b) of the parameter strip, windows, and where lines meet contours.

The line with parameters (a, b), 0 < a < 1, is

    r(a, b) = { s * (a, 1 - a) + (b, -b) : s in R }          [CDFFL13]

so x = a s + b and y = (1 - a) s - b. Its filtration value at the point with
parameter s (the *push coordinate*) is ``min(a, 1 - a) * s``: the abscissa
minus b for a <= 1/2, the ordinate plus b for a >= 1/2 (math.md section 2).

All functions are vectorised: ``a`` and ``b`` broadcast against each other and
the result has their broadcast shape; lines that miss a contour give NaN.

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in
   multidimensional persistent homology are stable functions", Math. Methods
   Appl. Sci. 36 (2013).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:  # annotations only: this module (and Window) does not import the grid model
    from specmap.grids.model import Contour

A_MARGIN = 0.02


@dataclass(frozen=True)
class Window:
    """A rectangle of the parameter strip: a in [a_lo, a_hi] within ]0, 1[, b in [b_lo, b_hi]."""

    a: tuple[float, float]
    b: tuple[float, float]

    def __post_init__(self) -> None:
        object.__setattr__(self, "a", (float(self.a[0]), float(self.a[1])))
        object.__setattr__(self, "b", (float(self.b[0]), float(self.b[1])))

    @property
    def area(self) -> float:
        return (self.a[1] - self.a[0]) * (self.b[1] - self.b[0])

    @property
    def diameter(self) -> float:
        return float(np.hypot(self.a[1] - self.a[0], self.b[1] - self.b[0]))

    def bounds(self) -> tuple[float, float, float, float]:
        """(a_lo, b_lo, a_hi, b_hi), the shapely convention."""
        return (self.a[0], self.b[0], self.a[1], self.b[1])

    def mesh(self, n_a: int, n_b: int) -> tuple[np.ndarray, np.ndarray]:
        """Sample nodes: arrays A, B of shape (n_b, n_a) (rows follow b)."""
        av = np.linspace(*self.a, n_a)
        bv = np.linspace(*self.b, n_b)
        return np.meshgrid(av, bv)

    def to_json(self) -> dict[str, list[float]]:
        return {"a": list(self.a), "b": list(self.b)}


def value_bounds(values: np.ndarray) -> tuple[float, float, float, float]:
    """(min f1, min f2, max f1, max f2) of an (n, 2) array of values."""
    v = np.asarray(values, dtype=float)
    return (float(v[:, 0].min()), float(v[:, 1].min()), float(v[:, 0].max()), float(v[:, 1].max()))


def default_window(bounds_f: Sequence[float], bounds_g: Sequence[float], margin: float = A_MARGIN) -> Window:
    """The compact window of math.md section 3.

    b- = min(min f1, min g1, -max f2, -max g2), b+ = max(max f1, max g1, -min f2, -min g2);
    lines with b outside [b-, b+] give nothing new. ``a`` is kept ``margin`` away from 0 and 1.

    Parameters
    ----------
    bounds_f, bounds_g : (min f1, min f2, max f1, max f2)
    """
    f1lo, f2lo, f1hi, f2hi = bounds_f
    g1lo, g2lo, g1hi, g2hi = bounds_g
    b_lo = min(f1lo, g1lo, -f2hi, -g2hi)
    b_hi = max(f1hi, g1hi, -f2lo, -g2lo)
    return Window((margin, 1.0 - margin), (b_lo, b_hi))


def window_for(shapes: Sequence[Any], grids: Sequence[Any], margin: float = A_MARGIN) -> Window:
    """The default window of a pair: :func:`default_window` of the value bounds of f and g.

    The one rule for the bounds of each side: the vertex values of its shape when
    it has a mesh, else the bounding box of its grid (a grid given by a file).

    Parameters
    ----------
    shapes : (Shape or None, Shape or None)
        The shapes of f and g (None for a side given as a grid file).
    grids : (Grid, Grid)
        Their extended Pareto grids.
    margin : float
        Distance of ``a`` from 0 and 1.
    """
    bounds = [
        s.value_bounds() if s is not None and getattr(s, "has_mesh", False) else g.bbox()
        for s, g in zip(shapes, grids, strict=True)
    ]
    return default_window(bounds[0], bounds[1], margin)


def push_scale(a: np.ndarray | float) -> np.ndarray:
    """min(a, 1 - a): converts a line parameter s into a push coordinate."""
    a = np.asarray(a, dtype=float)
    return np.minimum(a, 1.0 - a)


def line_point(a, b, s) -> tuple[np.ndarray, np.ndarray]:
    """Point (x, y) with parameter s on r(a, b)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    s = np.asarray(s, dtype=float)
    return a * s + b, (1.0 - a) * s - b


def line_parameter(contour: Contour, a, b) -> np.ndarray:
    """Parameter s at which r(a, b) meets a contour; NaN where it does not.

    A line of positive slope meets a non-increasing polyline at most once, and
    a vertical (horizontal) half-line at most once, so s is well defined.

    Parameters
    ----------
    contour : Contour
    a, b : array_like
        Line parameters, broadcast together; 0 < a < 1.

    Returns
    -------
    ndarray
        s with the broadcast shape of a and b (NaN where the line misses).
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    a, b = np.broadcast_arrays(a, b)
    pts = contour.points
    with np.errstate(invalid="ignore", divide="ignore"):
        if contour.kind == "vertical":
            x0, y0 = pts[0]
            s = (x0 - b) / a
            y = (1.0 - a) * s - b
            return np.where(y >= y0, s, np.nan)
        if contour.kind == "horizontal":
            x0, y0 = pts[0]
            s = (y0 + b) / (1.0 - a)
            x = a * s + b
            return np.where(x >= x0, s, np.nan)
        return _polyline_parameter(pts, a, b)


BISECT_MIN_POINTS = 9


def _polyline_parameter(pts: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Dispatch: dense evaluation for short polylines, bisection for long ones."""
    if len(pts) >= BISECT_MIN_POINTS:
        return _bisect_polyline_parameter(pts, a, b)
    return _dense_polyline_parameter(pts, a, b)


def _bisect_polyline_parameter(pts: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Line parameter on a non-increasing polyline by binary search, NaN where missed.

    Same result as :func:`_dense_polyline_parameter` (same formulas), in
    O(Q log n) instead of O(Q n) for Q lines and n vertices: along the polyline
    G(x, y) = (1-a)(x-b) - a(y+b) is non-decreasing (also in floating point, as
    each term is rounded monotonically), so the crossing segment is found by
    bisection on the vertex index.

    Parameters
    ----------
    pts : ndarray (n, 2), n >= 2
    a, b : ndarray
        Broadcast line parameters.

    Returns
    -------
    ndarray of the broadcast shape.
    """
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    shape = a.shape
    a1 = a.reshape(-1)
    b1 = b.reshape(-1)
    n = len(pts)
    xs = pts[:, 0]
    ys = pts[:, 1]

    def g_at(k: np.ndarray) -> np.ndarray:
        return (1.0 - a1) * (xs[k] - b1) - a1 * (ys[k] + b1)

    # count = number of vertices with G <= 0 = first index with G > 0
    lo = np.zeros(a1.shape, dtype=np.int64)
    hi = np.full(a1.shape, n, dtype=np.int64)
    for _ in range(int(np.ceil(np.log2(n + 1))) + 1):
        active = lo < hi
        if not active.any():
            break
        mid = np.minimum((lo + hi) // 2, n - 1)
        gt = g_at(mid) > 0.0
        hi = np.where(active & gt, mid, hi)
        lo = np.where(active & ~gt, mid + 1, lo)
    count = lo
    with np.errstate(invalid="ignore", divide="ignore"):
        met = (count >= 1) & (g_at(np.full(a1.shape, n - 1)) >= 0.0)
        k = np.clip(count - 1, 0, n - 2)
        g0 = g_at(k)
        g1 = g_at(k + 1)
        denom = g1 - g0
        t = np.where(denom > 0, -g0 / np.where(denom > 0, denom, 1.0), 0.0)
        t = np.clip(t, 0.0, 1.0)
        px = xs[k] + t * (xs[k + 1] - xs[k])
        py = ys[k] + t * (ys[k + 1] - ys[k])
        s = (a1 * (px - b1) + (1.0 - a1) * (py + b1)) / (a1 * a1 + (1.0 - a1) ** 2)
    return np.where(met, s, np.nan).reshape(shape)


def _dense_polyline_parameter(pts: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    # G(x, y) = (1 - a)(x - b) - a(y + b) is zero on the line and non-decreasing
    # along a non-increasing polyline; the crossing is where G changes sign.
    shape = a.shape
    a1 = a.reshape(-1)
    b1 = b.reshape(-1)
    x = pts[:, 0][:, None]
    y = pts[:, 1][:, None]
    G = (1.0 - a1) * (x - b1) - a1 * (y + b1)  # (n, Q)
    n = len(pts)
    count = (G <= 0.0).sum(axis=0)
    met = (count >= 1) & (G[-1] >= 0.0)
    k = np.clip(count - 1, 0, max(n - 2, 0))
    q = np.arange(G.shape[1])
    if n == 1:
        px = np.full(a1.shape, pts[0, 0])
        py = np.full(a1.shape, pts[0, 1])
    else:
        g0 = G[k, q]
        g1 = G[k + 1, q]
        denom = g1 - g0
        t = np.where(denom > 0, -g0 / np.where(denom > 0, denom, 1.0), 0.0)
        t = np.clip(t, 0.0, 1.0)
        px = pts[k, 0] + t * (pts[k + 1, 0] - pts[k, 0])
        py = pts[k, 1] + t * (pts[k + 1, 1] - pts[k, 1])
    s = (a1 * (px - b1) + (1.0 - a1) * (py + b1)) / (a1 * a1 + (1.0 - a1) ** 2)
    return np.where(met, s, np.nan).reshape(shape)


def star_values(values: np.ndarray, a, b) -> np.ndarray:
    """F*(a, b), the normalised function of a map on the line r(a, b), at its vertices.

    The explicit forms of math.md section 2 (they also give the limit lines:
    ``a = 0`` yields max(f1 - b, 0), ``a = 1`` yields max(0, f2 + b)):

        a <= 1/2:  F* = max(f1 - b, a / (1 - a) * (f2 + b))
        a >= 1/2:  F* = max((1 - a) / a * (f1 - b), f2 + b)

    written as max(r1 (f1 - b), r2 (f2 + b)) with r1 = 1, r2 = a / (1 - a) for
    a <= 1/2 and r1 = (1 - a) / a, r2 = 1 otherwise (value units).

    Parameters
    ----------
    values : ndarray (..., 2)
        (f1, f2) per vertex.
    a, b : array_like
        Line parameters, a in [0, 1]; broadcast against ``values[..., 0]`` (e.g.
        ``values[None]`` with ``a[:, None]`` gives one row per line).

    Returns
    -------
    ndarray of the broadcast shape of ``values[..., 0]``, a and b.

    References
    ----------
    .. [CDFFL13] Cerri et al., Math. Methods Appl. Sci. 36 (2013), the foliation method.

    Examples
    --------
    >>> star_values(np.array([[1.0, 2.0]]), 0.5, 0.0)
    array([2.])
    >>> star_values(np.array([[1.0, 2.0]])[None], np.array([[0.25], [0.75]]), np.array([[0.0], [1.0]]))
    array([[1.],
           [3.]])
    """
    v = np.asarray(values, dtype=float)
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):  # a = 0 or 1: the branch not taken divides by 0
        r1 = np.where(a <= 0.5, 1.0, (1.0 - a) / a)
        r2 = np.where(a <= 0.5, a / (1.0 - a), 1.0)
    return np.maximum(r1 * (v[..., 0] - b), r2 * (v[..., 1] + b))
