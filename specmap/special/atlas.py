"""The atlas of the special set: pieces, connected components, JSON and GeoJSON.

A *piece* is the curve set, the isolated points or the patch of one tie. The
special set is the union of all pieces; its *components* are the connected
components of the graph whose nodes are the single parts (one line string,
polygon or point) of all pieces and whose edges join parts closer than a tiny
distance (binned segment tests and a shapely ``STRtree``; scipy graph components).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import shapely
from shapely.geometry import mapping

from specmap.io import to_plain
from specmap.special.compiled.components import lattice_labels
from specmap.special.pairs import Tie, tie_from_json
from specmap.strip import Window

KINDS = ("curve", "patch", "point")


@dataclass(frozen=True)
class TiePiece:
    """The curves, points or patch of one tie; geometry in (a, b)."""

    tie: Tie
    kind: str
    geometry: Any


@dataclass(frozen=True)
class Component:
    """One connected component of the special set.

    Attributes
    ----------
    id : str
    kind : {"curve", "patch", "point"}
        ``patch`` if it holds any patch, else ``curve`` if it holds any curve.
    area : float
        Area of its patches (union), in (a, b) units.
    length : float
        Length of its curves (union; coincident curves of several ties count once).
    bbox : (a_min, b_min, a_max, b_max)
    ties : tuple of Tie
    geometry : shapely geometry or None (None when read back from a summary)
    """

    id: str
    kind: str
    area: float
    length: float
    bbox: tuple[float, float, float, float]
    ties: tuple[Tie, ...]
    geometry: Any = None

    def summary(self) -> dict[str, Any]:
        return {"id": self.id, "kind": self.kind, "area": float(self.area), "length": float(self.length),
                "bbox": [float(x) for x in self.bbox], "ties": [t.to_json() for t in self.ties]}


@dataclass(frozen=True)
class Atlas:
    """The special set of a pair of grids in a window of the strip.

    Attributes
    ----------
    window : Window
    tolerance : float
        Residual tolerance (push units) for ties and patches.
    pairs : {"all", "roles"}
    method : {"sweep", "naive"}
    resolution : (n_a, n_b)
    pieces : tuple of TiePiece
    components : tuple of Component
    stats : dict
    """

    window: Window
    tolerance: float
    pairs: str
    method: str
    resolution: tuple[int, int]
    pieces: tuple[TiePiece, ...]
    components: tuple[Component, ...]
    stats: dict = field(default_factory=dict)

    @property
    def total_area(self) -> float:
        return float(sum(c.area for c in self.components))

    def counts(self) -> dict[str, int]:
        return {k: sum(1 for c in self.components if c.kind == k) for k in KINDS}

    def to_json(self) -> dict[str, Any]:
        """Summary dict (the ``special.json`` contract)."""
        area = self.total_area
        return to_plain({
            "window": self.window.to_json(),
            "tolerance": float(self.tolerance),
            "pairs": self.pairs,
            "method": self.method,
            "resolution": list(self.resolution),
            "components": [c.summary() for c in self.components],
            "total_area": area,
            "area_fraction": area / self.window.area if self.window.area > 0 else 0.0,
            "counts": self.counts(),
            "stats": self.stats,
        })

    def to_geojson(self) -> dict[str, Any]:
        """FeatureCollection, one feature per component, coordinates (a, b)."""
        feats = []
        for c in self.components:
            geom = mapping(c.geometry) if c.geometry is not None else None
            feats.append({"type": "Feature", "id": c.id, "geometry": to_plain(geom),
                          "properties": c.summary()})
        return {"type": "FeatureCollection", "features": feats,
                "properties": {k: v for k, v in self.to_json().items() if k != "components"}}


@dataclass(frozen=True)
class AtlasSummary:
    """An atlas read back from its JSON summary (no geometry)."""

    window: Window
    tolerance: float
    pairs: str
    method: str
    resolution: tuple[int, int]
    components: tuple[Component, ...]
    total_area: float
    area_fraction: float
    counts: dict
    stats: dict


def atlas_from_json(d: dict[str, Any]) -> AtlasSummary:
    """Read a ``special.json`` summary (inverse of :meth:`Atlas.to_json`, without geometry)."""
    comps = tuple(
        Component(c["id"], c["kind"], float(c["area"]), float(c["length"]), tuple(c["bbox"]),
                  tuple(tie_from_json(t) for t in c["ties"]))
        for c in d.get("components", [])
    )
    w = d["window"]
    return AtlasSummary(Window(tuple(w["a"]), tuple(w["b"])), float(d["tolerance"]), d["pairs"], d["method"],
                        tuple(d["resolution"]), comps, float(d["total_area"]), float(d["area_fraction"]),
                        dict(d["counts"]), dict(d.get("stats", {})))


def _segments(lines: list) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Segments (start, end, owning line index) of a list of LineStrings."""
    coords, idx = shapely.get_coordinates(np.array(lines, dtype=object), return_index=True)
    same = idx[1:] == idx[:-1]
    return coords[:-1][same], coords[1:][same], idx[:-1][same].astype(np.int64)


