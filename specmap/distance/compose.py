"""matching_distance: the stages of the package composed into one :class:`DistanceResult`."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable, Sequence
from typing import Any

from specmap.distance.audit import position_audit, theorem_audit
from specmap.distance.bounds import distance_upper_bound, lipschitz_constants, value_range
from specmap.distance.branch import fold_strip
from specmap.distance.certify import degree_certificate, mesh_tolerance, resolution_check
from specmap.distance.dense import dense_sweep
from specmap.distance.ends import fold_ends
from specmap.distance.evaluator import LineEvaluator, Progress
from specmap.distance.reduced import ReducedSettings, reduced_search
from specmap.distance.result import (
    DenseSweep,
    DistanceResult,
    ReducedSearch,
    dense_json,
    landscape_json,
    reduced_json,
)
from specmap.distance.top_degree import fold_top
from specmap.errors import MissingInputError
from specmap.settings import DistanceSettings
from specmap.shapes.model import require_mesh
from specmap.strip import Window, default_window

METHODS = ("both", "dense", "reduced")
TOLERANCE_FRACTION = 1e-3
"""Default tolerance: this fraction of the largest value range of f and g."""


def _grids_pair(grids) -> tuple | None:
    if grids is None:
        return None
    if isinstance(grids, dict):
        return (grids["f"], grids["g"])
    g = tuple(grids)
    if len(g) != 2:
        raise ValueError("grids must be (grid_f, grid_g)")
    return g


def _check_inputs(shape_f, shape_g, method: str) -> None:
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, not {method!r}")
    for s in (shape_f, shape_g):
        require_mesh(s, "slice diagrams")


def _reduced_stage(
    ev: LineEvaluator,
    window: Window,
    pair: tuple | None,
    atlas,
    *,
    tolerance: float,
    upper: float,
    settings: ReducedSettings,
) -> ReducedSearch:
    """The reduced search, with the atlas computed from the grids when not given.

    ``atlas`` may also be a source (:func:`specmap.distance.focused.focused_source`): then only
    the ties whose cost can lie between the slope-one floor and ``upper`` are mapped.
    """
    if pair is None:
        raise MissingInputError(
            "the reduced search needs the extended Pareto grids of f and g",
            fix="pass grids=(grid_f, grid_g) or use method 'dense'",
        )
    if atlas is None:
        from specmap.special import special_set

        atlas = special_set(pair[0], pair[1], window)

    contours = {c.id: c for g in pair for c in g.contours}
    return reduced_search(ev, window, atlas, contours, tolerance=tolerance, upper=upper, settings=settings)


def _by_degree(
    red: ReducedSearch | None, dense: DenseSweep | None, degrees: Sequence[int], tolerance: float
) -> dict[int, dict[str, Any]]:
    """Per degree: value, line, where reached (slope-one / special / both / dense); certificates come later."""
    out: dict[int, dict[str, Any]] = {}
    for j, k in enumerate(degrees):
        if red is not None:
            s, p = red.slope[j], red.special[j]
            if p.value > s.value + tolerance:
                entry = {"value": p.value, "at": p.at, "reached_on": "special", "component": p.component}
            elif s.value > p.value + tolerance or not math.isfinite(p.value):
                entry = {"value": s.value, "at": s.at, "reached_on": "slope-one", "component": None}
            else:
                top = p if p.value > s.value else s
                entry = {"value": top.value, "at": top.at, "reached_on": "both", "component": p.component}
        else:
            assert dense is not None  # the method is validated: at least one stage ran
            v, at = dense.best[j]
            entry = {"value": v, "at": at, "reached_on": "dense", "component": None}
        out[k] = entry
    return out


def _certify_degrees(
    by_degree: dict[int, dict[str, Any]],
    degrees: Sequence[int],
    dense: DenseSweep | None,
    red: ReducedSearch | None,
    *,
    tolerance: float,
    upper: float,
    upper_kind: str,
    floors: tuple[float, float],
    max_lines: int,
) -> None:
    """Add ``bounds``, ``certified``, ``why_not``, ``upper_kind``, ``resolved``, ``resolved_why`` per degree."""
    for j, k in enumerate(degrees):
        e = by_degree[k]
        e.update(
            degree_certificate(
                j,
                e["value"],
                dense,
                red,
                tolerance=tolerance,
                upper=upper,
                upper_kind=upper_kind,
                max_lines=max_lines,
            )
        )
        e.update(
            resolution_check(e["value"], tolerance=tolerance, grid_tolerance=floors[0], mesh_tol=floors[1])
        )


# long by its docstring and public keyword signature only; the body composes the stages in about 40 lines
def matching_distance(
    shape_f,
    shape_g,
    *,
    settings: DistanceSettings | None = None,
    method: str | None = None,
    degrees: Iterable[int] | None = None,
    window: Window | None = None,
    atlas=None,
    grids=None,
    jobs: int = 1,
    dense_resolution: int | None = None,
    progress: Progress | None = None,
    tolerance: float | None = None,
    slope_samples: int | None = None,
    spacing: float | None = None,
    roles: bool | None = None,
    certify: str | None = None,
    position_lines: int | None = None,
) -> DistanceResult:
    """Matching distance D_k(f, g) of two meshed maps, dense, reduced or both.

    Parameters
    ----------
    shape_f, shape_g : Shape
        Must carry a mesh (vertices, triangles, values).
    settings : DistanceSettings, optional
        All settings at once (default :class:`~specmap.settings.DistanceSettings`, where every
        default lives); a keyword below that is given (not None) overrides its field.
    method : {"both", "dense", "reduced"}
    degrees : iterable of int
    window : Window, optional
        Default: :func:`specmap.strip.default_window` of the value bounds.
    atlas : object or callable, optional
        Special-set atlas with ``pieces`` (tie, kind, geometry) and ``components``, or a
        source ``atlas(floor, upper)`` of a focused one (see
        :func:`~specmap.distance.reduced.reduced_search`, e.g.
        :func:`specmap.distance.focused.focused_source`); when omitted, the atlas of ``grids``
        with default map settings.
    grids : (Grid, Grid), optional
        Extended Pareto grids of f and g; needed by the reduced search and the position audit.
    jobs : int
        Worker processes for the slices.
    dense_resolution : int
        Nodes per side of the dense sweep.
    progress : callable(done, total), optional
    tolerance : float, optional
        Default: 1e-3 times the largest value range of f and g.
    slope_samples, spacing, roles, certify
        Reduced search settings (:class:`~specmap.distance.reduced.ReducedSettings`). Every
        degree is certified on its own (``by_degree[k]``: ``bounds``, ``certified``,
        ``why_not``); ``certify="max"`` only limits the polish to degrees near the top value.
    position_lines : int
        Lines of the position audit (0 to skip).

    Returns
    -------
    DistanceResult

    Raises
    ------
    MissingInputError
        A shape without a mesh (:class:`~specmap.shapes.model.MeshRequiredError`); the reduced
        search without grids.

    Warns
    -----
    UserWarning
        When the theorem audit fails either way by more than the tolerance: the dense sweep
        above the reduced search, or the reduced value above a rigorous upper bound
        (``audit.theorem_gap``, per degree in ``audit.theorem``).

    References
    ----------
    .. [CDFFL13] Cerri et al. (2013); [EFQT23] Ethier et al. (2023); [FMQT] arXiv:2312.04201.
    """
    given: dict[str, Any] = {
        "method": method,
        "degrees": None if degrees is None else tuple(degrees),
        "dense_resolution": dense_resolution,
        "tolerance": tolerance,
        "slope_samples": slope_samples,
        "spacing": spacing,
        "roles": roles,
        "certify": certify,
        "position_lines": position_lines,
    }
    s = dataclasses.replace(
        settings or DistanceSettings(), **{k: v for k, v in given.items() if v is not None}
    )
    method, degrees, dense_resolution, tolerance = s.method, s.degrees, s.dense_resolution, s.tolerance
    certify, position_lines = s.certify, s.position_lines
    _check_inputs(shape_f, shape_g, method)
    bf, bg = shape_f.value_bounds(), shape_g.value_bounds()
    window = window or default_window(bf, bg)
    pair = _grids_pair(grids)
    tol = TOLERANCE_FRACTION * value_range(shape_f, shape_g) if tolerance is None else tolerance
    lip = lipschitz_constants(bf, bg, window)
    upper, upper_kind = distance_upper_bound(shape_f, shape_g)
    ev = LineEvaluator(shape_f, shape_g, degrees, jobs=jobs, progress=progress)
    reduced_settings = ReducedSettings.of(s)

    dense = red = None
    if method in ("dense", "both"):
        dense = dense_sweep(ev, window, resolution=dense_resolution, bounds=(bf, bg))
    if method in ("reduced", "both"):
        red = _reduced_stage(ev, window, pair, atlas, tolerance=tol, upper=upper, settings=reduced_settings)

    by_degree = _by_degree(red, dense, degrees, tol)
    grid_tol = max((float(g.tolerance) for g in pair), default=0.0) if pair is not None else 0.0
    floors = (grid_tol, max(mesh_tolerance(shape_f), mesh_tolerance(shape_g)))
    _certify_degrees(
        by_degree,
        degrees,
        dense,
        red,
        tolerance=tol,
        upper=upper,
        upper_kind=upper_kind,
        floors=floors,
        max_lines=reduced_settings.slope_max_lines,
    )
    # the strip's ends a < a0, a > 1 - a0 (issue 16 item 4)
    ends_meta = fold_ends(ev, shape_f, shape_g, window, by_degree, degrees, tol, upper=upper)
    # degree 2 of two closed connected surfaces: h_2 in closed form over the whole strip
    top_meta = fold_top(ev, shape_f, shape_g, window, by_degree, degrees, tol)
    # degrees still open: the 2-D branch and bound over the whole strip, ends included (issue 13 item 1)
    strip_meta = fold_strip(
        ev,
        shape_f,
        shape_g,
        window,
        by_degree,
        degrees,
        tol,
        upper=upper,
        max_lines=int(s.strip_budget * dense_resolution**2),
    )
    kmax = max(degrees, key=lambda k: by_degree[k]["value"])
    top = by_degree[kmax]

    # theorem_gap / gap stay None ("not run") unless the dense sweep ran (or a flag was raised)
    audit: dict[str, Any] = {
        "theorem_gap": None,
        "gap": None,
        "line": None,
        "degree": None,
        "position": None,
        "upper_bound": upper,
        "upper_bound_kind": upper_kind,
    }
    if red is not None:
        audit.update(theorem_audit(dense, by_degree, degrees, tol, upper=upper))
    if pair is not None and position_lines > 0:
        audit["position"] = position_audit(
            shape_f, shape_g, pair, window, tolerance=tol, lines=position_lines
        )

    return DistanceResult(
        value=float(top["value"]),
        at=top["at"],
        reached_on=top["reached_on"],
        component=top["component"],
        by_degree=by_degree,
        dense=None if dense is None else dense_json(dense, degrees),
        reduced=None if red is None else reduced_json(red, degrees, top, kmax),
        audit=audit,
        tolerance=float(tol),
        infinite=list(ev.infinite),
        landscape=None if dense is None else landscape_json(dense, degrees),
        window=window,
        meta={
            "degrees": list(degrees),
            "lines_total": ev.lines,
            "jobs": int(jobs),
            "lipschitz": {"a": lip[0], "b": lip[1]},
            "resolution_floor": {"distance": float(tol), "grid": floors[0], "mesh": floors[1]},
            "ends": ends_meta,
            "strip": strip_meta,
            "top_degree": top_meta,
        },
    )
