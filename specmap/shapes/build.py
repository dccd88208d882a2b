"""Turn a surface or mesh :class:`~specmap.study.ShapeSpec` into a :class:`~specmap.shapes.model.Shape`.

This is the I/O edge for shapes: it reads meshes, compiles expressions and
meshes smooth surfaces at their resolution. A grid file is not a shape: the
pipeline reads it with :func:`specmap.grids.model.read_grid` (see
:func:`specmap.pipeline.load_input`), so this package never imports
:mod:`specmap.grids`.
"""

from __future__ import annotations

import numpy as np

from specmap.errors import SpecmapInputError, StudyError
from specmap.expr import CompiledMap, compile_map, domain_break
from specmap.meshtable import mesh_edges
from specmap.shapes.meshes import read_mesh
from specmap.shapes.model import Shape
from specmap.shapes.normality import degeneracy
from specmap.shapes.steep import STEEP_LIMIT, steepest
from specmap.shapes.surfaces import make_surface

#: checkpoints of :func:`build_shape` reported to its ``progress`` callback
BUILD_STEPS = 5


def _no_progress(done: int, total: int) -> None:
    """Default ``progress`` of :func:`build_shape`: draws nothing."""


def build_shape(spec, study, progress=_no_progress) -> Shape:
    """Load or construct the surface or mesh a study names for f or g.

    Parameters
    ----------
    spec : ShapeSpec
        ``spec.source`` is ``"surface"`` or ``"mesh"``.
    study : Study
        For its file name (errors) and constants (expressions).
    progress : callable ``(done, total)``, optional
        Called after each of the :data:`BUILD_STEPS` checkpoints (mesh read or surface meshed,
        values, domain check, gradient check, normality check), so a large mesh is not silent.

    A constant component or a dependent pair is refused unless ``spec.insist``; then its reason
    is kept in ``meta["not_normal"]``.

    Raises
    ------
    SpecmapInputError
        Bad expression, unreadable mesh file, non-finite values, a non-normal pair.
    ValueError
        For a grid-file spec (a grid is not a shape; read it with ``read_grid``).
    """
    file = str(study.path)
    label = spec.label
    if spec.source not in ("surface", "mesh"):
        raise ValueError(
            f"{label}: a {spec.source!r} spec is not a shape (grid files are read with read_grid)"
        )
    fmap = None
    if spec.map is not None:
        try:
            fmap = compile_map(list(spec.map), study.constants, file=file, field=f"{label}.map")
        except SpecmapInputError as exc:
            raise exc.located(file=file, field=f"{label}.map") from None
    if spec.source == "surface":
        surface = make_surface(spec.surface, spec.radii)
        V, T = surface.mesh(spec.resolution)
        progress(1, BUILD_STEPS)
        assert fmap is not None  # the study loader requires a map for a surface
        values = fmap.values(V)
        _check_values(values, file, f"{label}.map")
        progress(2, BUILD_STEPS)
        _check_domain(fmap, V, T, file, f"{label}.map")
        progress(3, BUILD_STEPS)
        _check_steep(fmap, V, T, surface, file, f"{label}.map")
        progress(4, BUILD_STEPS)
        why = _check_normal(V, T, values, fmap.jacobian(V), file, f"{label}.map", insist=spec.insist)
        progress(5, BUILD_STEPS)
        return Shape(
            label,
            "surface",
            V,
            T,
            values,
            surface=surface,
            fmap=fmap,
            description=spec.describe(),
            meta={"vertices": len(V), **({"not_normal": why} if why else {})},
        )  # settings (route, resolution) travel in GridSettings
    hygiene: dict = {}
    V, T, fields = read_mesh(spec.path, fields=spec.fields, counts=hygiene)
    progress(1, BUILD_STEPS)
    mesh_values = fmap.values(V) if fmap is not None else fields
    if mesh_values is None:
        raise StudyError(
            "a mesh needs a map or two vertex fields",
            file=file,
            field=label,
            fix='add map = ["x", "y"] or fields = ["name1", "name2"]',
        )
    values = mesh_values
    _check_values(
        values,
        str(spec.path) if fmap is None else file,
        f"{label}.fields" if fmap is None else f"{label}.map",
    )
    progress(2, BUILD_STEPS)
    if fmap is not None:
        _check_domain(fmap, V, T, file, f"{label}.map")
    progress(3, BUILD_STEPS)
    if fmap is not None:
        _check_steep(fmap, V, T, None, file, f"{label}.map")
    progress(4, BUILD_STEPS)
    why = _check_normal(
        V,
        T,
        values,
        fmap.jacobian(V) if fmap is not None else None,
        file if fmap is not None else str(spec.path),
        f"{label}.map" if fmap is not None else f"{label}.fields",
        insist=spec.insist,
    )
    progress(5, BUILD_STEPS)
    return Shape(
        label,
        "mesh",
        V,
        T,
        values,
        fmap=fmap,
        description=spec.describe(),
        meta={
            "path": str(spec.path),
            "vertices": len(V),
            "hygiene": hygiene,
            **({"not_normal": why} if why else {}),
        },
    )


