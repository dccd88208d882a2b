"""The :class:`Shape` value: one filtered shape of a study (f or g).

A shape is either a smooth surface with a map, a triangle mesh with two
values per vertex, or a grid given directly (no mesh, no diagrams).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from specmap.grids.model import Grid

Source = Literal["surface", "mesh", "grid"]


@dataclass(frozen=True, eq=False)
class Shape:
    """One filtered shape.

    Attributes
    ----------
    label : str
        ``"f"`` or ``"g"``; prefixes contour ids.
    source : {"surface", "mesh", "grid"}
    vertices : ndarray (n, 3) or None
        Mesh vertices (surfaces are meshed at their resolution).
    triangles : ndarray (m, 3) of int or None
        Oriented triangles of a closed surface.
    values : ndarray (n, 2) or None
        The two filtering functions at the vertices.
    surface : object or None
        The smooth surface (:mod:`specmap.shapes.surfaces`) for ``source == "surface"``.
    fmap : object or None
        The compiled map (:class:`specmap.expr.CompiledMap`) when given as expressions.
    grid : Grid or None
        The grid of a ``source == "grid"`` shape.
    description : str
        One human line, e.g. ``"ellipsoid radii (2, 1, 1), map (x, y)"``.
    meta : dict
        Provenance, JSON-ready.
    """

    label: str
    source: Source
    vertices: np.ndarray | None = None
    triangles: np.ndarray | None = None
    values: np.ndarray | None = None
    surface: Any = None
    fmap: Any = None
    grid: Grid | None = None
    description: str = ""
    meta: dict[str, Any] = field(default_factory=dict)

    @property
    def has_mesh(self) -> bool:
        return self.vertices is not None and self.triangles is not None and self.values is not None

    def value_bounds(self) -> tuple[float, float, float, float]:
        """(min f1, min f2, max f1, max f2) from the vertex values or the grid."""
        if self.values is not None:
            v = self.values
            return (float(v[:, 0].min()), float(v[:, 1].min()),
                    float(v[:, 0].max()), float(v[:, 1].max()))
        assert self.grid is not None
        return self.grid.bbox()

    def with_values(self, values: np.ndarray, **meta: Any) -> Shape:
        """Same mesh, other vertex values (used by perturbations)."""
        return Shape(self.label, self.source, self.vertices, self.triangles,
                     np.asarray(values, dtype=float), self.surface, None, None,
                     self.description, {**self.meta, **meta})
