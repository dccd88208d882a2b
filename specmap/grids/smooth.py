"""Extended Pareto grid of a smooth map f = (f1, f2) on a smooth closed surface G = 0.

The route follows math.md sections 4 and 7:

1. Jacobi set. On the surface {G = 0} the two tangential gradients are parallel exactly where
   det(grad G, grad f1, grad f2) = 0 [EH04]. That determinant is contoured on a triangulation of
   the surface (marching triangles); every crossing point is moved onto the curve
   {G = 0, det = 0} by minimum-norm Gauss-Newton steps (exact grad G, numerically
   differentiated det) to the requested tolerance.
2. Pareto part. A point of the Jacobi set is Pareto critical when the tangential gradients
   t1, t2 are opposite or one vanishes, i.e. t1 . t2 <= 0 [CEF19]. Ends of Pareto arcs are
   critical points of f1 or f2, found separately by Newton's method on the Lagrange system
   grad f_i = mu grad G, G = 0, with Morse index from the Hessian of the Lagrangian restricted to
   the tangent plane.
3. Contours. Pareto arcs are mapped to the plane, cut at cusps (where the image reverses
   direction) into non-increasing polylines ("proper" contours); every critical point of f1
   (f2) starts a vertical (horizontal) half-line [CEF19].
4. Checks. The Morse counts #min - #saddle + #max must equal chi(M) for f1 and f2 [Mil63]; when
   they do not (features below the mesh spacing), the computation is repeated on a finer mesh.

The map is duck-typed: any object with ``values(P) -> (n, 2)`` and ``jacobian(P) -> (n, 2, 3)``.

References
----------
.. [CEF19] Cerri, Ethier, Frosini, "On the geometrical properties of the coherent matching
   distance in 2D persistent homology", J. Appl. Comput. Topol. 3 (2019).
.. [EH04] Edelsbrunner, Harer, "Jacobi sets of multiple Morse functions" (2004).
.. [Mil63] Milnor, "Morse Theory" (1963): #min - #saddle + #max = chi.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from specmap.grids.model import Contour, Grid, validate_grid
from specmap.meshtable import edges_and_faces

__all__ = ["CriticalPoint", "critical_points", "smooth_grid", "jacobi_cycles"]


class SmoothMap(Protocol):
    def values(self, P: np.ndarray) -> np.ndarray: ...

    def jacobian(self, P: np.ndarray) -> np.ndarray: ...


@dataclass(frozen=True, eq=False)
class CriticalPoint:
    """A critical point of f_i restricted to the surface.

    Attributes
    ----------
    point : ndarray (3,)
        Position on the surface (length units).
    value : ndarray (2,)
        f(point) (value units).
    index : int
        Morse index: 0 minimum, 1 saddle, 2 maximum.
    """

    point: np.ndarray
    value: np.ndarray
    index: int

    def to_json(self) -> dict[str, Any]:
        return {
            "point": [float(x) for x in self.point],
            "value": [float(x) for x in self.value],
            "index": int(self.index),
        }


# ----------------------------------------------------------------------------- small helpers
def _unit_normals(surface, P: np.ndarray) -> np.ndarray:
    n = surface.gradient(P)
    return n / np.linalg.norm(n, axis=1)[:, None]


def _tangential(surface, fmap: SmoothMap, P: np.ndarray) -> np.ndarray:
    """Tangential gradients, shape (n, 2, 3): grad f_i minus its normal part."""
    J = np.asarray(fmap.jacobian(P), dtype=float)
    n = _unit_normals(surface, P)
    return J - np.einsum("nij,nj->ni", J, n)[:, :, None] * n[:, None, :]


def _jacobi_det(surface, fmap: SmoothMap, P: np.ndarray) -> np.ndarray:
    """det(grad G, grad f1, grad f2) with grad G normalised, shape (n,)."""
    J = np.asarray(fmap.jacobian(P), dtype=float)
    n = _unit_normals(surface, P)
    return np.einsum("ni,ni->n", n, np.cross(J[:, 0], J[:, 1]))


def _fd_gradient(func, P: np.ndarray, h: float) -> np.ndarray:
    """Central-difference gradient of a scalar field evaluated on (n, 3) points."""
    n = len(P)
    E = np.eye(3) * h
    Q = np.concatenate([P[:, None, :] + E[None], P[:, None, :] - E[None]], axis=1).reshape(-1, 3)
    vals = np.asarray(func(Q)).reshape(n, 6)
    return (vals[:, :3] - vals[:, 3:]) / (2.0 * h)


def _fd_hessian(fmap: SmoothMap, P: np.ndarray, which: int, h: float) -> np.ndarray:
    """Hessian of f_which by central differences of the exact gradient, shape (n, 3, 3)."""
    n = len(P)
    E = np.eye(3) * h
    Q = np.concatenate([P[:, None, :] + E[None], P[:, None, :] - E[None]], axis=1).reshape(-1, 3)
    g = np.asarray(fmap.jacobian(Q), dtype=float)[:, which].reshape(n, 6, 3)
    H = (g[:, :3] - g[:, 3:]) / (2.0 * h)  # H[n, k, j] = d/dp_k (d f / dp_j)
    return 0.5 * (H + H.transpose(0, 2, 1))


def _edges(T: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Unique undirected edges (m, 2) and, per triangle, the ids of its edges (bc, ca, ab)."""
    table = edges_and_faces(T)
    return table.edges, table.triangle_edges[:, [1, 2, 0]]


