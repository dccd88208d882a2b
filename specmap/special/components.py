"""Connected components of the special set (production path).

The nodes of the graph are the single parts (one line string, polygon or point)
of all tie pieces; edges join parts closer than a tiny distance: line/line
contacts through the sample lattice (compiled chord interleaving,
:func:`specmap.special.compiled.components.lattice_labels`), everything that
involves a patch or a point through shapely ``STRtree`` queries; components are
those of the graph (scipy sparse graph).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import itertools
from collections.abc import Callable

import numpy as np
import shapely

from specmap.special.atlas import Component, TiePiece
from specmap.special.compiled.components import lattice_labels
from specmap.special.lattice import Lattice
from specmap.strip import Window


def segments(lines: list) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Segments (start, end, owning line index) of a list of LineStrings."""
    coords, idx = shapely.get_coordinates(np.array(lines, dtype=object), return_index=True)
    same = idx[1:] == idx[:-1]
    return coords[:-1][same], coords[1:][same], idx[:-1][same].astype(np.int64)


def _dedupe_lines(lines: list, scale: float) -> list:
    """Lines without repeats: a line whose vertices all lie within 1e-9 * ``scale`` of an earlier
    line's (same vertex count, either direction) is dropped (:func:`coincident_twins`)."""
    if not lines:
        return []
    twin = coincident_twins(lines, scale)
    return [g for i, g in enumerate(lines) if twin[i] == i]


def coincident_twins(lines: list, scale: float) -> np.ndarray:
    """For each line, the index of the first earlier kept line it repeats, else its own index.

    A line repeats a kept line when all its vertices lie within 1e-9 * ``scale`` of that
    line's (same vertex count, either direction). Candidates share the vertex count and a
    bucket of the vertex centroid (side 1e-6 * ``scale``; the 3 x 3 neighbouring buckets are
    searched, so rounding never separates coincident lines).
    """
    if not lines:
        return np.zeros(0, np.int64)
    tol = 1e-9 * scale
    h = 1e-6 * scale
    coords, idx = shapely.get_coordinates(np.array(lines, dtype=object), return_index=True)
    n = np.bincount(idx, minlength=len(lines))
    start = np.cumsum(n) - n
    cen = np.add.reduceat(coords, start, axis=0) / n[:, None]
    cell = np.floor(cen / h).astype(np.int64)
    buckets: dict[tuple[int, int, int], list[int]] = {}

    def seen(i: int, cx: int, cy: int) -> int:
        c = coords[start[i] : start[i] + n[i]]
        for dx, dy in itertools.product((-1, 0, 1), repeat=2):
            for j in buckets.get((int(n[i]), cx + dx, cy + dy), ()):
                d = coords[start[j] : start[j] + n[j]]
                if np.abs(c - d).max() <= tol or np.abs(c - d[::-1]).max() <= tol:
                    return j
        return -1

    twin = np.arange(len(lines), dtype=np.int64)
    for i, (cx, cy) in enumerate(cell.tolist()):
        j = seen(i, cx, cy)
        if j < 0:
            buckets.setdefault((int(n[i]), cx, cy), []).append(i)
        else:
            twin[i] = j
    return twin


def lattice_links(lines: list, eps: float, lattice: Lattice) -> tuple[np.ndarray, np.ndarray]:
    """Links (i, j) between lines whose union connects every set of touching lines.

    Uses the sample lattice the curves were traced on: every segment whose two
    end points lie on the boundary of one lattice cell (a marching-squares
    chord) is tested against the other chords of its cell by the interleaving
    of end points on the perimeter, lines sharing a vertex (to ``eps``) are
    joined, and the few other segments (ends on the domain boundary) are tested
    with the exact segment test against the segments of other components in
    the cells their box touches (all compiled:
    :func:`specmap.special.compiled.components.lattice_labels`).
    """
    if not lines:
        z = np.zeros(0, np.int64)
        return z, z
    p, q, owner = segments(lines)
    n_lines = len(lines)
    av, bv = lattice.av, lattice.bv
    ends = np.vstack([p, q])
    kk = np.round((ends - ends.min(axis=0)) / eps).astype(np.int64)
    vkey = kk[:, 0] * (int(kk[:, 1].max()) + 1) + kk[:, 1]
    label, _, _ = lattice_labels(
        np.ascontiguousarray(p),
        np.ascontiguousarray(q),
        owner,
        n_lines,
        np.asarray(av, float),
        np.asarray(bv, float),
        eps,
        vkey,
        np.argsort(vkey),
    )
    rep = np.full(int(label.max()) + 1, -1, dtype=np.int64)
    rep[label[::-1]] = np.arange(n_lines)[::-1]
    return np.arange(n_lines), rep[label]


