"""Former home of the perturbation run sets, kept as a re-export for existing imports.

The ideas now live in :mod:`specmap.perturb.run` (settings, base and the pure run),
:mod:`specmap.perturb.geometry` (Hausdorff distance of special sets),
:mod:`specmap.perturb.store` (run-set files, fingerprint, lock) and
:mod:`specmap.perturb.execution` (the joblib / Dask driver).
"""

from __future__ import annotations

from specmap.perturb.execution import run_study
from specmap.perturb.geometry import HAUSDORFF_STEPS, set_hausdorff
from specmap.perturb.run import (
    STABILITY_SLACK,
    TIME_FIELDS,
    PerturbBase,
    PerturbSettings,
    atlas_digest,
    make_base,
    run_one,
    run_seed,
    stability_check,
)
from specmap.perturb.store import fingerprint, load_runs, records_without_time, repair_tail, tidy_runs

__all__ = [
    "HAUSDORFF_STEPS",
    "STABILITY_SLACK",
    "TIME_FIELDS",
    "PerturbSettings",
    "PerturbBase",
    "atlas_digest",
    "make_base",
    "run_one",
    "run_seed",
    "run_study",
    "set_hausdorff",
    "stability_check",
    "fingerprint",
    "repair_tail",
    "tidy_runs",
    "load_runs",
    "records_without_time",
]
