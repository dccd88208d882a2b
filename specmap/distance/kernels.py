"""Compiled inner loops of the candidate list (numba): path resampling, tie-curve crossings, and the
stability bound from the nearest evaluated lines (:func:`near_line_bound`).

Both work on flat arrays (all paths' points in one array, ``off`` the path offsets), so the
candidate list of :mod:`specmap.distance.candidates` holds no Python object per tie piece.
Checked against the per-path numpy and shapely forms they replace in ``tests/test_reduced_build.py``.
"""

from __future__ import annotations

import math

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def _interp(x: float, xp: np.ndarray, fp: np.ndarray, lo: int, hi: int) -> float:
    """``np.interp(x, xp[lo:hi], fp[lo:hi])`` for x in [xp[lo], xp[hi - 1]], with numpy's arithmetic."""
    if x >= xp[hi - 1]:
        return fp[hi - 1]
    # last j with xp[j] <= x (then x < xp[j + 1]): numpy's binary search on a non-decreasing xp
    a, b = lo, hi - 1
    while b - a > 1:
        mid = (a + b) // 2
        if xp[mid] <= x:
            a = mid
        else:
            b = mid
    j = a
    slope = (fp[j + 1] - fp[j]) / (xp[j + 1] - xp[j])
    r = slope * (x - xp[j]) + fp[j]
    if math.isnan(r):
        r = slope * (x - xp[j + 1]) + fp[j + 1]
        if math.isnan(r) and fp[j] == fp[j + 1]:
            r = fp[j]
    return r


@numba.njit(cache=True, nogil=True)
def sample_paths(norm: np.ndarray, off: np.ndarray, spacing: float) -> tuple[np.ndarray, np.ndarray]:
    """Samples of every path: its vertices and a point every ``spacing`` of arc length.

    The numbers of :func:`specmap.distance.paths.sample_path` path by path (the union of the
    vertex arc lengths and ``linspace(0, L, max(2, ceil(L / spacing) + 1))``, interpolated as
    ``np.interp`` does). ``norm`` (N, 2) normalised points, ``off`` (P + 1,) path offsets.
    Returns (samples (M, 2), path index (M,)).
    """
    n_paths = off.size - 1
    cum = np.empty(norm.shape[0])
    nlin = np.zeros(n_paths, dtype=np.int64)
    cap = 0
    for p in range(n_paths):
        s, e = off[p], off[p + 1]
        cum[s] = 0.0
        for k in range(s + 1, e):
            dx = norm[k, 0] - norm[k - 1, 0]
            dy = norm[k, 1] - norm[k - 1, 1]
            cum[k] = cum[k - 1] + math.sqrt(dx * dx + dy * dy)
        if e - s > 1:
            nlin[p] = max(2, math.ceil(cum[e - 1] / spacing) + 1)
        cap += (e - s) + nlin[p]
    out = np.empty((cap, 2))
    pid = np.empty(cap, dtype=np.int64)
    t = np.empty(0)
    m = 0
    for p in range(n_paths):
        s, e = off[p], off[p + 1]
        if e - s == 1:
            out[m, 0], out[m, 1] = norm[s, 0], norm[s, 1]
            pid[m] = p
            m += 1
            continue
        length = cum[e - 1]
        n = nlin[p]
        if t.size < n:
            t = np.empty(2 * n)
        step = length / (n - 1)
        for k in range(n):
            t[k] = k * step
        t[n - 1] = length
        # merge the sorted vertex arc lengths and the linspace, dropping repeated values (union1d)
        i, k = s, 0
        last = -np.inf
        while i < e or k < n:
            if k >= n or (i < e and cum[i] <= t[k]):
                x = cum[i]
                i += 1
            else:
                x = t[k]
                k += 1
            if x == last:
                continue
            last = x
            out[m, 0] = _interp(x, cum, norm[:, 0], s, e)
            out[m, 1] = _interp(x, cum, norm[:, 1], s, e)
            pid[m] = p
            m += 1
    return out[:m], pid[:m]


EPS = 1e-12
"""Slack of the segment parameters of a crossing (an end touching the other curve is kept; clamped)."""


