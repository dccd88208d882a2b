"""The segment-end test kernel of the atlas components as it was before commit 670d3f2 (issue 12).

Kept only so that tests/benchmarks/bench_special_chords.py can time the old path against the
production one (specmap.special.compiled.components) on the same input, in the same run. The
code is the file specmap/special/compiled/components.py of commit 670d3f2^, unchanged but for
this docstring and formatting; it is not part of the package.
"""

from __future__ import annotations

import numba
import numpy as np

from specmap.special.compiled.lattice import interval_of


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
def lattice_labels(
    p: np.ndarray,
    q: np.ndarray,
    owner: np.ndarray,
    n_lines: int,
    av: np.ndarray,
    bv: np.ndarray,
    eps: float,
    vkey: np.ndarray,
    vorder: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
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
    cell = np.empty(S, dtype=np.int64)
    chord = np.zeros(S, dtype=np.bool_)
    t0 = np.empty(S)
    t1 = np.empty(S)
    for s in range(S):
        mx = 0.5 * (p[s, 0] + q[s, 0])
        my = 0.5 * (p[s, 1] + q[s, 1])
        ci = interval_of(av, mx)
        cj = interval_of(bv, my)
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
        order = np.argsort(ev_t[: 2 * k], kind="mergesort")
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
            g = _find(gpar, group[ch])
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
            _union(parent, owner[by_cell[lo + i]], owner[by_cell[lo + gch[_find(gpar, group[i])]]])
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
        xi0[r] = interval_of(av, min(p[s, 0], q[s, 0]) - eps)
        xi1[r] = interval_of(av, max(p[s, 0], q[s, 0]) + eps)
        xj0[r] = interval_of(bv, min(p[s, 1], q[s, 1]) - eps)
        xj1[r] = interval_of(bv, max(p[s, 1], q[s, 1]) + eps)
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
                            if (
                                min(p[o, 0], q[o, 0]) > sx1
                                or max(p[o, 0], q[o, 0]) < sx0
                                or min(p[o, 1], q[o, 1]) > sy1
                                or max(p[o, 1], q[o, 1]) < sy0
                            ):
                                continue
                            if _segments_close(
                                p[s, 0], p[s, 1], q[s, 0], q[s, 1], p[o, 0], p[o, 1], q[o, 0], q[o, 1], eps
                            ):
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
    if (
        min(p1x, q1x) > max(p2x, q2x) + 2 * eps
        or min(p2x, q2x) > max(p1x, q1x) + 2 * eps
        or min(p1y, q1y) > max(p2y, q2y) + 2 * eps
        or min(p2y, q2y) > max(p1y, q1y) + 2 * eps
    ):
        return False
    o1 = (q1x - p1x) * (p2y - p1y) - (q1y - p1y) * (p2x - p1x)
    o2 = (q1x - p1x) * (q2y - p1y) - (q1y - p1y) * (q2x - p1x)
    o3 = (q2x - p2x) * (p1y - p2y) - (q2y - p2y) * (p1x - p2x)
    o4 = (q2x - p2x) * (q1y - p2y) - (q2y - p2y) * (q1x - p2x)
    if o1 * o2 < 0 and o3 * o4 < 0:
        return True
    d = min(
        _point_segment_distance(p2x, p2y, p1x, p1y, q1x, q1y),
        _point_segment_distance(q2x, q2y, p1x, p1y, q1x, q1y),
        _point_segment_distance(p1x, p1y, p2x, p2y, q2x, q2y),
        _point_segment_distance(q1x, q1y, p2x, p2y, q2x, q2y),
    )
    return d <= eps
