"""The exact merge of tiled special-set pieces into one :class:`~specmap.special.atlas.Atlas`.

Each tile of the window (:mod:`specmap.special.tiles`) is mapped with a one-cell halo and
clipped to its *core*, a block of cells of the one global lattice, so that every chord of
a tie curve, every isolated point and every patch cell belongs to exactly one tile. The
merge then

1. joins the curve pieces of each tie at their *cut ends* (the crossings on the shared
   border edges, computed once per side from the same edge and the whole window's
   tolerances, :func:`specmap.special.trace.refine`, hence the same vertex bit for bit), so
   a curve that passes from tile to tile is one polyline again, a closed curve one ring;
2. unites the points and unions the patch polygons of each tie (shapely);
3. (the reading of "special", :mod:`specmap.special.reading`, is local and was applied in
   each tile) recomputes the components and their reasons over the whole window and lattice
   (:func:`specmap.special.components.components`), as the one-piece atlas does.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching distance for 2D
   filtering functions", J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import shapely

from specmap.special.atlas import TiePiece
from specmap.special.pairs import CONDITIONS, PairTable, Tie

CURVE, POINT, PATCH = "curve", "point", "patch"


@dataclass(frozen=True)
class TileItem:
    """What one tile found for one tie, clipped to the tile's core.

    Attributes
    ----------
    code : int
        Tie code of the :class:`~specmap.special.pairs.PairTable` of the two grids.
    kind : {"curve", "point", "patch"}
    geometry : shapely geometry
        MultiLineString, MultiPoint or (Multi)Polygon, coordinates (a, b).
    cuts : tuple of (bool, bool)
        Curves: per line, whether its start and its end were cut at the core's border.
    labels : tuple of int
        Curves: per line, its component label among the tile's lines (line/line contacts in
        the tile's cells, :func:`specmap.special.components.lattice_links`).
    """

    code: int
    kind: str
    geometry: Any
    cuts: tuple[tuple[bool, bool], ...] = ()
    labels: tuple[int, ...] = ()

    def to_json(self) -> dict[str, Any]:
        """Plain JSON (geometry as hexadecimal WKB: exact doubles)."""
        out: dict[str, Any] = {
            "code": int(self.code),
            "kind": self.kind,
            "wkb": shapely.to_wkb(self.geometry, hex=True),
        }
        if self.kind == CURVE:
            out["cuts"] = [[bool(s), bool(e)] for s, e in self.cuts]
            out["labels"] = [int(x) for x in self.labels]
        return out

    @staticmethod
    def from_json(d: dict[str, Any]) -> TileItem:
        """Inverse of :meth:`to_json`."""
        cuts = tuple((bool(s), bool(e)) for s, e in d.get("cuts", ()))
        labels = tuple(int(x) for x in d.get("labels", ()))
        return TileItem(int(d["code"]), str(d["kind"]), shapely.from_wkb(d["wkb"]), cuts, labels)


@dataclass(frozen=True)
class TileResult:
    """The clipped pieces of one tile and the tile atlas's statistics."""

    name: str
    items: tuple[TileItem, ...]
    stats: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return {"name": self.name, "items": [it.to_json() for it in self.items], "stats": self.stats}

    @staticmethod
    def from_json(d: dict[str, Any]) -> TileResult:
        return TileResult(str(d["name"]), tuple(TileItem.from_json(x) for x in d["items"]), dict(d["stats"]))

    def __reduce__(self) -> tuple[Any, tuple[Any, ...]]:
        """Pickle in columns (one WKB array, flat cuts and labels): what a worker sends back.

        Pickling the items one by one costs a shapely object each way; in columns a tile of
        150k items goes through ``pickle`` about 4x faster, with the same doubles (WKB).
        """
        items = self.items
        n_lines = np.array([len(it.cuts) for it in items], dtype=np.int64)
        n_labels = np.array([len(it.labels) for it in items], dtype=np.int64)
        columns = (
            np.array([it.code for it in items], dtype=np.int64),
            [it.kind for it in items],
            shapely.to_wkb(np.array([it.geometry for it in items], dtype=object)),
            n_lines,
            np.array([c for it in items for c in it.cuts], dtype=bool).reshape(-1, 2),
            n_labels,
            np.array([x for it in items for x in it.labels], dtype=np.int64),
        )
        return (_tile_result, (self.name, columns, self.stats))


