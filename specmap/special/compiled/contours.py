"""Contours at single lines, compiled: the flat form, tie residuals, root finding on segments.

Every formula is the one of :mod:`specmap.special.evaluate` and
:func:`specmap.strip.line_parameter`, evaluated one line at a time inside
compiled loops (numba, ``cache=True``: compiled on first use, then loaded
from ``__pycache__``; ``nogil=True``: :func:`in_chunks` splits work over
threads).

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
from specmap.special.compiled.lattice import edge_position

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
        meta = (
            np.stack([np.array([_KIND[c.kind] for c in contours], dtype=np.int64), start, count], axis=1)
            if C
            else np.zeros((0, 3), np.int64)
        )
        geo = np.ascontiguousarray(np.vstack(pts + [ext])) if C else np.zeros((0, 2))
        assert geo.shape[0] == V + 2 * C
        return FlatContours(np.ascontiguousarray(meta), geo)

    @property
    def args(self) -> tuple[np.ndarray, np.ndarray]:
        return self.meta, self.geo


#: threads used by :func:`in_chunks` (the compiled loops release the GIL)
THREADS = 2


def in_chunks(
    fn: Callable[[slice], np.ndarray], n: int, threads: int = THREADS, min_chunk: int = 20_000
) -> np.ndarray:
    """``fn`` over ``threads`` contiguous slices of ``range(n)``, results concatenated (row order kept)."""
    k = max(1, min(threads, n // min_chunk))
    if k == 1:
        return fn(slice(0, n))
    bounds = np.linspace(0, n, k + 1).astype(int)
    with ThreadPoolExecutor(k) as pool:
        parts = list(pool.map(fn, [slice(int(bounds[i]), int(bounds[i + 1])) for i in range(k)]))
    return np.concatenate(parts)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def ext_param(meta: np.ndarray, geo: np.ndarray, c: int, a: float, b: float) -> tuple[float, bool]:
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
def signed_residual(meta, geo, c0, c1, c2, c3, factor, a, b):
    """(R, tied value, all met) of one signed tie branch at one line; R in push units.

    R = min(a, 1-a) ((s̄_0 - s̄_1) - k (s̄_2 - s̄_3)): smooth where the four contours are met
    (no ridge where a difference changes sign, unlike |c_P| - k |c_Q|); the branch
    c_P = -k c_Q is this with the slots 2, 3 swapped (:func:`specmap.special.detect.crossing_slots`).
    """
    s0, m0 = ext_param(meta, geo, c0, a, b)
    s1, m1 = ext_param(meta, geo, c1, a, b)
    s2, m2 = ext_param(meta, geo, c2, a, b)
    s3, m3 = ext_param(meta, geo, c3, a, b)
    m = min(a, 1.0 - a)
    dp = (s0 - s1) * m
    dq = (s2 - s3) * m * factor
    return dp - dq, min(abs(dp), abs(dq) / factor), m0 and m1 and m2 and m3


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _either(meta, geo, c0, c1, c2, c3, factor, a, b, signed):
    if signed:
        return signed_residual(meta, geo, c0, c1, c2, c3, factor, a, b)
    return _residual(meta, geo, c0, c1, c2, c3, factor, a, b)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def slot_residuals(
    meta: np.ndarray,
    geo: np.ndarray,
    slots: np.ndarray,
    factor: np.ndarray,
    a: np.ndarray,
    b: np.ndarray,
    signed: bool = False,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Residual R, tied value and ``all met`` of ties ``slots`` (K, 4) at lines (a[k], b[k]).

    ``signed``: R of the signed branch (:func:`signed_residual`), else |c_P| - k |c_Q|.
    """
    K = slots.shape[0]
    r = np.empty(K)
    val = np.empty(K)
    met = np.empty(K, dtype=np.bool_)
    for k in range(K):
        r[k], val[k], met[k] = _either(
            meta, geo, slots[k, 0], slots[k, 1], slots[k, 2], slots[k, 3], factor[k], a[k], b[k], signed
        )
    return r, val, met


@numba.njit(cache=True, nogil=True, error_model="numpy")
def slot_params(
    meta: np.ndarray, geo: np.ndarray, slots: np.ndarray, a: np.ndarray, b: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """s̄ and met of every slot contour: arrays (K, m) at lines (a[k], b[k])."""
    K, M = slots.shape
    s = np.empty((K, M))
    met = np.empty((K, M), dtype=np.bool_)
    for k in range(K):
        for j in range(M):
            s[k, j], met[k, j] = ext_param(meta, geo, slots[k, j], a[k], b[k])
    return s, met


@numba.njit(cache=True, nogil=True, error_model="numpy")
def refine_edges(
    meta: np.ndarray,
    geo: np.ndarray,
    slots: np.ndarray,
    factor: np.ndarray,
    a0: np.ndarray,
    b0: np.ndarray,
    a1: np.ndarray,
    b1: np.ndarray,
    snap: float,
    eps: float,
    signed: bool = False,
) -> np.ndarray:
    """Zero of R + snap on each segment (a0, b0)-(a1, b1), to a bracket below ``2 eps`` in t ∈ [0, 1].

    ``signed``: R is the signed branch residual (:func:`signed_residual`, smooth where the
    contours are met), else |c_P| - k |c_Q|.
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
        ya = _either(meta, geo, c0, c1, c2, c3, fk, a0[k], b0[k], signed)[0] + snap
        yb = _either(meta, geo, c0, c1, c2, c3, fk, a1[k], b1[k], signed)[0] + snap
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
            y = _either(meta, geo, c0, c1, c2, c3, fk, a0[k] + x * da, b0[k] + x * db, signed)[0] + snap
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
            y = _either(meta, geo, c0, c1, c2, c3, fk, a0[k] + x * da, b0[k] + x * db, signed)[0] + snap
            if (y >= 0.0) == sa:
                lo = x
            else:
                hi = x
        t = 0.5 * (lo + hi)
        out[k, 0] = a0[k] + t * da
        out[k, 1] = b0[k] + t * db
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def met_bisect(
    meta: np.ndarray, geo: np.ndarray, slots: np.ndarray, lo: np.ndarray, hi: np.ndarray, n_iter: int
) -> tuple[np.ndarray, np.ndarray]:
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
def edge_endpoints(
    edges: np.ndarray, av: np.ndarray, bv: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(a0, b0, a1, b1) of lattice edges (:class:`specmap.special.lattice.Lattice` numbering)."""
    K = edges.size
    a0 = np.empty(K)
    b0 = np.empty(K)
    a1 = np.empty(K)
    b1 = np.empty(K)
    for k in range(K):
        horizontal, j, i = edge_position(edges[k], av.size, bv.size)
        if horizontal:
            a0[k], b0[k], a1[k], b1[k] = av[i], bv[j], av[i + 1], bv[j]
        else:
            a0[k], b0[k], a1[k], b1[k] = av[i], bv[j], av[i], bv[j + 1]
    return a0, b0, a1, b1
