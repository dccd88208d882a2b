"""Perturbation studies: how the special set (and the matching distance) react to small changes.

Each run perturbs the pair (random smooth functions added to f and g, or contours moved), maps
the special set again, and compares it with the unperturbed one. Runs are independent, seeded
per run index, executed in parallel with joblib (or a Dask cluster through joblib) and appended
to ``perturb/runs.jsonl`` as they finish, so an interrupted study resumes where it stopped.

Public API: :func:`perturbation_study` (a base pair from :func:`make_base`, its
:class:`~specmap.settings.PerturbSettings` and a folder; the pipeline builds both from a study),
:func:`run_study` (the driver), :func:`perturb_shape`, :func:`perturb_grid`, :func:`wilson_interval`.

Modules: ``models`` (the perturbations), ``run`` (settings, base, the pure run),
``geometry`` (Hausdorff distance of special sets), ``store`` (run-set files, fingerprint,
lock), ``execution`` (the joblib / Dask driver), ``summary`` (statistics and verdict).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from specmap.perturb.execution import run_study
from specmap.perturb.geometry import set_hausdorff
from specmap.perturb.models import PerturbedMap, RandomField, perturb_grid, perturb_shape, random_field
from specmap.perturb.run import PerturbBase, PerturbSettings, make_base, run_one, run_seed
from specmap.perturb.summary import wilson_interval

if TYPE_CHECKING:
    from specmap.study import Study

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


def settings_from_study(study: Study, *, runs: int | None = None) -> PerturbSettings:
    """The :class:`PerturbSettings` of a study (kept for old imports; see :meth:`Study.perturb_settings`)."""
    return study.perturb_settings(runs=runs)


def perturbation_study(
    base: PerturbBase,
    settings: PerturbSettings,
    folder: str | Path,
    *,
    sizes: Sequence[float] | None = None,
    jobs: int = 1,
    cluster: str | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> dict[str, Any]:
    """Run (or resume) a perturbation study of a base pair and write ``folder/summary.json``.

    Parameters
    ----------
    base : PerturbBase
        The unperturbed pair, its special set and (when ``settings.distance``) its matching
        distance, all computed by the caller (:func:`make_base`; the pipeline hands in what it
        already computed).
    settings : PerturbSettings
        Model, size, runs, seed and how each run is analysed
        (:meth:`specmap.study.Study.perturb_settings` builds them from a study file).
    folder : path
        The run-set folder (a study's ``DIR/perturb``).
    sizes : sequence of float, optional
        A sweep: each other size is its own run set under ``folder/sweep/size-<size>/``.
    jobs : int
        joblib worker processes (results do not depend on it).
    cluster : str, optional
        ``"tcp://host:port"``: run on the workers of a Dask cluster (:func:`specmap.perturb.execution._on_cluster`).
    progress : callable(done, total), optional

    Returns
    -------
    dict
        The summary of the run set at ``settings.size`` (see :func:`run_study`), with
        ``"sweep"``: one row per size when ``sizes`` is given, else None.

    Examples
    --------
    >>> from specmap.pipeline import StudyRun                      # doctest: +SKIP
    >>> from specmap.study import load_study                       # doctest: +SKIP
    >>> summary = StudyRun(load_study("studies/demo.toml")).write_perturb()  # doctest: +SKIP
    >>> summary["verdict"]                                          # doctest: +SKIP
    """
    return run_study(base, settings, Path(folder), jobs=jobs, cluster=cluster, progress=progress, sizes=sizes)
