"""The tiled atlas merged from its tile files, one tile in memory at a time (maps larger than memory).

:func:`specmap.special.merge.merge_items` joins the tiles' pieces into whole tie curves and
holds the whole output (about 160 bytes per crossing). Here the tile files of
:mod:`specmap.special.tiles` are read three times, one file at a time, and only
*summaries* stay in memory (about 100 bytes per clipped curve line, plus the patches and
isolated points, which are few):

1. per line of every clipped tie curve: tie code, the tile's component label, length,
   bounding box, cut flags and the two end vertices, and the line it repeats (coincident
   curves of several ties, :func:`specmap.special.components.coincident_twins`, within the tile);
2. the cut ends are joined as :func:`specmap.special.merge.join_runs` joins them (the same
   tie and bit for bit the same vertex, else the nearest free end within ``1e-10`` of the
   window's diameter), so every whole curve is a *chain* of runs; the contacts of lines with
   patches and points are found per tile (shapely ``STRtree``), all other contacts come from
   the tiles' labels and the patches and points held in memory; components are those of the
   graph (scipy), as in :func:`specmap.special.components.components_with`;
3. the GeoJSON is written feature by feature: one feature per tie, tile and component for
   curves (the clipped lines, a curve crossing tile borders is in several features), one per
   tie and component for patches and points, each with its component's id.

Components, their lengths, areas, boxes and member ties, and the counts of tie curves are
those of the in-memory merge (tests/test_tiles.py). A chain repeats another when each of
its runs repeats one of the other's (a whole curve repeats a whole curve: the one-piece
rule, since coincident curves are clipped at the same chords).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching distance for 2D
   filtering functions", J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import shapely
from shapely.geometry import mapping

from specmap.io import read_json
from specmap.special.atlas import Component, _plain_geometry
from specmap.special.merge import CURVE, PATCH, POINT, TileResult
from specmap.special.pairs import PairTable, Tie
from specmap.strip import Window


def read_tile(folder: Path, name: str, fp: str) -> TileResult:
    """The finished tile ``name`` of ``folder`` (fingerprint ``fp``); ValueError when missing or stale."""
    from specmap.special.tiles import FORMAT

    path = folder / f"{name}.json"
    d = read_json(path)
    if not (isinstance(d, dict) and d.get("format") == FORMAT and d.get("done") is True):
        raise ValueError(f"{path}: not a finished tile")
    if d.get("fingerprint") != fp:
        raise ValueError(f"{path}: a tile of another map (fingerprint {d.get('fingerprint')!r})")
    return TileResult.from_json(d["result"])


@dataclass
class _Lines:
    """Summaries of the clipped curve lines of all tiles, in tile order (one row per line)."""

    code: np.ndarray  # (L,) tie code
    label: np.ndarray  # (L,) global index of the line whose tile label it has
    twin: np.ndarray  # (L,) global index of the line it repeats (itself if none)
    length: np.ndarray  # (L,)
    bbox: np.ndarray  # (L, 4)
    cut: np.ndarray  # (L, 2) bool
    ends: np.ndarray  # (L, 2, 2) start and end vertex


def _tile_lines(res: TileResult, offset: int, scale: float) -> tuple[dict[str, np.ndarray], list[Any]]:
    """Summary columns of one tile's curve lines (global indices from ``offset``) and the lines."""
    items = [it for it in res.items if it.kind == CURVE]
    if not items:
        return {}, []
    parts, pidx = shapely.get_parts(np.array([it.geometry for it in items], dtype=object), return_index=True)
    codes = np.array([it.code for it in items], dtype=np.int64)[pidx]
    labels = np.concatenate([np.asarray(it.labels, np.int64) for it in items]) + offset
    cuts = np.array([c for it in items for c in it.cuts], dtype=bool).reshape(-1, 2)
    coords, cidx = shapely.get_coordinates(parts, return_index=True)
    nv = np.bincount(cidx, minlength=len(parts))
    first = np.cumsum(nv) - nv
    ends = np.stack([coords[first], coords[first + nv - 1]], axis=1)
    cols = {
        "code": codes,
        "label": labels,
        "twin": _twins(np.asarray(parts), np.asarray(cuts.any(axis=1), dtype=bool), scale) + offset,
        "length": shapely.length(parts),
        "bbox": shapely.bounds(parts),
        "cut": cuts,
        "ends": ends,
    }
    return cols, list(parts)


