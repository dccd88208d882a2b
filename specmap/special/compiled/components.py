"""Connected components of tie curves on the sample lattice, compiled (one union-find).

Lines are joined when they share a vertex, when two of their chords cross in
a lattice cell (end points interleaved along the cell's perimeter), or when a
segment that ends inside a cell (a domain boundary) crosses or comes within
the tolerance of another segment there.
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
    """Join lines through segments that end inside a cell, by exact tests (see :func:`lattice_labels`).

    Every segment that is not a chord (an end inside a cell: a domain boundary point) is tested
    against the chords and such segments of every cell its box (widened by ``eps``) touches, group
    by group of one component (:func:`_cell_tests`: one check per current component of the cell).
    Pairs already in one component are skipped (whole groups at once). The components do not
    depend on the order of the tests.
    """
    na1 = av.size - 1
    nb1 = bv.size - 1
    n_cells = na1 * nb1
    extra = np.nonzero(~chord)[0]
    n_x = extra.size
    if n_x == 0:
        return
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
    # per cell: its chords, then the non-chord segments whose box touches it
    acnt = np.zeros(n_cells + 1, dtype=np.int64)
    xcnt = np.zeros(n_cells + 1, dtype=np.int64)
    for c in range(n_cells):
        acnt[c + 1] = cnt[c + 1] - cnt[c]
    for r in range(n_x):
        for cj in range(xj0[r], xj1[r] + 1):
            for ci in range(xi0[r], xi1[r] + 1):
                acnt[cj * na1 + ci + 1] += 1
                xcnt[cj * na1 + ci + 1] += 1
    for c in range(n_cells):
        acnt[c + 1] += acnt[c]
        xcnt[c + 1] += xcnt[c]
    afill = acnt[:-1].copy()
    xfill = xcnt[:-1].copy()
    a_seg = np.empty(acnt[-1], dtype=np.int64)
    x_seg = np.empty(xcnt[-1], dtype=np.int64)
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
                x_seg[xfill[c]] = extra[r]
                xfill[c] += 1
    # components after the chord scan: each cell's list is sorted into groups of one component; a
    # group already joined to the tested segment is skipped at once and left at its first contact
    snap_lab = np.empty(n_lines, dtype=np.int64)
    for i in range(n_lines):
        snap_lab[i] = _find(parent, i)
    kmax = 0
    for c in range(n_cells):
        if xcnt[c + 1] > xcnt[c]:
            kmax = max(kmax, acnt[c + 1] - acnt[c])
    box = np.empty((kmax, 4))  # the cell's segments, gathered in test order: x0, x1, y0, y1
    seg = np.empty((kmax, 4))  # px, py, qx, qy
    own = np.empty(kmax, dtype=np.int64)
    for c in range(n_cells):
        lo = acnt[c]
        hi = acnt[c + 1]
        if xcnt[c + 1] == xcnt[c]:
            continue
        # groups of one component, each sorted by its segments' low x (the sweep of _cell_tests)
        lx = np.empty(hi - lo)
        for t in range(lo, hi):
            o = a_seg[t]
            lx[t - lo] = min(p[o, 0], q[o, 0])
        by_x = np.argsort(lx, kind="mergesort")
        keys = np.empty(hi - lo, dtype=np.int64)
        for t in range(hi - lo):
            keys[t] = snap_lab[owner[a_seg[lo + by_x[t]]]]
        order = np.argsort(keys, kind="mergesort")
        segs = a_seg[lo:hi][by_x[order]]
        keys = keys[order]
        for t in range(segs.size):
            o = segs[t]
            box[t, 0] = min(p[o, 0], q[o, 0])
            box[t, 1] = max(p[o, 0], q[o, 0])
            box[t, 2] = min(p[o, 1], q[o, 1])
            box[t, 3] = max(p[o, 1], q[o, 1])
            seg[t, 0] = p[o, 0]
            seg[t, 1] = p[o, 1]
            seg[t, 2] = q[o, 0]
            seg[t, 3] = q[o, 1]
            own[t] = owner[o]
        n_g = 1
        for t in range(1, segs.size):
            if keys[t] != keys[t - 1]:
                n_g += 1
        g_start = np.empty(n_g + 1, dtype=np.int64)
        g_start[0] = 0
        g = 1
        for t in range(1, segs.size):
            if keys[t] != keys[t - 1]:
                g_start[g] = t
                g += 1
        g_start[n_g] = segs.size
        _cell_tests(parent, p, q, owner, box, seg, own, keys, g_start, x_seg[xcnt[c] : xcnt[c + 1]], eps)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _cell_tests(parent, p, q, owner, box, seg, own, keys, g_start, queries, eps):
    """Exact tests of a cell's query segments against its groups (runs of one component in ``segs``).

    ``box``, ``seg``, ``own``: the cell's segments gathered in group order (boxes, end points,
    lines), each group sorted by low x, so a query's scan of a group stops at the first segment
    that starts right of its box (a sweep in x with a box filter, on contiguous memory).
    Groups are kept in *runs* of one current component (linked lists of groups): a query skips a
    run of its own component with one ``find`` and tests the groups of any other run until the
    first contact, which joins the whole run. The runs are merged again (by their current roots)
    before the next query whenever a query joined something. A query thus costs one check per
    current component of the cell instead of one per group: the components merge quickly, while
    a cell of a coarse lattice can hold thousands of groups and tens of thousands of queries.
    """
    n_g = g_start.size - 1
    if n_g == 0:
        return
    gnext = np.full(n_g, -1, dtype=np.int64)
    run_root = np.empty(n_g, dtype=np.int64)
    run_head = np.arange(n_g)
    run_tail = np.arange(n_g)
    for g in range(n_g):
        run_root[g] = keys[g_start[g]]
    n_run = n_g
    dirty = True
    for u in range(queries.size):
        s = queries[u]
        if dirty:  # merge the runs that now share a component
            for r in range(n_run):
                run_root[r] = _find(parent, run_root[r])
            order = np.argsort(run_root[:n_run], kind="mergesort")
            nr = run_root[order]
            nh = run_head[order]
            nt = run_tail[order]
            w = 0
            for r in range(n_run):
                if r > 0 and nr[r] == nr[r - 1]:
                    gnext[run_tail[w - 1]] = nh[r]
                    run_tail[w - 1] = nt[r]
                    continue
                run_root[w] = nr[r]
                run_head[w] = nh[r]
                run_tail[w] = nt[r]
                w += 1
            n_run = w
            dirty = False
        rs = _find(parent, owner[s])
        px, py, qx, qy = p[s, 0], p[s, 1], q[s, 0], q[s, 1]
        sx0 = min(px, qx) - 2 * eps
        sx1 = max(px, qx) + 2 * eps
        sy0 = min(py, qy) - 2 * eps
        sy1 = max(py, qy) + 2 * eps
        for r in range(n_run):
            if _find(parent, run_root[r]) == rs:
                continue
            g = run_head[r]
            hit = False
            while g >= 0 and not hit:
                for v in range(g_start[g], g_start[g + 1]):
                    if box[v, 0] > sx1:
                        break  # the group is sorted by low x: no later segment meets the query's box
                    if box[v, 1] < sx0 or box[v, 2] > sy1 or box[v, 3] < sy0:
                        continue
                    if _segments_close(px, py, qx, qy, seg[v, 0], seg[v, 1], seg[v, 2], seg[v, 3], eps):
                        _union(parent, owner[s], own[v])
                        hit = True  # the rest of the run is now joined too
                        break
                g = gnext[g]
            if hit:
                dirty = True
                rs = _find(parent, owner[s])


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
