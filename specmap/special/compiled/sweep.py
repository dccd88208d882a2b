"""The output-sensitive edge sweep of crossing detection, compiled.

For each lattice edge, the signed pair differences +-c_P and their doubles +-2 c_Q that are
present are sorted by the low end of their value interval; each is compared
only with the following ones while the intervals overlap, so the work follows
the number of overlapping values, not the number of quadruples. The tie rules
arrive as flags from :func:`specmap.special.pairs.kernel_flags`; they and the cell test of
:func:`specmap.special.detect.relevant_cells` are applied inline.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import numba
import numpy as np

from specmap.special.compiled.lattice import edge_side_cell


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _grow(buf, n):
    if n < buf.size:
        return buf
    out = np.empty(2 * buf.size + 16, dtype=buf.dtype)
    out[: buf.size] = buf
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
def sweep_rows(
    s: np.ndarray,
    met: np.ndarray,
    cell_pair: np.ndarray,
    first: np.ndarray,
    second: np.ndarray,
    pair_class: np.ndarray,
    equal_ok: np.ndarray,
    half_ok: np.ndarray,
    doubled: np.ndarray,
    mcol: np.ndarray,
    j_start: int,
    j_stop: int,
    snap: float,
    tol: float,
    banded: bool,
    band_lo: float,
    band_hi: float,
    cost_lo: np.ndarray,
    cost_hi: np.ndarray,
    node_hi: np.ndarray,
    edge_a: float,
    edge_b: float,
) -> tuple[np.ndarray, np.ndarray, int]:
    """Order swaps of pair differences on the lattice edges of node rows ``j_start`` to ``j_stop - 1``.

    Row j holds the horizontal edges (j, i)-(j, i+1) and the vertical edges
    (j, i)-(j+1, i). Items are the signed pair differences +c_P, -c_P and their doubles
    +-2 c_Q (push units, c_P = s_first - s_second) present on an edge (pair met at a corner
    of a cell beside it); the branch c_P = +k c_Q is the order of +c_P and +k c_Q, the branch
    c_P = -k c_Q that of +c_P and -k c_Q, and item pairs with -c_P (their mirrors) are
    skipped, so each branch crossing comes once. Items are sorted by the lower end of their value interval on
    the edge; each item is compared with the following ones while the
    intervals overlap (within ``snap``), so the work is the number of
    overlapping item pairs, not the number of ties. A crossing is an allowed
    tie (``equal_ok`` / ``half_ok`` indexed by the ``pair_class`` of P and Q;
    only ``doubled`` pairs get a doubled item -- the flags of
    :func:`specmap.special.pairs.kernel_flags`) whose two items change order (sign convention ``>= -snap``, not both
    ends within ``tol``) and that is met at a corner of a cell beside the edge.

    ``banded``: an item takes part on an edge only when the cost it stands for can lie in
    (``band_lo``, ``band_hi``] there: its interval of absolute values on the edge, widened by its own
    width, times ``cost_lo[p]`` .. ``cost_hi[p]`` for a plain item (the role factors of
    :func:`specmap.special.focus.cost_factors`) or 1/2 for a doubled one. At a crossing both
    items stand for the tied cost, so a tie whose cost is out of the band on an edge is not
    looked for there (:mod:`specmap.special.focus`). ``node_hi`` (n_b, n_a) lowers the top of
    the band per edge to the larger of its ends' values plus ``edge_a`` (an edge along a) or
    ``edge_b`` (along b): upper bounds of h, which a tied cost must not exceed to be a value of h.

    Returns
    -------
    codes, edges : ndarray of int64
        Crossing keys ``branch * 2 n² + (cond * n + P) * n + Q`` (branch 0: c_P = +k c_Q,
        1: c_P = -k c_Q) and edge ids (:class:`Lattice` numbering).
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
    M = 4 * n_p
    n2 = 2 * n_p * n_p
    lo = np.empty(M)
    hi = np.empty(M)
    v0 = np.empty(M)
    v1 = np.empty(M)
    ip = np.empty(M, dtype=np.int64)
    fac = np.empty(M, dtype=np.int64)
    sgn = np.empty(M)
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
            top_e = band_hi
            if banded:
                top_e = min(
                    band_hi, max(node_hi[ja, ia], node_hi[jb, ib]) + (edge_a if e < na - 1 else edge_b)
                )
            m = 0
            for p in range(n_p):
                pres = False
                for side in range(2):
                    cj = cells[side, 0]
                    if cj >= 0 and cell_pair[p, cj, cells[side, 1]]:
                        pres = True
                if not pres:
                    continue
                y0 = (s[first[p], ja, ia] - s[second[p], ja, ia]) * ma
                y1 = (s[first[p], jb, ib] - s[second[p], jb, ib]) * mb
                plain = True
                dbl = doubled[p]
                if banded:
                    x0 = abs(y0)
                    x1 = abs(y1)
                    w = abs(x1 - x0)
                    top = max(x0, x1) + w
                    bot = min(x0, x1) - w
                    plain = top * cost_hi[p] > band_lo and bot * cost_lo[p] <= top_e
                    dbl = dbl and top > band_lo and bot <= top_e  # 2x times 1/2
                for sg in (1.0, -1.0):
                    if plain:
                        v0[m] = sg * y0
                        v1[m] = sg * y1
                        ip[m] = p
                        fac[m] = 1
                        sgn[m] = sg
                        m += 1
                    if dbl:
                        v0[m] = sg * 2.0 * y0
                        v1[m] = sg * 2.0 * y1
                        ip[m] = p
                        fac[m] = 2
                        sgn[m] = sg
                        m += 1
            for q in range(m):
                lo[q] = min(v0[q], v1[q])
                hi[q] = max(v0[q], v1[q])
            order = np.argsort(lo[:m], kind="mergesort")
            for iu in range(m):
                u = order[iu]
                lim = hi[u] + snap + 1e-12 * abs(hi[u])
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
                    if sgn[big] < 0.0:
                        continue  # the mirror (-P, -+Q) of the item pair (+P, +-Q)
                    P = ip[big]
                    Q = ip[small]
                    if P == Q:
                        continue
                    if cond == 0:
                        if not equal_ok[pair_class[P], pair_class[Q]]:
                            continue
                    elif not half_ok[pair_class[P], pair_class[Q]]:
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
                    codes[n_out] = (cond * n_p + P) * n_p + Q + (n2 if sgn[small] < 0.0 else 0)
                    edges[n_out] = eid
                    n_out += 1
    return codes[:n_out].copy(), edges[:n_out].copy(), n_cand


@numba.njit(cache=True, nogil=True, error_model="numpy")
def tie_cells_met(met: np.ndarray, slots: np.ndarray, edges: np.ndarray, n_a: int, n_b: int) -> np.ndarray:
    """For each (tie, edge): whether each of the two cells beside the edge sees the tie met.

    A cell sees a tie when its four contours are met at one of the cell's
    corners. ``met`` (C, n_b, n_a); ``slots`` (K, 4); ``edges`` (K,) in
    :class:`specmap.special.lattice.Lattice` numbering. Returns bool (K, 2)
    in the order of :meth:`~specmap.special.lattice.Lattice.edge_cells`.
    """
    K = edges.size
    out = np.zeros((K, 2), dtype=np.bool_)
    for k in range(K):
        for side in range(2):
            cj, ci = edge_side_cell(edges[k], side, n_a, n_b)
            if cj >= 0:
                out[k, side] = _tie_met(met, slots[k, 0], slots[k, 1], slots[k, 2], slots[k, 3], cj, ci)
    return out
