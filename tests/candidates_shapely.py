"""Reference of the candidate list (tests only): the per-piece shapely form it had before issue 11.

Candidates are local maxima of a tie's cost along its curve, curve ends inside
the window, and crossings of two curves whose ties share a pair (math.md
section 5; why they suffice: :func:`specmap.distance.reduced.reduced_search`).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from specmap.distance.paths import denormalise, geometry_paths, normalise, sample_path
from specmap.distance.result import Candidates
from specmap.distance.ties import costs_at, tie_code
from specmap.strip import Window

LOCAL_MAX, END, CROSSING = range(3)
ORIGINS = ("local_max", "end", "crossing")
"""Where a candidate comes from: a local maximum of the tied cost along a curve, a curve end, a crossing."""


@dataclass
class _LiveTies:
    """Ties of two costs inside the window, with their contour columns, geometry and sampled paths."""

    ids: list[int] = field(default_factory=list)  # piece indices
    codes: list[int] = field(default_factory=list)
    quads: list[list[int]] = field(default_factory=list)
    geoms: list = field(default_factory=list)  # curves (patches: their boundary), for crossings
    paths: list[np.ndarray] = field(default_factory=list)  # normalised
    paths_of: dict[int, list[int]] = field(default_factory=dict)
    samples: list[np.ndarray] = field(default_factory=list)  # one per path
    pruned: dict[str, int] = field(
        default_factory=lambda: {"roles": 0, "unknown_contour": 0, "not_met": 0, "outside_window": 0}
    )


@dataclass(frozen=True)
class _Parts:
    """Candidate arrays of one origin group, before concatenation (``live``: index into the live ties)."""

    a: np.ndarray
    b: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    live: np.ndarray
    origin: np.ndarray


def _live_ties(pieces: tuple, columns: dict, window: Window, spacing: float, roles: bool) -> _LiveTies:
    """Keep the pieces whose tie is a tie of two costs with known contours and geometry in the window."""
    from shapely import box

    out = _LiveTies()
    wbox = box(*window.bounds())
    wa0, wb0, wa1, wb1 = window.bounds()
    for ip, piece in enumerate(pieces):
        ids = [c for pair in piece.tie.pairs for c in pair]
        if any(c not in columns for c in ids):
            out.pruned["unknown_contour"] += 1
            continue
        code = tie_code(piece.tie, roles=roles)
        if code is None:
            out.pruned["roles"] += 1
            continue
        geom = piece.geometry
        if geom is None or geom.is_empty:
            out.pruned["outside_window"] += 1
            continue
        ga0, gb0, ga1, gb1 = geom.bounds
        if not (wa0 < ga0 and ga1 < wa1 and wb0 < gb0 and gb1 < wb1):  # not strictly inside: shapely decides
            if not geom.intersects(wbox):
                out.pruned["outside_window"] += 1
                continue
            geom = geom if wbox.contains(geom) else geom.intersection(wbox)
        out.ids.append(ip)
        out.codes.append(code)
        out.quads.append([columns[c] for c in ids])
        out.geoms.append(geom.boundary if geom.geom_type in ("Polygon", "MultiPolygon") else geom)
        out.paths_of[ip] = []
        for path in geometry_paths(geom):
            norm = normalise(path, window)
            out.paths_of[ip].append(len(out.paths))
            out.samples.append(sample_path(norm, spacing))
            out.paths.append(norm)
    return out


@dataclass(frozen=True)
class _Sampled:
    """Costs along the sampled paths: kept candidates, ties met, and a cost bound per live tie."""

    parts: _Parts
    below_floor: int
    has: np.ndarray  # live ties with a finite cost somewhere
    tie_top: np.ndarray  # sampled max plus the largest step between neighbours, per live tie


def _sampled_candidates(
    live: _LiveTies,
    codes: np.ndarray,
    quads: np.ndarray,
    columns: dict,
    contours_by_id: dict,
    window: Window,
    cut: float,
) -> _Sampled:
    """Local maxima of the cost ``hi`` along each path and path ends inside the window, above ``cut``."""
    path_live = np.array([i for i, ip in enumerate(live.ids) for _ in live.paths_of[ip]], dtype=np.int64)
    if live.paths:
        pid = np.repeat(np.arange(len(live.paths)), [len(q) for q in live.samples])
        norm_pts = np.concatenate(live.samples)
    else:
        pid = np.zeros(0, dtype=np.int64)
        norm_pts = np.zeros((0, 2))
    raw = denormalise(norm_pts, window)
    li = path_live[pid] if len(pid) else np.zeros(0, dtype=np.int64)
    lo, hi = costs_at(codes[li], quads[li], columns, contours_by_id, raw[:, 0], raw[:, 1])
    h = np.where(np.isnan(hi), -np.inf, hi)
    n = len(h)
    same_prev = np.zeros(n, dtype=bool)
    same_next = np.zeros(n, dtype=bool)
    same_prev[1:] = pid[1:] == pid[:-1]
    same_next[:-1] = pid[:-1] == pid[1:]
    prev_h = np.r_[-np.inf, h[:-1]] if n else h
    next_h = np.r_[h[1:], -np.inf] if n else h
    finite = np.isfinite(h)
    local_max = same_prev & same_next & (h >= prev_h) & (h > next_h) & finite
    edge = 1e-9
    inside = np.all((norm_pts > edge) & (norm_pts < 1 - edge), axis=1)
    end = (~same_prev | ~same_next) & finite & inside
    keep = local_max | end
    # pieces with no finite cost anywhere: their contours are never met together (or the roles fail)
    has = np.zeros(len(live.ids), dtype=bool)
    has[li[finite]] = True
    tie_top = np.full(len(live.ids), -np.inf)
    if n:
        np.maximum.at(tie_top, li[finite], h[finite])
        step = np.zeros(n)
        both = same_prev & finite & np.r_[False, finite[:-1]]
        step[both] = np.abs(h[both] - prev_h[both])
        tie_step = np.zeros(len(live.ids))
        np.maximum.at(tie_step, li, step)
        tie_top = tie_top + tie_step
    low = keep & (hi <= cut)  # NaN compares False: such samples are not kept anyway
    keep &= ~low
    parts = _Parts(
        raw[keep, 0], raw[keep, 1], lo[keep], hi[keep], li[keep], np.where(local_max[keep], LOCAL_MAX, END)
    )
    return _Sampled(parts, int(low.sum()), has, tie_top)


def _sharing_pairs(pieces: tuple, live: _LiveTies, alive: np.ndarray) -> np.ndarray:
    """Pairs (u, v), u < v, of live ties (indices into ``live.ids``) whose ties share a pair of contours."""
    by_pair: dict[tuple, list[int]] = {}
    for i in alive:
        for pair in pieces[live.ids[i]].tie.pairs:
            by_pair.setdefault(pair, []).append(int(i))
    us, vs = [], []
    for members in by_pair.values():
        m = np.asarray(members)
        if len(m) > 1:
            u, v = np.triu_indices(len(m), 1)
            us.append(m[u])
            vs.append(m[v])
    if not us:
        return np.zeros((0, 2), dtype=np.int64)
    n = max(len(live.ids), 1)  # one int64 key per pair, u * n + v: a 1-d unique (same rows and order)
    key = np.unique(np.concatenate(us) * n + np.concatenate(vs))
    return np.c_[key // n, key % n]


def _crossing_candidates(
    uv: np.ndarray,
    live: _LiveTies,
    codes: np.ndarray,
    quads: np.ndarray,
    columns: dict,
    contours_by_id: dict,
    cut: float,
) -> tuple[_Parts | None, int, int]:
    """Crossings of the tie pairs ``uv`` above ``cut``: (parts or None, crossings, candidates below floor)."""
    from shapely import intersection, intersects

    garr = np.asarray(live.geoms, dtype=object)
    hit = intersects(garr[uv[:, 0]], garr[uv[:, 1]]) if len(uv) else np.zeros(0, bool)
    uv = uv[hit]
    pa_a, pb_a, pl_a = _crossing_points(intersection(garr[uv[:, 0]], garr[uv[:, 1]]), uv)
    if not len(pa_a):
        return None, 0, 0
    clo, chi = costs_at(codes[pl_a], quads[pl_a], columns, contours_by_id, pa_a, pb_a)
    low = np.isfinite(chi) & (chi <= cut)
    ok = np.isfinite(chi) & ~low
    parts = _Parts(pa_a[ok], pb_a[ok], clo[ok], chi[ok], pl_a[ok], np.full(int(ok.sum()), CROSSING))
    return parts, len(pa_a) // 2, int(low.sum())


def special_candidates(
    atlas,
    contours_by_id: dict,
    window: Window,
    *,
    spacing: float = 1 / 200,
    roles: bool = True,
    floor: float = -math.inf,
    tolerance: float = 0.0,
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

    Returns
    -------
    Candidates
    """
    t0 = time.perf_counter()
    pieces = tuple(getattr(atlas, "pieces", ()) or ())
    columns = {c: i for i, c in enumerate(contours_by_id)}
    cut = floor + tolerance
    live = _live_ties(pieces, columns, window, spacing, roles)
    codes = np.asarray(live.codes, dtype=np.int64)
    quads = np.asarray(live.quads, dtype=np.int64).reshape(-1, 4)
    sampled = _sampled_candidates(live, codes, quads, columns, contours_by_id, window, cut)
    pruned = {**live.pruned, "not_met": int((~sampled.has).sum()), "crossing_pairs_below_floor": 0}
    below_floor = sampled.below_floor
    groups = [sampled.parts]
    n_crossings = 0
    alive = np.nonzero(sampled.has)[0]
    if len(alive) > 1:
        uv = _sharing_pairs(pieces, live, alive)
        if len(uv):
            over = (sampled.tie_top[uv[:, 0]] > cut) | (sampled.tie_top[uv[:, 1]] > cut)
            pruned["crossing_pairs_below_floor"] = int((~over).sum())
            parts, n_crossings, low = _crossing_candidates(
                uv[over], live, codes, quads, columns, contours_by_id, cut
            )
            below_floor += low
            if parts is not None:
                groups.append(parts)
    live_arr = np.asarray(live.ids, dtype=np.int64)
    live_idx = np.concatenate([g.live for g in groups])
    return Candidates(
        a=np.concatenate([g.a for g in groups]),
        b=np.concatenate([g.b for g in groups]),
        lo=np.concatenate([g.lo for g in groups]),
        hi=np.concatenate([g.hi for g in groups]),
        piece=live_arr[live_idx] if len(live_arr) else np.zeros(0, dtype=np.int64),
        origin=np.concatenate([g.origin for g in groups]).astype(np.int64),
        paths=live.paths,
        paths_of=live.paths_of,
        pruned=pruned,
        crossings=n_crossings,
        below_floor=below_floor,
        live=[live.ids[i] for i in alive],
        seconds=time.perf_counter() - t0,
    )