def _twins(parts: np.ndarray, cut: np.ndarray, scale: float) -> np.ndarray:
    """:func:`~specmap.special.components.coincident_twins` among the uncut lines and among the cut
    ones separately (local indices).

    An uncut line is a whole tie curve; a cut one is a run of a longer curve. A whole curve
    that coincides with a run (it ends on the tile border where the other curve goes on) is not
    a repeat of that curve, which the one-piece rule keeps (the whole lines differ); whether a
    chain of runs repeats another is decided on chains (:func:`streamed_components`).
    """
    from specmap.special.components import coincident_twins

    twin = np.arange(len(parts), dtype=np.int64)
    for sel in (np.nonzero(~cut)[0], np.nonzero(cut)[0]):
        if sel.size:
            twin[sel] = sel[coincident_twins(list(parts[sel]), scale)]
    return twin


def _join_links(lines: _Lines, tol: float) -> np.ndarray:
    """Pairs (u, v) of lines whose cut ends are joined (:func:`specmap.special.merge.join_runs`' rule)."""
    from scipy.spatial import cKDTree

    rows, sides = np.nonzero(lines.cut)
    if rows.size == 0:
        return np.zeros((0, 2), np.int64)
    xy = lines.ends[rows, sides]
    code = lines.code[rows]
    order = np.lexsort((xy[:, 1], xy[:, 0], code))
    c, x, y = code[order], xy[order, 0], xy[order, 1]
    new = np.ones(order.size, dtype=bool)
    new[1:] = (c[1:] != c[:-1]) | (x[1:] != x[:-1]) | (y[1:] != y[:-1])
    start = np.nonzero(new)[0]
    size = np.diff(np.append(start, order.size))
    two = start[size == 2]
    linked = np.zeros(order.size, dtype=bool)
    linked[two] = linked[two + 1] = True
    out = [np.stack([rows[order[two]], rows[order[two + 1]]], axis=1)]
    rest = order[~linked]
    if rest.size > 1:  # the fallback: nearest free end of the same tie within ``tol``
        pairs = cKDTree(xy[rest]).query_pairs(tol, output_type="ndarray")
        if len(pairs):
            pairs = pairs[code[rest[pairs[:, 0]]] == code[rest[pairs[:, 1]]]]
            d = np.hypot(*(xy[rest[pairs[:, 0]]] - xy[rest[pairs[:, 1]]]).T)
            used = np.zeros(rest.size, dtype=bool)
            got = []
            for u, v in pairs[np.argsort(d, kind="stable")].tolist():
                if not used[u] and not used[v]:
                    used[u] = used[v] = True
                    got.append((int(rows[rest[u]]), int(rows[rest[v]])))
            if got:
                out.append(np.array(got, dtype=np.int64))
    return np.concatenate(out)


@dataclass(frozen=True)
class StreamedAtlas:
    """What the streamed merge keeps: the components (no geometry), the merged patches and points.

    ``line_comp`` gives the component index (into ``components``) of every clipped line, in
    tile order; ``tile_lines`` the number of lines of each tile.
    """

    components: tuple[Component, ...]
    stats: dict[str, Any]
    line_comp: np.ndarray
    tile_lines: tuple[int, ...]
    patches: tuple[tuple[int, Any], ...]
    points: tuple[tuple[int, Any], ...]
    part_comp: dict[str, np.ndarray]


