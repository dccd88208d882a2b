"""Which ties count: the reading of "special" by pairs of points or by pairs of contours.

[EFQT23] define a special value through the points where the line r(a, b) meets
Γ(f) ∪ Γ(g): two *different* pairs of those points whose coordinate differences tie. Ties
are computed per contour, so where two contours β, δ meet r(a, b) in the same point (a
crossing of β and δ, a proper contour's end that is a half-line's start, or two coincident
contours) the tie |s_α − s_β| = |s_α − s_δ| holds trivially: the two pairs of contours
{α, β}, {α, δ} are one pair of points. Every line through such a point then looks special,
and the pencil of those lines is a curve of the strip (a patch for coincident contours)
that carries no change of the matching cost.

The **points** reading (the default, [EFQT23]) removes exactly these coincidences: an equal
tie of two pairs sharing a contour α holds on two branches, s_β = s_δ (β and δ meet r at one
point) and s_β + s_δ = 2 s_α (β and δ on either side of α at equal distance); only the second
is special. A half tie with s_β = s_δ would need a zero difference, excluded by "> 0". Four
distinct contours tie as pairs of points only if two coincidences happen at once, which
has codimension two in the strip (isolated points). The **contours** reading keeps every
per-contour tie (specmap's behaviour before this module).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching distance for 2D
   filtering functions", J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import numpy as np
import shapely

from specmap.special.compiled.contours import FlatContours, slot_params
from specmap.special.pairs import PairTable

READINGS = ("points", "contours")


def shared_slots(table: PairTable, codes: np.ndarray) -> np.ndarray:
    """(k, 3) contour indices (α, β, δ) of equal ties {α, β} ~ {α, δ}; -1 rows for other ties."""
    slots, factor = table.tie_contours(np.asarray(codes, np.int64))
    out = np.full((len(slots), 3), -1, dtype=np.int64)
    for k, (c0, c1, c2, c3) in enumerate(slots.tolist()):
        if factor[k] != 1.0:
            continue
        for alpha, beta in ((c0, c1), (c1, c0)):
            if alpha in (c2, c3):
                delta = c3 if c2 == alpha else c2
                if delta != beta:
                    out[k] = (alpha, beta, delta)
                break
    return out


def coincident(
    table: PairTable,
    triples: np.ndarray,
    a: np.ndarray,
    b: np.ndarray,
    flat: FlatContours | None = None,
) -> np.ndarray:
    """Whether each line (a[k], b[k]) lies on the branch s_β = s_δ of its triple (α, β, δ).

    Of the two branches of |s_α − s_β| = |s_α − s_δ| the nearer one is taken: the residuals
    |s_β − s_δ| and |s_β + s_δ − 2 s_α| are compared at the line. ``flat``: the table's
    contours as :class:`FlatContours` when the caller has them (built here otherwise).
    """
    slots = np.ascontiguousarray(triples, dtype=np.int64)
    flat = FlatContours.of(table.contours) if flat is None else flat
    s, _ = slot_params(
        *flat.args,
        slots,
        np.ascontiguousarray(a, dtype=float),
        np.ascontiguousarray(b, dtype=float),
    )
    return np.abs(s[:, 1] - s[:, 2]) <= np.abs(s[:, 1] + s[:, 2] - 2.0 * s[:, 0])


def _probe(geom) -> list[tuple[float, float]]:
    """One point per part of a point set or a patch: the point, a patch's inner point."""
    out = []
    for part in shapely.get_parts(geom):
        if part.geom_type == "Point":
            out.append((part.x, part.y))
        else:
            p = part.representative_point()
            out.append((p.x, p.y))
    return out


def _kept_runs(lines: list, drop_seg: np.ndarray, seg_line: np.ndarray) -> tuple[list, np.ndarray]:
    """Runs of consecutive kept segments of ``lines``; and per line whether it lost a segment.

    ``drop_seg`` flags the segments (in the order of :func:`shapely.get_coordinates`, one
    entry per pair of consecutive vertices of a line, ``seg_line`` its line). A closed line
    that loses segments is read from its first dropped segment on, so no run is split at the
    ring's start vertex.
    """
    touched = np.bincount(seg_line, weights=drop_seg, minlength=len(lines)) > 0
    out: list = []
    for k, line in enumerate(lines):
        if not touched[k]:
            out.append(line)
            continue
        c = np.asarray(line.coords)
        d = drop_seg[seg_line == k]
        if len(c) > 2 and np.array_equal(c[0], c[-1]):
            r = int(np.argmax(d))
            c = np.vstack([c[r:-1], c[: r + 1]])
            d = np.concatenate([d[r:], d[:r]])
        pad = np.concatenate([[1], d.astype(np.int8), [1]])
        step = np.diff(pad)
        starts = np.nonzero(step == -1)[0]
        ends = np.nonzero(step == 1)[0]  # one past the last kept segment
        out.extend(shapely.LineString(c[s0 : e0 + 1]) for s0, e0 in zip(starts, ends, strict=True))
    return out, touched


