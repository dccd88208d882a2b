"""The atlas of the special set: pieces, connected components, JSON and GeoJSON.

A *piece* is the curve set, the isolated points or the patch of one tie. The
special set is the union of all pieces; its *components* are the connected
components of the graph whose nodes are the single parts (one line string,
polygon or point) of all pieces and whose edges join parts closer than a tiny
distance (shapely ``STRtree`` candidates, networkx components).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import networkx as nx
import numpy as np
import shapely
from shapely.geometry import mapping

from specmap.io import to_plain
from specmap.special.pairs import Tie, tie_from_json
from specmap.strip import Window

KINDS = ("curve", "patch", "point")
UNION_LIMIT = 4000


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


def _dedupe_lines(lines: list, scale: float) -> list:
    seen = set()
    out = []
    for g in lines:
        c = np.round(shapely.get_coordinates(g) / (1e-9 * scale)).astype(np.int64)
        key = min(c.tobytes(), c[::-1].tobytes())
        if key in seen:
            continue
        seen.add(key)
        out.append(g)
    return out


def components(pieces: tuple[TiePiece, ...], window: Window) -> tuple[Component, ...]:
    """Connected components of the union of all pieces.

    Parts closer than ``1e-9`` of the window diameter are joined. Area is the
    area of the union of patch polygons; length the length of the union of the
    curves (above ``UNION_LIMIT`` line parts: the sum over distinct curves).
    """
    scale = max(window.diameter, 1e-300)
    parts, owner = [], []
    for k, p in enumerate(pieces):
        for g in shapely.get_parts(p.geometry):
            if not g.is_empty:
                parts.append(g)
                owner.append(k)
    if not parts:
        return ()
    arr = np.array(parts, dtype=object)
    tree = shapely.STRtree(arr)
    i, j = tree.query(arr, predicate="dwithin", distance=1e-9 * scale)
    graph = nx.Graph()
    graph.add_nodes_from(range(len(parts)))
    graph.add_edges_from(zip(i[i < j].tolist(), j[i < j].tolist(), strict=True))
    comps = []
    for nodes in nx.connected_components(graph):
        nodes = sorted(nodes)
        geoms = [parts[n] for n in nodes]
        polys = [g for g in geoms if g.geom_type == "Polygon"]
        lines = _dedupe_lines([g for g in geoms if g.geom_type == "LineString"], scale)
        pts = [g for g in geoms if g.geom_type == "Point"]
        area_geom = shapely.union_all(polys) if polys else None
        if len(lines) <= UNION_LIMIT and lines:
            line_geom = shapely.union_all(lines)
            length = float(line_geom.length)
        else:
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