def _dedupe_lines(lines: list, scale: float) -> list:
    """Lines without repeats: a line whose vertices all lie within 1e-9 * ``scale`` of an earlier
    line's (same vertex count, either direction) is dropped.

    Candidates share the vertex count and a bucket of the vertex centroid (side 1e-6 * ``scale``;
    the 3 x 3 neighbouring buckets are searched, so rounding never separates coincident lines).
    """
    if not lines:
        return []
    tol = 1e-9 * scale
    h = 1e-6 * scale
    coords, idx = shapely.get_coordinates(np.array(lines, dtype=object), return_index=True)
    n = np.bincount(idx, minlength=len(lines))
    start = np.cumsum(n) - n
    cen = np.add.reduceat(coords, start, axis=0) / n[:, None]
    cell = np.floor(cen / h).astype(np.int64)
    buckets: dict[tuple[int, int, int], list[int]] = {}

    def seen(i: int, cx: int, cy: int) -> bool:
        c = coords[start[i]:start[i] + n[i]]
        for dx, dy in itertools.product((-1, 0, 1), repeat=2):
            for j in buckets.get((int(n[i]), cx + dx, cy + dy), ()):
                d = coords[start[j]:start[j] + n[j]]
                if np.abs(c - d).max() <= tol or np.abs(c - d[::-1]).max() <= tol:
                    return True
        return False

    out = []
    for i, (cx, cy) in enumerate(cell.tolist()):
        if not seen(i, cx, cy):
            buckets.setdefault((int(n[i]), cx, cy), []).append(i)
            out.append(lines[i])
    return out


