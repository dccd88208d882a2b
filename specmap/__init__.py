"""specmap: special sets, matching distances and their perturbations for pairs of
R^2-valued filtering functions (2-parameter persistent homology).

Python entry points (each a pure computation; I/O stays in the CLI):

- :func:`load_study` -- read and validate a study file;
- :func:`build_shape`, :func:`pareto_grid` -- shapes and extended Pareto grids;
- :func:`special_set` -- the special-set atlas in the parameter strip;
- :func:`slice_diagrams`, :func:`matching_distance` -- slices and the distance;
- :func:`perturbation_study` -- perturbed reruns, in parallel and resumable;
- :func:`build_report` -- the PDF report of a result folder.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

_LAZY = {
    "load_study": ("specmap.study", "load_study"),
    "Study": ("specmap.study", "Study"),
    "build_shape": ("specmap.shapes.build", "build_shape"),
    "Shape": ("specmap.shapes.model", "Shape"),
    "Grid": ("specmap.grids.model", "Grid"),
    "Contour": ("specmap.grids.model", "Contour"),
    "read_grid": ("specmap.grids.model", "read_grid"),
    "pareto_grid": ("specmap.grids", "pareto_grid"),
    "Window": ("specmap.strip", "Window"),
    "special_set": ("specmap.special", "special_set"),
    "Atlas": ("specmap.special.atlas", "Atlas"),
    "slice_diagrams": ("specmap.slices", "slice_diagrams"),
    "matching_distance": ("specmap.distance", "matching_distance"),
    "DistanceResult": ("specmap.distance", "DistanceResult"),
    "perturbation_study": ("specmap.perturb", "perturbation_study"),
    "MapSettings": ("specmap.settings", "MapSettings"),
    "DistanceSettings": ("specmap.settings", "DistanceSettings"),
    "PerturbSettings": ("specmap.settings", "PerturbSettings"),
    "build_report": ("specmap.report.pdf", "build_report"),
}

__all__ = ["__version__", *_LAZY]

if TYPE_CHECKING:  # editors and type checkers see the lazy names; at run time __getattr__ imports them
    from specmap.distance import DistanceResult, matching_distance
    from specmap.grids import pareto_grid
    from specmap.grids.model import Contour, Grid, read_grid
    from specmap.perturb import perturbation_study
    from specmap.report.pdf import build_report
    from specmap.settings import DistanceSettings, MapSettings, PerturbSettings
    from specmap.shapes.build import build_shape
    from specmap.shapes.model import Shape
    from specmap.slices import slice_diagrams
    from specmap.special import special_set
    from specmap.special.atlas import Atlas
    from specmap.strip import Window
    from specmap.study import Study, load_study


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        mod, attr = _LAZY[name]
        return getattr(importlib.import_module(mod), attr)
    raise AttributeError(f"module 'specmap' has no attribute {name!r}")