def point_contacts(
    points: np.ndarray, lines: list, eps: float, chunk: int = 2_000_000
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Pairs of points within ``eps`` of each other, and (point, line) pairs within ``eps``.

    The pairs of ``STRtree.query(points, predicate="dwithin", distance=eps)`` over the points and
    lines, with the lines cut into their segments first (a point is within eps of a line exactly
    when it is within eps of one of its segments): a long tie curve's box holds most of the
    window, so a tree of whole curves hands every point thousands of curves to walk, while a
    segment's box is one lattice cell at most (a scan pair's banded map: 61,596 points against
    733,236 curves took 612 s that way). Segments go into the tree ``chunk`` at a time; point
    pairs come from a KD-tree.

    Returns
    -------
    pp_i, pp_j : ndarray of int
        Point index pairs (each point with itself included).
    pl_p, pl_l : ndarray of int
        (point index, line index) pairs.
    """
    from scipy.spatial import cKDTree

    pts = np.asarray(points, float).reshape(-1, 2)
    pairs = cKDTree(pts).query_pairs(eps, output_type="ndarray") if len(pts) else np.empty((0, 2), int)
    self_ = np.arange(len(pts), dtype=np.int64)
    pp_i = np.concatenate([self_, pairs[:, 0], pairs[:, 1]]).astype(np.int64)
    pp_j = np.concatenate([self_, pairs[:, 1], pairs[:, 0]]).astype(np.int64)
    empty = np.empty(0, np.int64)
    if not lines or not len(pts):
        return pp_i, pp_j, empty, empty
    u, v, owner = segments(lines)
    geoms = shapely.points(pts)
    out_p, out_l = [empty], [empty]
    for k in range(0, len(u), chunk):
        segs = shapely.linestrings(np.stack([u[k : k + chunk], v[k : k + chunk]], axis=1))
        qi, ti = shapely.STRtree(segs).query(geoms, predicate="dwithin", distance=eps)
        out_p.append(qi.astype(np.int64))
        out_l.append(owner[k + ti])
    pl = np.unique(np.column_stack([np.concatenate(out_p), np.concatenate(out_l)]), axis=0)
    return pp_i, pp_j, pl[:, 0].astype(np.int64), pl[:, 1].astype(np.int64)


def components(pieces: tuple[TiePiece, ...], window: Window, lattice: Lattice) -> tuple[Component, ...]:
    """Connected components of the union of all pieces.

    Parts closer than ``1e-9`` of the window diameter are joined: line/line
    contacts by chord interleaving per cell of the ``lattice`` the curves were
    traced on (:func:`lattice_links`); patch polygons join through the connected parts of
    their union (regions closer than the tolerance are joined too), and
    contacts of regions and points with everything else come from shapely
    ``STRtree`` queries. Components are those of the resulting graph
    (scipy sparse graph). Area is the area of the union of patch polygons;
    length the sum over distinct curves (curves of several ties that coincide
    to 1e-9 count once).
    """
    return components_with(
        pieces, window, lambda lines, eps: lattice_links(lines, eps, lattice), segment_points=True
    )


LineLinks = Callable[[list, float], tuple[np.ndarray, np.ndarray]]
"""(lines, eps) -> links (i, j) whose union connects every set of touching lines."""


def components_with(
    pieces: tuple[TiePiece, ...],
    window: Window,
    line_links: LineLinks,
    *,
    segment_points: bool = False,
) -> tuple[Component, ...]:
    """:func:`components` with the line/line contacts found by ``line_links``.

    The reference segment test (:func:`specmap.special.reference.segment_links`)
    plugs in here as well as the production :func:`lattice_links`. With ``segment_points``
    the point contacts come from :func:`point_contacts` (a tree of segments); without it from an
    ``STRtree`` query over whole parts (the reference).
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    scale = max(window.diameter, 1e-300)
    eps = 1e-9 * scale
    if not pieces:
        return ()
    arr, owner_idx = shapely.get_parts(
        np.array([p.geometry for p in pieces], dtype=object), return_index=True
    )
    keep = ~shapely.is_empty(arr)
    arr, owner_idx = arr[keep], owner_idx[keep]
    if not arr.size:
        return ()
    parts, owner = list(arr), owner_idx.tolist()
    types = shapely.get_type_id(arr)
    line_idx = np.nonzero(types == 1)[0]
    la, lb = line_links(list(arr[line_idx]), eps)
    ea, eb = [line_idx[la]], [line_idx[lb]]
    poly_idx = np.nonzero(types == 3)[0]
    point_idx = np.nonzero((types != 1) & (types != 3))[0]
    rest = np.concatenate([line_idx, point_idx])  # everything but polygons
    fast_points = bool(point_idx.size) and segment_points and bool(np.all(types[point_idx] == 0))
    tree_needed = poly_idx.size or (point_idx.size and not fast_points)
    rest_tree = shapely.STRtree(arr[rest]) if rest.size and tree_needed else None
    n = len(parts)
    n_nodes = n
    if poly_idx.size:
        # patch regions: the connected parts of the union of all patch polygons, one graph node each
        # (ties often share a region; testing each region once replaces a test per polygon)
        regions = shapely.get_parts(shapely.union_all(arr[poly_idx]))
        rnode = n + np.arange(len(regions))
        n_nodes = n + len(regions)
        rtree = shapely.STRtree(regions)
        qi, ti = rtree.query(shapely.point_on_surface(arr[poly_idx]), predicate="intersects")
        ea.append(poly_idx[qi])
        eb.append(rnode[ti])
        qi, ti = rtree.query(regions, predicate="dwithin", distance=eps)
        ea.append(rnode[qi])
        eb.append(rnode[ti])
        if rest_tree is not None:
            qi, ti = rest_tree.query(regions, predicate="dwithin", distance=eps)
            ea.append(rnode[qi])
            eb.append(rest[ti])
    if fast_points:
        pp_i, pp_j, pl_p, pl_l = point_contacts(
            shapely.get_coordinates(arr[point_idx]), list(arr[line_idx]), eps
        )
        ea += [point_idx[pp_i], point_idx[pl_p]]
        eb += [point_idx[pp_j], line_idx[pl_l]]
    elif point_idx.size:
        assert rest_tree is not None  # points are in ``rest``, so the tree exists
        qi, ti = rest_tree.query(arr[point_idx], predicate="dwithin", distance=eps)
        ea.append(point_idx[qi])
        eb.append(rest[ti])
    ia = np.concatenate(ea)
    ib = np.concatenate(eb)
    graph = coo_matrix((np.ones(ia.size), (ia, ib)), shape=(n_nodes, n_nodes))
    _, label = connected_components(graph, directed=False)
    label = label[:n]
    order = np.argsort(label, kind="stable")
    _, st = np.unique(label[order], return_index=True)
    groups = np.split(order, st[1:])
    comps = []
    for nodes in groups:
        geoms = [parts[n] for n in nodes]
        polys = [g for g in geoms if g.geom_type == "Polygon"]
        lines = _dedupe_lines([g for g in geoms if g.geom_type == "LineString"], scale)
        pts = [g for g in geoms if g.geom_type == "Point"]
        area_geom = shapely.union_all(polys) if polys else None
        line_geom = shapely.MultiLineString(lines) if lines else None
        length = float(sum(g.length for g in lines))
        members = [g for g in (area_geom, line_geom) if g is not None]
        if pts:
            members.append(shapely.MultiPoint(pts))
        geom = members[0] if len(members) == 1 else shapely.GeometryCollection(members)
        kind = "patch" if polys else ("curve" if lines else "point")
        ties = sorted({pieces[owner[n]].tie for n in nodes}, key=lambda t: (t.condition, t.pairs))
        comps.append(
            (
                geom.bounds,
                kind,
                float(area_geom.area) if area_geom is not None else 0.0,
                length,
                tuple(ties),
                geom,
            )
        )
    comps.sort(key=lambda c: (c[0][0], c[0][1], c[0][2], c[0][3]))
    return tuple(
        Component(
            f"c{k}", kind, area, length, (float(bb[0]), float(bb[1]), float(bb[2]), float(bb[3])), ties, geom
        )
        for k, (bb, kind, area, length, ties, geom) in enumerate(comps)
    )