def _segment_links(lines: list, eps: float) -> tuple[np.ndarray, np.ndarray]:
    """Links (i, j) between lines whose union connects every set of touching lines.

    Lines sharing a vertex (to ``eps``) are linked first. Segments are binned in
    a hash grid whose cell is the largest segment extent, so two touching
    segments share a bin; only segments of a common bin that still belong to
    different components are tested (vectorised, bins in random chunks with the
    components updated after each chunk), which keeps the work near-linear.
    """
    if not lines:
        z = np.zeros(0, np.int64)
        return z, z
    p, q, owner = _segments(lines)
    lo = np.minimum(p, q) - eps
    hi = np.maximum(p, q) + eps
    ext = np.max(hi - lo, axis=1)
    h = max(float(np.quantile(ext, 0.99)), eps, 1e-300)
    org = lo.min(axis=0)
    c0 = np.floor((lo - org) / h).astype(np.int64)
    c1 = np.floor((hi - org) / h).astype(np.int64)
    width = int(c1[:, 0].max()) + 2
    # every bin a segment's bounding box touches (long segments: several)
    nx_ = c1[:, 0] - c0[:, 0] + 1
    ny_ = c1[:, 1] - c0[:, 1] + 1
    tot = nx_ * ny_
    sid = np.repeat(np.arange(len(p)), tot)
    k = np.arange(int(tot.sum())) - np.repeat(np.cumsum(tot) - tot, tot)
    dy, dx = np.divmod(k, nx_[sid])
    segs = [sid]
    bins = [(c0[sid, 1] + dy) * width + c0[sid, 0] + dx]
    segs = np.concatenate(segs)
    bins = np.concatenate(bins)
    n_lines = len(lines)
    # round 1: lines sharing an end point or vertex (to eps) are linked without tests
    key = np.round(np.vstack([p, q]) / eps).astype(np.int64)
    _, vid = np.unique(key, axis=0, return_inverse=True)
    vid = vid.ravel()
    links_a = [np.concatenate([owner, owner])]
    links_b = [n_lines + vid]
    n_nodes = n_lines + int(vid.max()) + 1
    label = _labels(n_nodes, links_a, links_b)[:n_lines]
    # coincident segments (same rounded end points) are already linked: keep one per bin
    vp, vq = vid[:p.shape[0]], vid[p.shape[0]:]
    sk = np.minimum(vp, vq)[segs] * (int(vid.max()) + 1) + np.maximum(vp, vq)[segs]
    _, first = np.unique(np.stack([bins, sk], axis=1), axis=0, return_index=True)
    segs, bins = segs[first], bins[first]
    order = np.argsort(bins, kind="stable")
    segs, bins = segs[order], bins[order]
    _, start, count = np.unique(bins, return_index=True, return_counts=True)
    rng = np.random.default_rng(0)
    multi = np.nonzero(count > 1)[0]
    multi = multi[rng.permutation(multi.size)]
    work = count[multi].astype(np.int64) * (count[multi] - 1) // 2
    cuts = np.searchsorted(np.cumsum(work), np.arange(0, int(work.sum()) + 1, 1_000_000)[1:])
    for chunk in np.split(multi, np.unique(cuts + 1)):
        if chunk.size == 0:
            continue
        us, vs = [], []
        for cval in np.unique(count[chunk]):
            sel = start[chunk[count[chunk] == cval]]
            ia, ib = np.triu_indices(int(cval), k=1)
            for t0 in range(0, ia.size, 1_000_000):
                ja, jb = ia[t0:t0 + 1_000_000], ib[t0:t0 + 1_000_000]
                u = segs[(sel[:, None] + ja[None, :]).ravel()]
                v = segs[(sel[:, None] + jb[None, :]).ravel()]
                keep = label[owner[u]] != label[owner[v]]
                us.append(u[keep])
                vs.append(v[keep])
                if sum(x.size for x in us) > 1_000_000:
                    label = _test_links(p, q, owner, eps, us, vs, links_a, links_b, n_nodes, n_lines, label)
                    us, vs = [], []
        if us:
            label = _test_links(p, q, owner, eps, us, vs, links_a, links_b, n_nodes, n_lines, label)
    # links from every line to the first line of its component
    rep = np.full(int(label.max()) + 1, -1, dtype=np.int64)
    rep[label[::-1]] = np.arange(n_lines)[::-1]
    return np.arange(n_lines), rep[label]


def _lattice_links(lines: list, eps: float, lattice) -> tuple[np.ndarray, np.ndarray]:
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
    p, q, owner = _segments(lines)
    n_lines = len(lines)
    av, bv = lattice.av, lattice.bv
    ends = np.vstack([p, q])
    kk = np.round((ends - ends.min(axis=0)) / eps).astype(np.int64)
    vkey = kk[:, 0] * (int(kk[:, 1].max()) + 1) + kk[:, 1]
    label, _, _ = lattice_labels(np.ascontiguousarray(p), np.ascontiguousarray(q), owner, n_lines,
                                 np.asarray(av, float), np.asarray(bv, float), eps, vkey, np.argsort(vkey))
    rep = np.full(int(label.max()) + 1, -1, dtype=np.int64)
    rep[label[::-1]] = np.arange(n_lines)[::-1]
    return np.arange(n_lines), rep[label]


def _test_links(p, q, owner, eps, us, vs, links_a, links_b, n_nodes, n_lines, label):
    u = np.concatenate(us)
    v = np.concatenate(vs)
    keep = label[owner[u]] != label[owner[v]]
    u, v = u[keep], v[keep]
    if u.size == 0:
        return label
    hit = _segments_close(p[u], q[u], p[v], q[v], eps)
    if not hit.any():
        return label
    links_a.append(owner[u[hit]])
    links_b.append(owner[v[hit]])
    return _labels(n_nodes, links_a, links_b)[:n_lines]