def _tile_result(name: str, columns: tuple[Any, ...], stats: dict[str, Any]) -> TileResult:
    """Inverse of :meth:`TileResult.__reduce__`."""
    from specmap.gcpause import collector_paused

    with collector_paused():  # 150k small objects at once (specmap.gcpause): 3.1 s -> 0.5 s a tile
        return _unpacked(name, columns, stats)


def _unpacked(name: str, columns: tuple[Any, ...], stats: dict[str, Any]) -> TileResult:
    codes, kinds, wkb, n_lines, cuts, n_labels, labels = columns
    geoms = shapely.from_wkb(wkb) if len(wkb) else []
    cut_rows = [(bool(a), bool(b)) for a, b in cuts.tolist()]
    label_list = labels.tolist()
    c0 = np.concatenate([[0], np.cumsum(n_lines)]).tolist()
    l0 = np.concatenate([[0], np.cumsum(n_labels)]).tolist()
    items = tuple(
        TileItem(int(c), k, g, tuple(cut_rows[c0[i] : c0[i + 1]]), tuple(label_list[l0[i] : l0[i + 1]]))
        for i, (c, k, g) in enumerate(zip(codes.tolist(), kinds, geoms, strict=True))
    )
    return TileResult(name, items, stats)


def tie_codes(table: PairTable, ties: Sequence[Tie]) -> np.ndarray:
    """Tie codes of ``table`` for canonical ties (inverse of :meth:`PairTable.ties`).

    An equal tie may be coded with its pairs in either order (the same contours, the same
    residual up to sign); a half tie's first pair is the larger difference (P), as in
    :meth:`PairTable.encode`.
    """
    ids = table.ids
    index: dict[tuple[str, ...], int] = {}
    for k, (i, j) in enumerate(zip(table.first.tolist(), table.second.tolist(), strict=True)):
        index[tuple(sorted((ids[i], ids[j])))] = k
    cond = np.array([CONDITIONS.index(t.condition) for t in ties], dtype=np.int64)
    p = np.array([index[t.pairs[0]] for t in ties], dtype=np.int64)
    q = np.array([index[t.pairs[1]] for t in ties], dtype=np.int64)
    return table.encode(cond, p, q)