def streamed_components(
    names: Sequence[str],
    load: Callable[[str], TileResult],
    table: PairTable,
    window: Window,
    tol: float,
) -> StreamedAtlas:
    """Components of the tiled atlas from its tiles, loaded one at a time by ``load(name)``.

    Passes 1 and 2 of the module text; the third (the features) is :func:`iter_features`.
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    from specmap.special.reasons import contour_scale, patch_reasons

    scale = max(window.diameter, 1e-300)
    eps = 1e-9 * scale
    cols: dict[str, list[np.ndarray]] = {}
    points: dict[int, list[Any]] = {}
    patch_parts: dict[int, list[Any]] = {}
    tile_lines = []
    offset = 0
    for name in names:  # pass 1: summaries
        res = load(name)
        got, _ = _tile_lines(res, offset, scale)
        for k, v in got.items():
            cols.setdefault(k, []).append(v)
        n = len(got["code"]) if got else 0
        tile_lines.append(n)
        offset += n
        for it in res.items:
            if it.kind == POINT:
                points.setdefault(it.code, []).extend(shapely.get_parts(it.geometry))
            elif it.kind == PATCH:
                patch_parts.setdefault(it.code, []).append(it.geometry)
        del res
    empty = {
        "code": np.zeros(0, np.int64),
        "label": np.zeros(0, np.int64),
        "twin": np.zeros(0, np.int64),
        "length": np.zeros(0),
        "bbox": np.zeros((0, 4)),
        "cut": np.zeros((0, 2), bool),
        "ends": np.zeros((0, 2, 2)),
    }
    lines = _Lines(**{k: (np.concatenate(cols[k]) if k in cols else v) for k, v in empty.items()})
    n_l = lines.code.size
    # patches as merge_items unites them (each distinct set of parts once), points per tie
    by_parts: dict[bytes, Any] = {}
    patches: list[tuple[int, Any]] = []
    for code in sorted(patch_parts):
        key = b"|".join(sorted(shapely.to_wkb(g) for g in patch_parts[code]))
        if key not in by_parts:
            by_parts[key] = shapely.union_all(patch_parts[code])
        if not by_parts[key].is_empty:
            patches.append((code, by_parts[key]))
    del patch_parts, by_parts
    pts = [(code, shapely.MultiPoint(points[code])) for code in sorted(points)]
    poly, poly_code, poly_piece = [], [], []
    for pk, (code, g) in enumerate(patches):
        for p in shapely.get_parts(g):
            if not p.is_empty:
                poly.append(p)
                poly_code.append(code)
                poly_piece.append(pk)
    point, point_code = [], []
    for code, g in pts:
        for p in shapely.get_parts(g):
            point.append(p)
            point_code.append(code)
    n_p, n_q = len(poly), len(point)
    regions = shapely.get_parts(shapely.union_all(poly)) if poly else np.zeros(0, dtype=object)
    n_r = len(regions)
    # nodes: lines [0, L), polygons [L, L+P), points [L+P, L+P+Q), regions after
    o_p, o_q, o_r = n_l, n_l + n_p, n_l + n_p + n_q
    links = _join_links(lines, 1e-10 * window.diameter)
    # edges: (line, the line of its tile label), the joins, then patches and points
    ea_ = [np.arange(n_l), links[:, 0]]
    eb_ = [lines.label, links[:, 1]]
    point_arr = np.array(point, dtype=object)
    if n_r:
        rtree = shapely.STRtree(regions)
        qi, ti = rtree.query(shapely.point_on_surface(np.array(poly, dtype=object)), predicate="intersects")
        ea_.append(o_p + qi)
        eb_.append(o_r + ti)
        qi, ti = rtree.query(regions, predicate="dwithin", distance=eps)
        ea_.append(o_r + qi)
        eb_.append(o_r + ti)
        if n_q:
            qi, ti = rtree.query(point_arr, predicate="dwithin", distance=eps)
            ea_.append(o_q + qi)
            eb_.append(o_r + ti)
    if n_q:
        qtree = shapely.STRtree(point_arr)
        qi, ti = qtree.query(point_arr, predicate="dwithin", distance=eps)
        ea_.append(o_q + qi)
        eb_.append(o_q + ti)
    if (n_r or n_q) and n_l:  # pass 2: lines against patches and points, tile by tile
        near = np.array(list(regions) + point, dtype=object)
        node = np.concatenate([o_r + np.arange(n_r), o_q + np.arange(n_q)]).astype(np.int64)
        ntree = shapely.STRtree(near)
        box = shapely.total_bounds(near)
        start = 0
        for name, n in zip(names, tile_lines, strict=True):
            if n and _boxes_meet(lines.bbox[start : start + n], box, eps):
                _, parts = _tile_lines(load(name), start, scale)
                qi, ti = ntree.query(np.array(parts, dtype=object), predicate="dwithin", distance=eps)
                ea_.append(start + qi)
                eb_.append(node[ti])
                del parts
            start += n
    n_nodes = o_r + n_r
    ia, ib = np.concatenate(ea_), np.concatenate(eb_)
    graph = coo_matrix((np.ones(ia.size, dtype=np.int8), (ia, ib)), shape=(n_nodes, n_nodes))
    n_comp, label = connected_components(graph, directed=False)
    del graph, ia, ib
    # whole curves: a line not cut is one; cut lines form chains (components of the joins);
    # a curve counts once among coincident ones: a line when it repeats no earlier line, a
    # chain when no earlier chain has the same sorted twins of its runs
    kept = lines.twin == np.arange(n_l)
    cutl = np.nonzero(lines.cut.any(axis=1))[0]
    n_chains = n_l - cutl.size
    if cutl.size:
        loc = np.full(n_l, -1, dtype=np.int64)
        loc[cutl] = np.arange(cutl.size)
        m = cutl.size
        g = coo_matrix(
            (np.ones(len(links), dtype=np.int8), (loc[links[:, 0]], loc[links[:, 1]])), shape=(m, m)
        )
        n_ch, ch = connected_components(g, directed=False)
        del g
        n_chains += int(n_ch)
        order = np.lexsort((lines.twin[cutl], ch))
        size = np.bincount(ch, minlength=n_ch)
        starts = np.cumsum(size) - size
        seen: set[bytes] = set()
        for c in np.nonzero(size > 1)[0].tolist():
            rows = cutl[order[starts[c] : starts[c] + size[c]]]
            key = np.sort(lines.twin[rows]).tobytes()
            kept[rows] = key not in seen
            seen.add(key)
    comp_l = label[:n_l]
    comp_p = label[o_p:o_q]
    comp_q = label[o_q:o_r]
    # per component: kind, area, length, box, ties
    has_l = np.bincount(comp_l, minlength=n_comp) > 0
    has_p = np.bincount(comp_p, minlength=n_comp) > 0
    has_q = np.bincount(comp_q, minlength=n_comp) > 0
    present = has_l | has_p | has_q
    length = np.bincount(comp_l[kept], weights=lines.length[kept], minlength=n_comp)
    inf = np.inf
    bb = np.tile([inf, inf, -inf, -inf], (n_comp, 1))
    for j, fn in ((0, np.minimum), (1, np.minimum), (2, np.maximum), (3, np.maximum)):
        fn.at(bb[:, j], comp_l[kept], lines.bbox[kept, j])
    if n_p:
        pb = shapely.bounds(np.array(poly, dtype=object))
        for j, fn in ((0, np.minimum), (1, np.minimum), (2, np.maximum), (3, np.maximum)):
            fn.at(bb[:, j], comp_p, pb[:, j])
    if n_q:
        qb = shapely.bounds(point_arr)
        for j, fn in ((0, np.minimum), (1, np.minimum), (2, np.maximum), (3, np.maximum)):
            fn.at(bb[:, j], comp_q, qb[:, j])
    all_comp = np.concatenate([comp_l, comp_p, comp_q])
    all_code = np.concatenate([lines.code, np.array(poly_code, np.int64), np.array(point_code, np.int64)])
    pair = (
        np.unique(np.stack([all_comp, all_code], axis=1), axis=0) if all_comp.size else np.zeros((0, 2), int)
    )
    ties_of: dict[int, list[Tie]] = {}
    if len(pair):
        ties_all = table.ties(pair[:, 1])
        for (c, _), t in zip(pair.tolist(), ties_all, strict=True):
            ties_of.setdefault(int(c), []).append(t)
    area = np.zeros(n_comp)
    polys_of: dict[int, list[Any]] = {}
    for p, c in zip(poly, comp_p.tolist(), strict=True):
        polys_of.setdefault(int(c), []).append(p)
    for c, ps in polys_of.items():
        area[c] = float(shapely.union_all(ps).area)
    # reasons: a tie's patch is held by the component that holds its representative point
    held: dict[int, list[int]] = {}
    if patches:
        rp = shapely.point_on_surface(np.array([g for _, g in patches], dtype=object))
        qi, ti = rtree.query(rp, predicate="intersects")
        first_region: dict[int, int] = {}
        for q, t in zip(qi.tolist(), ti.tolist(), strict=True):
            first_region.setdefault(q, t)
        for pk in range(len(patches)):
            if pk in first_region:
                held.setdefault(int(label[o_r + first_region[pk]]), []).append(pk)
    by_id = {c.id: c for c in table.contours}
    cscale = contour_scale(table.contours, tol)
    comps = []
    for c in np.nonzero(present)[0].tolist():
        kind = "patch" if has_p[c] else ("curve" if has_l[c] else "point")
        ties = tuple(sorted(ties_of.get(c, []), key=lambda t: (t.condition, t.pairs)))
        reasons: tuple[dict[str, Any], ...] = ()
        if kind == "patch":
            hk = held.get(c, [])
            reasons = tuple(
                patch_reasons(
                    [table.ties(np.array([patches[k][0]]))[0] for k in hk],
                    by_id,
                    tol,
                    [patches[k][1] for k in hk],
                    scale=cscale,
                )
            )
        comps.append(
            (tuple(float(x) for x in bb[c]), c, kind, float(area[c]), float(length[c]), ties, reasons)
        )
    comps.sort(key=lambda x: x[0])
    index = np.full(n_comp, -1, dtype=np.int64)
    out = []
    for ck, (box4, c, kind, ar, ln, ties, reasons) in enumerate(comps):
        index[c] = ck
        x0, y0, x1, y1 = box4
        out.append(Component(f"c{ck}", kind, ar, ln, (x0, y0, x1, y1), ties, None, reasons))
    stats = {
        "tie_curves": int(n_chains),
        "ties_with_curves": int(np.unique(lines.code).size),
        "ties_with_patches": len(patches),
        "pieces": int(np.unique(lines.code).size) + len(pts) + len(patches),
        "clipped_lines": int(n_l),
    }
    return StreamedAtlas(
        tuple(out),
        stats,
        index[comp_l],
        tuple(tile_lines),
        tuple(patches),
        tuple(pts),
        {"poly": index[comp_p], "point": index[comp_q]},
    )


def _boxes_meet(bbox: np.ndarray, box: np.ndarray, eps: float) -> bool:
    """Whether any of the boxes ``bbox`` (n, 4) comes within ``eps`` of ``box``."""
    return bool(
        np.any(
            (bbox[:, 0] <= box[2] + eps)
            & (bbox[:, 2] >= box[0] - eps)
            & (bbox[:, 1] <= box[3] + eps)
            & (bbox[:, 3] >= box[1] - eps)
        )
    )


def iter_features(
    names: Sequence[str], load: Callable[[str], TileResult], table: PairTable, got: StreamedAtlas
) -> Iterator[dict[str, Any]]:
    """GeoJSON features of the streamed atlas, one at a time (pass 3 of the module text).

    Curves: one feature per tie, tile and component (the tile's clipped lines); patches and
    points: one per tie and component. Properties: ``component`` (its id), ``tie``, ``kind``,
    and ``tile`` for curves.
    """
    ids = [c.id for c in got.components]
    start = 0
    for name, n in zip(names, got.tile_lines, strict=True):
        if not n:
            continue
        res = load(name)
        items = [it for it in res.items if it.kind == CURVE]
        comp = got.line_comp[start : start + n]
        ties = table.ties(np.array([it.code for it in items], dtype=np.int64))
        k = 0
        for it, tie in zip(items, ties, strict=True):
            parts = shapely.get_parts(it.geometry)
            cs = comp[k : k + len(parts)]
            k += len(parts)
            for c in np.unique(cs).tolist():
                geom = shapely.multilinestrings(parts[cs == c])
                yield _feature(geom, ids[c], tie, CURVE, name)
        start += n
        del res
    for kind, pieces, comp in (
        (PATCH, got.patches, got.part_comp["poly"]),
        (POINT, got.points, got.part_comp["point"]),
    ):
        k = 0
        for code, g in pieces:
            parts = (
                [p for p in shapely.get_parts(g) if not p.is_empty]
                if kind == PATCH
                else list(shapely.get_parts(g))
            )
            cs = comp[k : k + len(parts)]
            k += len(parts)
            tie = table.ties(np.array([code], dtype=np.int64))[0]
            for c in np.unique(cs).tolist():
                sel = [p for p, x in zip(parts, cs.tolist(), strict=True) if x == c]
                geom = shapely.union_all(sel) if kind == PATCH else shapely.MultiPoint(sel)
                yield _feature(geom, ids[c], tie, kind, None)


def _feature(geom: Any, comp: str, tie: Tie, kind: str, tile: str | None) -> dict[str, Any]:
    props: dict[str, Any] = {"component": comp, "kind": kind, "tie": tie.to_json()}
    if tile is not None:
        props["tile"] = tile
    return {"type": "Feature", "geometry": _plain_geometry(mapping(geom)), "properties": props}
