"""One perturbation run as a pure function, and the values it reads and returns.

:class:`~specmap.settings.PerturbSettings` decide a run set (defined in :mod:`specmap.settings`,
importable from here), :class:`PerturbBase` holds the unperturbed pair;
:func:`run_one` perturbs the pair once (seeded by :func:`run_seed`), maps its special set again,
compares it with the base (:func:`specmap.perturb.geometry.set_hausdorff`) and checks the
stability bound of the matching distance (:func:`stability_check`).

Seeds. Run ``i`` uses the seed ``SeedSequence(seed).spawn(i + 1)[i]`` (its first 32-bit word),
which depends on ``(seed, i)`` only: results are identical for any number of jobs or workers,
and the sizes of a sweep share their random directions (common random numbers).

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, Math. Methods Appl. Sci. 36 (2013):
   D_k(f, g) <= ||f - g||_inf, hence |D(f', g') - D(f, g)| <= ||f - f'|| + ||g - g'||.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely

from specmap.errors import UnsupportedInputError
from specmap.grids.model import Grid
from specmap.perturb.geometry import curve_movement, flat_parts, patch_change, set_hausdorff
from specmap.perturb.models import perturb_grid, perturb_shape
from specmap.settings import GridSettings, PerturbSettings
from specmap.shapes.model import Shape
from specmap.strip import Window

STABILITY_SLACK = 1e-9
"""Relative slack (times the value scale) allowed in the stability check, on top of reported
distance tolerances."""

TIME_FIELDS = ("time",)


@dataclass(frozen=True, eq=False)
class PerturbBase:
    """The unperturbed pair and what runs are compared with.

    Attributes
    ----------
    grid_f, grid_g : Grid
    window : Window
    shape_f, shape_g : Shape or None
        Needed by the "function" model.
    total_area : float
        Patch area of the base special set.
    counts : dict
        Pieces of the base special set by kind.
    geometry : shapely geometry
        Union of the component geometries of the base special set, in (a, b).
    distance : dict or None
        ``{"value": float, "by_degree": {k: float}, "tolerance": float}`` of the base pair.
    grid_settings : (GridSettings, GridSettings)
        How the grids of perturbed shapes are computed ("function" model).
    patch_reasons : tuple of tuple of dict
        The ``reasons`` of each patch component of the base special set (``special.json``), from
        which :meth:`summary` says why the patches exist and the verdict reads the runs.
    """

    grid_f: Grid
    grid_g: Grid
    window: Window
    shape_f: Shape | None = None
    shape_g: Shape | None = None
    total_area: float = 0.0
    counts: Any = None
    geometry: Any = None
    distance: dict[str, Any] | None = None
    grid_settings: tuple[GridSettings, GridSettings] = (GridSettings(), GridSettings())
    patch_reasons: tuple[tuple[dict[str, Any], ...], ...] = ()

    def summary(self) -> dict[str, Any]:
        """Area, counts and distance of the base; with patches, why they exist (``reason``, the
        report's words) and the size that breaks them (``breaks_at``, None when not recorded)."""
        out: dict[str, Any] = {
            "total_area": self.total_area,
            "counts": dict(self.counts or {}),
            "distance": None if self.distance is None else self.distance["value"],
        }
        if any(self.patch_reasons):
            from specmap.report.genericity import breaking_size, reason_phrase  # lazy: parent only

            sp = {"components": [{"kind": "patch", "reasons": list(rs)} for rs in self.patch_reasons]}
            br = breaking_size(sp)
            out.update(reason=reason_phrase(sp), breaks_at=br if math.isfinite(br) else None)
        return out


def atlas_digest(atlas: Any) -> tuple[float, dict[str, int], Any]:
    """(total patch area, counts by kind, all component geometries in (a, b)) of an atlas.

    The geometry is a flat :class:`shapely.GeometryCollection` of the components' parts (no
    noding: only :func:`set_hausdorff` reads it).
    """
    js = atlas.to_json()
    counts = {k: int(js["counts"].get(k, 0)) for k in ("curve", "patch", "point")}
    geoms = [c.geometry for c in atlas.components if c.geometry is not None and not c.geometry.is_empty]
    return float(js["total_area"]), counts, shapely.GeometryCollection(flat_parts(geoms))


def _distance_digest(result: Any) -> dict[str, Any]:
    """value, per-degree values and certified intervals [lower, upper], and the reported tolerance.

    A degree without a finite interval (an old result, an infinite degree) is left out of the
    stability check; a degree with one is checked whether or not it is certified to tolerance.
    """
    js = result.to_json() if hasattr(result, "to_json") else dict(result)
    by: dict[str, float] = {}
    bounds: dict[str, list[float]] = {}
    for k, v in (js.get("by_degree") or {}).items():
        by[str(k)] = float(v["value"] if isinstance(v, dict) else v)
        b = v.get("bounds") if isinstance(v, dict) else None
        if isinstance(b, (list, tuple)) and len(b) == 2:
            try:
                lo, hi = float(b[0]), float(b[1])
            except (TypeError, ValueError):
                continue
            if math.isfinite(lo) and math.isfinite(hi):
                bounds[str(k)] = [lo, hi]
    tol = js.get("tolerance", 0.0)
    tol = float(tol) if isinstance(tol, (int, float)) else 0.0
    return {"value": float(js["value"]), "by_degree": by, "bounds": bounds, "tolerance": tol}


def _special(grid_f: Grid, grid_g: Grid, window: Window, settings: PerturbSettings) -> Any:
    """The special set of a run: the whole map, or the map of the band ``settings.costs``."""
    from specmap.special import special_set

    ms = settings.map_settings
    if ms.costs is not None:
        from specmap.special.banded import banded_special_set

        return banded_special_set(grid_f, grid_g, window, ms)
    return special_set(
        grid_f,
        grid_g,
        window,
        pairs=ms.pairs,
        resolution=ms.resolution,
        method=ms.method,
        tol=ms.tol,
        reading=ms.reading,
    )


def _distance(
    shape_f: Shape,
    shape_g: Shape,
    grids: tuple[Grid, Grid],
    atlas: Any,
    window: Window,
    settings: PerturbSettings,
) -> dict[str, Any]:
    from specmap.distance import matching_distance

    ms = settings.map_settings
    if ms.costs is not None:  # a banded map is no atlas of the search: its own focused source
        from specmap.distance.focused import focused_source

        atlas = focused_source(
            grids[0],
            grids[1],
            window,
            roles=settings.distance_settings.roles,
            pairs=ms.pairs,
            resolution=ms.resolution,
            method=ms.method,
            tol=ms.tol,
            reading=ms.reading,
        )
    res = matching_distance(
        shape_f, shape_g, settings=settings.distance_settings, window=window, atlas=atlas, grids=grids
    )
    return _distance_digest(res)


def perturbed_grid_settings(settings: GridSettings) -> GridSettings:
    """The grid settings of a perturbed shape: a perturbed map is not linear, so "exact" becomes "auto"."""
    return dataclasses.replace(settings, route="auto") if settings.route == "exact" else settings


def _pareto(shape: Shape, settings: GridSettings) -> Grid:
    from specmap.grids import pareto_grid

    return pareto_grid(shape, perturbed_grid_settings(settings))


def run_seed(seed: int, run_index: int) -> int:
    """The seed of run ``run_index``: first 32-bit word of ``SeedSequence(seed).spawn(...)[run_index]``."""
    child = np.random.SeedSequence(seed, spawn_key=(run_index,))
    return int(child.generate_state(1, dtype=np.uint32)[0])


def run_one(base: PerturbBase, run_index: int, seed: int, settings: PerturbSettings) -> dict[str, Any]:
    """Perturb the base pair once, recompute its special set (and distance), compare.

    Parameters
    ----------
    base : PerturbBase
    run_index : int
    seed : int
        Seeds :func:`numpy.random.default_rng`; f and g get independent child streams.
    settings : PerturbSettings

    Returns
    -------
    dict
        ``run``, ``seed``, ``size``, ``model``, ``applied`` ([f, g] sup norm of the change or
        largest contour move), ``total_area``, ``counts``, ``has_patch``, ``hausdorff`` (to the
        base special set, see :func:`set_hausdorff`), ``distance`` (``None`` unless
        ``settings.distance`` and the "function" model: value, base, change, bound, by_degree
        changes), ``stability_ok`` (``None`` without distance) and ``time`` (seconds).

    References
    ----------
    .. [CDFFL13] stability: |D(f', g') - D(f, g)| <= ||f - f'||_inf + ||g - g'||_inf.
    """
    t0 = time.perf_counter()
    ss_f, ss_g = np.random.SeedSequence(seed).spawn(2)
    rng_f, rng_g = np.random.default_rng(ss_f), np.random.default_rng(ss_g)
    shape_f = shape_g = None
    if settings.model == "grid":
        grid_f, moved_f = perturb_grid(base.grid_f, settings.size, rng_f)
        grid_g, moved_g = perturb_grid(base.grid_g, settings.size, rng_g)
    else:
        if base.shape_f is None or base.shape_g is None:
            raise UnsupportedInputError(
                "the 'function' model needs the shapes of f and g",
                subject="model",
                fix="use the 'grid' model for pairs given by grids",
            )
        shape_f, moved_f = perturb_shape(base.shape_f, settings.size, rng_f)
        shape_g, moved_g = perturb_shape(base.shape_g, settings.size, rng_g)
        grid_f, grid_g = _pareto(shape_f, base.grid_settings[0]), _pareto(shape_g, base.grid_settings[1])
    atlas = _special(grid_f, grid_g, base.window, settings)
    area, counts, geometry = atlas_digest(atlas)
    record: dict[str, Any] = {
        "run": int(run_index),
        "seed": int(seed),
        "model": settings.model,
        "size": float(settings.size),
        "applied": [moved_f, moved_g],
        "total_area": area,
        "counts": counts,
        "has_patch": counts["patch"] > 0,
        "hausdorff": set_hausdorff(geometry, base.geometry, base.window),
        "curve_movement": curve_movement(geometry, base.geometry, base.window),
        "patch_change": patch_change(geometry, base.geometry, base.window),
        "distance": None,
        "stability_ok": None,
    }
    if settings.distance and settings.model == "function" and base.distance is not None:
        new = _distance(shape_f, shape_g, (grid_f, grid_g), atlas, base.window, settings)
        record["distance"], record["stability_ok"] = stability_check(base.distance, new, moved_f + moved_g)
    record["time"] = time.perf_counter() - t0
    return record


def stability_check(before: dict[str, Any], after: dict[str, Any], bound: float) -> tuple[dict, bool]:
    """Compare two distance digests against the stability bound [CDFFL13].

    |D_k(f', g') - D_k(f, g)| <= ||(f', g') - (f, g)||_inf = ``bound`` for every degree k. With the
    intervals [lo, hi] that contain each D_k before and after, a violation is *certain* when
    lo_after - hi_before or lo_before - hi_after exceeds the bound plus both tolerances plus
    ``STABILITY_SLACK * max(1, |D|)`` for rounding. Every degree with finite intervals on both
    sides is checked, certified to tolerance or not (a wide interval makes the check weaker,
    never wrong).

    Returns
    -------
    (digest, ok) : (dict, bool)
    """
    slack = before["tolerance"] + after["tolerance"] + STABILITY_SLACK * max(1.0, abs(before["value"]))
    change = after["value"] - before["value"]
    by = {k: after["by_degree"][k] - v for k, v in before["by_degree"].items() if k in after["by_degree"]}
    bb, ba = before.get("bounds") or {}, after.get("bounds") or {}
    checked = sorted(k for k in by if k in bb and k in ba)
    ok = all(ba[k][0] - bb[k][1] <= bound + slack and bb[k][0] - ba[k][1] <= bound + slack for k in checked)
    digest = {
        "value": after["value"],
        "base": before["value"],
        "change": change,
        "bound": bound,
        "slack": slack,
        "by_degree_change": by,
        "checked_degrees": checked,
    }
    return digest, bool(ok)


def make_base(
    grids: tuple[Grid, Grid],
    window: Window,
    *,
    shapes: tuple[Shape, Shape] | None = None,
    atlas: Any = None,
    distance: Any = None,
    settings: PerturbSettings | None = None,
    grid_settings: tuple[GridSettings, GridSettings] | None = None,
) -> PerturbBase:
    """Assemble the base pair, computing its special set (and distance) when not given.

    Parameters
    ----------
    grids : (Grid, Grid)
    window : Window
    shapes : (Shape, Shape), optional
    atlas : Atlas, optional
        Base special set; computed with ``settings`` when missing.
    distance : DistanceResult or dict, optional
        Base matching distance; computed when ``settings.distance`` asks for it and it is missing.
    settings : PerturbSettings, optional
    grid_settings : (GridSettings, GridSettings), optional
        How the grids of f and g were computed (default :class:`~specmap.settings.GridSettings`);
        the "function" model computes the grids of perturbed shapes the same way.
    """
    settings = settings or PerturbSettings()
    if settings.model == "function" and (shapes is None or any(s is None or not s.has_mesh for s in shapes)):
        raise UnsupportedInputError(
            "the 'function' model needs f and g as surfaces or meshes",
            subject="model",
            fix="use the 'grid' model for pairs given by grids",
        )
    gf, gg = grids
    if atlas is None:
        atlas = _special(gf, gg, window, settings)
    area, counts, geometry = atlas_digest(atlas)
    sf, sg = shapes if shapes is not None else (None, None)
    dist = None
    if settings.distance and settings.model == "function" and sf is not None:
        dist = (
            _distance_digest(distance)
            if distance is not None
            else _distance(sf, sg, (gf, gg), atlas, window, settings)
        )
    return PerturbBase(
        gf,
        gg,
        window,
        sf,
        sg,
        area,
        counts,
        geometry,
        dist,
        grid_settings or (GridSettings(), GridSettings()),
        patch_reasons(atlas),
    )


def patch_reasons(atlas: Any) -> tuple[tuple[dict[str, Any], ...], ...]:
    """The ``reasons`` of every patch component of an atlas (:mod:`specmap.special.reasons`)."""
    return tuple(
        tuple(dict(r) for r in getattr(c, "reasons", ()) or ())
        for c in getattr(atlas, "components", ())
        if getattr(c, "kind", None) == "patch"
    )