@numba.njit(cache=True, nogil=True)
def _cell(x: float, y: float, a0: float, b0: float, wa: float, wb: float, side: int) -> int:
    """Bucket of a point: (row, col) of a side x side grid over the window, flattened, clipped."""
    i = int(math.floor((x - a0) / wa * side))
    j = int(math.floor((y - b0) / wb * side))
    i = min(max(i, 0), side - 1)
    j = min(max(j, 0), side - 1)
    return j * side + i


@numba.njit(cache=True, nogil=True)
def _emit(x, y, cell, frame, fill, at, ox, oy) -> int:
    """Count (and with ``fill`` write) a crossing point when it lies in ``cell``; returns 0 or 1."""
    if _cell(x, y, frame[0], frame[1], frame[2], frame[3], int(frame[4])) != cell:
        return 0
    if fill:
        ox[at] = x
        oy[at] = y
    return 1


@numba.njit(cache=True, nogil=True)
def _group_crossings(
    g, gstart, ecell, eseg, ekey, seg, seg_tie, tie_keys, use, frame, fill, at, ox, oy, ou, ov
) -> int:
    """Crossings of segments of different ties within one (pair key, cell) group."""
    s0, s1 = gstart[g], gstart[g + 1]
    cell, key = ecell[s0], ekey[s0]
    cnt = 0
    for i in range(s0, s1):
        si = eseg[i]
        u = seg_tie[si]
        for j in range(i + 1, s1):
            sj = eseg[j]
            v = seg_tie[sj]
            if u == v or not (use[u] or use[v]):
                continue
            # the smallest pair key the two ties share reports them (ties may share both pairs)
            shared = key
            for ku in (tie_keys[u, 0], tie_keys[u, 1]):
                if ku < shared and (ku == tie_keys[v, 0] or ku == tie_keys[v, 1]):
                    shared = ku
            if shared != key:
                continue
            if si > sj:  # the same arithmetic whichever cell or group finds the pair
                si, sj = sj, si
            tu, tv = seg_tie[si], seg_tie[sj]
            px, py, rx, ry = seg[si, 0], seg[si, 1], seg[si, 2] - seg[si, 0], seg[si, 3] - seg[si, 1]
            qx, qy, sx, sy = seg[sj, 0], seg[sj, 1], seg[sj, 2] - seg[sj, 0], seg[sj, 3] - seg[sj, 1]
            d = rx * sy - ry * sx
            wx, wy = qx - px, qy - py
            rr, ss = rx * rx + ry * ry, sx * sx + sy * sy
            before = cnt
            if rr == 0.0 or ss == 0.0:  # a point piece (or a zero-length segment): on the other one?
                if rr == 0.0 and ss == 0.0:
                    if wx == 0.0 and wy == 0.0:
                        cnt += _emit(px, py, cell, frame, fill, at + cnt, ox, oy)
                elif rr == 0.0:
                    if wx * sy - wy * sx == 0.0 and 0.0 <= -(wx * sx + wy * sy) / ss <= 1.0:
                        cnt += _emit(px, py, cell, frame, fill, at + cnt, ox, oy)
                elif wx * ry - wy * rx == 0.0 and 0.0 <= (wx * rx + wy * ry) / rr <= 1.0:
                    cnt += _emit(qx, qy, cell, frame, fill, at + cnt, ox, oy)
            elif d != 0.0:
                t = (wx * sy - wy * sx) / d
                w = (wx * ry - wy * rx) / d
                if -EPS <= t <= 1.0 + EPS and -EPS <= w <= 1.0 + EPS:
                    t = min(max(t, 0.0), 1.0)
                    cnt += _emit(px + t * rx, py + t * ry, cell, frame, fill, at + cnt, ox, oy)
            elif wx * ry - wy * rx == 0.0:  # collinear: the ends of the overlap
                for k in range(4):
                    if k < 2:
                        x, y = (qx, qy) if k == 0 else (qx + sx, qy + sy)
                        inside = 0.0 <= ((x - px) * rx + (y - py) * ry) / rr <= 1.0
                    else:
                        x, y = (px, py) if k == 2 else (px + rx, py + ry)
                        inside = 0.0 <= ((x - qx) * sx + (y - qy) * sy) / ss <= 1.0
                    if inside:
                        cnt += _emit(x, y, cell, frame, fill, at + cnt, ox, oy)
            if fill:
                for k in range(before, cnt):
                    ou[at + k] = min(tu, tv)
                    ov[at + k] = max(tu, tv)
    return cnt


