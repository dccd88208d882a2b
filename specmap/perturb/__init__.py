"""Perturbation studies: how the special set (and the matching distance) react to small changes.

Each run perturbs the pair (random smooth functions added to f and g, or contours moved), maps
the special set again, and compares it with the unperturbed one. Runs are independent, seeded
per run index, executed in parallel with joblib (or a Dask cluster through joblib) and appended
to ``perturb/runs.jsonl`` as they finish, so an interrupted study resumes where it stopped.

Public API: :func:`perturbation_study` (from a :class:`~specmap.study.Study`),
:func:`run_study` (one run set from a :class:`PerturbBase`), :func:`perturb_shape`,
:func:`perturb_grid`, :func:`wilson_interval`.

Modules: ``models`` (the perturbations), ``run`` (settings, base, the pure run),
``geometry`` (Hausdorff distance of special sets), ``store`` (run-set files, fingerprint,
lock), ``execution`` (the joblib / Dask driver), ``summary`` (statistics and verdict).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

from specmap.perturb.execution import run_study
from specmap.perturb.geometry import set_hausdorff
from specmap.perturb.models import PerturbedMap, RandomField, perturb_grid, perturb_shape, random_field
from specmap.perturb.run import PerturbBase, PerturbSettings, make_base, run_one, run_seed
from specmap.perturb.summary import wilson_interval

__all__ = [
    "perturbation_study",
    "perturb_grid",
    "perturb_shape",
    "wilson_interval",
    "run_study",
    "run_one",
    "run_seed",
    "make_base",
    "set_hausdorff",
    "settings_from_study",
    "PerturbBase",
    "PerturbSettings",
    "PerturbedMap",
    "RandomField",
    "random_field",
]


def settings_from_study(study: Any, *, runs: int | None = None) -> PerturbSettings:
    """The :class:`PerturbSettings` of a study's ``[perturb]``, ``[map]`` and ``[distance]`` tables."""
    spec = study.perturb
    if spec is None:
        from specmap.errors import StudyError

        raise StudyError("no [perturb] table", file=str(getattr(study, "path", "")) or None,
                         field="[perturb]", fix="add [perturb] with size = ..., runs = ...")
    mp, ds = getattr(study, "map", None), getattr(study, "distance", None)
    dmethod = getattr(ds, "method", "reduced")
    return PerturbSettings(
        model=spec.model, size=float(spec.size), runs=int(spec.runs if runs is None else runs),
        seed=int(spec.seed), pairs=getattr(mp, "pairs", "all"), resolution=int(getattr(mp, "resolution", 121)),
        method=getattr(mp, "method", "sweep"), distance=bool(spec.distance),
        distance_method="dense" if dmethod == "dense" else "reduced",
        degrees=tuple(getattr(ds, "degrees", (0, 1, 2))),
        dense_resolution=int(getattr(ds, "dense_resolution", 41)),
    )


def _base_from(study: Any, base: Any, settings: PerturbSettings) -> PerturbBase:
    if isinstance(base, PerturbBase):
        return base
    if isinstance(base, (tuple, list)):
        shapes, grids, atlas, distance = base
        window = None
    elif isinstance(base, dict):
        shapes, grids = base.get("shapes"), base.get("grids")
        atlas, distance, window = base.get("atlas"), base.get("distance"), base.get("window")
    else:
        shapes = grids = atlas = distance = window = None
    if shapes is None and grids is None:
        from specmap.pipeline import StudyRun  # the study's inputs: shapes (None for a grid file) and grids

        run = StudyRun(study, show_progress=False)
        shapes, grids = run.shapes, run.grids
    if grids is None:
        from specmap.grids import pareto_grid

        grids = (pareto_grid(shapes[0]), pareto_grid(shapes[1]))
    if window is None:
        window = getattr(study, "window", None)
    if window is None:
        from specmap.strip import window_for

        window = window_for(shapes if shapes is not None else (None, None), grids)
    if shapes is not None and any(s is None or not s.has_mesh for s in shapes):
        shapes = None if settings.model == "grid" else shapes
    return make_base(tuple(grids), window, shapes=None if shapes is None else tuple(shapes), atlas=atlas,
                     distance=distance, settings=settings)


def perturbation_study(study: Any, *, out_dir: str | Path, runs: int | None = None, jobs: int = 1,
                       cluster: str | None = None, progress: Callable[[int, int], None] | None = None,
                       base: Any = None) -> dict[str, Any]:
    """Run (or resume) the perturbation study of a study file and write ``perturb/summary.json``.

    Parameters
    ----------
    study : Study
        Its ``perturb`` table (:class:`~specmap.study.PerturbSpec`) sets model, size, runs,
        seed, sizes and distance; ``map`` and ``distance`` set how each run is analysed.
    out_dir : path
        The study's result folder; files go to ``out_dir/perturb/``.
    runs : int, optional
        Overrides ``study.perturb.runs``.
    jobs : int
        joblib worker processes (results do not depend on it).
    cluster : str, optional
        ``"tcp://host:port"``: run on a Dask cluster through joblib's dask backend.
    progress : callable(done, total), optional
    base : PerturbBase, dict or tuple, optional
        Precomputed base: a dict with keys ``shapes``, ``grids``, ``window``, ``atlas``,
        ``distance`` (any may be missing), or a tuple ``(shapes, grids, atlas, distance)``.

    Returns
    -------
    dict
        The summary of the run set at ``study.perturb.size`` (see :func:`run_study`), with
        ``"sweep"``: one row per size when ``study.perturb.sizes`` is given, else None. Each
        size of a sweep is its own run set under ``perturb/sweep/size-<size>/``.

    Raises
    ------
    StudyError
        No ``[perturb]`` table, a "function" model without shapes, a missing Dask.

    Examples
    --------
    >>> from specmap.study import load_study                       # doctest: +SKIP
    >>> summary = perturbation_study(load_study("studies/demo.toml"), out_dir="results/demo")  # doctest: +SKIP
    >>> summary["verdict"]                                          # doctest: +SKIP
    """
    settings = settings_from_study(study, runs=runs)
    pbase = _base_from(study, base, settings)
    return run_study(pbase, settings, Path(out_dir) / "perturb", jobs=jobs, cluster=cluster, progress=progress,
                     sizes=getattr(study.perturb, "sizes", None))
