"""Turn a :class:`~specmap.study.ShapeSpec` into a :class:`~specmap.shapes.model.Shape`.

This is the I/O edge for shapes: it reads meshes and grid files, compiles
expressions and meshes smooth surfaces at their resolution.
"""

from __future__ import annotations

import numpy as np

from specmap.errors import SpecmapInputError, StudyError
from specmap.grids.model import read_grid
from specmap.shapes.model import Shape


def build_shape(spec, study) -> Shape:
    """Load or construct the shape a study names for f or g.

    Parameters
    ----------
    spec : ShapeSpec
    study : Study
        For its file name (errors) and constants (expressions).

    Raises
    ------
    SpecmapInputError
        Bad expression, unreadable mesh or grid file, non-finite values.
    """
    file = str(study.path)
    label = spec.label
    if spec.source == "grid":
        grid = read_grid(spec.path, prefix=label)
        return Shape(label, "grid", grid=grid, description=spec.describe(),
                     meta={"path": str(spec.path)})
    from specmap.expr import compile_map

    fmap = None
    if spec.map is not None:
        try:
            fmap = compile_map(list(spec.map), study.constants, file=file, field=f"{label}.map")
        except SpecmapInputError as exc:
            raise exc.located(file=file, field=f"{label}.map") from None
    if spec.source == "surface":
        from specmap.shapes.surfaces import make_surface

        surface = make_surface(spec.surface, spec.radii)
        V, T = surface.mesh(spec.resolution)
        values = fmap.values(V)
        _check_values(values, file, f"{label}.map")
        return Shape(label, "surface", V, T, values, surface=surface, fmap=fmap,
                     description=spec.describe(),
                     meta={"resolution": spec.resolution, "vertices": len(V), "route": spec.route})
    from specmap.shapes.meshes import read_mesh

    hygiene: dict = {}
    V, T, fields = read_mesh(spec.path, fields=spec.fields, counts=hygiene)
    values = fmap.values(V) if fmap is not None else fields
    _check_values(values, str(spec.path) if fmap is None else file,
                  f"{label}.fields" if fmap is None else f"{label}.map")
    return Shape(label, "mesh", V, T, values, fmap=fmap, description=spec.describe(),
                 meta={"path": str(spec.path), "vertices": len(V), "simplify": spec.simplify,
                       "hygiene": hygiene})


def _check_values(values: np.ndarray, file: str, field: str) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        n = int(bad.any(axis=1).sum())
        raise StudyError(f"the functions are NaN or infinite at {n} vertices", file=file, field=field,
                         fix="use functions defined on the whole shape (check log, sqrt, division)")