def clip_lines(
    geoms: Sequence[Any], box: tuple[float, float, float, float]
) -> tuple[np.ndarray, list[tuple[bool, bool]], np.ndarray]:
    """The runs of the lines of ``geoms`` whose segments have their midpoint in ``box``.

    The box is half-open, ``a0 <= a < a1`` and ``b0 <= b < b1`` (pass ``inf`` for a side on
    the window's border), so neighbouring boxes share no segment. Chords of the marching
    squares lie inside one lattice cell, so a midpoint decides the cell, hence the tile, of
    a segment. A closed ring cut by the box is rotated to start at
    an outside segment first, so each of its runs has two cut ends. All lines at once
    (numpy), rings rotated one by one.

    Returns
    -------
    (runs, cuts, owner)
        LineStrings, per run whether its start / end was cut, and the index in ``geoms`` of
        the geometry each run comes from.
    """
    a0, b0, a1, b1 = box
    if not len(geoms):
        return np.zeros(0, dtype=object), [], np.zeros(0, np.int64)
    parts, pidx = shapely.get_parts(np.asarray(geoms, dtype=object), return_index=True)
    coords, lidx = shapely.get_coordinates(parts, return_index=True)
    n_l = len(parts)
    nv = np.bincount(lidx, minlength=n_l)
    ls = np.cumsum(nv) - nv
    le = ls + nv - 1
    mid = 0.5 * (coords[1:] + coords[:-1])
    seg_ok = lidx[1:] == lidx[:-1]
    ins = seg_ok & (mid[:, 0] >= a0) & (mid[:, 0] < a1) & (mid[:, 1] >= b0) & (mid[:, 1] < b1)
    ring = np.zeros(n_l, dtype=bool)
    out_any = np.bincount(lidx[:-1][seg_ok & ~ins], minlength=n_l) > 0
    closed = (nv > 2) & np.all(coords[ls] == coords[le], axis=1)
    rot = np.nonzero(closed & out_any)[0]
    if rot.size:  # rings cut by the box: start each at its first outside segment
        coords = coords.copy()
        for line in rot.tolist():
            c = coords[ls[line] : le[line] + 1]
            k = int(np.argmin(ins[ls[line] : le[line]]))
            coords[ls[line] : le[line] + 1] = np.vstack([c[k:-1], c[: k + 1]])
        ring[rot] = True
        mid = 0.5 * (coords[1:] + coords[:-1])
        ins = seg_ok & (mid[:, 0] >= a0) & (mid[:, 0] < a1) & (mid[:, 1] >= b0) & (mid[:, 1] < b1)
    pad = np.concatenate([[False], ins, [False]]).astype(np.int8)
    step = np.diff(pad)
    rs = np.nonzero(step == 1)[0]  # first segment of a run
    re_ = np.nonzero(step == -1)[0] - 1  # last segment of a run
    line = lidx[rs]
    cut_s = (rs > ls[line]) | ring[line]
    cut_e = (re_ + 1 < le[line]) | ring[line]
    length = re_ - rs + 2
    vid = np.repeat(rs, length) + (
        np.arange(int(length.sum())) - np.repeat(np.cumsum(length) - length, length)
    )
    runs = shapely.linestrings(coords[vid], indices=np.repeat(np.arange(rs.size), length))
    return runs, list(zip(cut_s.tolist(), cut_e.tolist(), strict=True)), pidx[line].astype(np.int64)


def join_runs(
    runs: list[np.ndarray],
    cuts: list[tuple[bool, bool]],
    tol: float,
    group: np.ndarray | None = None,
    members: list[list[int]] | None = None,
) -> tuple[list[np.ndarray], list[int]]:
    """Polylines from runs joined at matching cut ends (within ``tol``, same ``group``).

    A cut end is a crossing on a border edge, seen from both sides: it is joined to the one
    other cut end of the same group (tie code) at the very same vertex; ends left over (none
    in the tests) to the nearest free end of the group within ``tol``. The joint vertex is
    the first run's. Runs that close up become rings (first vertex repeated at the end).

    Returns
    -------
    (lines, groups)
        The joined polylines and the group of each; when a list ``members`` is given, the
        runs of each line are appended to it.
    """
    from scipy.spatial import cKDTree

    n = len(runs)
    grp = np.zeros(n, dtype=np.int64) if group is None else np.asarray(group, dtype=np.int64)
    ends = [(r, e) for r in range(n) for e in (0, 1) if cuts[r][e]]
    link: dict[tuple[int, int], tuple[int, int]] = {}
    # first by identity: a cut end is a refined crossing of a shared border edge, computed
    # from the same edge, tie and tolerances in both tiles (bit for bit the same vertex)
    same: dict[tuple[int, float, float], list[tuple[int, int]]] = {}
    for r, e in ends:
        x, y = runs[r][0] if e == 0 else runs[r][-1]
        same.setdefault((int(grp[r]), float(x), float(y)), []).append((r, e))
    for group_ends in same.values():
        if len(group_ends) == 2:
            u, v = group_ends
            link[u], link[v] = v, u
    rest = [x for x in ends if x not in link]
    if len(rest) > 1:  # fallback (not met in the tests): the nearest free end within ``tol``
        xy = np.array([runs[r][0] if e == 0 else runs[r][-1] for r, e in rest])
        eg = grp[[r for r, _ in rest]]
        pairs = cKDTree(xy).query_pairs(tol, output_type="ndarray")
        if len(pairs):
            pairs = pairs[eg[pairs[:, 0]] == eg[pairs[:, 1]]]
            d = np.hypot(*(xy[pairs[:, 0]] - xy[pairs[:, 1]]).T)
            for u, v in pairs[np.argsort(d, kind="stable")].tolist():  # nearest first
                if rest[u] not in link and rest[v] not in link:
                    link[rest[u]] = rest[v]
                    link[rest[v]] = rest[u]
    seen = np.zeros(n, dtype=bool)

    def walk(r: int, enter: int) -> tuple[list[np.ndarray], bool]:
        """Runs from run ``r`` entered at end ``enter``, following links; (pieces, closed)."""
        out: list[np.ndarray] = []
        start = (r, enter)
        if members is not None:
            members.append([])
        while True:
            seen[r] = True
            if members is not None:
                members[-1].append(r)
            c = runs[r] if enter == 0 else runs[r][::-1]
            out.append(c if not out else c[1:])
            nxt = link.get((r, 1 - enter))
            if nxt is None:
                return out, False
            if nxt == start:
                return out, True
            r, enter = nxt
            if seen[r]:
                return out, False

    lines: list[np.ndarray] = []
    groups: list[int] = []
    for r in range(n):  # open chains start at a free end
        if seen[r]:
            continue
        for e in (0, 1):
            if (r, e) not in link:
                parts, _ = walk(r, e)
                lines.append(np.vstack(parts))
                groups.append(int(grp[r]))
                break
    for r in range(n):  # what is left are rings
        if not seen[r]:
            parts, closed = walk(r, 0)
            c = np.vstack(parts)
            if closed and not np.array_equal(c[0], c[-1]):
                c = np.vstack([c, c[:1]])
            lines.append(c)
            groups.append(int(grp[r]))
    return lines, groups


