"""The atlas of the special set: its pieces and components as values, JSON and GeoJSON.

A *piece* is the curve set, the isolated points or the patch of one tie. The
special set is the union of all pieces; its *components* (computed by
:func:`specmap.special.components.components`) are its connected parts.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from shapely.geometry import mapping

from specmap.io import to_plain
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
    reasons : tuple of dict
        For a patch: why each of its identically held ties holds
        (:func:`specmap.special.reasons.tie_reason`).
    """

    id: str
    kind: str
    area: float
    length: float
    bbox: tuple[float, float, float, float]
    ties: tuple[Tie, ...]
    geometry: Any = None
    reasons: tuple[dict[str, Any], ...] = ()

    def summary(self) -> dict[str, Any]:
        out = {
            "id": self.id,
            "kind": self.kind,
            "area": float(self.area),
            "length": float(self.length),
            "bbox": [float(x) for x in self.bbox],
            "ties": [t.to_json() for t in self.ties],
        }
        if self.kind == "patch":
            out["reasons"] = [dict(r) for r in self.reasons]
        return out


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
        return to_plain(
            {
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
            }
        )

    def iter_features(self) -> Iterator[dict[str, Any]]:
        """The GeoJSON features, one per component, made one at a time (for streamed writing)."""
        for c in self.components:
            geom = _plain_geometry(mapping(c.geometry)) if c.geometry is not None else None
            yield {"type": "Feature", "id": c.id, "geometry": geom, "properties": c.summary()}

    def iter_features_streamed(self) -> Iterator[dict[str, Any]]:
        """:meth:`iter_features` for :func:`specmap.io.write_json_streamed` with ``plain=True``: the
        same JSON, but the coordinates of a multi-part geometry are made one part at a time as the
        encoder walks them (:class:`_LazyParts`), so a component of millions of points is never
        held as Python lists whole. Only for that writer: the lists read empty to other code."""
        for c in self.components:
            geom = _lazy_geometry(c.geometry) if c.geometry is not None else None
            yield {"type": "Feature", "id": c.id, "geometry": geom, "properties": to_plain(c.summary())}

    def geojson_head(self) -> dict[str, Any]:
        """The FeatureCollection without its features (``"features": None`` marks their place)."""
        return {
            "type": "FeatureCollection",
            "features": None,
            "properties": {k: v for k, v in self.to_json().items() if k != "components"},
        }

    def to_geojson(self) -> dict[str, Any]:
        """FeatureCollection, one feature per component, coordinates (a, b)."""
        return {**self.geojson_head(), "features": list(self.iter_features())}

    def shape_features(self) -> dict[str, Any]:
        """:meth:`to_geojson` with each feature's geometry the component's shapely geometry itself
        (no coordinate copy), for the figures (:func:`specmap.report.figures.special_figure`
        reads either form); not JSON."""
        feats = [
            {"type": "Feature", "id": c.id, "geometry": c.geometry, "properties": c.summary()}
            for c in self.components
        ]
        return {**self.geojson_head(), "features": feats}


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
        Component(
            c["id"],
            c["kind"],
            float(c["area"]),
            float(c["length"]),
            tuple(c["bbox"]),
            tuple(tie_from_json(t) for t in c["ties"]),
        )
        for c in d.get("components", [])
    )
    w = d["window"]
    return AtlasSummary(
        Window(tuple(w["a"]), tuple(w["b"])),
        float(d["tolerance"]),
        d["pairs"],
        d["method"],
        tuple(d["resolution"]),
        comps,
        float(d["total_area"]),
        float(d["area_fraction"]),
        dict(d["counts"]),
        dict(d.get("stats", {})),
    )


PIECES_FORMAT = "specmap-pieces/1"
"""Layout of ``special_pieces.json``: the tie pieces of a map, one record per piece, in order."""


def piece_record(piece: TiePiece) -> dict[str, Any]:
    """One piece as a JSON record: its tie, kind and geometry as hex WKB (exact coordinates)."""
    import shapely

    return {"tie": piece.tie.to_json(), "kind": piece.kind, "wkb": shapely.to_wkb(piece.geometry, hex=True)}


def _plain_coordinates(coords: Any, depth: int) -> Any:
    """Nested coordinate tuples of ``depth`` levels above the points, as plain lists of floats."""
    if depth == 0:
        arr = np.asarray(coords, dtype=float)
        if arr.size == 0 or not np.isfinite(arr).all():
            return to_plain(coords)  # writes inf/nan as strings
        return arr.tolist()
    return [_plain_coordinates(c, depth - 1) for c in coords]


