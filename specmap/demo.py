"""The end-to-end demo: grid, map, distance, a small perturbation study and the report."""

from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path

from specmap.pipeline import StudyRun
from specmap.study import load_study


def run_demo(study_path: str | Path, *, out: str | Path | None = None, pdf: str | Path = "reports/demo.pdf",
             jobs: int = 2, quick: bool = False, show_progress: bool = True) -> Path:
    """Run every stage of the demo study and write its PDF report.

    Parameters
    ----------
    study_path : path
        The demo study file.
    out : path, optional
        Result folder (default ``results/<study name>``).
    pdf : path
        Where the report is copied (default ``reports/demo.pdf``).
    jobs : int
        Parallel workers for slices and perturbation runs.
    quick : bool
        Smaller settings (coarser sampling, fewer runs), for CI.

    Returns
    -------
    Path
        The PDF written.
    """
    from specmap.report.pdf import build_report

    study = load_study(study_path)
    if quick:
        study = dataclasses.replace(
            study,
            map=dataclasses.replace(study.map, resolution=min(study.map.resolution, 61)),
            distance=dataclasses.replace(study.distance, dense_resolution=min(study.distance.dense_resolution, 15)),
            perturb=dataclasses.replace(study.perturb, runs=min(study.perturb.runs, 4)) if study.perturb else None,
            f=dataclasses.replace(study.f, resolution=min(study.f.resolution, 800)),
            g=dataclasses.replace(study.g, resolution=min(study.g.resolution, 800)),
        )
    sr = StudyRun(study, out, show_progress=show_progress)
    sr.write_grids()
    sr.record("specmap demo" + (" --quick" if quick else ""))
    sr.write_map()
    sr.write_distance(jobs=jobs)
    if study.perturb is not None:
        sr.write_perturb(jobs=jobs)
    sr.record("specmap demo" + (" --quick" if quick else ""))
    built = build_report(sr.out)
    target = Path(pdf)
    target.parent.mkdir(parents=True, exist_ok=True)
    if target.resolve() != Path(built).resolve():
        shutil.copyfile(built, target)
    return target
