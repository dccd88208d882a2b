"""The finite candidate set of the reduced search on the special set, built without any diagram.

Candidates are local maxima of a tie's cost along its curve, curve ends inside
the window, and crossings of two curves whose ties share a pair (math.md
section 5; why they suffice: :func:`specmap.distance.reduced.reduced_search`).

Everything runs on flat arrays: the pieces' geometries are read once into one
array of points with path offsets (shapely's array functions), the paths are
resampled by a compiled loop (:func:`specmap.distance.kernels.sample_paths`), costs
are evaluated in chunks of paths, and crossings are found by a bucket join of
segments of ties that share a contour pair
(:func:`specmap.distance.kernels.bucket_crossings`). Candidates are kept chunk by
chunk only when they can still matter (above the floor, and, when given, not above
an upper bound of h at their line), so memory follows the survivors.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from specmap.distance.paths import FlatPaths, PathsOf, denormalise, geometry_paths
from specmap.distance.result import Candidates
from specmap.distance.ties import costs_at
from specmap.special.pairs import (
    ANY_EQUAL,
    ANY_HALF,
    EQUAL_CROSS,
    EQUAL_SAME,
    HALF_P,
    HALF_Q,
    grid_of,
    role_rules,
)
from specmap.strip import Window

LOCAL_MAX, END, CROSSING = range(3)
ORIGINS = ("local_max", "end", "crossing")
"""Where a candidate comes from: a local maximum of the tied cost along a curve, a curve end, a crossing."""

CHUNK_SAMPLES = 2_000_000
"""Path samples whose costs are evaluated at once (a few hundred MB of work arrays)."""
BUCKETS = 256
"""Buckets per side of the window for the crossing join."""

Bound = Callable[[np.ndarray, np.ndarray], np.ndarray]
"""An upper bound of h (value units) at many lines (a, b) at once."""


@dataclass(frozen=True)
class _Ties:
    """Live ties (pieces with a tie of two costs, known contours and geometry in the window), flat."""

    ids: np.ndarray  # piece index per live tie
    codes: np.ndarray
    quads: np.ndarray  # (T, 4) contour columns
    keys: np.ndarray  # (T, 2) the two pair keys, sorted (unordered column pair lo * C + hi)
    xy: np.ndarray  # (N, 2) raw (a, b) points of all paths
    off: np.ndarray  # (P + 1,) path offsets
    path_tie: np.ndarray  # (P,) live tie of each path
    pruned: dict[str, int]


def _tie_codes(gcol: np.ndarray, quads: np.ndarray, equal: np.ndarray, roles: bool) -> np.ndarray:
    """:func:`specmap.special.pairs.tie_code` of many ties at once; -1 for a tie of no two costs."""
    g = gcol[quads]  # (T, 4): 0 f, 1 g, -1 unknown grid
    unknown = (g < 0).any(axis=1) | (not roles)
    cp = (g[:, 0] != g[:, 1]).astype(np.int64)  # CROSS = 1, SAME = 0 (specmap.special.pairs)
    cq = (g[:, 2] != g[:, 3]).astype(np.int64)
    rules = role_rules("roles")
    eq_ok = rules.equal_ok[cp, cq]
    code = np.where(
        equal,
        np.where(eq_ok, np.where(cp == 1, EQUAL_CROSS, EQUAL_SAME), -1),
        np.where(rules.half_ok[cp, cq], HALF_P, np.where(rules.half_ok[cq, cp], HALF_Q, -1)),
    )
    return np.where(unknown, np.where(equal, ANY_EQUAL, ANY_HALF), code).astype(np.int64)


def _expand(geoms: np.ndarray, owner: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Split multi-part geometries and polygons into their simple parts and rings, keeping the order.

    The order of :func:`specmap.distance.paths.geometry_paths` (parts in order; a polygon's
    exterior, then its interiors).
    """
    import shapely

    while True:
        kind = shapely.get_type_id(geoms)
        multi = np.isin(kind, (3, 4, 5, 6, 7))
        if not multi.any():
            return geoms, owner
        poly = kind == 3
        n = np.ones(len(geoms), dtype=np.int64)
        n[multi & ~poly] = shapely.get_num_geometries(geoms[multi & ~poly])
        n[poly] = shapely.get_num_interior_rings(geoms[poly]) + 1
        start = np.cumsum(n) - n
        out = np.empty(int(n.sum()), dtype=object)
        keep = ~multi
        out[start[keep]] = geoms[keep]
        for mask, parts_of in ((multi & ~poly, shapely.get_parts), (poly, shapely.get_rings)):
            idx = np.nonzero(mask)[0]
            if not len(idx):
                continue
            parts, which = parts_of(geoms[idx], return_index=True)
            rank = np.arange(len(which)) - np.searchsorted(which, which)
            out[start[idx[which]] + rank] = parts
        owner = np.repeat(owner, n)
        geoms = out


