"""The end-to-end demo: grid, map, distance, a small perturbation study and the report."""

from __future__ import annotations

import dataclasses
import shutil
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from specmap.io import read_json
from specmap.pipeline import StudyRun
from specmap.study import load_study


@dataclass(frozen=True)
class DemoOutcome:
    """What the demo wrote and found.

    Attributes
    ----------
    out : Path
        The result folder.
    report : Path
        The PDF built in the result folder.
    pdf : Path
        Where it was copied (the same path when no copy was needed).
    replaced : bool
        Whether an existing file at ``pdf`` was overwritten.
    distance : dict
        ``distance.json``.
    special : dict
        ``special.json``.
    verdict : str or None
        The perturbation study's verdict.
    """

    out: Path
    report: Path
    pdf: Path
    replaced: bool
    distance: dict[str, Any]
    special: dict[str, Any]
    verdict: str | None


def run_demo(
    study_path: str | Path,
    *,
    out: str | Path | None = None,
    pdf: str | Path = "reports/demo.pdf",
    jobs: int = 2,
    quick: bool = False,
    show_progress: bool = True,
    command: str | None = None,
) -> DemoOutcome:
    """Run every stage of the demo study and write its PDF report.

    The report is built in the result folder and copied to ``pdf``; when that
    replaces an existing file (by default the tracked ``reports/demo.pdf``) the
    outcome says so and the CLI prints it.

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
    command : str, optional
        The command line recorded once in ``study.json`` (default ``specmap demo`` and the options).

    Returns
    -------
    DemoOutcome
    """
    from specmap.report.pdf import build_report

    study = load_study(study_path)
    if quick:
        study = dataclasses.replace(
            study,
            map=dataclasses.replace(study.map, resolution=min(study.map.resolution, 61)),
            distance=dataclasses.replace(
                study.distance, dense_resolution=min(study.distance.dense_resolution, 15)
            ),
            perturb=dataclasses.replace(study.perturb, runs=min(study.perturb.runs, 4))
            if study.perturb
            else None,
            f=dataclasses.replace(study.f, resolution=min(study.f.resolution, 800)),
            g=dataclasses.replace(study.g, resolution=min(study.g.resolution, 800)),
        )
    sr = StudyRun(study, out, show_progress=show_progress)
    sr.write_grids()
    sr.write_map()
    distance = sr.write_distance(jobs=jobs)
    summary = sr.write_perturb(jobs=jobs) if study.perturb is not None else {}
    sr.record(command or "specmap demo" + (" --quick" if quick else "") + f" --jobs {jobs}")
    built = Path(build_report(sr.out))
    target = Path(pdf)
    replaced = False
    if target.resolve() != built.resolve():
        target.parent.mkdir(parents=True, exist_ok=True)
        replaced = target.exists()
        shutil.copyfile(built, target)
    special = read_json(sr.out / "special.json")
    return DemoOutcome(sr.out, built, target, replaced, distance, special, summary.get("verdict"))


def degree_lines(d: dict[str, Any]) -> list[str]:
    """One line per homology degree: D_k, its interval and whether it is certified (why not, briefly).

    Examples
    --------
    >>> degree_lines({"tolerance": 1e-3, "by_degree": {"0": {"value": 0.3, "certified": True, "bounds": [0.3, 0.3004]},
    ...     "1": {"value": 0.1, "certified": False, "bounds": [0.1, 0.3], "why_not": "no reduced search ran"}}})
    ['  D_0 = 0.3000, certified: in [0.3000, 0.3004]', '  D_1 = 0.1, not certified: in [0.1, 0.3]. No reduced search ran.']
    """
    from specmap.report.summary import degree_rows, why_sentences

    out = []
    for r in degree_rows(d):
        if r.degree == "max":
            continue
        where = f"in {r.interval_text}" if r.interval else "no interval recorded"
        if r.status == "certified":
            out.append(f"  D_{r.degree} = {r.value_text}, certified: {where}")
        else:
            why = why_sentences(r.status.removeprefix("not certified: ").split("; ")[0])
            out.append(f"  D_{r.degree} = {r.value_text}, not certified: {where}. {why}")
    return out


def summary_lines(o: DemoOutcome) -> list[str]:
    """What the demo prints: D, where, the special set, the verdict, and where the report went."""
    from specmap.cli import REACHED
    from specmap.report.fmt import fmt_distance, fmt_point
    from specmap.report.summary import component_counts

    d = o.distance
    lines = [
        f"matching distance: D = {fmt_distance(d)} at (a, b) = {fmt_point(d.get('at'))}, "
        f"{REACHED.get(d.get('reached_on'), 'reached on ' + str(d.get('reached_on')))}",
    ]
    lines += degree_lines(d)
    lines.append(f"special set: {component_counts(o.special)} (connected components)")
    if o.verdict:
        lines.append(f"verdict: {o.verdict}")
    lines.append(f"results: {o.out}; report: {o.report}")
    if o.pdf.resolve() != o.report.resolve():
        lines.append(
            f"report copied to {o.pdf}"
            + (
                " (replaced the previous file there; in a clone that is the "
                "tracked copy, so git diff shows the change)"
                if o.replaced
                else ""
            )
        )
    return lines
