"""Joint simplification of a mesh map (f1, f2): fewer Pareto pieces at a measured sup-norm change.

Persistence-sensitive simplification (:mod:`specmap.simplify`) treats each field alone and
removes the short critical pairs of f1 and of f2, i.e. the half-lines of the extended Pareto
grid. On scanned meshes most contours are *proper* pieces: PL Pareto edges [EH04]_ chained and
cut at critical vertices, branchings and cusps. An edge uv is a PL Pareto edge when f1 and f2
order u, v oppositely and the images of its two triangles fold onto the same side of the image
of uv, i.e. the two triangles have opposite orientations in the value plane. On a coarse or
noisy mesh the fold edges zigzag and form small loops (each zig a cusp, so a new contour), and
no amount of smoothing removes them (measured in tests/benchmarks/results_simplify.md): they
come from the triangulation, not from the shape.

:func:`joint_simplify` composes three steps, each moving every vertex value by a bounded
amount, and then *measures* ||f - f'||_inf (the max over the vertices: f - f' is PL on the same
triangles), which is all the stability theorem [CDFFL13]_ needs:

1. tube smoothing of both fields (:func:`specmap.simplify.smooth_within`, radius tau);
2. fold straightening (:func:`straighten_folds`, radius tau around step 1): a greedy descent
   that moves one vertex image at a time to the point of a (k x k) grid in its box
   [g(v) - tau, g(v) + tau]^2 (or keeps it) that leaves the fewest PL Pareto edges among the
   edges of its star triangles; the count never rises, so the passes end;
3. persistence-sensitive simplification of the pair at 2 tau
   (:func:`specmap.simplify.simplify_pair`), which removes the critical pairs steps 1-2 left or
   made.

So ||f - f'||_inf <= 4 tau by construction, and the measured value is what the record keeps.
:func:`auto_joint` scans tau upward on a geometric grid from ``cap / 256`` to ``cap / 4`` (so the
change stays within ``cap``), stops at the first tau whose pair meets the contour budget, and
refines between that tau and the one before (below the grid by halving when its first tau meets it); it returns the candidate with the smallest measured
change that meets the budget, or, when none does, the one with the fewest contours and says so.
The count is not monotone in tau (a larger tube can make more folds), hence the scan.

References
----------
.. [EH04] Edelsbrunner, Harer, "Jacobi sets of multiple Morse functions", Foundations of
   Computational Mathematics, Minneapolis 2002, Cambridge Univ. Press (2004).
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in multidimensional
   persistent homology are stable functions", Math. Methods Appl. Sci. 36 (2013).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numba
import numpy as np

from specmap.meshtable import edges_and_faces
from specmap.simplify import simplify_pair, smooth_within

PASSES = 20
GRID = 5
SCAN_STEPS = 13  # tau = cap / 4 * 2^(-k / 2), k = 12 .. 0
REFINE_STEPS = 3


@numba.njit(cache=True, nogil=True)
def _orient(g: np.ndarray, a: int, b: int, c: int) -> int:
    d = (g[b, 0] - g[a, 0]) * (g[c, 1] - g[a, 1]) - (g[b, 1] - g[a, 1]) * (g[c, 0] - g[a, 0])
    return 1 if d > 0 else (-1 if d < 0 else 0)


@numba.njit(cache=True, nogil=True)
def _star_cost(
    g: np.ndarray,
    v: int,
    ori: np.ndarray,
    sptr: np.ndarray,
    stri: np.ndarray,
    tedges: np.ndarray,
    faces: np.ndarray,
    edges: np.ndarray,
) -> int:
    """Pareto edges among the edges of the star triangles of v (edges at v counted twice)."""
    cost = 0
    for p in range(sptr[v], sptr[v + 1]):
        t = stri[p]
        for j in range(3):
            e = tedges[t, j]
            if ori[faces[e, 0]] != ori[faces[e, 1]]:
                a = edges[e, 0]
                b = edges[e, 1]
                if (g[a, 0] - g[b, 0]) * (g[a, 1] - g[b, 1]) <= 0:
                    cost += 1
    return cost


@numba.njit(cache=True, nogil=True)
def _straighten(
    T: np.ndarray,
    centre: np.ndarray,
    g: np.ndarray,
    tau: float,
    sptr: np.ndarray,
    stri: np.ndarray,
    tedges: np.ndarray,
    faces: np.ndarray,
    edges: np.ndarray,
    passes: int,
    k: int,
) -> int:
    m = len(T)
    n = len(g)
    ori = np.empty(m, dtype=np.int64)
    for t in range(m):
        ori[t] = _orient(g, T[t, 0], T[t, 1], T[t, 2])
    moved = 0
    for _ in range(passes):
        changed = 0
        for v in range(n):
            x0 = g[v, 0]
            y0 = g[v, 1]
            best = _star_cost(g, v, ori, sptr, stri, tedges, faces, edges)
            if best == 0:
                continue
            bx = x0
            by = y0
            for q in range(k * k):
                cx = centre[v, 0] - tau + 2.0 * tau * (q % k) / (k - 1)
                cy = centre[v, 1] - tau + 2.0 * tau * (q // k) / (k - 1)
                g[v, 0] = cx
                g[v, 1] = cy
                for p in range(sptr[v], sptr[v + 1]):
                    t = stri[p]
                    ori[t] = _orient(g, T[t, 0], T[t, 1], T[t, 2])
                cost = _star_cost(g, v, ori, sptr, stri, tedges, faces, edges)
                if cost < best:
                    best = cost
                    bx = cx
                    by = cy
            g[v, 0] = bx
            g[v, 1] = by
            for p in range(sptr[v], sptr[v + 1]):
                t = stri[p]
                ori[t] = _orient(g, T[t, 0], T[t, 1], T[t, 2])
            if bx != x0 or by != y0:
                changed += 1
        moved += changed
        if changed == 0:
            break
    return moved


def straighten_folds(
    tri: np.ndarray, values: np.ndarray, tau: float, *, passes: int = PASSES, grid: int = GRID
) -> np.ndarray:
    """Move vertex images within the box of radius ``tau`` to remove PL Pareto edges (greedy).

    Parameters
    ----------
    tri : ndarray (m, 3) of int
        Consistently oriented triangles of a closed surface.
    values : ndarray (n, 2)
        (f1, f2) at the vertices (value units).
    tau : float
        Box radius >= 0 (value units): every output value is within ``tau`` of the input in each
        component (a value that rounding put outside the box is stepped back into it).
    passes, grid : int
        Sweeps over the vertices (stops early when a sweep moves none); candidates per vertex are
        a ``grid`` x ``grid`` lattice of its box.

    Returns
    -------
    ndarray (n, 2)
    """
    T = np.asarray(tri, dtype=np.int64)
    F = np.asarray(values, dtype=float)
    if F.ndim != 2 or F.shape[1] != 2:
        raise ValueError(f"values have shape {F.shape}, expected (n, 2)")
    if not (tau >= 0 and np.isfinite(tau)):
        raise ValueError(f"tau must be finite and >= 0, got {tau!r}")
    if tau == 0 or len(T) == 0:
        return F.copy()
    n, m = len(F), len(T)
    tab = edges_and_faces(T)
    tv = T.ravel()
    order = np.argsort(tv, kind="stable")
    sptr = np.r_[0, np.cumsum(np.bincount(tv, minlength=n))].astype(np.int64)
    stri = np.repeat(np.arange(m, dtype=np.int64), 3)[order]
    g = F.copy()
    _straighten(
        T,
        F,
        g,
        float(tau),
        sptr,
        stri,
        tab.triangle_edges.astype(np.int64),
        tab.faces.astype(np.int64),
        tab.edges.astype(np.int64),
        int(passes),
        max(int(grid), 2),
    )
    g = np.clip(g, F - tau, F + tau)
    while True:  # F + tau can round above the box: step such values back towards F
        bad = np.abs(g - F) > tau
        if not bad.any():
            return g
        g[bad] = np.nextafter(g[bad], F[bad])


@dataclass(frozen=True)
class JointSimplified:
    """One jointly simplified pair.

    Attributes
    ----------
    values : ndarray (n, 2)
        (f1', f2') at the vertices (value units).
    tau : float
        Tube radius of steps 1 and 2; the persistence step used 2 tau (value units).
    sup_change : tuple of float
        Measured max |f_i - f_i'| over the vertices, i = 1, 2 (value units; <= 4 tau).
    """

    values: np.ndarray
    tau: float
    sup_change: tuple[float, float]

    @property
    def bound(self) -> float:
        """4 tau: the change the construction allows (value units)."""
        return 4.0 * self.tau


def joint_simplify(tri: np.ndarray, values: np.ndarray, tau: float) -> JointSimplified:
    """Tube smoothing, fold straightening and persistence at 2 tau (see the module docstring).

    Parameters
    ----------
    tri : ndarray (m, 3) of int
        Consistently oriented triangles of a closed surface.
    values : ndarray (n, 2)
        (f1, f2) at the vertices (value units).
    tau : float
        > 0 (value units).

    Returns
    -------
    JointSimplified
        With the measured sup change of each component (<= 4 tau).
    """
    T = np.asarray(tri, dtype=np.int64)
    F = np.asarray(values, dtype=float)
    S = np.column_stack([smooth_within(T, F[:, 0], tau), smooth_within(T, F[:, 1], tau)])
    S = straighten_folds(T, S, tau)
    out = simplify_pair(T, S[:, 0], S[:, 1], 2.0 * tau).values
    sup = np.abs(out - F).max(axis=0) if len(F) else np.zeros(2)
    return JointSimplified(out, float(tau), (float(sup[0]), float(sup[1])))


@dataclass(frozen=True)
class AutoJoint:
    """Result of :func:`auto_joint`.

    Attributes
    ----------
    pair : JointSimplified or None
        The chosen pair (None when the input already meets the budget or nothing lowers it).
    count_before, count_after : int
    budget : int
    met : bool
    cap : float
        The largest change allowed (value units); every tau tried is <= cap / 4.
    tried : list of (tau, max sup change, count)
        Every candidate evaluated, in order.
    """

    pair: JointSimplified | None
    count_before: int
    count_after: int
    budget: int
    met: bool
    cap: float
    tried: list[tuple[float, float, int]] = field(default_factory=list)


def auto_joint(
    tri: np.ndarray,
    values: np.ndarray,
    count_fn: Callable[[np.ndarray, np.ndarray], int],
    budget: int,
    cap: float,
    *,
    steps: int = SCAN_STEPS,
    refine: int = REFINE_STEPS,
) -> AutoJoint:
    """The smallest measured change of the joint family that brings ``count_fn`` under ``budget``.

    Parameters
    ----------
    tri : ndarray (m, 3) of int
    values : ndarray (n, 2)
        (f1, f2) at the vertices.
    count_fn : callable (f1', f2') -> int
        E.g. the number of contours of the pair's extended Pareto grid.
    budget : int
    cap : float
        Largest change allowed, > 0 (value units), e.g. 5 % of the larger value range.
    steps : int
        Scanned taus cap / 4 * 2^(-k / 2), k = steps - 1 .. 0 (increasing).
    refine : int
        Geometric bisection steps between the first tau that meets the budget and the one before
        (or, when the smallest scanned tau meets it, halvings while the budget is still met).

    Returns
    -------
    AutoJoint
    """
    F = np.asarray(values, dtype=float)
    before = int(count_fn(F[:, 0], F[:, 1]))
    if before <= budget:
        return AutoJoint(None, before, before, int(budget), True, float(cap))
    tried: list[tuple[float, float, int]] = []
    found: list[tuple[float, int, JointSimplified]] = []  # (max sup, count, pair)

    def at(tau: float) -> tuple[JointSimplified, int]:
        pair = joint_simplify(tri, F, tau)
        c = int(count_fn(pair.values[:, 0], pair.values[:, 1]))
        tried.append((float(tau), max(pair.sup_change), c))
        found.append((max(pair.sup_change), c, pair))
        return pair, c

    taus = cap / 4.0 * 2.0 ** (-np.arange(steps - 1, -1, -1) / 2.0)
    prev = 0.0
    hit = None
    for tau in taus:
        _, c = at(float(tau))
        if c <= budget:
            hit = float(tau)
            break
        prev = float(tau)
    if hit is not None and prev > 0:
        lo, hi = prev, hit
        for _ in range(refine):
            mid = float(np.sqrt(lo * hi))
            _, c = at(mid)
            if c <= budget:
                hi = mid
            else:
                lo = mid
    elif hit is not None:  # the smallest scanned tau already meets the budget: halve while it does
        tau = hit
        for _ in range(refine):
            tau /= 2.0
            if at(tau)[1] > budget:
                break
    ok = [x for x in found if x[1] <= budget]
    if ok:
        sup, c, pair = min(ok, key=lambda x: (x[0], x[1]))
        return AutoJoint(pair, before, c, int(budget), True, float(cap), tried)
    sup, c, pair = min(found, key=lambda x: (x[1], x[0]))
    if c >= before:
        return AutoJoint(None, before, before, int(budget), False, float(cap), tried)
    return AutoJoint(pair, before, c, int(budget), False, float(cap), tried)