@numba.njit(cache=True, nogil=True, parallel=True)
def bucket_crossings(
    gstart: np.ndarray,
    ecell: np.ndarray,
    eseg: np.ndarray,
    ekey: np.ndarray,
    seg: np.ndarray,
    seg_tie: np.ndarray,
    tie_keys: np.ndarray,
    use: np.ndarray,
    frame: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Crossing points of segments of two ties that share a contour pair.

    Entries (``ekey`` pair key, ``ecell`` bucket, ``eseg`` segment) are sorted by (key, cell,
    segment) with group starts ``gstart``; a segment is entered in every bucket its (padded)
    bounding box meets, under both pair keys of its tie (``tie_keys`` (T, 2), sorted). A crossing
    is reported once: in the bucket that holds the point, under the smallest shared key, for
    segment pairs of two different ties of which one at least is in ``use``. ``seg`` (S, 4) holds
    (x0, y0, x1, y1); ``frame`` = (a0, b0, width a, width b, side). Collinear overlaps give the
    ends of the overlap. Returns (x, y, tie u, tie v) with u < v (ties repeat at shared vertices).
    """
    n_groups = gstart.size - 1
    counts = np.zeros(n_groups, dtype=np.int64)
    dummy = np.empty(0)
    dummy_i = np.empty(0, dtype=np.int64)
    for g in numba.prange(n_groups):
        counts[g] = _group_crossings(
            g,
            gstart,
            ecell,
            eseg,
            ekey,
            seg,
            seg_tie,
            tie_keys,
            use,
            frame,
            False,
            0,
            dummy,
            dummy,
            dummy_i,
            dummy_i,
        )
    offs = np.zeros(n_groups + 1, dtype=np.int64)
    offs[1:] = np.cumsum(counts)
    total = offs[-1]
    ox, oy = np.empty(total), np.empty(total)
    ou, ov = np.empty(total, dtype=np.int64), np.empty(total, dtype=np.int64)
    for g in numba.prange(n_groups):
        if counts[g]:
            _group_crossings(
                g,
                gstart,
                ecell,
                eseg,
                ekey,
                seg,
                seg_tie,
                tie_keys,
                use,
                frame,
                True,
                offs[g],
                ox,
                oy,
                ou,
                ov,
            )
    return ox, oy, ou, ov


@numba.njit(cache=True, nogil=True, parallel=True)
def near_line_bound(
    Ff: np.ndarray, Fg: np.ndarray, H: np.ndarray, idx: np.ndarray, Sf: np.ndarray, Sg: np.ndarray
) -> np.ndarray:
    """min_j (H[idx[k, j]] + max_v |Ff[idx[k, j]] - Sf[k]| + max_v |Fg[idx[k, j]] - Sg[k]|), per k and group.

    The numpy form of :meth:`specmap.distance.bounds.LocalBound.many` in one pass, without its
    (k, near, vertices) temporaries; the same operations in the same order (max of absolute
    differences, one sum, one sum, min), so the same doubles.
    """
    n, near = idx.shape
    groups = H.shape[1]
    out = np.empty((n, groups))
    for k in numba.prange(n):
        for g in range(groups):
            out[k, g] = math.inf
        for j in range(near):
            q = idx[k, j]
            mf = 0.0
            for v in range(Ff.shape[1]):
                d = abs(Ff[q, v] - Sf[k, v])
                if d > mf or d != d:
                    mf = d
            mg = 0.0
            for v in range(Fg.shape[1]):
                d = abs(Fg[q, v] - Sg[k, v])
                if d > mg or d != d:
                    mg = d
            move = mf + mg
            for g in range(groups):
                x = H[q, g] + move
                if x < out[k, g] or x != x:
                    out[k, g] = x
    return out