def _live_ties(pieces: tuple, columns: dict, window: Window, roles: bool) -> _Ties:
    """Keep the pieces whose tie is a tie of two costs with known contours and geometry in the window."""
    import shapely

    pruned = {"roles": 0, "unknown_contour": 0, "not_met": 0, "outside_window": 0}
    n = len(pieces)
    col = np.fromiter(
        (columns.get(c, -1) for p in pieces for pair in p.tie.pairs for c in pair), np.int64, 4 * n
    ).reshape(n, 4)
    equal = np.fromiter((p.tie.condition == "equal" for p in pieces), bool, n)
    geoms = np.empty(n, dtype=object)
    geoms[:] = [p.geometry for p in pieces]
    known = (col >= 0).all(axis=1)
    pruned["unknown_contour"] = int((~known).sum())
    gcol = np.array([{"f": 0, "g": 1}.get(grid_of(c) or "", -1) for c in columns], dtype=np.int64)
    codes = np.full(n, -1, dtype=np.int64)
    if known.any():
        codes[known] = _tie_codes(gcol, col[known], equal[known], roles)
    has_code = known & (codes >= 0)
    pruned["roles"] = int((known & ~has_code).sum())
    present = np.zeros(n, dtype=bool)
    present[has_code] = ~shapely.is_missing(geoms[has_code])
    present[present] = ~shapely.is_empty(geoms[present])
    wbox = shapely.box(*window.bounds())
    wa0, wb0, wa1, wb1 = window.bounds()
    bb = np.full((n, 4), np.nan)
    bb[present] = shapely.bounds(geoms[present])
    with np.errstate(invalid="ignore"):
        strict = (wa0 < bb[:, 0]) & (bb[:, 2] < wa1) & (wb0 < bb[:, 1]) & (bb[:, 3] < wb1)
    edge = np.nonzero(present & ~strict)[0]  # not strictly inside: shapely decides
    if len(edge):
        meets = shapely.intersects(geoms[edge], wbox)
        present[edge[~meets]] = False
        cut = edge[meets][~shapely.contains(wbox, geoms[edge[meets]])]
        if len(cut):
            geoms[cut] = shapely.intersection(geoms[cut], wbox)
    pruned["outside_window"] = int((has_code & ~present).sum())
    live = np.nonzero(present)[0]
    parts, owner = _expand(geoms[live], np.arange(len(live)))
    fallback = ~np.isin(shapely.get_type_id(parts), (0, 1, 2))  # anything else: the general walk
    xy, cidx = shapely.get_coordinates(parts, return_index=True)
    cnt = np.bincount(cidx, minlength=len(parts)) if len(parts) else np.zeros(0, dtype=np.int64)
    if fallback.any():  # pragma: no cover - shapely types outside the atlas's pieces
        paths = [[xy[cidx == k]] if not fallback[k] else geometry_paths(parts[k]) for k in range(len(parts))]
        flat = [(owner[k], q) for k in range(len(parts)) for q in paths[k] if len(q)]
        owner = np.array([o for o, _ in flat], dtype=np.int64)
        cnt = np.array([len(q) for _, q in flat], dtype=np.int64)
        xy = np.concatenate([q for _, q in flat]) if flat else np.zeros((0, 2))
    else:
        owner = owner[cnt > 0]
        cnt = cnt[cnt > 0]
    off = np.r_[0, np.cumsum(cnt)].astype(np.int64)
    q = col[live]
    pk = np.sort(q.reshape(-1, 2), axis=1)
    keys = np.sort((pk[:, 0] * max(len(columns), 1) + pk[:, 1]).reshape(-1, 2), axis=1)
    return _Ties(live, codes[live], q, keys, np.asarray(xy, float)[:, :2], off, owner, pruned)