class _UnionFind:
    """Union-find over ``n`` labels (path halving)."""

    def __init__(self, n: int) -> None:
        self.parent = np.arange(n)

    def find(self, x: int) -> int:
        p = self.parent
        while p[x] != x:
            p[x] = p[p[x]]
            x = int(p[x])
        return x

    def union(self, x: int, y: int) -> None:
        rx, ry = self.find(x), self.find(y)
        if rx != ry:
            self.parent[max(rx, ry)] = min(rx, ry)


def _merged_curves(
    items: list[TileItem], labels: np.ndarray, tol: float
) -> tuple[dict[int, Any], dict[int, np.ndarray]]:
    """MultiLineString per tie code of all tiles' curve items (cut runs joined, the rest as they are).

    ``labels`` are global component labels of the items' lines (in the order of their parts);
    the labels of the runs of one joined line are united. Returns the curves and, per code,
    the label of each of its lines (union-find roots).
    """
    if not items:
        return {}, {}
    geoms = np.array([it.geometry for it in items], dtype=object)
    parts, pidx = shapely.get_parts(geoms, return_index=True)
    codes = np.array([it.code for it in items], dtype=np.int64)[pidx]
    cuts = [c for it in items for c in it.cuts]
    cut = np.array([s or e for s, e in cuts], dtype=bool)
    uf = _UnionFind(int(labels.max()) + 1 if labels.size else 0)
    lines = list(parts[~cut])
    line_codes = list(codes[~cut].tolist())
    line_labels = list(labels[~cut].tolist())
    del geoms
    if cut.any():
        k = np.nonzero(cut)[0]
        coords, cidx = shapely.get_coordinates(parts[k], return_index=True)
        runs = np.split(coords, np.cumsum(np.bincount(cidx, minlength=k.size))[:-1])
        members: list[list[int]] = []
        joined, groups = join_runs(runs, [cuts[i] for i in k.tolist()], tol, codes[k], members)
        for m in members:
            first = int(labels[k[m[0]]])
            for r in m[1:]:
                uf.union(first, int(labels[k[r]]))
            line_labels.append(first)
        if joined:
            sizes = np.array([len(c) for c in joined], dtype=np.int64)
            made = shapely.linestrings(np.vstack(joined), indices=np.repeat(np.arange(sizes.size), sizes))
            lines.extend(made.tolist())
        line_codes.extend(groups)
    roots = np.array([uf.find(x) for x in line_labels], dtype=np.int64)
    order = np.argsort(np.array(line_codes, dtype=np.int64), kind="stable")
    lc = np.array(line_codes, dtype=np.int64)[order]
    uc, first_i = np.unique(lc, return_index=True)
    mls = shapely.multilinestrings(np.array(lines, dtype=object)[order], indices=np.searchsorted(uc, lc))
    bounds = np.append(first_i, lc.size)
    lab = {int(c): roots[order[bounds[i] : bounds[i + 1]]] for i, c in enumerate(uc.tolist())}
    return dict(zip(uc.tolist(), list(mls), strict=True)), lab


