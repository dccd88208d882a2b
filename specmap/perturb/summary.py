"""Summaries of perturbation run sets: counts, a Wilson interval, means, maxima and a verdict.

Pure functions of the run records (the dicts written to ``runs.jsonl``) and the base summary.

References
----------
.. [Wil27] Wilson, "Probable inference, the law of succession, and statistical inference",
   J. Amer. Statist. Assoc. 22 (1927). The score interval for a binomial proportion.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

__all__ = ["wilson_interval", "summarize_runs", "verdict", "sweep_row", "movement_slope"]

Z95 = 1.959963984540054
"""Two-sided 95% normal quantile."""


def wilson_interval(successes: int, trials: int, z: float = Z95) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion [Wil27].

    Parameters
    ----------
    successes, trials : int
        0 <= successes <= trials.
    z : float
        Normal quantile (1.96 for 95%).

    Returns
    -------
    (lo, hi) : tuple of float
        Bounds in [0, 1]; (0, 1) when ``trials == 0``.

    Examples
    --------
    >>> lo, hi = wilson_interval(0, 50, z=1.96)
    >>> lo, round(hi, 4)
    (0.0, 0.0714)
    """
    if trials < 0 or not 0 <= successes <= trials:
        raise ValueError(f"need 0 <= successes <= trials, got {successes} of {trials}")
    if trials == 0:
        return 0.0, 1.0
    n = float(trials)
    p = successes / n
    z2 = z * z
    denom = 1.0 + z2 / n
    center = (p + z2 / (2.0 * n)) / denom
    half = z / denom * math.sqrt(p * (1.0 - p) / n + z2 / (4.0 * n * n))
    lo = 0.0 if successes == 0 else max(0.0, center - half)
    hi = 1.0 if successes == trials else min(1.0, center + half)
    return lo, hi


def _mean_max(values: Sequence[float | None]) -> dict[str, float | None]:
    """Mean and maximum of the finite values (None and non-finite left out; both None when none is left)."""
    vals = [float(v) for v in values if v is not None and math.isfinite(float(v))]
    if not vals:
        return {"mean": None, "max": None}
    return {"mean": sum(vals) / len(vals), "max": max(vals)}


def _pct(x: float) -> str:
    v = 100.0 * x
    if v == 0.0 or v >= 99.95:
        return f"{v:.0f}"
    return f"{v:.2g}" if v < 1.0 else f"{v:.1f}".rstrip("0").rstrip(".")


def verdict(
    base: dict[str, Any],
    n_runs: int,
    with_patch: int,
    ci: tuple[float, float],
    size: float,
    window_area: float,
) -> str:
    """One sentence: the base special set (with why its patches exist), then how many perturbed runs
    had a patch, read against the size that breaks the patch's identities.

    ``base`` may carry ``reason`` (:func:`specmap.report.genericity.reason_phrase` of the base's
    patches) and ``breaks_at`` (their :func:`~specmap.report.genericity.breaking_size`, None when
    unknown), as :meth:`specmap.perturb.run.PerturbBase.summary` writes them; the result is then
    read by :func:`specmap.report.genericity.evidence`, the report's own words.

    Examples
    --------
    >>> verdict({"total_area": 0.84, "counts": {"patch": 1, "curve": 0, "point": 0}},
    ...         50, 0, (0.0, 0.0713), 1e-3, 0.84)
    'The base special set has 1 patch (area 0.84, 100% of the window); 0 of 50 perturbed runs of size 0.001 kept a patch (95% CI 0-7.1%).'
    >>> verdict({"total_area": 0.84, "counts": {"patch": 1}, "breaks_at": 3e-5,
    ...          "reason": "equal spacing (1 identity) of the critical values of f1 and g1"},
    ...         20, 0, (0.0, 0.161), 1e-3, 0.84)  # doctest: +NORMALIZE_WHITESPACE
    "The base special set has 1 patch (area 0.84, 100% of the window), non-generic by equal spacing
    (1 identity) of the critical values of f1 and g1, which breaks at perturbations larger than 3e-05;
    0 of 20 perturbed runs of size 0.001 kept a patch (95% CI 0-16.1%): the patch is an artefact of a
    non-generic input, not of the pair's geometry, as its reasons predict (size 0.001 > 3e-05)."
    """
    counts = base.get("counts", {})
    n_patch = int(counts.get("patch", 0))
    lo, hi = ci
    ci_text = f"95% CI {_pct(lo)}-{_pct(hi)}%"
    if n_patch:
        area = float(base.get("total_area", 0.0))
        share = area / window_area if window_area > 0 else 0.0
        head = (
            f"The base special set has {n_patch} patch{'es' if n_patch > 1 else ''} "
            f"(area {area:.3g}, {_pct(share)}% of the window)"
        )
        verb = "kept"
    else:
        n_curve = int(counts.get("curve", 0))
        head = (
            f"The base special set has no patch ({n_curve} curve{'s' if n_curve != 1 else ''}, "
            f"{int(counts.get('point', 0))} isolated points)"
        )
        verb = "gained"
    reason = base.get("reason") if n_patch else None
    if not reason:
        return f"{head}; {with_patch} of {n_runs} perturbed runs of size {size:g} {verb} a patch ({ci_text})."
    from specmap.report.genericity import evidence  # lazy: workers never build a verdict

    br = base.get("breaks_at")
    br = float(br) if isinstance(br, (int, float)) else math.nan
    breaks = f", which breaks at perturbations larger than {br:.3g}" if math.isfinite(br) else ""
    return (
        f"{head}, non-generic by {reason}{breaks}; {with_patch} of {n_runs} perturbed runs of size {size:g} "
        f"{verb} a patch ({ci_text})" + evidence(n_patch, br, with_patch, size)
    )