@dataclass
class _Kept:
    """Candidate arrays gathered chunk by chunk (``live``: index into the live ties)."""

    a: list[np.ndarray]
    b: list[np.ndarray]
    lo: list[np.ndarray]
    hi: list[np.ndarray]
    live: list[np.ndarray]
    origin: list[np.ndarray]
    below_floor: int = 0
    above_bound: int = 0
    bound_pruned: int = 0

    def offer(self, a, b, lo, hi, live, origin, cut: float, upper: float, bound: Bound | None, tol: float):
        """Keep the candidates above ``cut`` and not refuted by ``upper`` or ``bound`` (counted)."""
        low = hi <= cut  # NaN compares False: such samples are never kept
        ok = np.isfinite(hi) & ~low
        self.below_floor += int(low.sum())
        over = ok & (lo > upper + tol)
        self.above_bound += int(over.sum())
        ok &= ~over
        if bound is not None and ok.any():
            idx = np.nonzero(ok)[0]
            refuted = lo[idx] > bound(a[idx], b[idx]) + tol
            self.bound_pruned += int(refuted.sum())
            ok[idx[refuted]] = False
        for store, arr in zip(
            (self.a, self.b, self.lo, self.hi, self.live, self.origin),
            (a, b, lo, hi, live, origin),
            strict=True,
        ):
            store.append(arr[ok])


def _norm(xy: np.ndarray, window: Window) -> np.ndarray:
    wa = window.a[1] - window.a[0]
    wb = window.b[1] - window.b[0]
    return (xy - [window.a[0], window.b[0]]) / [wa, wb]


def _sampled(
    ties: _Ties, columns: dict, contours_by_id: dict, window: Window, spacing: float, kept: _Kept, **keep_kw
) -> tuple[np.ndarray, np.ndarray]:
    """Local maxima of ``hi`` along each path and path ends inside the window, chunk by chunk.

    Returns (has: live ties with a finite cost somewhere, tie_top: sampled max plus the largest
    step between neighbours, per live tie).
    """
    from specmap.distance.kernels import sample_paths

    n_ties = len(ties.ids)
    has = np.zeros(n_ties, dtype=bool)
    top = np.full(n_ties, -np.inf)
    tie_step = np.zeros(n_ties)
    n_paths = len(ties.off) - 1
    # chunks of whole paths holding about CHUNK_SAMPLES samples (estimate: vertices + length / spacing)
    norm = _norm(ties.xy, window)
    starts = np.zeros(1, dtype=np.int64)
    if n_paths:
        seglen = np.zeros(len(norm))
        seglen[1:] = np.sqrt(np.add.reduce(np.diff(norm, axis=0) ** 2, axis=1))
        seglen[ties.off[:-1]] = 0.0  # no segment into the first point of a path
        est = np.cumsum(np.add.reduceat(seglen, ties.off[:-1]) / spacing + np.diff(ties.off) + 2)
        marks = np.arange(CHUNK_SAMPLES, est[-1] + CHUNK_SAMPLES, CHUNK_SAMPLES)
        starts = np.unique(np.r_[0, np.minimum(np.searchsorted(est, marks) + 1, n_paths), n_paths])
    edge = 1e-9
    for p0, p1 in zip(starts[:-1], starts[1:], strict=True):
        o0, o1 = ties.off[p0], ties.off[p1]
        pts, pid = sample_paths(norm[o0:o1], ties.off[p0 : p1 + 1] - o0, spacing)
        raw = denormalise(pts, window)
        li = ties.path_tie[p0 + pid]
        lo, hi = costs_at(ties.codes[li], ties.quads[li], columns, contours_by_id, raw[:, 0], raw[:, 1])
        h = np.where(np.isnan(hi), -np.inf, hi)
        n = len(h)
        same_prev = np.zeros(n, dtype=bool)
        same_next = np.zeros(n, dtype=bool)
        same_prev[1:] = pid[1:] == pid[:-1]
        same_next[:-1] = pid[:-1] == pid[1:]
        prev_h = np.r_[-np.inf, h[:-1]]
        next_h = np.r_[h[1:], -np.inf]
        finite = np.isfinite(h)
        local_max = same_prev & same_next & (h >= prev_h) & (h > next_h) & finite
        inside = np.all((pts > edge) & (pts < 1 - edge), axis=1)
        end = (~same_prev | ~same_next) & finite & inside
        keep = local_max | end
        has[li[finite]] = True
        np.maximum.at(top, li[finite], h[finite])
        step = np.zeros(n)
        both = same_prev & finite & np.r_[False, finite[:-1]]
        step[both] = np.abs(h[both] - prev_h[both])
        np.maximum.at(tie_step, li, step)
        kept.offer(
            raw[keep, 0],
            raw[keep, 1],
            lo[keep],
            hi[keep],
            li[keep],
            np.where(local_max[keep], LOCAL_MAX, END),
            **keep_kw,
        )
    return has, top + tie_step