def _labels(n: int, a: list, b: list) -> np.ndarray:
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    ea = np.concatenate(a)
    eb = np.concatenate(b)
    g = coo_matrix((np.ones(ea.size), (ea, eb)), shape=(n, n))
    return connected_components(g, directed=False)[1]


def _point_segment_distance(x, p, q):
    d = q - p
    L = np.einsum("ij,ij->i", d, d)
    t = np.where(L > 0, np.einsum("ij,ij->i", x - p, d) / np.where(L > 0, L, 1.0), 0.0)
    t = np.clip(t, 0.0, 1.0)
    return np.hypot(*(x - p - t[:, None] * d).T)


def _segments_close(p1, q1, p2, q2, eps) -> np.ndarray:
    """Vectorised: segments p1q1 and p2q2 cross or come within eps."""
    def orient(a, b, c):
        return (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0])

    o1 = orient(p1, q1, p2)
    o2 = orient(p1, q1, q2)
    o3 = orient(p2, q2, p1)
    o4 = orient(p2, q2, q1)
    cross = (o1 * o2 < 0) & (o3 * o4 < 0)
    dist = np.minimum.reduce([_point_segment_distance(p2, p1, q1), _point_segment_distance(q2, p1, q1),
                              _point_segment_distance(p1, p2, q2), _point_segment_distance(q1, p2, q2)])
    return cross | (dist <= eps)


def components(pieces: tuple[TiePiece, ...], window: Window, lattice: Any = None) -> tuple[Component, ...]:
    """Connected components of the union of all pieces.

    Parts closer than ``1e-9`` of the window diameter are joined: line/line
    contacts by a binned, vectorised segment test (or, given the ``lattice``
    the curves were traced on, by chord interleaving per cell, see
    :func:`_lattice_links`); patch polygons join through the connected parts of
    their union (regions closer than the tolerance are joined too), and
    contacts of regions and points with everything else come from shapely
    ``STRtree`` queries. Components are those of the resulting graph
    (scipy sparse graph). Area is the area of the union of patch polygons;
    length the sum over distinct curves (curves of several ties that coincide
    to 1e-9 count once).
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    scale = max(window.diameter, 1e-300)
    eps = 1e-9 * scale
    parts, owner = [], []
    for k, p in enumerate(pieces):
        for g in shapely.get_parts(p.geometry):
            if not g.is_empty:
                parts.append(g)
                owner.append(k)
    if not parts:
        return ()
    arr = np.array(parts, dtype=object)
    types = shapely.get_type_id(arr)
    line_idx = np.nonzero(types == 1)[0]
    if lattice is not None:
        la, lb = _lattice_links(list(arr[line_idx]), eps, lattice)
    else:
        la, lb = _segment_links(list(arr[line_idx]), eps)
    ea, eb = [line_idx[la]], [line_idx[lb]]
    poly_idx = np.nonzero(types == 3)[0]
    point_idx = np.nonzero((types != 1) & (types != 3))[0]
    rest = np.concatenate([line_idx, point_idx])  # everything but polygons
    rest_tree = shapely.STRtree(arr[rest]) if rest.size and (poly_idx.size or point_idx.size) else None
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
    if point_idx.size:
        qi, ti = rest_tree.query(arr[point_idx], predicate="dwithin", distance=eps)
        ea.append(point_idx[qi])
        eb.append(rest[ti])
    ea = np.concatenate(ea)
    eb = np.concatenate(eb)
    graph = coo_matrix((np.ones(ea.size), (ea, eb)), shape=(n_nodes, n_nodes))
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
        comps.append((geom.bounds, kind, float(area_geom.area) if area_geom is not None else 0.0,
                      length, tuple(ties), geom))
    comps.sort(key=lambda c: (c[0][0], c[0][1], c[0][2], c[0][3]))
    return tuple(Component(f"c{k}", kind, area, length, tuple(float(x) for x in bb), ties, geom)
                 for k, (bb, kind, area, length, ties, geom) in enumerate(comps))