def _curves_reading(
    table: PairTable, triples: np.ndarray, geoms: list, flat: FlatContours
) -> list[tuple[list, int]]:
    """The parts of curve pieces off the coincidence branch, decided vertex by vertex.

    Every vertex of a traced curve is a zero of the tie's residual (a refined crossing or a
    domain end), so it lies on one of the two branches; a segment is dropped when both its
    ends lie on the coincidence branch (segments from one branch to the other, which meet
    only where three contours meet the line in one point, are kept). The decision is local:
    a piece of the curve, e.g. in a tile of the window, is read as the whole curve is.

    All pieces at once (one coordinate read, one compiled evaluation); ``triples[k]`` is the
    (α, β, δ) of ``geoms[k]``. Returns per piece (kept lines, lines that lost a segment).
    """
    parts = [list(shapely.get_parts(g)) for g in geoms]
    n_lines = np.array([len(p) for p in parts], dtype=np.int64)
    first_line = np.r_[0, np.cumsum(n_lines)].astype(np.int64)
    lines = np.empty(int(first_line[-1]), dtype=object)
    lines[:] = [ln for p in parts for ln in p]
    if not len(lines):
        return [([], 0) for _ in geoms]
    xy, idx = shapely.get_coordinates(lines, return_index=True)
    piece_of_line = np.repeat(np.arange(len(geoms)), n_lines)
    same = coincident(table, triples[piece_of_line[idx]], xy[:, 0], xy[:, 1], flat)
    seg = idx[1:] == idx[:-1]
    drop = (same[1:] & same[:-1])[seg]
    seg_line = idx[:-1][seg].astype(np.int64)
    bounds = np.searchsorted(seg_line, first_line)  # segments of piece k: bounds[k] .. bounds[k + 1]
    out = []
    for k, p in enumerate(parts):
        d = drop[bounds[k] : bounds[k + 1]]
        if not d.any():
            out.append((p, 0))
            continue
        kept, touched = _kept_runs(p, d, seg_line[bounds[k] : bounds[k + 1]] - first_line[k])
        out.append((kept, int(touched.sum())))
    return out


def points_reading(table: PairTable, items: list[tuple[int, str, object]]) -> tuple[list, dict[str, int]]:
    """Drop the parts of tie pieces that lie on a coincidence branch (see the module text).

    Curves are read segment by segment, all at once (:func:`_curves_reading`), points one by one, patches
    by an inner point of each part.

    Parameters
    ----------
    table : PairTable
    items : list of (code, kind, geometry)
        Traced pieces: kind ``"curve"`` (MultiLineString), ``"point"`` (MultiPoint) or
        ``"patch"`` (polygonal).

    Returns
    -------
    (kept items, counts)
        Items with their coincident parts removed (empty ones dropped), and the numbers of
        curves that lost segments, points and patches removed.
    """
    removed = {"curves": 0, "points": 0, "patches": 0}
    codes = np.array([c for c, _, _ in items], dtype=np.int64)
    triples = shared_slots(table, codes) if len(items) else np.empty((0, 3), np.int64)
    flat = FlatContours.of(table.contours) if (triples[:, 0] >= 0).any() else None
    probes, owner = [], []
    on_curve = []
    for k, (_, kind, geom) in enumerate(items):
        if triples[k, 0] < 0:
            continue
        if kind == "curve":
            on_curve.append(k)
        else:
            pts = _probe(geom)
            probes.extend(pts)
            owner.extend([k] * len(pts))
    curves: dict[int, list] = {}
    if on_curve:
        assert flat is not None
        read = _curves_reading(table, triples[on_curve], [items[k][2] for k in on_curve], flat)
        for k, (kept_lines, n_touched) in zip(on_curve, read, strict=True):
            curves[k] = kept_lines
            removed["curves"] += n_touched
    drop_of: dict[int, np.ndarray] = {}
    if probes:
        P = np.array(probes, dtype=float)
        own = np.array(owner, dtype=np.int64)
        same = coincident(table, triples[own], P[:, 0], P[:, 1], flat)
        for k in np.unique(own):
            drop_of[int(k)] = same[own == k]
    kept = []
    for k, (code, kind, geom) in enumerate(items):
        if k in curves:
            if curves[k]:
                kept.append((code, kind, shapely.MultiLineString(curves[k])))
            continue
        if k not in drop_of or not drop_of[k].any():
            kept.append((code, kind, geom))
            continue
        parts = shapely.get_parts(geom)
        keep = [g for g, d in zip(parts, drop_of[k], strict=True) if not d]
        removed["points" if kind == "point" else "patches"] += int(drop_of[k].sum())
        if not keep:
            continue
        if kind == "point":
            kept.append((code, kind, shapely.MultiPoint(keep)))
        else:
            kept.append((code, kind, shapely.union_all(keep)))
    return kept, removed