def _segment_entries(ties: _Ties, window: Window, alive: np.ndarray, side: int):
    """Segments of the alive ties' paths and their bucket entries (pair key, cell, segment), sorted."""
    norm = _norm(ties.xy, window)
    n_pts = len(norm)
    starts = np.ones(n_pts, dtype=bool)  # a point that starts no segment: the last of its path
    if n_pts:
        starts[ties.off[1:] - 1] = False
    single = np.diff(ties.off) == 1  # a point piece's point: a segment of length zero
    starts[ties.off[:-1][single]] = True
    pt_tie = np.repeat(ties.path_tie, np.diff(ties.off))
    first = np.nonzero(starts & alive[pt_tie])[0]
    nxt = first + (~np.isin(first, ties.off[:-1][single]))
    seg = np.c_[ties.xy[first], ties.xy[nxt]]
    seg_tie = pt_tie[first]
    pad = 1e-9
    lo = np.floor((np.minimum(norm[first], norm[nxt]) - pad) * side).astype(np.int64)
    hi = np.floor((np.maximum(norm[first], norm[nxt]) + pad) * side).astype(np.int64)
    lo, hi = np.clip(lo, 0, side - 1), np.clip(hi, 0, side - 1)
    na, nb = hi[:, 0] - lo[:, 0] + 1, hi[:, 1] - lo[:, 1] + 1
    reps = na * nb
    s = np.repeat(np.arange(len(first)), reps)
    k = np.arange(len(s)) - np.repeat(np.cumsum(reps) - reps, reps)
    cell = (lo[s, 1] + k // na[s]) * side + lo[s, 0] + k % na[s]
    # every entry under both pair keys of its tie
    e_seg = np.r_[s, s]
    e_cell = np.r_[cell, cell]
    e_key = np.r_[ties.keys[seg_tie[s], 0], ties.keys[seg_tie[s], 1]]
    order = np.lexsort((e_seg, e_cell, e_key))
    e_seg, e_cell, e_key = e_seg[order], e_cell[order], e_key[order]
    brk = (
        np.r_[True, (e_key[1:] != e_key[:-1]) | (e_cell[1:] != e_cell[:-1])]
        if len(e_key)
        else np.ones(0, bool)
    )
    gstart = np.r_[np.nonzero(brk)[0], len(e_key)].astype(np.int64)
    return seg, seg_tie, gstart, e_cell, e_seg, e_key


def _pairs_below(ties: _Ties, alive: np.ndarray, over: np.ndarray) -> int:
    """Pairs of alive ties sharing a contour pair, neither of which exceeds the floor (not computed)."""
    low = np.nonzero(alive & ~over)[0]
    if len(low) < 2:
        return 0
    keys = ties.keys[low]
    _, per_key = np.unique(keys.ravel(), return_counts=True)
    both = np.unique(keys, axis=0, return_counts=True)[1]  # ties with the same two keys: counted twice
    return int((per_key * (per_key - 1) // 2).sum() - (both * (both - 1) // 2).sum())


def _crossings(
    ties: _Ties, columns: dict, contours_by_id: dict, window: Window, has, over, kept: _Kept, **keep_kw
) -> int:
    """Crossings of ties sharing a pair, one of them at least over the floor; returns their number."""
    from specmap.distance.kernels import bucket_crossings

    seg, seg_tie, gstart, e_cell, e_seg, e_key = _segment_entries(ties, window, has, BUCKETS)
    if len(gstart) < 2:
        return 0
    frame = np.array(
        [window.a[0], window.b[0], window.a[1] - window.a[0], window.b[1] - window.b[0], float(BUCKETS)]
    )
    x, y, u, v = bucket_crossings(gstart, e_cell, e_seg, e_key, seg, seg_tie, ties.keys, over & has, frame)
    if not len(x):
        return 0
    # one point per tie pair where two segments meet at a shared vertex (1e-12 of the window)
    scale = 1e-12 * max(window.a[1] - window.a[0], window.b[1] - window.b[0])
    qx, qy = np.rint(x / scale).astype(np.int64), np.rint(y / scale).astype(np.int64)
    order = np.lexsort((qy, qx, v, u))
    x, y, u, v, qx, qy = x[order], y[order], u[order], v[order], qx[order], qy[order]
    new = np.r_[True, (u[1:] != u[:-1]) | (v[1:] != v[:-1]) | (qx[1:] != qx[:-1]) | (qy[1:] != qy[:-1])]
    x, y, u, v = x[new], y[new], u[new], v[new]
    pa, pb, pl = np.repeat(x, 2), np.repeat(y, 2), np.c_[u, v].ravel()
    for s in range(0, len(pa), CHUNK_SAMPLES):
        sl = slice(s, s + CHUNK_SAMPLES)
        lo, hi = costs_at(ties.codes[pl[sl]], ties.quads[pl[sl]], columns, contours_by_id, pa[sl], pb[sl])
        kept.offer(pa[sl], pb[sl], lo, hi, pl[sl], np.full(len(lo), CROSSING), **keep_kw)
    return len(x)


def special_candidates(
    atlas,
    contours_by_id: dict,
    window: Window,
    *,
    spacing: float = 1 / 200,
    roles: bool = True,
    floor: float = -math.inf,
    tolerance: float = 0.0,
    upper: float = math.inf,
    bound: Bound | None = None,
) -> Candidates:
    """The finite candidate set of the reduced search, built without any diagram.

    For every tie piece of ``atlas`` whose tie is a tie of two costs
    (:func:`~specmap.distance.ties.tie_costs`), each path of its geometry inside
    ``window`` (patches: their rings) is resampled every ``spacing`` of the normalised
    window; the candidates are the local maxima of the tie cost ``hi`` along each path
    and the path ends inside the window (a tie starts or stops), plus the crossings
    of two curves whose ties share a pair (where an active tie can stop being
    active: one of its costs ties with a third one).

    ``floor`` (with ``tolerance``) is a value of D already reached, e.g. on the
    slope-one line: a candidate with ``hi <= floor + tolerance`` could only be
    pruned ``below_best`` by :func:`~specmap.distance.reduced.reduced_search`, so it
    is dropped here and counted in ``below_floor``. Crossings of two ties are not
    computed when the sampled cost of each tie stays <= ``floor + tolerance`` (sampled
    max plus the largest step between consecutive samples, a margin for the cost
    between samples): a crossing's cost is one of the two tie costs there. Those pairs
    are counted in ``pruned["crossing_pairs_below_floor"]``.

    ``upper`` (an upper bound of D) and ``bound`` (an upper bound of h at many lines, e.g.
    :meth:`specmap.distance.boxes.BoxBound.at`) drop, as they are generated, the candidates
    with ``lo > upper + tolerance`` (``pruned["above_bound"]``) or ``lo > bound + tolerance``
    (``pruned["box_bound"]``): there h < t, so the candidate is not where D is read (the
    rules of the descending pass, applied early so that memory follows the survivors).

    Returns
    -------
    Candidates
    """
    t0 = time.perf_counter()
    pieces = tuple(getattr(atlas, "pieces", ()) or ())
    columns = {c: i for i, c in enumerate(contours_by_id)}
    cut = floor + tolerance
    ties = _live_ties(pieces, columns, window, roles)
    kept = _Kept([], [], [], [], [], [])
    keep_kw = dict(cut=cut, upper=upper, bound=bound, tol=tolerance)
    has, tie_top = _sampled(ties, columns, contours_by_id, window, spacing, kept, **keep_kw)
    pruned = {**ties.pruned, "not_met": int((~has).sum()), "crossing_pairs_below_floor": 0}
    over = tie_top > cut
    n_crossings = 0
    if has.sum() > 1:
        pruned["crossing_pairs_below_floor"] = _pairs_below(ties, has, over)
        n_crossings = _crossings(ties, columns, contours_by_id, window, has, over, kept, **keep_kw)
    pruned["above_bound"] = kept.above_bound
    pruned["box_bound"] = kept.bound_pruned
    live_idx = np.concatenate(kept.live) if kept.live else np.zeros(0, dtype=np.int64)
    cat = lambda xs: np.concatenate(xs) if xs else np.zeros(0)  # noqa: E731
    path_piece = ties.ids[ties.path_tie] if len(ties.path_tie) else np.zeros(0, dtype=np.int64)
    return Candidates(
        a=cat(kept.a),
        b=cat(kept.b),
        lo=cat(kept.lo),
        hi=cat(kept.hi),
        piece=ties.ids[live_idx] if len(ties.ids) else np.zeros(0, dtype=np.int64),
        origin=cat(kept.origin).astype(np.int64),
        paths=FlatPaths(_norm(ties.xy, window), ties.off),
        paths_of=PathsOf(path_piece),
        pruned=pruned,
        crossings=n_crossings,
        below_floor=kept.below_floor,
        live=[int(i) for i in ties.ids[np.nonzero(has)[0]]],
        seconds=time.perf_counter() - t0,
    )