# levels of nesting above the arrays of points, per GeoJSON geometry type (RFC 7946 section 3.1)
_DEPTH = {"Point": 0, "MultiPoint": 0, "LineString": 0, "MultiLineString": 1, "Polygon": 1, "MultiPolygon": 2}


def _plain_geometry(geom: dict[str, Any]) -> dict[str, Any]:
    """A shapely ``mapping`` as plain JSON types, the same values as :func:`to_plain` but one
    numpy conversion per array of points instead of one Python call per number."""
    kind = geom.get("type")
    if kind == "GeometryCollection":
        return {"type": kind, "geometries": [_plain_geometry(g) for g in geom["geometries"]]}
    if kind not in _DEPTH:
        return to_plain(geom)
    return {"type": kind, "coordinates": _plain_coordinates(geom["coordinates"], _DEPTH[kind])}


class _LazyParts(list):
    """A JSON array whose items are made when iterated: ``make(part)`` for each of ``parts``.

    The pure-Python JSON encoder (the one used with an indent) tests an array's truth and then
    iterates it, so it writes these items one at a time. The list itself is empty: indexing,
    numpy and the C encoder see nothing, hence only :func:`specmap.io.write_json_streamed`.
    """

    def __init__(self, parts: list[Any], make: Any) -> None:
        super().__init__()
        self._parts = parts
        self._make = make

    def __iter__(self) -> Iterator[Any]:
        return (self._make(p) for p in self._parts)

    def __len__(self) -> int:
        return len(self._parts)

    def __bool__(self) -> bool:
        return bool(self._parts)


def _lazy_geometry(geometry: Any) -> dict[str, Any]:
    """The plain GeoJSON geometry of :func:`_plain_geometry`, multi-part coordinates made lazily."""
    kind = geometry.geom_type
    if kind == "GeometryCollection":
        return {"type": kind, "geometries": [_lazy_geometry(g) for g in geometry.geoms]}
    if kind in ("MultiLineString", "MultiPolygon", "MultiPoint"):
        return {
            "type": kind,
            "coordinates": _LazyParts(
                list(geometry.geoms), lambda p: _plain_geometry(mapping(p))["coordinates"]
            ),
        }
    return _plain_geometry(mapping(geometry))


def iter_piece_records(atlas: Atlas) -> Iterator[dict[str, Any]]:
    """The records of ``atlas.pieces`` in order, made one at a time (for streamed writing)."""
    for p in atlas.pieces:
        yield piece_record(p)


def atlas_from_files(special: dict[str, Any], geojson: dict[str, Any], pieces: dict[str, Any]) -> Atlas:
    """The :class:`Atlas` written as ``special.json``, ``special.geojson`` and ``special_pieces.json``.

    The pieces come back bit for bit (hex WKB), in their order (the reduced search names a
    piece by its index); the components from the GeoJSON features (their summary and
    geometry; Python's JSON floats round-trip exactly). Inverse of :meth:`Atlas.to_json`,
    :meth:`Atlas.iter_features` and :func:`iter_piece_records`.

    Raises
    ------
    ValueError
        The files do not fit together (piece layout, feature count, a missing key).
    """
    import shapely
    from shapely.geometry import shape

    if pieces.get("format") != PIECES_FORMAT:
        raise ValueError(f"pieces format {pieces.get('format')!r}, expected {PIECES_FORMAT!r}")
    records = pieces["pieces"]
    geoms = shapely.from_wkb([r["wkb"] for r in records]) if records else []
    tp = tuple(
        TiePiece(tie_from_json(r["tie"]), str(r["kind"]), g) for r, g in zip(records, geoms, strict=True)
    )
    summary = atlas_from_json(special)
    feats = geojson["features"]
    if len(feats) != len(summary.components):
        raise ValueError(f"{len(feats)} GeoJSON features for {len(summary.components)} components")
    for c, f in zip(summary.components, feats, strict=True):
        if f.get("id") != c.id:
            raise ValueError(f"GeoJSON feature {f.get('id')!r} where component {c.id!r} was written")
    comps = tuple(
        Component(
            c.id,
            c.kind,
            c.area,
            c.length,
            (float(c.bbox[0]), float(c.bbox[1]), float(c.bbox[2]), float(c.bbox[3])),
            c.ties,
            shape(f["geometry"]) if f.get("geometry") is not None else None,
            tuple(dict(r) for r in (f.get("properties") or {}).get("reasons", ())),
        )
        for c, f in zip(summary.components, feats, strict=True)
    )
    n_a, n_b = summary.resolution
    return Atlas(
        summary.window,
        summary.tolerance,
        summary.pairs,
        summary.method,
        (int(n_a), int(n_b)),
        tp,
        comps,
        dict(summary.stats),
    )