def merge_items(
    results: Iterable[TileResult], diameter: float
) -> tuple[list[tuple[int, str, Any]], dict[int, np.ndarray]]:
    """Items (code, kind, geometry) of the whole window, in the order of the one-piece atlas.

    Per tie: curves joined at cut ends (:func:`join_runs`, fallback tolerance
    ``1e-10 * diameter``), then points; patches (unions of the tiles' clipped polygons) after
    all curves and points, each group sorted by code. Also, per code, the component label of
    each of its curve lines: the tiles' labels (contacts in each tile's cells) united where a
    line passes from tile to tile (union-find), so the line/line part of the components needs
    no pass over the whole window's segments.
    """
    curve_items: list[TileItem] = []
    curve_labels: list[np.ndarray] = []
    point_codes: list[int] = []
    point_geoms: list[Any] = []
    patches: dict[int, list[Any]] = {}
    offset = 0
    for res in results:
        tile_labels: list[int] = []
        for it in res.items:
            if it.kind == CURVE:
                curve_items.append(it)
                tile_labels.extend(it.labels)
            elif it.kind == POINT:
                point_codes.append(it.code)
                point_geoms.append(it.geometry)
            else:
                patches.setdefault(it.code, []).append(it.geometry)
        lab = np.asarray(tile_labels, dtype=np.int64)
        curve_labels.append(lab + offset)
        offset += int(lab.max()) + 1 if lab.size else 0
    points = _points_by_code(point_codes, point_geoms)
    labels = np.concatenate(curve_labels) if curve_labels else np.zeros(0, np.int64)
    curves, line_labels = _merged_curves(curve_items, labels, 1e-10 * diameter)
    del curve_items
    items: list[tuple[int, str, Any]] = []
    for code in sorted(set(curves) | set(points)):
        if code in curves:
            items.append((code, CURVE, curves[code]))
        if code in points:
            items.append((code, POINT, shapely.MultiPoint(points[code])))
    # ties often share one region (symmetric maps): each distinct set of parts is united once
    by_parts: dict[bytes, Any] = {}
    for code in sorted(patches):
        parts = patches[code]
        key = b"|".join(sorted(shapely.to_wkb(g) for g in parts))
        if key not in by_parts:
            by_parts[key] = shapely.union_all(parts)
        if not by_parts[key].is_empty:
            items.append((code, PATCH, by_parts[key]))
    return items, line_labels


def _points_by_code(codes: list[int], geoms: list[Any]) -> dict[int, list[Any]]:
    """The single points of the tiles' point items per tie code, in the order the items came."""
    if not geoms:
        return {}
    parts, idx = shapely.get_parts(np.array(geoms, dtype=object), return_index=True)
    pc = np.asarray(codes, dtype=np.int64)[idx]
    order = np.argsort(pc, kind="stable")
    uc, first = np.unique(pc[order], return_index=True)
    bounds = np.append(first, order.size)
    return {int(c): list(parts[order[bounds[i] : bounds[i + 1]]]) for i, c in enumerate(uc.tolist())}


def as_pieces(table: PairTable, items: list[tuple[int, str, Any]]) -> list[TiePiece]:
    """Tie pieces of merged items (the ties decoded from their codes)."""
    ties = table.ties(np.array([c for c, _, _ in items], dtype=np.int64)) if items else []
    return [TiePiece(tie, kind, geom) for tie, (_, kind, geom) in zip(ties, items, strict=True)]
