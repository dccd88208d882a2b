"""From refined crossings to polylines, compiled: marching squares per tie, neighbours, chain walk."""

from __future__ import annotations

import numba
import numpy as np

from specmap.special.compiled.contours import signed_residual
from specmap.special.compiled.lattice import edge_side_cell


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _find_sorted(arr, lo, hi, x):
    """Index of ``x`` in the sorted slice arr[lo:hi], -1 if absent.

    Only the slice is searched: ``arr[hi]`` (the next tie's first crossing in
    :func:`march_cells`) is never a match.
    """
    end = hi
    while lo < hi:
        mid = (lo + hi) // 2
        if arr[mid] < x:
            lo = mid + 1
        else:
            hi = mid
    return lo if lo < end and arr[lo] == x else -1


@numba.njit(cache=True, nogil=True, error_model="numpy")
def march_cells(
    codes: np.ndarray,
    edges: np.ndarray,
    rel: np.ndarray,
    n_a: int,
    n_b: int,
    av: np.ndarray,
    bv: np.ndarray,
    meta: np.ndarray,
    geo: np.ndarray,
    slots: np.ndarray,
    factor: np.ndarray,
    snap: float,
) -> np.ndarray:
    """Marching squares per tie: segments (u, v) of crossing indices joined inside a cell.

    ``codes``, ``edges`` sorted by (code, edge); ``rel`` (K, 2) from
    :func:`tie_cells_met`. Each (tie, cell) with a relevant crossing is handled
    once: two crossings on its edges give one segment, four a saddle decided
    by the signed branch residual (``slots`` ordered per branch,
    :func:`specmap.special.detect.crossing_slots`) at the cell centre against corner (0, 0), three (a curve
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
                cj, ci = edge_side_cell(e, side, n_a, n_b)  # a relevant side is inside the lattice
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
                    ac = 0.5 * (a0 + a1)
                    bc = 0.5 * (bb0 + bb1)
                    rc = signed_residual(meta, geo, c0, c1, c2, c3, factor[k], ac, bc)[0]
                    r00 = signed_residual(meta, geo, c0, c1, c2, c3, factor[k], a0, bb0)[0]
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


@numba.njit(cache=True, nogil=True, error_model="numpy")
def neighbours(n: int, segs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
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
def chain_walk(nbr: np.ndarray, deg: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
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
                    closed[n_paths] = (
                        ln > 2 and (nbr[cur, 0] == start or nbr[cur, 1] == start) and prev != start
                    )
                    break
                seen[nxt] = True
                flat[pos] = nxt
                pos += 1
                prev = cur
                cur = nxt
            length[n_paths] = pos - begin
            n_paths += 1
    return flat[:pos].copy(), length[:n_paths].copy(), closed[:n_paths].copy()
