"""Extended Pareto grids: the value model and the three routes that compute them.

- ``exact``: closed form for linear maps on ellipsoids;
- ``smooth``: Jacobi-set tracing on smooth implicit surfaces;
- ``piecewise``: PL Pareto edges on triangle meshes.
"""

from __future__ import annotations

import dataclasses
from typing import TYPE_CHECKING

from specmap.errors import StudyError
from specmap.grids.exact import is_dependent_linear, is_exact_case
from specmap.grids.model import Contour, Grid, grid_from_json, read_grid, validate_grid

if TYPE_CHECKING:
    from specmap.shapes.model import Shape

__all__ = ["Contour", "Grid", "grid_from_json", "read_grid", "validate_grid", "pareto_grid", "route_for"]


def route_for(shape: Shape) -> str:
    """The route :func:`pareto_grid` takes for a shape."""
    if shape.source == "grid":
        return "file"
    if shape.source == "mesh":
        return "piecewise"
    if shape.fmap is not None and is_dependent_linear(shape.fmap):
        raise StudyError("the two components of the map are linearly dependent (rank < 2), "
                         "so the map has no Pareto grid", field=f"{shape.label}.map",
                         fix="give two independent functions")
    requested = shape.meta.get("route", "auto")
    exact_ok = is_exact_case(shape.surface, shape.fmap)
    if requested == "exact" and not exact_ok:
        raise StudyError("route 'exact' needs an ellipsoid with a linear map",
                         field=f"{shape.label}.route", fix='use route = "auto" or "smooth"')
    if requested != "auto":
        return requested
    return "exact" if exact_ok else "smooth"


def pareto_grid(shape: Shape, *, simplify: float | None = None) -> Grid:
    """The extended Pareto grid of a shape [CEF19].

    Parameters
    ----------
    shape : Shape
    simplify : float, optional
        PL route only: drop proper contours shorter than this (value units);
        default is the shape's own setting (off).

    Returns
    -------
    Grid
        Contour ids are prefixed with the shape's label ("f:" or "g:").

    References
    ----------
    .. [CEF19] Cerri, Ethier, Frosini, J. Appl. Comput. Topol. 3 (2019).
    """
    route = route_for(shape)
    label = shape.label
    if route == "file":
        assert shape.grid is not None
        return shape.grid.relabelled(label)
    if route == "piecewise":
        from specmap.grids.piecewise import piecewise_grid

        s = shape.meta.get("simplify", 0.0) if simplify is None else simplify
        grid = piecewise_grid(shape.vertices, shape.triangles, shape.values, label=label, simplify=s)
        hygiene = shape.meta.get("hygiene")
        if hygiene:  # what reading the mesh cleaned (loose/duplicate vertices, collapsed triangles)
            grid = dataclasses.replace(grid, meta={**grid.meta, "mesh_hygiene": dict(hygiene)})
        return grid
    if route == "exact":
        from specmap.grids.exact import ellipsoid_linear_grid

        return ellipsoid_linear_grid(shape.surface.radii, shape.fmap.matrix(), shape.fmap.offset(),
                                     label=label)
    from specmap.grids.smooth import smooth_grid

    return smooth_grid(shape.surface, shape.fmap, label=label,
                       resolution=int(shape.meta.get("resolution", 4000)))
