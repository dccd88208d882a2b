"""Extended Pareto grids: the value model and the three routes that compute them.

- ``exact``: closed form for linear maps on ellipsoids;
- ``smooth``: Jacobi-set tracing on smooth implicit surfaces;
- ``piecewise``: PL Pareto edges on triangle meshes.

A grid given by a file is read with :func:`read_grid` and is already a
:class:`Grid`; :func:`pareto_grid` computes the grid of a
:class:`~specmap.shapes.model.Shape` (a surface or a mesh).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from typing import TYPE_CHECKING

from specmap.errors import UnsupportedInputError
from specmap.grids.exact import ellipsoid_linear_grid, is_dependent_linear, is_exact_case
from specmap.grids.model import Contour, Grid, grid_from_json, read_grid, validate_grid
from specmap.grids.piecewise import piecewise_grid
from specmap.grids.smooth import smooth_grid
from specmap.settings import GridSettings

if TYPE_CHECKING:
    from specmap.shapes.model import Shape

__all__ = [
    "Contour",
    "Grid",
    "GridSettings",
    "grid_from_json",
    "read_grid",
    "validate_grid",
    "pareto_grid",
    "route_for",
]


def route_for(shape: Shape, route: str = "auto") -> str:
    """The route :func:`pareto_grid` takes for a shape: ``"piecewise"``, ``"exact"`` or ``"smooth"``.

    Parameters
    ----------
    shape : Shape
    route : {"auto", "smooth", "exact", "piecewise"}
        The route asked for (:attr:`specmap.settings.GridSettings.route`); ``"auto"`` picks the
        closed form when it applies, else Jacobi-set tracing (a mesh always takes the PL route).

    Raises
    ------
    UnsupportedInputError
        ``subject="map"``: the two components of a linear map are dependent (rank < 2);
        ``subject="route"``: ``"exact"`` asked for a shape outside the closed form.
    """
    if shape.source == "mesh":
        return "piecewise"
    if shape.fmap is not None and is_dependent_linear(shape.fmap):
        raise UnsupportedInputError(
            "the two components of the map are linearly dependent (rank < 2), so the map has no Pareto grid",
            subject="map",
            fix="give two independent functions",
        )
    exact_ok = is_exact_case(shape.surface, shape.fmap)
    if route == "exact" and not exact_ok:
        raise UnsupportedInputError(
            "route 'exact' needs an ellipsoid with a linear map",
            subject="route",
            fix="use route 'auto' or 'smooth'",
        )
    if route != "auto":
        return route
    return "exact" if exact_ok else "smooth"


def pareto_grid(
    shape: Shape,
    settings: GridSettings | None = None,
    *,
    simplification: dict | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> Grid:
    """The extended Pareto grid of a shape [CEF19].

    Parameters
    ----------
    shape : Shape
        A surface or a mesh (a grid file is read with :func:`read_grid` instead).
    settings : GridSettings, optional
        Route and smooth-route resolution (default :class:`~specmap.settings.GridSettings`:
        route ``"auto"``, the smooth route's own resolution).
    simplification : dict, optional
        PL route only: the record of :func:`specmap.simplify.simplify_values` when the
        shape's values were simplified; copied into ``meta["simplification"]`` (``delta``,
        ``sup_change``, ``contours_before``, ``contours_after``, ...).
    progress : callable ``(done, total)``, optional
        PL route only: passed to :func:`piecewise_grid` (five steps).

    Returns
    -------
    Grid
        Contour ids are prefixed with the shape's label ("f:" or "g:").

    References
    ----------
    .. [CEF19] Cerri, Ethier, Frosini, J. Appl. Comput. Topol. 3 (2019).
    """
    settings = settings or GridSettings()
    route = route_for(shape, settings.route)
    label = shape.label
    if route == "piecewise":
        V, T, vals = shape.vertices, shape.triangles, shape.values
        assert (
            V is not None and T is not None and vals is not None
        )  # route_for gives piecewise to meshes only
        grid = piecewise_grid(V, T, vals, label=label, progress=progress)
        hygiene = shape.meta.get("hygiene")
        if hygiene:  # what reading the mesh cleaned (loose/duplicate vertices, collapsed triangles)
            grid = dataclasses.replace(grid, meta={**grid.meta, "mesh_hygiene": dict(hygiene)})
        if simplification:  # the values were simplified before the grid (specmap.simplify)
            grid = dataclasses.replace(grid, meta={**grid.meta, "simplification": dict(simplification)})
        return grid
    if route == "exact":
        return ellipsoid_linear_grid(
            shape.surface.radii, shape.fmap.matrix(), shape.fmap.offset(), label=label
        )
    if settings.resolution is None:
        return smooth_grid(shape.surface, shape.fmap, label=label)
    return smooth_grid(shape.surface, shape.fmap, label=label, resolution=int(settings.resolution))