def summarize_runs(
    records: Sequence[dict[str, Any]],
    *,
    base: dict[str, Any],
    size: float,
    model: str,
    window_area: float,
    runs_per_minute: float | None = None,
    runs_per_minute_basis: str | None = None,
) -> dict[str, Any]:
    """The summary of one run set (one size).

    Parameters
    ----------
    records : sequence of dict
        Run records as written to ``runs.jsonl`` (one per run index).
    base : dict
        ``{"total_area", "counts"}`` (and optionally ``"distance"``) of the unperturbed pair.
    size : float
    model : {"function", "grid"}
    window_area : float
    runs_per_minute : float, optional
    runs_per_minute_basis : str, optional
        How the rate was measured.

    Returns
    -------
    dict
        JSON-ready; keys listed in :func:`specmap.perturb.execution.run_study`.
    """
    recs = sorted(records, key=lambda r: int(r["run"]))
    n = len(recs)
    with_patch = sum(1 for r in recs if int(r["counts"].get("patch", 0)) > 0)
    ci = wilson_interval(with_patch, n)
    dist_recs = [r["distance"] for r in recs if r.get("distance")]
    distance = None
    if dist_recs:
        changes = [abs(float(d["change"])) for d in dist_recs]
        distance = {
            "base": base.get("distance"),
            "abs_change": _mean_max(changes),
            "bound": _mean_max([float(d["bound"]) for d in dist_recs]),
            "runs": len(dist_recs),
        }
    # null when the distance was not tracked: "0 violations" would claim a check that did not run
    violations = sum(1 for r in recs if r.get("stability_ok") is False) if dist_recs else None
    return {
        "runs": n,
        "size": float(size),
        "model": model,
        "base": {
            "total_area": float(base.get("total_area", 0.0)),
            "counts": dict(base.get("counts", {})),
            # why the base's patches exist and the size that breaks them (None: not recorded)
            "reason": base.get("reason"),
            "breaks_at": base.get("breaks_at"),
        },
        "runs_with_patch": with_patch,
        "runs_with_patch_ci95": [ci[0], ci[1]],
        "total_area": _mean_max([r["total_area"] for r in recs]),
        "hausdorff": _mean_max([r["hausdorff"] for r in recs]),
        # curves and points only (a vanishing patch is not curve movement), and the patch change
        "curve_movement": _mean_max([r.get("curve_movement") for r in recs]),
        # per unit of perturbation size (value units): how far the curves move per unit of change
        "curve_movement_per_size": _mean_max(
            [float(r["curve_movement"]) / float(size) for r in recs if r.get("curve_movement") is not None]
            if float(size) > 0
            else []
        ),
        "patch_change": _mean_max([r.get("patch_change") for r in recs]),
        "distance": distance,
        "stability_violations": violations,
        "verdict": verdict(base, n, with_patch, ci, size, window_area),
        "sweep": None,
        "runs_per_minute": runs_per_minute,
        "runs_per_minute_basis": runs_per_minute_basis,
    }


def movement_slope(rows: Sequence[dict[str, Any]]) -> float | None:
    """Least-squares slope through the origin of the mean curve movement against the size.

    ``rows`` are :func:`sweep_row` rows; the slope k minimises sum (m_i - k s_i)^2 over the sizes
    s_i with a finite mean movement m_i, so k = sum s_i m_i / sum s_i^2 ((a, b) units per value
    unit). None with no such row.

    Examples
    --------
    >>> movement_slope([{"size": 0.01, "curve_movement_mean": 0.02}, {"size": 0.02, "curve_movement_mean": 0.04}])
    2.0
    """
    pts = [
        (float(r["size"]), float(r["curve_movement_mean"]))
        for r in rows
        if r.get("curve_movement_mean") is not None and math.isfinite(float(r["curve_movement_mean"]))
    ]
    den = sum(s * s for s, _ in pts)
    if not pts or den <= 0:
        return None
    return sum(s * m for s, m in pts) / den


def sweep_row(summary: dict[str, Any]) -> dict[str, Any]:
    """One row of a size sweep, taken from the summary of that size's run set."""
    dist = summary.get("distance")
    return {
        "size": summary["size"],
        "runs": summary["runs"],
        "runs_with_patch": summary["runs_with_patch"],
        "runs_with_patch_ci95": summary["runs_with_patch_ci95"],
        "total_area_mean": summary["total_area"]["mean"],
        "hausdorff_mean": summary["hausdorff"]["mean"],
        "hausdorff_max": summary["hausdorff"]["max"],
        "curve_movement_mean": (summary.get("curve_movement") or {}).get("mean"),
        "patch_change_mean": (summary.get("patch_change") or {}).get("mean"),
        "distance_change_max": dist["abs_change"]["max"] if dist else None,
        "stability_violations": summary["stability_violations"],
    }
