"""Maps too steep for the theory's smoothness or for any mesh: the gradient's bound on the surface.

:func:`specmap.expr.domain_break` finds a pole or a domain boundary that a guard crosses between two
vertices. A singular point the guard only touches (``sqrt(x + 1)`` on the unit sphere: the argument
is 0 at one point and positive elsewhere) and a near-singular one (``sqrt(x + 1.0000001)``, or
``tan(20*x)`` on a sphere of radius 0.078, where 20 x stays just inside the first pole) give finite
vertex values, so they pass that test; but the map is not smooth there (the critical point of
``sqrt(x + 1)`` at the pole has no vanishing gradient), or it varies on a scale that no mesh we
build resolves, and the grids then have wrong critical sets.

Rule. With R the range of the map's values on the surface (value units; at the samples below and
the steepest point found), D the longest side of the vertices' bounding box (length units) and G
the largest norm of the expression's exact symbolic gradient in space on the surface, the map is
refused when

    G * D / R > STEEP_LIMIT  (= 1e3),

or when G or the map is not finite at a point of the surface. G D / R is scale free: it is 1 for ``x``
on a sphere, about k for ``sin(k x)`` on the unit sphere, 20 for ``exp(5*x)`` on a sphere of
radius 2 (closed forms);
above 1e3 the map changes by its whole range over a thousandth of the shape, finer than the edges
of a million-vertex mesh (near D / 1000). The gradient is the one in space, not its tangential
part: that is what makes ``sqrt(x + 1)`` infinite at the pole (its tangential part stays bounded,
like a cone's), so a map steep only off the surface (``x + 1e6*(x*x + y*y + z*z - 1)`` on the unit
sphere) is refused too; write it without the steep term.

G is searched, not bounded: the gradient at the vertices, edge midpoints and triangle centroids
(for a smooth surface, projected onto it), then a Nelder-Mead ascent of log |grad| [NM65] on the
surface from the steepest samples and from the samples nearest a zero of each guard of
:func:`specmap.expr.domain_break` (division, negative powers, tan, log, sqrt). Like
``domain_break``, the test is certain when it fires and not complete.

References
----------
.. [NM65] J. A. Nelder and R. Mead, "A simplex method for function minimization", The Computer
   Journal 7 (1965) 308-313.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Protocol

import numpy as np

from specmap.expr import Expr, _evaluate, _guards, _inputs
from specmap.meshtable import mesh_edges

STEEP_LIMIT = 1e3
"""Largest accepted G D / R (see the module text)."""

SEEDS = 4
"""Ascents started from the steepest samples (plus one per guard)."""

MAX_EVALUATIONS = 100
"""Objective evaluations per ascent."""


class Surface(Protocol):
    """What the search needs of a smooth surface (:mod:`specmap.shapes.surfaces`)."""

    def gradient(self, P: np.ndarray) -> np.ndarray: ...

    def project(self, P: np.ndarray, tol: float = ..., max_iter: int = ...) -> np.ndarray: ...


@dataclass(frozen=True)
class Steep:
    """The steepest point found.

    Attributes
    ----------
    ratio : float
        G D / R (inf when the gradient or the value is not finite there).
    gradient : float
        G, the norm of the gradient in space (value units per length unit; inf or nan when not finite).
    at : ndarray (3,)
        The point of the surface where it was found.
    """

    ratio: float
    gradient: float
    at: np.ndarray

    @property
    def finite(self) -> bool:
        return bool(np.isfinite(self.ratio))


class _NotFinite(Exception):
    def __init__(self, at: np.ndarray) -> None:
        super().__init__()
        self.at = at


def _grad_norm(expr: Expr, P: np.ndarray) -> np.ndarray:
    """|grad expr| at points P (n, 3); nan where the value or the gradient is not finite."""
    g = np.linalg.norm(expr.grad(P[:, 0], P[:, 1], P[:, 2]), axis=0)
    v = expr(P[:, 0], P[:, 1], P[:, 2])
    return np.where(np.isfinite(g) & np.isfinite(v), g, np.nan)


def _samples(V: np.ndarray, T: np.ndarray, surface: Surface | None) -> tuple[np.ndarray, np.ndarray]:
    """Points of the surface (vertices, edge midpoints, centroids) and the triangle each lies in."""
    T = np.asarray(T, dtype=np.int64)
    E = mesh_edges(T)
    mids = 0.5 * (V[E[:, 0]] + V[E[:, 1]])
    cents = V[T].mean(axis=1)
    P = np.vstack([V, mids, cents])
    if surface is not None:
        P[len(V) :] = surface.project(P[len(V) :])
    # a triangle of each sample, for the mesh's charts: any triangle of a vertex, of an edge's end
    owner = np.zeros(len(V), dtype=np.int64)
    owner[T[:, 0]] = np.arange(len(T))
    tri = np.concatenate([owner, owner[E[:, 0]], np.arange(len(T))])
    return P, tri


def _surface_chart(surface: Surface, p0: np.ndarray, h: float) -> Callable[[np.ndarray], np.ndarray]:
    """q (2,) -> the surface point over p0 + h (q1 e1 + q2 e2), e1, e2 a basis of the tangent plane."""
    n = surface.gradient(p0[None])[0]
    n = n / np.linalg.norm(n)
    e1 = np.cross(n, np.eye(3)[int(np.argmin(np.abs(n)))])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(n, e1)

    def chart(q: np.ndarray) -> np.ndarray:
        q = np.clip(q, -3.0, 3.0)  # three edges around the seed: the projection stays near the surface
        return surface.project((p0 + h * (q[0] * e1 + q[1] * e2))[None])[0]

    return chart


def _triangle_chart(corners: np.ndarray, p0: np.ndarray) -> Callable[[np.ndarray], np.ndarray]:
    """q (2,) -> a point of the triangle (barycentric steps from p0, clipped into the triangle)."""
    a, b, c = corners

    def chart(q: np.ndarray) -> np.ndarray:
        p = p0 + q[0] * (b - a) + q[1] * (c - a)
        M = np.c_[b - a, c - a]
        st = np.linalg.lstsq(M, p - a, rcond=None)[0]
        s, t = np.clip(st, 0.0, 1.0)
        if s + t > 1.0:
            s, t = s / (s + t), t / (s + t)
        return a + s * (b - a) + t * (c - a)

    return chart


def _ascend(expr: Expr, chart: Callable[[np.ndarray], np.ndarray]) -> tuple[float, np.ndarray]:
    """Largest |grad| found by Nelder-Mead from q = 0 in ``chart``; _NotFinite when it is not finite."""
    from scipy.optimize import minimize

    top = [-np.inf]
    spot = [chart(np.zeros(2))]

    def objective(q: np.ndarray) -> float:
        p = chart(np.asarray(q, dtype=float))
        g = float(_grad_norm(expr, p[None])[0])
        if not np.isfinite(g):
            raise _NotFinite(p)
        if g > top[0]:
            top[0], spot[0] = g, p
        return -float(np.log(g)) if g > 0 else 1e300

    simplex = np.array([[0.0, 0.0], [0.3, 0.0], [0.0, 0.3]])
    minimize(
        objective,
        np.zeros(2),
        method="Nelder-Mead",
        options={"maxfev": MAX_EVALUATIONS, "xatol": 1e-9, "fatol": 1e-9, "initial_simplex": simplex},
    )
    return top[0], spot[0]


def steepest(expr: Expr, V: np.ndarray, T: np.ndarray, surface: Surface | None = None) -> Steep | None:
    """The steepest point of ``expr`` found on a surface or mesh, or None for a constant map.

    Parameters
    ----------
    expr : Expr
    V : ndarray (n, 3)
        Vertices (on the surface when ``surface`` is given), length units.
    T : ndarray (m, 3) of int
        Triangles.
    surface : Ellipsoid or Torus, optional
        The smooth surface the mesh samples: the search moves on it; else on the triangles.

    Returns
    -------
    Steep or None
        None when the vertex values have no range (a constant map: :mod:`specmap.shapes.normality`
        says so) or are not finite (checked before, with its own message).

    Examples
    --------
    >>> from specmap.expr import compile_expr
    >>> from specmap.shapes.surfaces import make_surface
    >>> S = make_surface("ellipsoid", (1.0, 1.0, 1.0))
    >>> V, T = S.mesh(200)
    >>> round(steepest(compile_expr("x"), V, T, S).ratio, 1)  # |grad x| = 1, D ~ R ~ 2 (closed form)
    1.0
    >>> steepest(compile_expr("sqrt(x + 1.0000001)"), V, T, S).ratio > STEEP_LIMIT
    True
    """
    V = np.asarray(V, dtype=np.float64)
    T = np.asarray(T, dtype=np.int64).reshape(-1, 3)
    values = expr(V[:, 0], V[:, 1], V[:, 2])
    R = float(np.ptp(values)) if len(values) else 0.0
    D = float(np.max(V.max(axis=0) - V.min(axis=0))) if len(V) else 0.0
    if not (np.isfinite(R) and R > 0 and np.isfinite(D) and D > 0):
        return None
    P, tri = _samples(V, T, surface)
    g = _grad_norm(expr, P)
    vals = expr(P[:, 0], P[:, 1], P[:, 2])
    if np.isfinite(vals).all():
        R = max(R, float(np.ptp(vals)))
    bad = np.nonzero(~np.isfinite(g))[0]
    if bad.size:
        return Steep(np.inf, float("nan"), P[int(bad[0])])
    seeds = list(np.argsort(-g)[:SEEDS])
    env, _ = _inputs(P[:, 0], P[:, 1], P[:, 2])
    for _, guard in _guards(expr._tree):
        with np.errstate(all="ignore"):
            u = np.abs(np.broadcast_to(_evaluate(guard, env, {}), (len(P),)))
        if np.isfinite(u).any():
            seeds.append(int(np.nanargmin(u)))
    k = int(np.argmax(g))
    best, at = float(g[k]), P[k]
    if expr.is_linear() or best * D / R > STEEP_LIMIT:  # a constant gradient; or refused already
        return Steep(best * D / R, best, at)
    h = float(np.median(np.linalg.norm(V[T[:, 1]] - V[T[:, 0]], axis=1)))
    for i in dict.fromkeys(int(s) for s in seeds):
        chart = (
            _surface_chart(surface, P[i], h) if surface is not None else _triangle_chart(V[T[tri[i]]], P[i])
        )
        try:
            found, where = _ascend(expr, chart)
        except _NotFinite as exc:
            return Steep(np.inf, float("nan"), exc.at)
        if found > best:
            best, at = found, where
            if best * D / R > STEEP_LIMIT:
                break
    at = np.asarray(at)
    v_at = float(expr(at[0], at[1], at[2]))
    R = max(R, float(np.max(vals)) - v_at, v_at - float(np.min(vals))) if np.isfinite(vals).all() else R
    return Steep(best * D / R, best, at)
