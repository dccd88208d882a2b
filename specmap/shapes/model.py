"""The :class:`Shape` value: one filtered shape of a study (f or g).

A shape is either a smooth surface with a map or a triangle mesh with two
values per vertex. A grid given directly by a file is not a shape: it is a
:class:`~specmap.grids.model.Grid` (no mesh, no diagrams), read by the
pipeline; this module does not depend on :mod:`specmap.grids`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from specmap.errors import MeshError, MissingInputError

Source = Literal["surface", "mesh"]


@dataclass(frozen=True, eq=False)
class Shape:
    """One filtered shape.

    Attributes
    ----------
    label : str
        ``"f"`` or ``"g"``; prefixes contour ids.
    source : {"surface", "mesh"}
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
    description: str = ""
    meta: dict[str, Any] = field(default_factory=dict)

    @property
    def has_mesh(self) -> bool:
        """True when vertices, triangles and vertex values are all present."""
        return self.vertices is not None and self.triangles is not None and self.values is not None

    def value_bounds(self) -> tuple[float, float, float, float]:
        """(min f1, min f2, max f1, max f2) of the vertex values (value units)."""
        if self.values is None:
            require_mesh(self, "value bounds")  # raises: no values
        v = self.values
        assert v is not None
        return (float(v[:, 0].min()), float(v[:, 1].min()), float(v[:, 0].max()), float(v[:, 1].max()))

    def with_values(self, values: np.ndarray, **meta: Any) -> Shape:
        """Same mesh, other vertex values (used by perturbations)."""
        return Shape(
            self.label,
            self.source,
            self.vertices,
            self.triangles,
            np.asarray(values, dtype=float),
            self.surface,
            None,
            self.description,
            {**self.meta, **meta},
        )


class MeshRequiredError(MissingInputError, MeshError):
    """A computation that needs a mesh (slice diagrams, distances) was given none.

    A core error (:class:`~specmap.errors.MissingInputError`, also a
    :class:`~specmap.errors.StudyError` for old callers) and a :class:`~specmap.errors.MeshError`.
    """


def require_mesh(shape: Any, what: str) -> Shape:
    """The shape itself when it has a mesh with vertex values, else a one-line error.

    Parameters
    ----------
    shape : Shape, Grid or None
        Anything else than a :class:`Shape` with vertices, triangles and values
        (e.g. a grid read from a file) is refused.
    what : str
        What needs the mesh, for the message, e.g. ``"slice diagrams"``.

    Raises
    ------
    MeshRequiredError
        ``"<label> has no mesh, so no <what>"``.

    Examples
    --------
    >>> require_mesh(None, "slice diagrams")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    specmap.shapes.model.MeshRequiredError: the shape has no mesh, so no slice diagrams; ...
    """
    if isinstance(shape, Shape) and shape.has_mesh:
        return shape
    label = getattr(shape, "label", None) or "the shape"
    raise MeshRequiredError(f"{label} has no mesh, so no {what}", fix="give a surface or mesh for f and g")
