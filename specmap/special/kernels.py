"""Compiled inner loops of the special-set atlas (numba).

The atlas spends its time in three loops whose work grows with the output
(the number of lattice edges that tie curves cross): evaluating contours at
single lines, refining crossings, and scanning each lattice edge for order
swaps. They run here, compiled, over a flat array form of the contours
(:class:`FlatContours`); every formula is the one of
:mod:`specmap.special.evaluate` and :func:`specmap.strip.line_parameter`.

Functions are compiled on first use and cached on disk next to this module
(``cache=True``); ``nogil=True`` lets callers split work over threads.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
.. [OT20] Oliveira, Takahashi, "An enhancement of the bisection method average
   performance preserving minmax optimality", ACM Trans. Math. Softw. 47 (2020).
   The ITP root-finding method used by :func:`refine_edges`.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numba
import numpy as np

from specmap.grids.model import Contour

#: contour kinds in the flat form
VERTICAL, HORIZONTAL, PROPER = 0, 1, 2
_KIND = {"vertical": VERTICAL, "horizontal": HORIZONTAL, "proper": PROPER}


@dataclass(frozen=True, eq=False)
class FlatContours:
    """Contours as two plain arrays (what the compiled loops read).

    Two arrays rather than one per field: every array passed to a compiled
    function costs reference counting on each call, which dominated the
    evaluation of a contour at a line.

    Attributes
    ----------
    meta : ndarray of int64 (C, 3)
        Kind (:data:`VERTICAL`, :data:`HORIZONTAL`, :data:`PROPER`), first row
        in ``geo`` and number of vertices of each contour.
    geo : ndarray (V + 2 C, 2)
        All vertices (x, y), then for contour c the second points of its two
        prolongations (rows ``V + 2c``: beyond the first vertex, through vertex
        1; ``V + 2c + 1``: beyond the last, through vertex n - 2), replaced by
        a point of slope -1 from the end when the contour is a single point or
        the two vertices are numerically equal (``np.allclose``), as in
        :func:`specmap.special.evaluate._through`.
    """

    meta: np.ndarray
    geo: np.ndarray

    @staticmethod
    def of(contours: Sequence[Contour]) -> FlatContours:
        C = len(contours)
        pts = [np.asarray(c.points, float).reshape(-1, 2) for c in contours]
        count = np.array([len(p) for p in pts], dtype=np.int64)
        start = (np.cumsum(count) - count).astype(np.int64)
        V = int(count.sum())
        ext = np.zeros((2 * C, 2))
        for i, p in enumerate(pts):
            for side, (end, nxt) in enumerate(((0, 1), (-1, -2))):
                q = p[nxt] if len(p) > 1 else None
                if q is None or np.allclose(p[end], q):
                    q = p[end] + np.array([1.0, -1.0])
                ext[2 * i + side] = q
        meta = np.stack([np.array([_KIND[c.kind] for c in contours], dtype=np.int64), start, count], axis=1) \
            if C else np.zeros((0, 3), np.int64)
        geo = np.ascontiguousarray(np.vstack(pts + [ext])) if C else np.zeros((0, 2))
        assert geo.shape[0] == V + 2 * C
        return FlatContours(np.ascontiguousarray(meta), geo)

    @property
    def args(self) -> tuple[np.ndarray, np.ndarray]:
        return self.meta, self.geo


#: threads used by :func:`in_chunks` (the compiled loops release the GIL)
THREADS = 2


def in_chunks(fn: Callable[[slice], np.ndarray], n: int, threads: int = THREADS,
              min_chunk: int = 20_000) -> np.ndarray:
    """``fn`` over ``threads`` contiguous slices of ``range(n)``, results concatenated (row order kept)."""
    k = max(1, min(threads, n // min_chunk))
    if k == 1:
        return fn(slice(0, n))
    bounds = np.linspace(0, n, k + 1).astype(int)
    with ThreadPoolExecutor(k) as pool:
        parts = list(pool.map(fn, [slice(int(bounds[i]), int(bounds[i + 1])) for i in range(k)]))
    return np.concatenate(parts)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def ext_param(meta, geo, c, a, b):
    """Extended line parameter s̄ and ``met`` of contour ``c`` at the line (a, b).

    Scalar version of :func:`specmap.special.evaluate.extended_parameter`
    (same formulas; binary search on the vertex index for any length).
    G(x, y) = (1-a)(x-b) - a(y+b) is zero on r(a, b) and non-decreasing along
    a non-increasing polyline.
    """
    kd = meta[c, 0]
    k0 = meta[c, 1]
    if kd == VERTICAL:
        s = (geo[k0, 0] - b) / a
        return s, (1.0 - a) * s - b >= geo[k0, 1]
    if kd == HORIZONTAL:
        s = (geo[k0, 1] + b) / (1.0 - a)
        return s, a * s + b >= geo[k0, 0]
    n = meta[c, 2]
    oma = 1.0 - a
    den = a * a + oma * oma
    g_first = oma * (geo[k0, 0] - b) - a * (geo[k0, 1] + b)
    g_last = oma * (geo[k0 + n - 1, 0] - b) - a * (geo[k0 + n - 1, 1] + b)
    if g_first <= 0.0 and g_last >= 0.0:
        if n == 1:
            return (a * (geo[k0, 0] - b) + oma * (geo[k0, 1] + b)) / den, True
        # count of vertices with G <= 0
        lo = 0
        hi = n
        while lo < hi:
            mid = (lo + hi) // 2
            if oma * (geo[k0 + mid, 0] - b) - a * (geo[k0 + mid, 1] + b) > 0.0:
                hi = mid
            else:
                lo = mid + 1
        k = k0 + min(max(lo - 1, 0), n - 2)
        g0 = oma * (geo[k, 0] - b) - a * (geo[k, 1] + b)
        g1 = oma * (geo[k + 1, 0] - b) - a * (geo[k + 1, 1] + b)
        d = g1 - g0
        t = -g0 / d if d > 0.0 else 0.0
        t = min(max(t, 0.0), 1.0)
        px = geo[k, 0] + t * (geo[k + 1, 0] - geo[k, 0])
        py = geo[k, 1] + t * (geo[k + 1, 1] - geo[k, 1])
        return (a * (px - b) + oma * (py + b)) / den, True
    # prolongation: through the first end where the line passes above it, else the last
    n_c = meta.shape[0]
    v_all = geo.shape[0] - 2 * n_c
    if g_first > 0.0:
        px = geo[k0, 0]
        py = geo[k0, 1]
        q = v_all + 2 * c
    else:
        px = geo[k0 + n - 1, 0]
        py = geo[k0 + n - 1, 1]
        q = v_all + 2 * c + 1
    qx = geo[q, 0]
    qy = geo[q, 1]
    gp = oma * (px - b) - a * (py + b)
    gq = oma * (qx - b) - a * (qy + b)
    t = -gp / (gq - gp)
    return px + py + t * ((qx - px) + (qy - py)), False


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _residual(meta, geo, c0, c1, c2, c3, factor, a, b):
    """(R, tied value, all met) of one tie at one line; R in push units."""
    s0, m0 = ext_param(meta, geo, c0, a, b)
    s1, m1 = ext_param(meta, geo, c1, a, b)
    s2, m2 = ext_param(meta, geo, c2, a, b)
    s3, m3 = ext_param(meta, geo, c3, a, b)
    m = min(a, 1.0 - a)
    dp = abs(s0 - s1) * m
    dq = abs(s2 - s3) * m * factor
    return dp - dq, min(dp, dq / factor), m0 and m1 and m2 and m3


@numba.njit(cache=True, nogil=True, error_model="numpy")
def slot_residuals(meta, geo, slots, factor, a, b):
    """Residual R, tied value and ``all met`` of ties ``slots`` (K, 4) at lines (a[k], b[k])."""
    K = slots.shape[0]
    r = np.empty(K)
    val = np.empty(K)
    met = np.empty(K, dtype=np.bool_)
    for k in range(K):
        r[k], val[k], met[k] = _residual(meta, geo, slots[k, 0], slots[k, 1],
                                         slots[k, 2], slots[k, 3], factor[k], a[k], b[k])
    return r, val, met


@numba.njit(cache=True, nogil=True, error_model="numpy")
def slot_params(meta, geo, slots, a, b):
    """s̄ and met of every slot contour: arrays (K, m) at lines (a[k], b[k])."""
    K, M = slots.shape
    s = np.empty((K, M))
    met = np.empty((K, M), dtype=np.bool_)
    for k in range(K):
        for j in range(M):
            s[k, j], met[k, j] = ext_param(meta, geo, slots[k, j], a[k], b[k])
    return s, met


@numba.njit(cache=True, nogil=True, error_model="numpy")
def refine_edges(meta, geo, slots, factor, a0, b0, a1, b1, snap, eps):
    """Zero of R + snap on each segment (a0, b0)-(a1, b1), to a bracket below ``2 eps`` in t ∈ [0, 1].

    The sign convention is the detection's: a side is ``R >= -snap``. Each
    root is bracketed by the segment's ends and found by the ITP method
    [OT20]: never more evaluations than bisection (plus one), superlinear on
    the smooth pieces of R (parameters kappa1 = 0.01, kappa2 = 2, n0 = 1). Returns the midpoints of the final brackets (K, 2).
    When both ends are on the same side (no bracket), the end point is returned.
    """
    K = slots.shape[0]
    out = np.empty((K, 2))
    n_half = int(np.ceil(np.log2(1.0 / (2.0 * eps)))) if eps < 0.5 else 0
    n_max = n_half + 1
    for k in range(K):
        c0, c1, c2, c3, fk = slots[k, 0], slots[k, 1], slots[k, 2], slots[k, 3], factor[k]
        da = a1[k] - a0[k]
        db = b1[k] - b0[k]
        ya = _residual(meta, geo, c0, c1, c2, c3, fk, a0[k], b0[k])[0] + snap
        yb = _residual(meta, geo, c0, c1, c2, c3, fk, a1[k], b1[k])[0] + snap
        sa = ya >= 0.0
        if sa == (yb >= 0.0):
            out[k, 0] = a1[k]
            out[k, 1] = b1[k]
            continue
        lo = 0.0
        hi = 1.0
        j = 0
        while hi - lo > 2.0 * eps and j < n_max + 2:
            half = 0.5 * (lo + hi)
            r = eps * 2.0 ** (n_max - j) - 0.5 * (hi - lo)
            delta = 0.01 * (hi - lo) * (hi - lo)
            xf = (yb * lo - ya * hi) / (yb - ya) if yb != ya else half
            sig = 1.0 if half - xf >= 0.0 else -1.0
            xt = xf + sig * delta if delta <= abs(half - xf) else half
            x = xt if abs(xt - half) <= r else half - sig * r
            if not (x > lo and x < hi):
                x = half
            y = _residual(meta, geo, c0, c1, c2, c3, fk,
                          a0[k] + x * da, b0[k] + x * db)[0] + snap
            if (y >= 0.0) == sa:
                lo = x
                ya = y
            else:
                hi = x
                yb = y
            j += 1
        # guard: finish by bisection if the ITP budget ran out (cannot happen in exact arithmetic)
        while hi - lo > 2.0 * eps:
            x = 0.5 * (lo + hi)
            y = _residual(meta, geo, c0, c1, c2, c3, fk,
                          a0[k] + x * da, b0[k] + x * db)[0] + snap
            if (y >= 0.0) == sa:
                lo = x
            else:
                hi = x
        t = 0.5 * (lo + hi)
        out[k, 0] = a0[k] + t * da
        out[k, 1] = b0[k] + t * db
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def edge_endpoints(edges, av, bv):
    """(a0, b0, a1, b1) of lattice edges (:class:`specmap.special.lattice.Lattice` numbering)."""
    n_a = av.size
    n_h = bv.size * (n_a - 1)
    K = edges.size
    a0 = np.empty(K)
    b0 = np.empty(K)
    a1 = np.empty(K)
    b1 = np.empty(K)
    for k in range(K):
        e = edges[k]
        if e < n_h:
            j = e // (n_a - 1)
            i = e - j * (n_a - 1)
            a0[k], b0[k], a1[k], b1[k] = av[i], bv[j], av[i + 1], bv[j]
        else:
            j = (e - n_h) // n_a
            i = (e - n_h) - j * n_a
            a0[k], b0[k], a1[k], b1[k] = av[i], bv[j], av[i], bv[j + 1]
    return a0, b0, a1, b1


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _grow(buf, n):
    if n < buf.size:
        return buf
    out = np.empty(2 * buf.size + 16, dtype=buf.dtype)
    out[:buf.size] = buf
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _tie_met(met, c0, c1, c2, c3, cj, ci):
    """All four contours met at one corner of cell (cj, ci)."""
    for dj in range(2):
        for di in range(2):
            j = cj + dj
            i = ci + di
            if met[c0, j, i] and met[c1, j, i] and met[c2, j, i] and met[c3, j, i]:
                return True
    return False


@numba.njit(cache=True, nogil=True, error_model="numpy")
def sweep_rows(s, met, cell_pair, first, second, cross, roles, mcol, j_start, j_stop, snap, tol):
    """Order swaps of pair differences on the lattice edges of node rows ``j_start`` to ``j_stop - 1``.

    Row j holds the horizontal edges (j, i)-(j, i+1) and the vertical edges
    (j, i)-(j+1, i). Items are the pair differences |c_P| and their doubles
    2|c_Q| (push units) present on an edge (pair met at a corner of a cell
    beside it). Items are sorted by the lower end of their value interval on
    the edge; each item is compared with the following ones while the
    intervals overlap (within ``snap``), so the work is the number of
    overlapping item pairs, not the number of ties. A crossing is an allowed
    tie whose two items change order (sign convention ``>= -snap``, not both
    ends within ``tol``) and that is met at a corner of a cell beside the edge.

    Returns
    -------
    codes, edges : ndarray of int64
        Tie codes ``(cond * n + P) * n + Q`` and edge ids (:class:`Lattice` numbering).
    n_candidates : int
        Overlapping item pairs examined.
    """
    n_p = first.size
    nb = s.shape[1]
    na = s.shape[2]
    n_h = nb * (na - 1)
    codes = np.empty(1024, dtype=np.int64)
    edges = np.empty(1024, dtype=np.int64)
    n_out = 0
    n_cand = 0
    M = 2 * n_p
    lo = np.empty(M)
    hi = np.empty(M)
    v0 = np.empty(M)
    v1 = np.empty(M)
    ip = np.empty(M, dtype=np.int64)
    fac = np.empty(M, dtype=np.int64)
    cells = np.empty((2, 2), dtype=np.int64)
    for j in range(j_start, j_stop):
        n_edges_row = (na - 1) + (na if j < nb - 1 else 0)
        for e in range(n_edges_row):
            if e < na - 1:  # horizontal edge (j, e)-(j, e+1)
                ja, ia, jb, ib = j, e, j, e + 1
                eid = j * (na - 1) + e
                cells[0, 0], cells[0, 1] = j - 1, e
                cells[1, 0], cells[1, 1] = j, e
                if j == 0:
                    cells[0, 0] = -1
                if j == nb - 1:
                    cells[1, 0] = -1
            else:  # vertical edge (j, i)-(j+1, i)
                i = e - (na - 1)
                ja, ia, jb, ib = j, i, j + 1, i
                eid = n_h + j * na + i
                cells[0, 0], cells[0, 1] = j, i - 1
                cells[1, 0], cells[1, 1] = j, i
                if i == 0:
                    cells[0, 0] = -1
                if i == na - 1:
                    cells[1, 0] = -1
            ma = mcol[ia]
            mb = mcol[ib]
            m = 0
            for p in range(n_p):
                pres = False
                for side in range(2):
                    cj = cells[side, 0]
                    if cj >= 0 and cell_pair[p, cj, cells[side, 1]]:
                        pres = True
                if not pres:
                    continue
                x0 = abs(s[first[p], ja, ia] - s[second[p], ja, ia]) * ma
                x1 = abs(s[first[p], jb, ib] - s[second[p], jb, ib]) * mb
                v0[m] = x0
                v1[m] = x1
                ip[m] = p
                fac[m] = 1
                m += 1
                if (not roles) or cross[p]:
                    v0[m] = 2.0 * x0
                    v1[m] = 2.0 * x1
                    ip[m] = p
                    fac[m] = 2
                    m += 1
            for q in range(m):
                lo[q] = min(v0[q], v1[q])
                hi[q] = max(v0[q], v1[q])
            order = np.argsort(lo[:m], kind="mergesort")
            for iu in range(m):
                u = order[iu]
                lim = hi[u] + snap + 1e-12 * hi[u]
                for iv in range(iu + 1, m):
                    v = order[iv]
                    if lo[v] > lim:
                        break
                    n_cand += 1
                    fu = fac[u]
                    fv = fac[v]
                    if fu == 2 and fv == 2:
                        continue
                    # equal: P is the smaller pair index; half: P is the plain (undoubled) item
                    cond = 0 if fu == fv else 1
                    if (ip[u] < ip[v]) if cond == 0 else (fu == 1):
                        big, small = u, v
                    else:
                        big, small = v, u
                    P = ip[big]
                    Q = ip[small]
                    if P == Q:
                        continue
                    if roles and ((cross[P] != cross[Q]) if cond == 0 else (cross[P] or not cross[Q])):
                        continue
                    f0 = v0[big] - v0[small]
                    f1 = v1[big] - v1[small]
                    if (f0 >= -snap) == (f1 >= -snap):
                        continue
                    if max(abs(f0), abs(f1)) <= tol:
                        continue
                    c0, c1, c2, c3 = first[P], second[P], first[Q], second[Q]
                    ok = False
                    for side in range(2):
                        cj = cells[side, 0]
                        if cj >= 0 and _tie_met(met, c0, c1, c2, c3, cj, cells[side, 1]):
                            ok = True
                    if not ok:
                        continue
                    codes = _grow(codes, n_out)
                    edges = _grow(edges, n_out)
                    codes[n_out] = (cond * n_p + P) * n_p + Q
                    edges[n_out] = eid
                    n_out += 1
    return codes[:n_out].copy(), edges[:n_out].copy(), n_cand


@numba.njit(cache=True, nogil=True, error_model="numpy")
def neighbours(n, segs):
    """Degree and the first two neighbours (-1 = none) of each of ``n`` vertices.

    Half-edges are taken in the order u->v, v->u of each segment in turn;
    loops (u == v) are ignored.
    """
    deg = np.zeros(n, dtype=np.int64)
    nbr = np.full((n, 2), -1, dtype=np.int64)
    for k in range(segs.shape[0]):
        u = segs[k, 0]
        v = segs[k, 1]
        if u == v:
            continue
        if deg[u] < 2:
            nbr[u, deg[u]] = v
        deg[u] += 1
        if deg[v] < 2:
            nbr[v, deg[v]] = u
        deg[v] += 1
    return nbr, deg


@numba.njit(cache=True, nogil=True, error_model="numpy")
def chain_walk(nbr, deg):
    """Walk a graph of maximum degree 2 (neighbours ``nbr`` (n, 2), -1 = none) into paths.

    Paths start at degree-1 vertices, then at unseen vertices of degree >= 2
    (loops), then isolated vertices; order as :func:`specmap.special.trace.chain`.

    Returns
    -------
    flat : ndarray of int64 (n,)
        Vertices path after path.
    length : ndarray of int64 (paths,)
    closed : ndarray of bool (paths,)
        Whether the path closes into a loop (last vertex joined to the first).
    """
    n = deg.size
    seen = np.zeros(n, dtype=np.bool_)
    flat = np.empty(n, dtype=np.int64)
    length = np.empty(n, dtype=np.int64)
    closed = np.zeros(n, dtype=np.bool_)
    pos = 0
    n_paths = 0
    for stage in range(3):
        for v in range(n):
            d = deg[v]
            if stage == 0 and d != 1 or stage == 1 and d < 2 or stage == 2 and d != 0:
                continue
            if seen[v] and stage < 2:
                continue
            if stage == 2:
                flat[pos] = v
                pos += 1
                length[n_paths] = 1
                n_paths += 1
                continue
            start = v
            begin = pos
            seen[start] = True
            flat[pos] = start
            pos += 1
            prev = -1
            cur = start
            while True:
                nxt = -1
                for r in range(2):
                    w = nbr[cur, r]
                    if w >= 0 and w != prev and not seen[w]:
                        nxt = w
                        break
                if nxt < 0:
                    ln = pos - begin
                    closed[n_paths] = ln > 2 and (nbr[cur, 0] == start or nbr[cur, 1] == start) and prev != start
                    break
                seen[nxt] = True
                flat[pos] = nxt
                pos += 1
                prev = cur
                cur = nxt
            length[n_paths] = pos - begin
            n_paths += 1
    return flat[:pos].copy(), length[:n_paths].copy(), closed[:n_paths].copy()


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _find(parent, x):
    while parent[x] != x:
        parent[x] = parent[parent[x]]
        x = parent[x]
    return x


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _union(parent, x, y):
    rx = _find(parent, x)
    ry = _find(parent, y)
    if rx != ry:
        if rx < ry:
            parent[ry] = rx
        else:
            parent[rx] = ry


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _perimeter(x, y, a0, a1, b0, b1, eps):
    """Position in [0, 4) of (x, y) along the boundary of cell [a0, a1] x [b0, b1] and ``on``."""
    wa = a1 - a0
    wb = b1 - b0
    d0 = abs(y - b0)
    d1 = abs(x - a1)
    d2 = abs(y - b1)
    d3 = abs(x - a0)
    side = 0
    dm = d0
    if d1 < dm:
        side, dm = 1, d1
    if d2 < dm:
        side, dm = 2, d2
    if d3 < dm:
        side, dm = 3, d3
    on = dm <= 1e-9 * min(wa, wb) and a0 - eps <= x <= a1 + eps and b0 - eps <= y <= b1 + eps
    fa = min(max((x - a0) / wa, 0.0), 1.0)
    fb = min(max((y - b0) / wb, 0.0), 1.0)
    if side == 0:
        t = fa
    elif side == 1:
        t = 1.0 + fb
    elif side == 2:
        t = 3.0 - fa
    else:
        t = 4.0 - fb
    return t, on


@numba.njit(cache=True, nogil=True, error_model="numpy")
def lattice_labels(p, q, owner, n_lines, av, bv, eps, vkey, vorder):
    """Components of lines linked by shared vertices and by crossing chords of lattice cells.

    ``p``, ``q`` (S, 2): segments, ``owner`` their line; ``vkey`` integer keys
    of the 2S end points (p then q, rounded to ``eps``) and ``vorder`` their
    sort order. A segment whose two ends lie on the boundary of the lattice
    cell holding its midpoint is a *chord*; two chords of a cell cross exactly
    when their end points interleave along the perimeter. One scan of each
    cell's sorted end points with a stack of merged groups (a chord that
    closes crosses every chord opened after it and still open) gives the
    components of the crossing graph in O(k log k) for k chords instead of
    O(k^2) pair tests. Union-find on lines.

    Other segments (an end inside its cell, where a tie's domain ends) are
    tested exactly (cross, or closer than ``eps``) against the chords and such
    segments of every cell their box touches; pairs already in one component
    are skipped, so a line stops being tested once it is joined.

    Returns
    -------
    label : ndarray of int64 (n_lines,)
        Smallest line index of each line's component.
    cell : ndarray of int64 (S,)
        Lattice cell of each segment (by its midpoint).
    chord : ndarray of bool (S,)
    """
    S = p.shape[0]
    parent = np.arange(n_lines)
    for i in range(1, 2 * S):
        u = vorder[i]
        v = vorder[i - 1]
        if vkey[u] == vkey[v]:
            _union(parent, owner[u % S], owner[v % S])
    cell, chord, t0, t1 = _cells_and_perimeter(p, q, av, bv, eps)
    cnt, by_cell = _chord_unions(parent, owner, cell, chord, t0, t1, (av.size - 1) * (bv.size - 1))
    _extra_unions(parent, p, q, owner, chord, cnt, by_cell, av, bv, eps, n_lines)
    label = np.empty(n_lines, dtype=np.int64)
    for i in range(n_lines):
        label[i] = _find(parent, i)
    return label, cell, chord


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _cells_and_perimeter(p, q, av, bv, eps):
    """Cell of each segment (by its midpoint), whether it is a chord, and its ends' perimeter positions."""
    S = p.shape[0]
    na1 = av.size - 1
    nb1 = bv.size - 1
    cell = np.empty(S, dtype=np.int64)
    chord = np.zeros(S, dtype=np.bool_)
    t0 = np.empty(S)
    t1 = np.empty(S)
    for s in range(S):
        mx = 0.5 * (p[s, 0] + q[s, 0])
        my = 0.5 * (p[s, 1] + q[s, 1])
        ci = min(max(np.searchsorted(av, mx, side="right") - 1, 0), na1 - 1)
        cj = min(max(np.searchsorted(bv, my, side="right") - 1, 0), nb1 - 1)
        cell[s] = cj * na1 + ci
        tp, onp = _perimeter(p[s, 0], p[s, 1], av[ci], av[ci + 1], bv[cj], bv[cj + 1], eps)
        tq, onq = _perimeter(q[s, 0], q[s, 1], av[ci], av[ci + 1], bv[cj], bv[cj + 1], eps)
        chord[s] = onp and onq
        t0[s] = min(tp, tq)
        t1[s] = max(tp, tq)
    return cell, chord, t0, t1


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _chord_unions(parent, owner, cell, chord, t0, t1, n_cells):
    """Join the lines of crossing chords, cell by cell (perimeter scan); returns the chords by cell."""
    S = cell.size
    # chords grouped by cell (counting sort)
    cnt = np.zeros(n_cells + 1, dtype=np.int64)
    for s in range(S):
        if chord[s]:
            cnt[cell[s] + 1] += 1
    for c in range(n_cells):
        cnt[c + 1] += cnt[c]
    fill = cnt[:-1].copy()
    by_cell = np.empty(cnt[-1], dtype=np.int64)
    for s in range(S):
        if chord[s]:
            by_cell[fill[cell[s]]] = s
            fill[cell[s]] += 1
    kmax = 0
    for c in range(n_cells):
        kmax = max(kmax, cnt[c + 1] - cnt[c])
    ev_t = np.empty(2 * kmax)
    ev_ch = np.empty(2 * kmax, dtype=np.int64)
    ev_open = np.empty(2 * kmax, dtype=np.bool_)
    group = np.empty(kmax, dtype=np.int64)
    gpar = np.empty(kmax, dtype=np.int64)
    gch = np.empty(kmax, dtype=np.int64)
    gcount = np.empty(kmax, dtype=np.int64)
    gpos = np.empty(kmax, dtype=np.int64)
    stack = np.empty(kmax, dtype=np.int64)
    for c in range(n_cells):
        lo = cnt[c]
        k = cnt[c + 1] - lo
        if k < 2:
            continue
        # opens before closes, so that a stable sort by t puts opens first at equal t
        for i in range(k):
            s = by_cell[lo + i]
            ev_t[i] = t0[s]
            ev_ch[i] = i
            ev_open[i] = True
            ev_t[k + i] = t1[s]
            ev_ch[k + i] = i
            ev_open[k + i] = False
        order = np.argsort(ev_t[:2 * k], kind="mergesort")
        n_g = 0
        top = 0
        for e in range(2 * k):
            ei = order[e]
            ch = ev_ch[ei]
            if ev_open[ei]:
                g = n_g
                n_g += 1
                gpar[g] = g
                gch[g] = ch
                gcount[g] = 1
                gpos[g] = top
                stack[top] = g
                top += 1
                group[ch] = g
                continue
            g = group[ch]
            while gpar[g] != g:
                gpar[g] = gpar[gpar[g]]
                g = gpar[g]
            pg = gpos[g]
            if pg + 1 < top:
                # g's chord closes: it crosses every chord opened after it and still open
                for t in range(pg + 1, top):
                    h = stack[t]
                    gpar[h] = g
                    gcount[g] += gcount[h]
                top = pg + 1
            gcount[g] -= 1
            if gcount[g] == 0:
                top -= 1
        # every chord now knows its group root; lines of one group are one component
        for i in range(k):
            g = group[i]
            while gpar[g] != g:
                g = gpar[g]
            _union(parent, owner[by_cell[lo + i]], owner[by_cell[lo + gch[g]]])
    return cnt, by_cell


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _extra_unions(parent, p, q, owner, chord, cnt, by_cell, av, bv, eps, n_lines):
    """Join lines through segments that end inside a cell, by exact tests (see :func:`lattice_labels`)."""
    na1 = av.size - 1
    nb1 = bv.size - 1
    n_cells = na1 * nb1
    # other segments (an end inside a cell: domain boundary points): exact tests against the
    # chords and other such segments of every cell their box touches. Each cell's list is sorted
    # into groups by component (as after the chord scan); a group already joined to the tested
    # segment is skipped at once, and a group is left at its first contact.
    extra = np.nonzero(~chord)[0]
    n_x = extra.size
    xi0 = np.empty(n_x, dtype=np.int64)
    xi1 = np.empty(n_x, dtype=np.int64)
    xj0 = np.empty(n_x, dtype=np.int64)
    xj1 = np.empty(n_x, dtype=np.int64)
    for r in range(n_x):
        s = extra[r]
        xi0[r] = min(max(np.searchsorted(av, min(p[s, 0], q[s, 0]) - eps, side="right") - 1, 0), na1 - 1)
        xi1[r] = min(max(np.searchsorted(av, max(p[s, 0], q[s, 0]) + eps, side="right") - 1, 0), na1 - 1)
        xj0[r] = min(max(np.searchsorted(bv, min(p[s, 1], q[s, 1]) - eps, side="right") - 1, 0), nb1 - 1)
        xj1[r] = min(max(np.searchsorted(bv, max(p[s, 1], q[s, 1]) + eps, side="right") - 1, 0), nb1 - 1)
    if n_x == 0:
        return
    acnt = np.zeros(n_cells + 1, dtype=np.int64)
    for c in range(n_cells):
        acnt[c + 1] = cnt[c + 1] - cnt[c]
    for r in range(n_x):
        for cj in range(xj0[r], xj1[r] + 1):
            for ci in range(xi0[r], xi1[r] + 1):
                acnt[cj * na1 + ci + 1] += 1
    for c in range(n_cells):
        acnt[c + 1] += acnt[c]
    afill = acnt[:-1].copy()
    a_seg = np.empty(acnt[-1], dtype=np.int64)
    for c in range(n_cells):
        for t in range(cnt[c], cnt[c + 1]):
            a_seg[afill[c]] = by_cell[t]
            afill[c] += 1
    for r in range(n_x):
        for cj in range(xj0[r], xj1[r] + 1):
            for ci in range(xi0[r], xi1[r] + 1):
                c = cj * na1 + ci
                a_seg[afill[c]] = extra[r]
                afill[c] += 1
    snap_lab = np.empty(n_lines, dtype=np.int64)
    for i in range(n_lines):
        snap_lab[i] = _find(parent, i)
    a_lab = np.empty(a_seg.size, dtype=np.int64)
    g_end = np.empty(a_seg.size, dtype=np.int64)  # end of the run of equal labels at each position
    for c in range(n_cells):
        lo = acnt[c]
        hi = acnt[c + 1]
        if hi - lo < 1:
            continue
        keys = np.empty(hi - lo, dtype=np.int64)
        for t in range(lo, hi):
            keys[t - lo] = snap_lab[owner[a_seg[t]]]
        order = np.argsort(keys, kind="mergesort")
        segs = a_seg[lo:hi].copy()
        for t in range(hi - lo):
            a_seg[lo + t] = segs[order[t]]
            a_lab[lo + t] = keys[order[t]]
        end = hi
        for t in range(hi - 1, lo - 1, -1):
            if t < hi - 1 and a_lab[t] != a_lab[t + 1]:
                end = t + 1
            g_end[t] = end
    for r in range(n_x):
        s = extra[r]
        sx0 = min(p[s, 0], q[s, 0]) - 2 * eps
        sx1 = max(p[s, 0], q[s, 0]) + 2 * eps
        sy0 = min(p[s, 1], q[s, 1]) - 2 * eps
        sy1 = max(p[s, 1], q[s, 1]) + 2 * eps
        for cj in range(xj0[r], xj1[r] + 1):
            for ci in range(xi0[r], xi1[r] + 1):
                c = cj * na1 + ci
                t = acnt[c]
                hi = acnt[c + 1]
                while t < hi:
                    t2 = g_end[t]
                    # a whole group already in this segment's component: skip it at once
                    if _find(parent, a_lab[t]) != _find(parent, owner[s]):
                        for u in range(t, t2):
                            o = a_seg[u]
                            if (min(p[o, 0], q[o, 0]) > sx1 or max(p[o, 0], q[o, 0]) < sx0
                                    or min(p[o, 1], q[o, 1]) > sy1 or max(p[o, 1], q[o, 1]) < sy0):
                                continue
                            if _segments_close(p[s, 0], p[s, 1], q[s, 0], q[s, 1],
                                               p[o, 0], p[o, 1], q[o, 0], q[o, 1], eps):
                                _union(parent, owner[s], owner[o])
                                break  # the rest of the group is now joined too
                    t = t2


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _point_segment_distance(x, y, px, py, qx, qy):
    dx = qx - px
    dy = qy - py
    L = dx * dx + dy * dy
    t = ((x - px) * dx + (y - py) * dy) / L if L > 0.0 else 0.0
    t = min(max(t, 0.0), 1.0)
    return np.hypot(x - px - t * dx, y - py - t * dy)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _segments_close(p1x, p1y, q1x, q1y, p2x, p2y, q2x, q2y, eps):
    """Segments p1q1 and p2q2 cross or come within ``eps`` (boxes first)."""
    if (min(p1x, q1x) > max(p2x, q2x) + 2 * eps or min(p2x, q2x) > max(p1x, q1x) + 2 * eps
            or min(p1y, q1y) > max(p2y, q2y) + 2 * eps or min(p2y, q2y) > max(p1y, q1y) + 2 * eps):
        return False
    o1 = (q1x - p1x) * (p2y - p1y) - (q1y - p1y) * (p2x - p1x)
    o2 = (q1x - p1x) * (q2y - p1y) - (q1y - p1y) * (q2x - p1x)
    o3 = (q2x - p2x) * (p1y - p2y) - (q2y - p2y) * (p1x - p2x)
    o4 = (q2x - p2x) * (q1y - p2y) - (q2y - p2y) * (q1x - p2x)
    if o1 * o2 < 0 and o3 * o4 < 0:
        return True
    d = min(_point_segment_distance(p2x, p2y, p1x, p1y, q1x, q1y),
            _point_segment_distance(q2x, q2y, p1x, p1y, q1x, q1y),
            _point_segment_distance(p1x, p1y, p2x, p2y, q2x, q2y),
            _point_segment_distance(q1x, q1y, p2x, p2y, q2x, q2y))
    return d <= eps


@numba.njit(cache=True, nogil=True, error_model="numpy")
def tie_cells_met(met, slots, edges, n_a, n_b):
    """For each (tie, edge): whether each of the two cells beside the edge sees the tie met.

    A cell sees a tie when its four contours are met at one of the cell's
    corners. ``met`` (C, n_b, n_a); ``slots`` (K, 4); ``edges`` (K,) in
    :class:`specmap.special.lattice.Lattice` numbering. Returns bool (K, 2)
    in the order of :meth:`~specmap.special.lattice.Lattice.edge_cells`.
    """
    K = edges.size
    out = np.zeros((K, 2), dtype=np.bool_)
    n_h = n_b * (n_a - 1)
    for k in range(K):
        e = edges[k]
        c0, c1, c2, c3 = slots[k, 0], slots[k, 1], slots[k, 2], slots[k, 3]
        if e < n_h:
            j = e // (n_a - 1)
            i = e - j * (n_a - 1)
            if j > 0:
                out[k, 0] = _tie_met(met, c0, c1, c2, c3, j - 1, i)
            if j < n_b - 1:
                out[k, 1] = _tie_met(met, c0, c1, c2, c3, j, i)
        else:
            j = (e - n_h) // n_a
            i = (e - n_h) - j * n_a
            if i > 0:
                out[k, 0] = _tie_met(met, c0, c1, c2, c3, j, i - 1)
            if i < n_a - 1:
                out[k, 1] = _tie_met(met, c0, c1, c2, c3, j, i)
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def met_bisect(meta, geo, slots, lo, hi, n_iter):
    """Bisection on the chord lo-hi (K, 2 each) for where a tie stops being met.

    ``lo`` has all four contours met, ``hi`` not; after ``n_iter`` halvings
    returns the new (lo, hi) bracket of the domain boundary.
    """
    K = slots.shape[0]
    lo = lo.copy()
    hi = hi.copy()
    for k in range(K):
        for _ in range(n_iter):
            ma = 0.5 * (lo[k, 0] + hi[k, 0])
            mb = 0.5 * (lo[k, 1] + hi[k, 1])
            ok = True
            for j in range(4):
                if not ext_param(meta, geo, slots[k, j], ma, mb)[1]:
                    ok = False
                    break
            if ok:
                lo[k, 0] = ma
                lo[k, 1] = mb
            else:
                hi[k, 0] = ma
                hi[k, 1] = mb
    return lo, hi


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _find_sorted(arr, lo, hi, x):
    """Index of ``x`` in the sorted slice arr[lo:hi], -1 if absent."""
    while lo < hi:
        mid = (lo + hi) // 2
        if arr[mid] < x:
            lo = mid + 1
        else:
            hi = mid
    return lo if lo < arr.size and arr[lo] == x else -1


@numba.njit(cache=True, nogil=True, error_model="numpy")
def march_cells(codes, edges, rel, n_a, n_b, av, bv, meta, geo, slots, factor, snap):
    """Marching squares per tie: segments (u, v) of crossing indices joined inside a cell.

    ``codes``, ``edges`` sorted by (code, edge); ``rel`` (K, 2) from
    :func:`tie_cells_met`. Each (tie, cell) with a relevant crossing is handled
    once: two crossings on its edges give one segment, four a saddle decided
    by the residual at the cell centre against corner (0, 0), three (a curve
    through a node) the first two in the order bottom, right, top, left.
    """
    K = codes.size
    n_h = n_b * (n_a - 1)
    out = np.empty((max(K, 1), 2), dtype=np.int64)
    n_out = 0
    idx = np.empty(4, dtype=np.int64)
    towards = np.array([1, 0, 0, 1])  # side of the bottom/right/top/left edge that faces the cell
    b0 = 0
    while b0 < K:
        b1 = b0
        while b1 < K and codes[b1] == codes[b0]:
            b1 += 1
        for k in range(b0, b1):
            e = edges[k]
            for side in range(2):
                if not rel[k, side]:
                    continue
                if e < n_h:
                    j = e // (n_a - 1)
                    i = e - j * (n_a - 1)
                    cj = j - 1 + side
                    ci = i
                else:
                    j = (e - n_h) // n_a
                    i = (e - n_h) - j * n_a
                    cj = j
                    ci = i - 1 + side
                bottom = cj * (n_a - 1) + ci
                left = n_h + cj * n_a + ci
                idx[0] = _find_sorted(edges, b0, b1, bottom)
                idx[1] = _find_sorted(edges, b0, b1, left + 1)
                idx[2] = _find_sorted(edges, b0, b1, bottom + (n_a - 1))
                idx[3] = _find_sorted(edges, b0, b1, left)
                first = True
                cnt = 0
                for r in range(4):
                    m = idx[r]
                    if m >= 0:
                        cnt += 1
                        if m < k and rel[m, towards[r]]:
                            first = False
                if not first or cnt < 2:
                    continue
                if n_out + 2 > out.shape[0]:
                    grown = np.empty((2 * out.shape[0] + 16, 2), dtype=np.int64)
                    grown[:n_out] = out[:n_out]
                    out = grown
                if cnt == 4:
                    a0 = av[ci]
                    a1 = av[ci + 1]
                    bb0 = bv[cj]
                    bb1 = bv[cj + 1]
                    c0, c1, c2, c3 = slots[k, 0], slots[k, 1], slots[k, 2], slots[k, 3]
                    rc = _residual(meta, geo, c0, c1, c2, c3, factor[k], 0.5 * (a0 + a1), 0.5 * (bb0 + bb1))[0]
                    r00 = _residual(meta, geo, c0, c1, c2, c3, factor[k], a0, bb0)[0]
                    if (rc >= -snap) == (r00 >= -snap):
                        # centre like corner 00 (and 11): cut off corners 10 and 01
                        out[n_out, 0], out[n_out, 1] = idx[0], idx[1]
                        out[n_out + 1, 0], out[n_out + 1, 1] = idx[2], idx[3]
                    else:
                        out[n_out, 0], out[n_out, 1] = idx[3], idx[0]
                        out[n_out + 1, 0], out[n_out + 1, 1] = idx[1], idx[2]
                    n_out += 2
                    continue
                w = 0
                for r in range(4):
                    if idx[r] >= 0 and w < 2:
                        out[n_out, w] = idx[r]
                        w += 1
                n_out += 1
        b0 = b1
    return out[:n_out].copy()