def _check_domain(fmap: CompiledMap, V: np.ndarray, T: np.ndarray, file: str, field: str) -> None:
    """Refuse a map with a pole or a domain boundary on the surface (between vertices too)."""
    edges = mesh_edges(T)
    for i, e in enumerate(fmap.exprs):
        hit = domain_break(e, V, edges)
        if hit is not None:
            what, at = hit
            where = ", ".join(f"{c:.4g}" for c in at)
            raise StudyError(
                f"{e.text!r} is not finite on the whole surface: {what} near ({where})",
                file=file,
                field=f"{field}[{i}]",
                fix="use a map that is finite and smooth on the whole shape",
            )


def _check_steep(fmap: CompiledMap, V: np.ndarray, T: np.ndarray, surface, file: str, field: str) -> None:
    """Refuse a map whose gradient is unbounded or steeper than any mesh resolves (shapes/steep.py)."""
    for i, e in enumerate(fmap.exprs):
        hit = steepest(e, V, T, surface)
        if hit is None or hit.ratio <= STEEP_LIMIT:
            continue
        where = ", ".join(f"{c:.4g}" for c in hit.at)
        problem = (
            f"{e.text!r} has no finite gradient at ({where}) on the surface (a singular point)"
            if not hit.finite
            else f"{e.text!r} is too steep on the surface: its gradient reaches {hit.gradient:.3g} near "
            f"({where}), {hit.ratio:.3g} times its value range over the shape's size (limit {STEEP_LIMIT:g})"
        )
        raise StudyError(
            problem,
            file=file,
            field=f"{field}[{i}]",
            fix="use a map that is smooth on the scale of the shape (no zero of a sqrt, log or "
            "division argument on or near the surface)",
        )


def _check_normal(
    V: np.ndarray,
    T: np.ndarray,
    values: np.ndarray,
    jac: np.ndarray | None,
    file: str,
    field: str,
    *,
    insist: bool = False,
) -> str | None:
    """Refuse a constant component or a functionally dependent pair (outside the theory).

    With ``insist`` (the study's ``insist = true``) the pair is accepted and the reason returned, for
    ``Shape.meta["not_normal"]`` and the caveat of every result; None for a normal pair.
    """
    why = degeneracy(V, T, values, jac)
    if why is not None and not insist:
        raise StudyError(
            f"{why}: the pair is not normal, so its grids and special set mean nothing",
            file=file,
            field=field,
            fix="give two functionally independent, non-constant measurements (math.md section 4)",
        )
    return why


def _check_values(values: np.ndarray, file: str, field: str) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        n = int(bad.any(axis=1).sum())
        raise StudyError(
            f"the functions are NaN or infinite at {n} vertices",
            file=file,
            field=field,
            fix="use functions defined on the whole shape (check log, sqrt, division)",
        )