def _mesh_spacing(V: np.ndarray, E: np.ndarray) -> float:
    return float(np.linalg.norm(V[E[:, 0]] - V[E[:, 1]], axis=1).mean())


# ----------------------------------------------------------------------------- critical points
def _lagrange_newton(
    surface, fmap: SmoothMap, which: int, P0: np.ndarray, tol: float, max_iter: int = 50
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Newton's method on grad f_i - mu grad G = 0, G = 0. Returns (points, mu, converged)."""
    size = surface.size
    h = 1e-5 * size
    P = surface.project(np.asarray(P0, dtype=float))
    g = surface.gradient(P)
    df = np.asarray(fmap.jacobian(P), dtype=float)[:, which]
    mu = np.einsum("ni,ni->n", df, g) / np.einsum("ni,ni->n", g, g)
    done = np.zeros(len(P), dtype=bool)
    for _ in range(max_iter):
        act = ~done
        if not act.any():
            break
        p, m = P[act], mu[act]
        g = surface.gradient(p)
        df = np.asarray(fmap.jacobian(p), dtype=float)[:, which]
        HL = _fd_hessian(fmap, p, which, h) - m[:, None, None] * surface.hessian(p)
        K = np.zeros((len(p), 4, 4))
        K[:, :3, :3] = HL
        K[:, :3, 3] = -g
        K[:, 3, :3] = g
        F = np.concatenate([df - m[:, None] * g, surface.implicit(p)[:, None]], axis=1)
        try:
            step = np.linalg.solve(K, -F[:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:
            step = np.stack([np.linalg.lstsq(k, -f, rcond=None)[0] for k, f in zip(K, F, strict=True)])
        # damp wild steps (seeds far from a critical point)
        ln = np.linalg.norm(step[:, :3], axis=1)
        scale = np.minimum(1.0, 0.2 * size / np.maximum(ln, 1e-300))
        step *= scale[:, None]
        P[act] = p + step[:, :3]
        mu[act] = m + step[:, 3]
        idx = np.nonzero(act)[0]
        done[idx[ln <= tol * size]] = True
    P = surface.project(P)
    t = _tangential(surface, fmap, P)[:, which]
    J = np.asarray(fmap.jacobian(P), dtype=float)[:, which]
    ok = done & (np.linalg.norm(t, axis=1) <= 1e-6 * np.maximum(np.linalg.norm(J, axis=1), 1e-300))
    ok &= np.all(np.isfinite(P), axis=1)
    return P, mu, ok


def _morse_index(surface, fmap: SmoothMap, which: int, P: np.ndarray, mu: np.ndarray) -> np.ndarray:
    """Number of negative eigenvalues of the Lagrangian Hessian on the tangent plane."""
    h = 1e-5 * surface.size
    HL = _fd_hessian(fmap, P, which, h) - mu[:, None, None] * surface.hessian(P)
    n = _unit_normals(surface, P)
    # orthonormal tangent basis: the last two right-singular vectors of the normal row
    _, _, Vt = np.linalg.svd(n[:, None, :])
    B = Vt[:, 1:, :]  # (n, 2, 3)
    H2 = np.einsum("nai,nij,nbj->nab", B, HL, B)
    return (np.linalg.eigvalsh(H2) < 0).sum(axis=1)


def _seed_vertices(surface, fmap: SmoothMap, which: int, V: np.ndarray, E: np.ndarray) -> np.ndarray:
    """Vertices where |tangential grad f_i| is not larger than at any neighbour."""
    t = np.linalg.norm(_tangential(surface, fmap, V)[:, which], axis=1)
    nb_min = np.full(len(V), np.inf)
    np.minimum.at(nb_min, E[:, 0], t[E[:, 1]])
    np.minimum.at(nb_min, E[:, 1], t[E[:, 0]])
    return np.nonzero(t <= nb_min)[0]


def critical_points(
    surface,
    fmap: SmoothMap,
    which: int,
    resolution: int = 4000,
    *,
    tol: float = 1e-10,
    mesh: tuple[np.ndarray, np.ndarray] | None = None,
) -> list[CriticalPoint]:
    """Critical points of f_which (0 for f1, 1 for f2) on the surface, with Morse index.

    Seeds are mesh vertices where the tangential gradient is locally smallest; each seed is
    refined by Newton's method on the Lagrange system grad f_i = mu grad G, G = 0 (Hessian of
    f_i by central differences of the exact gradient) and duplicates are merged.

    Parameters
    ----------
    surface : Ellipsoid or Torus
    fmap : object with ``values`` and ``jacobian``
    which : {0, 1}
    resolution : int
        Mesh vertices used for seeding (critical points closer than a few mesh steps to each
        other may be missed).
    tol : float
        Newton stopping step, relative to the surface size.
    mesh : (V, T), optional
        Reuse a mesh of the surface.

    Returns
    -------
    list of CriticalPoint
        Sorted by the value of f_which.

    References
    ----------
    [Mil63] for the Morse index and #min - #saddle + #max = chi.
    """
    if which not in (0, 1):
        raise ValueError("which must be 0 (f1) or 1 (f2)")
    V, T = surface.mesh(resolution) if mesh is None else mesh
    E, _ = _edges(T)
    found = _refine_seeds(surface, fmap, which, V[_seed_vertices(surface, fmap, which, V, E)], tol, [])
    # every critical point lies on the Jacobi set, where t1 . t2 changes sign
    cycles = jacobi_cycles(surface, fmap, V, T, tol)
    located, vanishing = _pareto_ends(surface, fmap, cycles, tol)
    if len(located):
        found = _refine_seeds(surface, fmap, which, located[vanishing == which], tol, found)
    return found


def _refine_seeds(
    surface, fmap: SmoothMap, which: int, seeds: np.ndarray, tol: float, known: list[CriticalPoint]
) -> list[CriticalPoint]:
    """Newton-refine seeds to critical points of f_which; merge with ``known``; sort by value."""
    out = list(known)
    if len(seeds) == 0:
        return out
    P, mu, ok = _lagrange_newton(surface, fmap, which, np.asarray(seeds, dtype=float), tol)
    P, mu = P[ok], mu[ok]
    if len(P) == 0:
        return out
    idx = _morse_index(surface, fmap, which, P, mu)
    vals = np.asarray(fmap.values(P), dtype=float)
    merge = 1e-6 * surface.size
    for k in range(len(P)):
        if all(np.linalg.norm(P[k] - c.point) > merge for c in out):
            out.append(CriticalPoint(P[k].copy(), vals[k].copy(), int(idx[k])))
    out.sort(key=lambda c: (float(c.value[which]), float(c.value[1 - which])))
    return out


def _euler_check(cps: list[CriticalPoint], chi: int) -> dict[str, Any]:
    counts = [sum(1 for c in cps if c.index == k) for k in range(3)]
    alt = counts[0] - counts[1] + counts[2]
    return {
        "minima": counts[0],
        "saddles": counts[1],
        "maxima": counts[2],
        "alternating_sum": alt,
        "chi": chi,
        "ok": alt == chi,
    }


# ----------------------------------------------------------------------------- Jacobi curves
def _refine_on_jacobi(surface, fmap: SmoothMap, P: np.ndarray, tol: float, max_iter: int = 40) -> np.ndarray:
    """Minimum-norm Gauss-Newton onto {G = 0, det = 0}; step below ``tol * size`` stops."""
    size = surface.size
    h = 1e-6 * size
    P = np.array(P, dtype=float)
    done = np.zeros(len(P), dtype=bool)

    def det(Q: np.ndarray) -> np.ndarray:
        return _jacobi_det(surface, fmap, Q)

    for _ in range(max_iter):
        act = ~done
        if not act.any():
            break
        p = P[act]
        J = np.stack([surface.gradient(p), _fd_gradient(det, p, h)], axis=1)  # (n, 2, 3)
        F = np.stack([surface.implicit(p), det(p)], axis=1)
        JJ = J @ J.transpose(0, 2, 1)
        JJ += 1e-14 * np.trace(JJ, axis1=1, axis2=2)[:, None, None] * np.eye(2)
        lam = np.linalg.solve(JJ, F[:, :, None])
        step = -(J.transpose(0, 2, 1) @ lam)[:, :, 0]
        ln = np.linalg.norm(step, axis=1)
        step *= np.minimum(1.0, 0.1 * size / np.maximum(ln, 1e-300))[:, None]
        P[act] = p + step
        idx = np.nonzero(act)[0]
        done[idx[ln <= tol * size]] = True
    return P


def jacobi_cycles(surface, fmap: SmoothMap, V: np.ndarray, T: np.ndarray, tol: float) -> list[np.ndarray]:
    """Closed curves of the Jacobi set, as cyclic point lists refined onto the curve.

    Marching triangles on the sign of det(grad G, grad f1, grad f2) at the vertices (zero
    counts as negative); each crossing edge is one curve point.
    """
    E, tri_edges = _edges(T)
    d = _jacobi_det(surface, fmap, V)
    pos = d > 0
    crossing = pos[E[:, 0]] != pos[E[:, 1]]
    if not crossing.any():
        return []
    tri_cross = crossing[tri_edges]  # (m, 3) -> 0 or 2 per triangle
    sel = tri_cross.sum(axis=1) == 2
    pairs = np.array([row[mask] for row, mask in zip(tri_edges[sel], tri_cross[sel], strict=True)])
    nbr: dict[int, list[int]] = {}
    for a, b in pairs:
        nbr.setdefault(int(a), []).append(int(b))
        nbr.setdefault(int(b), []).append(int(a))
    # interpolated crossing points
    ce = np.nonzero(crossing)[0]
    da, db = d[E[ce, 0]], d[E[ce, 1]]
    t = da / (da - db)
    pts = V[E[ce, 0]] + t[:, None] * (V[E[ce, 1]] - V[E[ce, 0]])
    where = {int(e): k for k, e in enumerate(ce)}
    pts = _refine_on_jacobi(surface, fmap, pts, tol)
    seen: set[int] = set()
    cycles: list[np.ndarray] = []
    for start in nbr:
        if start in seen:
            continue
        order = [start]
        seen.add(start)
        prev, cur = -1, start
        while True:
            nxt = [x for x in nbr[cur] if x != prev]
            if not nxt:
                break
            step = nxt[0]
            if step == start or step in seen:
                break
            order.append(step)
            seen.add(step)
            prev, cur = cur, step
        cyc = pts[[where[e] for e in order]]
        # drop repeated points (vertices where the determinant vanishes exactly)
        gap = np.linalg.norm(np.diff(cyc, axis=0, append=cyc[:1]), axis=1)
        cyc = cyc[gap > 1e-9 * surface.size] if (gap > 1e-9 * surface.size).sum() >= 3 else cyc
        if len(cyc) >= 3:
            cycles.append(cyc)
    return cycles


# ----------------------------------------------------------------------------- Pareto pieces
def _pareto_sign(surface, fmap: SmoothMap, P: np.ndarray) -> np.ndarray:
    """t1 . t2 / (|grad f1| |grad f2|): <= 0 on the Pareto part of the Jacobi set."""
    t = _tangential(surface, fmap, P)
    J = np.asarray(fmap.jacobian(P), dtype=float)
    nrm = np.linalg.norm(J[:, 0], axis=1) * np.linalg.norm(J[:, 1], axis=1)
    return np.einsum("ni,ni->n", t[:, 0], t[:, 1]) / np.maximum(nrm, 1e-300)


def _sign_changes(s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cyclic index pairs (k, k+1) where the Pareto sign flips; first index is the inside one."""
    inside = s <= 0
    nxt = np.roll(np.arange(len(s)), -1)
    flip = np.nonzero(inside != inside[nxt])[0]
    k_in = np.where(inside[flip], flip, nxt[flip])
    k_out = np.where(inside[flip], nxt[flip], flip)
    return k_in, k_out


def _locate_ends(surface, fmap, pa: np.ndarray, pb: np.ndarray, tol: float, iters: int = 60) -> np.ndarray:
    """Points of the Jacobi curve between pa (t1 . t2 <= 0) and pb (> 0) where it is zero.

    Vectorised regula falsi (Illinois variant) on the Pareto sign, each trial point moved onto
    the curve; stops when the bracket is below ``tol * size``.
    """
    pa, pb = pa.copy(), pb.copy()
    sa, sb = _pareto_sign(surface, fmap, pa), _pareto_sign(surface, fmap, pb)
    side = np.zeros(len(pa), dtype=int)
    for _ in range(iters):
        act = np.linalg.norm(pb - pa, axis=1) > tol * surface.size
        if not act.any():
            break
        w = np.clip(sa[act] / np.where(sa[act] != sb[act], sa[act] - sb[act], 1.0), 0.05, 0.95)
        p = _refine_on_jacobi(surface, fmap, pa[act] + w[:, None] * (pb[act] - pa[act]), tol)
        sp = _pareto_sign(surface, fmap, p)
        idx = np.nonzero(act)[0]
        lo = sp <= 0
        for j, k in enumerate(idx):
            if lo[j]:
                pa[k], sa[k] = p[j], sp[j]
                if side[k] == -1:
                    sb[k] *= 0.5
                side[k] = -1
            else:
                pb[k], sb[k] = p[j], sp[j]
                if side[k] == 1:
                    sa[k] *= 0.5
                side[k] = 1
    return 0.5 * (pa + pb)


def _pareto_ends(surface, fmap, cycles: list[np.ndarray], tol: float) -> tuple[np.ndarray, np.ndarray]:
    """All ends of Pareto arcs on the cycles and which gradient vanishes there (0 or 1)."""
    pa, pb = [], []
    for cyc in cycles:
        k_in, k_out = _sign_changes(_pareto_sign(surface, fmap, cyc))
        pa.append(cyc[k_in])
        pb.append(cyc[k_out])
    if not pa or sum(len(x) for x in pa) == 0:
        return np.empty((0, 3)), np.empty(0, dtype=int)
    ends = _locate_ends(surface, fmap, np.concatenate(pa), np.concatenate(pb), tol)
    t = _tangential(surface, fmap, ends)
    J = np.asarray(fmap.jacobian(ends), dtype=float)
    rel = np.linalg.norm(t, axis=2) / np.maximum(np.linalg.norm(J, axis=2), 1e-300)
    return ends, np.argmin(rel, axis=1)


def _pareto_runs(
    surface, fmap, cyc: np.ndarray, crit: np.ndarray, snap: float, tol: float
) -> list[np.ndarray]:
    """Maximal Pareto arcs of one Jacobi cycle; ends at critical points of f1 or f2.

    Each end is located on the curve and replaced by the critical point within ``snap``.
    """
    s = _pareto_sign(surface, fmap, cyc)
    inside = s <= 0
    if inside.all():
        return [np.concatenate([cyc, cyc[:1]])]  # closed; cut at cusps later
    if not inside.any():
        return []
    shift = int(np.nonzero(~inside)[0][0])
    cyc, inside = np.roll(cyc, -shift, 0), np.roll(inside, -shift)
    m = len(cyc)
    spans = []
    k = 0
    while k < m:
        if not inside[k]:
            k += 1
            continue
        j = k
        while j + 1 < m and inside[j + 1]:
            j += 1
        spans.append((k, j))
        k = j + 1
    pa = np.array([cyc[k] for k, j in spans] + [cyc[j] for k, j in spans])
    pb = np.array([cyc[k - 1] for k, j in spans] + [cyc[(j + 1) % m] for k, j in spans])
    ends = _locate_ends(surface, fmap, pa, pb, tol)
    if len(crit):
        dist = np.linalg.norm(ends[:, None, :] - crit[None, :, :], axis=2)
        near = np.argmin(dist, axis=1)
        close = dist[np.arange(len(ends)), near] <= snap
        ends[close] = crit[near[close]]
    n = len(spans)
    return [
        np.concatenate([ends[i][None], cyc[k : j + 1], ends[n + i][None]]) for i, (k, j) in enumerate(spans)
    ]


def _densify(surface, fmap, run: np.ndarray, tol: float, eps: float, rounds: int = 25) -> np.ndarray:
    """Insert curve points into segments whose image step is not monotone (dx dy > 0).

    Such a step hides a cusp (often next to a critical point); its 3-D chord midpoint is moved
    onto the Jacobi curve and the test repeated, halving the segment each round.
    """
    min_len = 1e-7 * surface.size
    cap = 4 * len(run) + 200
    stuck = np.zeros(len(run), dtype=bool)  # per segment (last entry unused)
    for _ in range(rounds):
        if len(run) > cap:
            break
        Y = np.asarray(fmap.values(run), dtype=float)
        d = np.diff(Y, axis=0)
        seg = np.linalg.norm(np.diff(run, axis=0), axis=1)
        bad = (d[:, 0] * d[:, 1] > 0) & (np.abs(d[:, 0]) > eps) & (np.abs(d[:, 1]) > eps)
        bad &= seg > min_len
        if not bad.any():
            break
        k = np.nonzero(bad & ~stuck[: len(bad)])[0]
        if k.size == 0:
            break
        chord_mid = 0.5 * (run[k] + run[k + 1])
        mids = _refine_on_jacobi(surface, fmap, chord_mid, tol)
        # accept a midpoint only if it stays local and Pareto; otherwise leave the step
        # (the final monotonicity guard splits there)
        ok = np.linalg.norm(mids - chord_mid, axis=1) <= 0.5 * seg[k]
        ok &= _pareto_sign(surface, fmap, mids) <= 1e-9
        stuck[k[~ok]] = True
        k, mids = k[ok], mids[ok]
        run = np.insert(run, k + 1, mids, axis=0)
        stuck = np.insert(stuck, k + 1, False)
    return run


def _refine_cusp(surface, fmap, P: np.ndarray, k: int, tol: float) -> np.ndarray:
    """Better cusp point near P[k]: extremum of x - y along the curve (parabola fit)."""
    a, b, c = P[k - 1], P[k], P[k + 1]
    ta, tc = -np.linalg.norm(b - a), np.linalg.norm(c - b)
    Y = np.asarray(fmap.values(np.stack([a, b, c])), dtype=float)
    psi = Y[:, 0] - Y[:, 1]
    # parabola through (ta, psi0), (0, psi1), (tc, psi2)
    A = np.array([[ta * ta, ta, 1.0], [0.0, 0.0, 1.0], [tc * tc, tc, 1.0]])
    try:
        q2, q1, _ = np.linalg.solve(A, psi)
    except np.linalg.LinAlgError:
        return b
    if q2 == 0:
        return b
    ts = -q1 / (2.0 * q2)
    if not (ta < ts < tc):
        return b
    # quadratic interpolation of the 3-D points at the same parameters
    la = ts * (ts - tc) / (ta * (ta - tc))
    lb = (ts - ta) * (ts - tc) / (ta * tc)
    lc = ts * (ts - ta) / (tc * (tc - ta))
    p = _refine_on_jacobi(surface, fmap, (la * a + lb * b + lc * c)[None], tol)[0]
    yp = np.asarray(fmap.values(p[None]), dtype=float)[0]
    sp = yp[0] - yp[1]
    better = sp >= psi[1] if q2 < 0 else sp <= psi[1]
    return p if better else b


def _cut_at_cusps(surface, fmap, run: np.ndarray, closed: bool, tol: float, eps: float) -> list[np.ndarray]:
    """Split a Pareto arc into pieces whose images are monotone (3-D point lists)."""
    run = _densify(surface, fmap, run, tol, eps)
    Y = np.asarray(fmap.values(run), dtype=float)
    keep = np.concatenate([[True], np.linalg.norm(np.diff(Y, axis=0), axis=1) > eps])
    run, Y = run[keep], Y[keep]
    if closed and len(run) > 2 and np.linalg.norm(Y[-1] - Y[0]) <= eps:
        run, Y = run[:-1], Y[:-1]
    if len(run) < 2:
        return []
    if closed:
        sig = np.sign(np.diff(np.concatenate([Y, Y[:1]]), axis=0) @ np.array([1.0, -1.0]))
        change = np.nonzero(sig != np.roll(sig, 1))[0]
        if change.size:
            r = int(change[0])
            run = np.roll(run, -r, axis=0)
        run = np.concatenate([run, run[:1]])
        Y = np.asarray(fmap.values(run), dtype=float)
    sig = np.sign(np.diff(Y, axis=0) @ np.array([1.0, -1.0]))
    cuts = [k for k in range(1, len(sig)) if sig[k] != sig[k - 1] and sig[k] != 0 and sig[k - 1] != 0]
    run = run.copy()
    for k in cuts:
        run[k] = _refine_cusp(surface, fmap, run, k, tol)
    bounds = [0, *cuts, len(run) - 1]
    return [run[bounds[i] : bounds[i + 1] + 1] for i in range(len(bounds) - 1) if bounds[i + 1] > bounds[i]]


def _monotone_parts(Y: np.ndarray, tol: float) -> tuple[list[np.ndarray], int]:
    """Split a polyline at steps that are not non-increasing (beyond ``tol``), dropping them.

    A guard against under-resolved geometry (a cusp or two branches inside one mesh cell);
    returns the parts with at least two points and the number of dropped steps.
    """
    d = np.diff(Y, axis=0)
    bad = np.nonzero((d[:, 0] < -tol) | (d[:, 1] > tol))[0]
    bounds = [-1, *bad.tolist(), len(Y) - 1]
    parts = [Y[bounds[i] + 1 : bounds[i + 1] + 1] for i in range(len(bounds) - 1)]
    return [p for p in parts if len(p) >= 2], int(bad.size)


def _chord_error(Y: np.ndarray) -> float:
    """Largest sagitta of the polyline's segments, from a three-point curvature estimate.

    The curvature at Y[k] is 2 d / (h1 h2), d the distance of Y[k] from the chord of its
    neighbours and h1, h2 the adjacent segment lengths; a segment of length h on a curve of
    curvature kappa deviates from it by kappa h^2 / 8.
    """
    if len(Y) < 3:
        return 0.0
    a, b, c = Y[:-2], Y[1:-1], Y[2:]
    ac = c - a
    cross = np.abs(ac[:, 0] * (b[:, 1] - a[:, 1]) - ac[:, 1] * (b[:, 0] - a[:, 0]))
    d = cross / np.maximum(np.linalg.norm(ac, axis=1), 1e-300)
    h1 = np.linalg.norm(b - a, axis=1)
    h2 = np.linalg.norm(c - b, axis=1)
    kappa = 2.0 * d / np.maximum(h1 * h2, 1e-300)
    return float((kappa * np.maximum(h1, h2) ** 2 / 8.0).max())


# ----------------------------------------------------------------------------- the grid
def smooth_grid(
    surface, fmap: SmoothMap, *, label: str = "f", resolution: int = 4000, tol: float = 1e-9, retries: int = 1
) -> Grid:
    """Extended Pareto grid of a smooth map on a smooth surface.

    Parameters
    ----------
    surface : Ellipsoid or Torus
        Anything with ``implicit``, ``gradient``, ``hessian``, ``project``, ``mesh``, ``size``
        and ``euler_characteristic``.
    fmap : object
        ``values(P) -> (n, 2)`` and ``jacobian(P) -> (n, 2, 3)``.
    label : str
        Contour id prefix: ``{label}:p{k}`` proper, ``{label}:v{k}`` vertical (critical points
        of f1), ``{label}:h{k}`` horizontal (critical points of f2).
    resolution : int
        Vertices of the mesh on which the Jacobi set is contoured and critical points seeded.
    tol : float
        Newton accuracy of curve points and critical points, relative to the surface size.
    retries : int
        If the Morse check fails (#min - #saddle + #max != chi for f1 or f2, i.e. critical
        points closer than the mesh spacing were missed) or non-monotone steps had to be
        dropped, recompute up to ``retries`` times at 4x the resolution and keep the first
        clean result (else the last one).

    Returns
    -------
    Grid
        ``route="smooth"``; ``tolerance`` estimates the position error of the polylines in
        value units (largest sagitta plus the Newton accuracy times the map's gradient size);
        ``meta`` holds the resolution, the critical points and a Morse check against chi.

    References
    ----------
    [CEF19] (grid), [EH04] (Jacobi sets), [Mil63] (Morse count), math.md sections 4 and 7.

    Examples
    --------
    >>> from specmap.shapes.surfaces import Torus
    >>> class XY:
    ...     def values(self, P): return P[:, :2]
    ...     def jacobian(self, P): return np.broadcast_to(np.eye(3)[:2], (len(P), 2, 3))
    >>> g = smooth_grid(Torus((2, 1)), XY(), resolution=2000)
    >>> len(g.by_kind("vertical")), len(g.by_kind("horizontal"))
    (4, 4)
    """
    res = int(resolution)
    grid = _smooth_grid_once(surface, fmap, label, res, tol)
    for _ in range(max(int(retries), 0)):
        if _clean(grid):
            break
        res *= 4
        grid = _smooth_grid_once(surface, fmap, label, res, tol)
    meta = {**grid.meta, "requested_resolution": int(resolution)}
    return Grid(grid.contours, grid.route, grid.tolerance, meta)


def _clean(grid: Grid) -> bool:
    ec = grid.meta["euler_check"]
    return bool(ec["f1"]["ok"] and ec["f2"]["ok"] and grid.meta["dropped_steps"] == 0)


def _smooth_grid_once(surface, fmap: SmoothMap, label: str, resolution: int, tol: float) -> Grid:
    """One pass of :func:`smooth_grid` at a fixed resolution."""
    V, T = surface.mesh(resolution)
    E, _ = _edges(T)
    spacing = _mesh_spacing(V, E)
    ctol = min(tol, 1e-10)
    cycles = jacobi_cycles(surface, fmap, V, T, tol)
    located, vanishing = _pareto_ends(surface, fmap, cycles, ctol)
    cps = []
    for i in (0, 1):
        found = _refine_seeds(surface, fmap, i, V[_seed_vertices(surface, fmap, i, V, E)], ctol, [])
        if len(located):
            found = _refine_seeds(surface, fmap, i, located[vanishing == i], ctol, found)
        cps.append(found)
    crit = np.array([c.point for c in cps[0] + cps[1]]).reshape(-1, 3)
    vals = np.asarray(fmap.values(V), dtype=float)
    vscale = float(max(np.ptp(vals[:, 0]), np.ptp(vals[:, 1]), 1e-300))
    eps = 1e-12 * vscale
    lip = float(np.linalg.norm(np.asarray(fmap.jacobian(V), dtype=float), axis=2).max())
    mono_tol = max(1e-7 * vscale, 10.0 * tol * surface.size * lip)
    n_dropped = 0
    pieces: list[np.ndarray] = []
    for cyc in cycles:
        for run in _pareto_runs(surface, fmap, cyc, crit, 1e-6 * surface.size, ctol):
            closed = bool(np.linalg.norm(run[0] - run[-1]) <= 1e-12 * surface.size and len(run) > 3)
            for piece in _cut_at_cusps(surface, fmap, run, closed, tol, eps):
                Y = np.asarray(fmap.values(piece), dtype=float)
                if Y[-1, 0] - Y[-1, 1] < Y[0, 0] - Y[0, 1]:
                    Y = Y[::-1]
                parts, dropped = _monotone_parts(Y, mono_tol)
                n_dropped += dropped
                pieces.extend(parts)
    pieces.sort(key=lambda Y: (Y[0, 0], Y[0, 1]))
    err = max([_chord_error(Y) for Y in pieces] + [tol * surface.size * lip, 1e-15 * vscale])
    contours: list[Contour] = [Contour(f"{label}:p{k}", "proper", Y) for k, Y in enumerate(pieces)]
    contours += [Contour(f"{label}:v{k}", "vertical", c.value) for k, c in enumerate(cps[0])]
    contours += [Contour(f"{label}:h{k}", "horizontal", c.value) for k, c in enumerate(cps[1])]
    chi = int(surface.euler_characteristic)
    meta = {
        "resolution": int(resolution),
        "mesh_vertices": int(len(V)),
        "mesh_spacing": spacing,
        "critical_points": {"f1": [c.to_json() for c in cps[0]], "f2": [c.to_json() for c in cps[1]]},
        "euler_check": {"f1": _euler_check(cps[0], chi), "f2": _euler_check(cps[1], chi)},
        "dropped_steps": n_dropped,
    }
    grid = Grid(tuple(contours), route="smooth", tolerance=err, meta=meta)
    return validate_grid(grid, tol=mono_tol)
