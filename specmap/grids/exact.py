"""Closed-form extended Pareto grid of an affine map on an ellipsoid.

For the ellipsoid E = D S^2 (D = diag(r1, r2, r3)) and f(p) = L p + c, the image f(E) is the
filled ellipse c + {M w : |w| <= 1} with M = L D (rank 2). Its boundary is the ellipse with
quadratic form Q = M M^T; the boundary point with outward unit normal nu is the support point

    y(nu) = c + Q nu / sqrt(nu^T Q nu).

The Pareto critical set maps onto the two boundary arcs whose outward normal lies in the closed
first quadrant or the closed third quadrant; both are non-increasing. The critical points of
f1 (f2) are the two points of E where f1 (f2) is extreme; they start the vertical (horizontal)
half-lines at the leftmost / rightmost (lowest / highest) points of the image ellipse.

References
----------
.. [CEF19] Cerri, Ethier, Frosini, "On the geometrical properties of the coherent matching
   distance in 2D persistent homology", J. Appl. Comput. Topol. 3 (2019). Extended Pareto grid.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from specmap.grids.model import Contour, Grid, validate_grid

__all__ = ["ellipsoid_linear_grid", "is_exact_case", "is_dependent_linear", "support_point"]


def support_point(Q: np.ndarray, offset: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """Boundary points of the ellipse c + {M w : |w| <= 1} with outward normal angle ``phi``.

    Parameters
    ----------
    Q : ndarray (2, 2)
        M M^T (positive definite).
    offset : ndarray (2,)
        Centre c.
    phi : ndarray (n,)
        Normal angles (radians); the normal is (cos phi, sin phi).

    Returns
    -------
    ndarray (n, 2)
        c + Q nu / sqrt(nu^T Q nu) (the maximiser of nu . y over the ellipse).
    """
    nu = np.stack([np.cos(phi), np.sin(phi)], axis=1)
    Qn = nu @ Q.T
    h = np.sqrt(np.einsum("ij,ij->i", nu, Qn))
    return offset + Qn / h[:, None]


def _arc(Q: np.ndarray, c: np.ndarray, phi0: float, n: int) -> tuple[np.ndarray, float]:
    """Arc of normal angles [phi0, phi0 + pi/2], ordered by increasing x; and its chord error."""
    phi = np.linspace(phi0, phi0 + math.pi / 2.0, n)
    pts = support_point(Q, c, phi)
    mid = support_point(Q, c, 0.5 * (phi[1:] + phi[:-1]))
    a, b = pts[:-1], pts[1:]
    ab = b - a
    cross = ab[:, 0] * (mid[:, 1] - a[:, 1]) - ab[:, 1] * (mid[:, 0] - a[:, 0])
    dev = np.abs(cross) / np.maximum(np.linalg.norm(ab, axis=1), 1e-300)
    if pts[-1, 0] < pts[0, 0]:
        pts = pts[::-1]
    return pts, float(dev.max()) if len(dev) else 0.0


def _extreme_points(radii: np.ndarray, row: np.ndarray, const: float) -> list[dict[str, Any]]:
    """Minimum and maximum of p -> row . p + const on the ellipsoid (index 0 and 2)."""
    Dl = radii * row
    norm = float(np.linalg.norm(Dl))
    p = radii * Dl / norm  # maximiser D (D l) / |D l|
    return [
        {"point": (-p).tolist(), "value": const - norm, "index": 0},
        {"point": p.tolist(), "value": const + norm, "index": 2},
    ]


def ellipsoid_linear_grid(
    radii, matrix, offset=(0.0, 0.0), *, label: str = "f", n_points: int = 2001
) -> Grid:
    """Extended Pareto grid of f(p) = L p + c on the ellipsoid with the given radii.

    Parameters
    ----------
    radii : sequence of 3 floats
        Semi-axes of the ellipsoid (length units).
    matrix : array_like (2, 3)
        L, of rank 2 after scaling by the radii.
    offset : array_like (2,)
        c.
    label : str
        Contour id prefix.
    n_points : int
        Points per proper arc (uniform in the normal angle).

    Returns
    -------
    Grid
        ``route="exact"``; proper contours ``{label}:p0`` (third-quadrant arc) and
        ``{label}:p1`` (first-quadrant arc), vertical half-lines ``v0`` (min f1) and ``v1``
        (max f1), horizontal ``h0`` (min f2) and ``h1`` (max f2). ``tolerance`` is the largest
        distance between the sampled polylines and the true arcs (value units).

    Raises
    ------
    ValueError
        If the shapes are wrong, a radius is not positive, or L D has rank < 2.

    References
    ----------
    [CEF19] for the grid; the support-point formula is standard convex geometry.

    Examples
    --------
    >>> g = ellipsoid_linear_grid((2, 1, 1), [[1, 0, 0], [0, 1, 0]])
    >>> [c.id for c in g.contours]
    ['f:p0', 'f:p1', 'f:v0', 'f:v1', 'f:h0', 'f:h1']
    """
    r = np.asarray(radii, dtype=float).reshape(-1)
    L = np.asarray(matrix, dtype=float)
    c = np.asarray(offset, dtype=float).reshape(-1)
    if r.shape != (3,) or not np.all(r > 0) or L.shape != (2, 3) or c.shape != (2,):
        raise ValueError("need 3 positive radii, a (2, 3) matrix and a (2,) offset")
    M = L * r[None, :]
    Q = M @ M.T
    if not _rank_two(M):
        raise ValueError("the map is degenerate on this ellipsoid (L D has rank < 2)")
    n = max(int(n_points), 2)
    third, e3 = _arc(Q, c, math.pi, n)
    first, e1 = _arc(Q, c, 0.0, n)
    ext = support_point(Q, c, np.array([math.pi, 0.0, 1.5 * math.pi, 0.5 * math.pi]))
    contours = [
        Contour(f"{label}:p0", "proper", third),
        Contour(f"{label}:p1", "proper", first),
        Contour(f"{label}:v0", "vertical", ext[0]),
        Contour(f"{label}:v1", "vertical", ext[1]),
        Contour(f"{label}:h0", "horizontal", ext[2]),
        Contour(f"{label}:h1", "horizontal", ext[3]),
    ]
    scale = float(np.sqrt(np.trace(Q)))
    meta = {
        "n_points": n,
        "critical_points": {
            "f1": _extreme_points(r, L[0], float(c[0])),
            "f2": _extreme_points(r, L[1], float(c[1])),
        },
    }
    grid = Grid(tuple(contours), route="exact", tolerance=max(e1, e3, 1e-15 * scale), meta=meta)
    return validate_grid(grid, tol=1e-12 * max(scale, 1.0))


def _rank_two(M: np.ndarray) -> bool:
    """Whether the 2x3 matrix M has rank 2 (relative tolerance 1e-12 on singular values)."""
    sv = np.linalg.svd(np.asarray(M, dtype=float), compute_uv=False)
    return bool(sv[-1] > 1e-12 * max(sv[0], 1e-300))


def _is_linear(fmap: Any) -> bool:
    is_lin = getattr(fmap, "is_linear", None)
    return is_lin is not None and bool(is_lin())


def is_dependent_linear(fmap: Any) -> bool:
    """Whether ``fmap`` is affine with a 2x3 matrix of rank < 2 (its components are dependent).

    Such a map is functionally dependent on every surface (f2 = k f1 + c or a constant), so no
    Pareto grid is defined for it. Positive radii do not change the rank, so this is also the
    rank test of L D used by :func:`is_exact_case`.
    """
    return _is_linear(fmap) and not _rank_two(fmap.matrix())


def is_exact_case(surface: Any, fmap: Any) -> bool:
    """Whether the closed form applies: an ellipsoid and an affine, non-degenerate map.

    The one exact-route predicate: :func:`specmap.grids.route_for` routes to
    :func:`ellipsoid_linear_grid` exactly when this is true.

    Parameters
    ----------
    surface : object with ``kind`` and ``radii``
    fmap : object with ``is_linear()`` and ``matrix()`` (e.g. :class:`specmap.expr.CompiledMap`)
    """
    if getattr(surface, "kind", None) != "ellipsoid" or not _is_linear(fmap):
        return False
    return _rank_two(np.asarray(fmap.matrix(), dtype=float) * np.asarray(surface.radii, dtype=float)[None, :])