def _crossing_points(inter: np.ndarray, uv: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Points of the intersections ``inter`` of tie pairs ``uv`` (points; ends of overlaps), twice each.

    Same points and order as :func:`~specmap.distance.paths.geometry_paths` (a point, or
    the two ends of a path) per intersection; returns (a, b, live index), one entry for
    each tie of the pair.
    """
    from shapely import get_coordinates, get_parts, get_type_id

    empty = (np.zeros(0), np.zeros(0), np.zeros(0, dtype=np.int64))
    if not len(uv):
        return empty
    parts, owner = get_parts(inter, return_index=True)
    kinds = get_type_id(parts)
    if np.isin(kinds, (3, 4, 5, 6, 7)).any():  # nested collections or polygons: the general walk
        xs, ys, us = [], [], []
        for k, g in enumerate(inter):
            for path in geometry_paths(g):
                for x, y in path if len(path) == 1 else path[[0, -1]]:
                    xs.append(x)
                    ys.append(y)
                    us.append(k)
        P = np.c_[np.asarray(xs, float), np.asarray(ys, float)].reshape(-1, 2)
        pair = np.asarray(us, dtype=np.int64)
    else:
        coords, cidx = get_coordinates(parts, return_index=True)
        cnt = np.bincount(cidx, minlength=len(parts))
        first = np.cumsum(cnt) - cnt
        # per part, in order: a single point itself, a path its two ends (start first), an empty part nothing
        ends = np.c_[first, first + cnt - 1]
        idx = ends[np.c_[cnt >= 1, cnt > 1]]
        P = coords[idx]
        pair = owner[cidx[idx]]
    if not len(P):
        return empty
    u, v = uv[pair, 0], uv[pair, 1]
    return np.repeat(P[:, 0], 2), np.repeat(P[:, 1], 2), np.c_[u, v].ravel()
