"""Plain sentences from the numbers of a result folder.

Each sentence states one finding with its tolerance where the result file
records one. Sentences that report a disagreement between the computation and
the theory start with ``WARNING:``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from specmap.report.fmt import (
    fmt,
    fmt_distance,
    fmt_interval,
    fmt_pct,
    fmt_point,
    fmt_to,
    fraction_interval,
    num,
    plural,
)

WARNING = "WARNING:"


def _tol(x: Any) -> str:
    return f" (tolerance {fmt(x, 3)})" if x is not None else ""


def _grid_sentences(res: dict[str, Any]) -> list[str]:
    out = []
    for name in ("f", "g"):
        grid = res.get(f"grid_{name}")
        if not grid:
            continue
        kinds = [c.get("kind") for c in grid.get("contours", [])]
        out.append(
            f"The extended Pareto grid of {name} has {plural(len(kinds), 'contour')}: "
            f"{kinds.count('proper')} proper, {kinds.count('vertical')} vertical and "
            f"{kinds.count('horizontal')} horizontal half-lines (route {grid.get('route', 'n/a')}, "
            f"tolerance {fmt(grid.get('tolerance'), 3)})."
        )
    simp = {n: (res.get(f"grid_{n}") or {}).get("meta", {}).get("simplification") for n in ("f", "g")}
    if any(simp.values()):
        said = "; ".join(
            f"{n}: delta {fmt(r.get('delta'), 3)}, sup change {fmt(max(r.get('sup_change') or [0]), 3)}"
            f", {r.get('contours_before')} -> {r.get('contours_after')} contours"
            for n, r in simp.items()
            if r
        )
        out.append(
            f"The values were simplified ({said}): the grids, the special set and the distance shown are "
            "those of the simplified pair; the original pair's distance lies in the simplified_bounds "
            "of distance.json (stability theorem)."
        )
    return out


def _perturb_tail(res: dict[str, Any]) -> str:
    """``"; none survived 200 perturbations of size 0.001"`` or ``""``."""
    pert = res.get("perturb") or {}
    s = pert.get("summary")
    if not s:
        return ""
    runs, k = int(num(s.get("runs")) or 0), s.get("runs_with_patch")
    if k is None:
        return ""
    k = int(num(k))
    if k == 0:
        return f"; none survived {runs} perturbations of size {fmt(s.get('size'), 3)}"
    return (
        f"; a patch persisted in {k} of {runs} perturbations of size {fmt(s.get('size'), 3)}"
        f" (95% interval for the fraction {fmt_interval(fraction_interval(s.get('runs_with_patch_ci95'), runs))})"
    )


def _special_sentences(res: dict[str, Any]) -> list[str]:
    sp = res.get("special")
    if not sp:
        return []
    c = sp.get("counts") or {}
    n_curve, n_patch, n_point = (int(num(c.get(k, 0))) for k in ("curve", "patch", "point"))
    win = sp.get("window") or {}
    out = [
        f"In the window a in {fmt_interval(win.get('a'))}, b in {fmt_interval(win.get('b'))} the special "
        f"set has {plural(n_patch, 'patch', 'patches')}, {plural(n_curve, 'curve component')} and "
        f"{plural(n_point, 'point component')} (connected components), found with method {sp.get('method', 'n/a')} at resolution "
        f"{sp.get('resolution', 'n/a')} over {sp.get('pairs', 'n/a')} pairs{_tol(sp.get('tolerance'))}."
    ]
    tail = _perturb_tail(res)
    if n_patch:
        verb = "covers" if n_patch == 1 else "cover"
        out.append(
            f"{plural(n_patch, 'patch', 'patches')} {verb} {fmt_pct(sp.get('area_fraction'))} of the "
            f"window (total area {fmt(sp.get('total_area'))}){tail}."
        )
    else:
        out.append(
            "No patch was found: at this resolution and tolerance the special set has zero area"
            f"{tail.replace('none survived', 'no patch appeared in')}."
        )
    return out


def _reached(on: Any, at: Any, comp: Any) -> str:
    at = at or [math.nan, math.nan]
    b = fmt(at[1]) if len(at) > 1 else "n/a"
    if on == "slope-one":
        return f"reached on the slope-one line at b = {b}"
    where = f"at (a, b) = {fmt_point(at)}" + (f" (component {comp})" if comp is not None else "")
    if on == "special":
        return f"reached on the special set {where}"
    if on == "both":
        return f"reached both on the slope-one line and on the special set, {where}"
    return f"reached {where}"


@dataclass(frozen=True)
class StripCheck:
    """The whole-strip branch and bound against the reduced search, for one degree (check (c) of
    :func:`specmap.distance.audit.theorem_audit`).

    Attributes
    ----------
    degree : str
    reduced : float
        The reported (reduced-search) value D_k.
    best, bound : float
        The largest h_k the branch and bound evaluated over the whole strip, and its certified
        upper bound there (``by_degree[k].strip.bounds``).
    margin : float
        ``best - reduced`` (``audit.theorem.by_degree[k].strip_minus_reduced`` when recorded):
        above the tolerance, the reduced search missed a larger value.
    at : list or None
        The line (a, b) of ``best``.
    lines : Any
        Lines the branch and bound evaluated.
    """

    degree: str
    reduced: float
    best: float
    bound: float
    margin: float
    at: Any
    lines: Any


def strip_check(d: dict[str, Any]) -> StripCheck | None:
    """The degree whose whole-strip search comes closest to (or exceeds most) the reduced value.

    None when no degree of ``distance.json`` records a ``strip`` block (the search did not run).

    Examples
    --------
    >>> c = strip_check({"by_degree": {"0": {"value": 0.3, "strip": {"bounds": [0.32, 0.35],
    ...     "best_at": [0.27, -1.4], "lines": 300}}}})
    >>> c.degree, round(c.margin, 12), c.bound
    ('0', 0.02, 0.35)
    """
    rows = ((d.get("audit") or {}).get("theorem") or {}).get("by_degree") or {}
    out = []
    for k, v in (d.get("by_degree") or {}).items():
        strip = (v or {}).get("strip")
        if not isinstance(strip, dict):
            continue
        b = strip.get("bounds") or [math.nan, math.nan]
        reduced = num(v.get("value"))
        margin = num((rows.get(str(k)) or {}).get("strip_minus_reduced"))
        if not math.isfinite(margin):
            margin = num(b[0]) - reduced
        at = strip.get("best_at")
        out.append(StripCheck(str(k), reduced, num(b[0]), num(b[1]), margin, at, strip.get("lines")))
    return max(out, key=lambda c: c.margin if not math.isnan(c.margin) else -math.inf, default=None)


def _strip_excess_clause(c: StripCheck, tol: Any) -> str:
    """``"the branch and bound over the whole strip found h_0 = ... above ... by ..."``."""
    return (
        f"the branch and bound over the whole strip ({c.lines} lines) found h_{c.degree} = "
        f"{fmt_to(c.best, tol)} at (a, b) = {fmt_point(c.at)}, above the reduced search's value "
        f"{fmt_to(c.reduced, tol)} by {fmt_to(c.margin, tol)}, more than the tolerance {fmt(num(tol), 3)} "
        f"(its certified upper bound over the strip is {fmt_to(c.bound, tol)})"
    )


def theorem_audit_sentence(d: dict[str, Any]) -> str | None:
    """The theorem-audit sentence of a distance result (``WARNING:`` when the audit failed), or ``None``.

    One source for the findings list and the PDF's audit section. Each check of
    :func:`specmap.distance.audit.theorem_audit` that ran is said: the dense sweep against the
    reduced search (``gap``), the whole-strip branch and bound against it (:func:`strip_check`),
    the reduced value against the certified upper bound.
    """
    audit = d.get("audit") or {}
    th = audit.get("theorem") or {}
    tol = d.get("tolerance")
    strip = strip_check(d)
    strip_flag = bool(th.get("strip_above_reduced")) or (
        strip is not None and th.get("strip_above_reduced") is None and strip.margin > num(tol)
    )
    dense_ran = d.get("dense") is not None or th.get("dense_above_reduced") is not None
    if audit.get("theorem_gap"):
        line = audit.get("line")
        at = fmt_point(line) if isinstance(line, list) else str(line)
        dense_flag = bool(th.get("dense_above_reduced")) or (
            th.get("dense_above_reduced") is None and dense_ran and num(audit.get("gap")) > num(tol)
        )
        if th.get("reduced_above_upper") and not dense_flag and not strip_flag:
            return (
                f"{WARNING} the reduced search's value lies above a certified upper bound of D at "
                f"(a, b) = {at}: an evaluation or a bound is wrong{_tol(tol)}."
            )
        if strip_flag and strip is not None and not dense_flag:
            return (
                f"{WARNING} {_strip_excess_clause(strip, tol)}: the reduced search (slope-one line and "
                "special set) missed a larger value, so the computation disagrees with the theorem's "
                "reduction here."
            )
        also = f"; {_strip_excess_clause(strip, tol)}" if strip_flag and strip is not None else ""
        return (
            f"{WARNING} the dense sweep exceeds the reduced search by {fmt_to(audit.get('gap'), tol)} at "
            f"(a, b) = {at}{also}: the computation disagrees with the theorem's reduction here"
            f"{_tol(tol)}."
        )
    if "theorem_gap" in audit and audit["theorem_gap"] is None:
        return (
            "Theorem audit: not run (it compares the dense sweep with the reduced search; "
            "run specmap distance --method both)."
        )
    if "theorem_gap" in audit:
        parts = []
        if dense_ran or strip is None:
            parts.append(
                f"the dense sweep does not exceed the reduced search beyond the tolerance "
                f"{fmt(num(tol), 3)} (gap {fmt_to(audit.get('gap'), tol)})"
            )
        if strip is not None:
            gap = (
                f"{fmt_to(-strip.margin, tol)} below it"
                if strip.margin <= 0
                else f"{fmt_to(strip.margin, tol)} above it, within the tolerance"
            )
            parts.append(
                f"the branch and bound over the whole strip ({strip.lines} lines) found no line above "
                f"the reduced value beyond the tolerance (closest in degree {strip.degree}: best "
                f"h_{strip.degree} = {fmt_to(strip.best, tol)}, {gap}; certified upper bound "
                f"{fmt_to(strip.bound, tol)})"
            )
        text = "; ".join(parts)
        return text[0].upper() + text[1:] + "."
    return None


MESH_AWARE = "the value change of F* along one mesh edge plus the grid tolerance"
"""What the mesh-aware position tolerance adds (:func:`specmap.distance.audit.coordinate_slack`)."""
POSITION_FIX = (
    "raise the mesh resolution of f and g ([f]/[g] resolution) or use the piecewise grid route "
    '(route = "piecewise", the grid of the meshed map itself); if the fraction does not rise, a contour '
    "is missing from the grid and the reduced search may miss the maximum"
)
"""What to do about a red mesh-aware position audit."""


def worst_position(pos: dict[str, Any], tol: Any = None) -> str | None:
    """The worst coordinate of a position audit in words (``None`` when none is recorded).

    Examples
    --------
    >>> worst_position({"worst": [{"map": "f", "a": 0.3, "b": 0.1, "coordinate": 0.41,
    ...     "deviation": 0.036, "allowed": 0.004}]})
    'worst: the coordinate 0.41 of f on the line (a, b) = (0.3, 0.1) is 0.036 from the nearest push coordinate, 0.004 allowed'
    """
    ws = [w for w in pos.get("worst") or [] if isinstance(w, dict)]
    if not ws:
        return None
    w = ws[0]
    return (
        f"worst: the coordinate {fmt(w.get('coordinate'), 4)} of {w.get('map', '?')} on the line (a, b) = "
        f"{fmt_point([w.get('a'), w.get('b')])} is {fmt(w.get('deviation'), 3)} from the nearest push "
        f"coordinate, {fmt(w.get('allowed'), 3)} allowed"
    )


def position_audit_sentence(d: dict[str, Any]) -> str | None:
    """The position-audit sentence of a distance result, or ``None``.

    A mesh-aware audit (``audit.position.mesh_aware``, the default of
    :func:`specmap.distance.audit.position_audit`) below 100% is a ``WARNING:`` with its fraction,
    its worst coordinate and what to do: its tolerance already includes the mesh term, so a
    shortfall points to a missing contour or a mesh too coarse for the map. A result without the
    mesh-aware tolerance (an older ``distance.json``) keeps a caveat: its tolerance omits the mesh.
    """
    pos = (d.get("audit") or {}).get("position") or {}
    if not pos:
        return None
    frac = num(pos.get("fraction_explained"))
    aware = pos.get("mesh_aware") is True
    within = f" within the mesh-aware tolerance ({MESH_AWARE})" if aware else ""
    txt = (
        f"{fmt_pct(frac)} of diagram coordinates on {pos.get('lines', 'n/a')} audited lines are push "
        f"coordinates of grid contours{within} (max deviation {fmt(pos.get('max_deviation'), 3)})"
    )
    short = pos.get("short_pair_coordinates")
    if isinstance(short, int) and short > 0:
        txt += (
            f"; {short} coordinates of pairs of persistence at most twice the largest edge change of F* "
            "(mesh interpolation noise, by stability) are left out"
        )
    if math.isfinite(frac) and frac < 1.0 and aware:
        worst = worst_position(pos)
        return (
            f"{WARNING} position audit: only {txt}; the position theorem [CEF19] is not met"
            + (f" ({worst})" if worst else "")
            + f": {POSITION_FIX}."
        )
    if math.isfinite(frac) and frac < 1.0:
        return (
            f"Position audit (caveat): only {txt}; this distance.json predates the mesh-aware audit "
            "(no mesh_aware field, or false), whose tolerance omits the mesh error, so surface studies fall "
            "short of 100%: rerun specmap distance for the mesh-aware audit."
        )
    return txt[0].upper() + txt[1:] + ", as the position theorem requires."


def audit_sentences(d: dict[str, Any]) -> list[str]:
    """Theorem-audit and position-audit sentences of a distance result, those recorded."""
    return [s for s in (theorem_audit_sentence(d), position_audit_sentence(d)) if s is not None]


def _distance_sentences(res: dict[str, Any]) -> list[str]:
    d = res.get("distance")
    if not d:
        return []
    out = []
    by = d.get("by_degree") or {}
    value = num(d.get("value"))
    degs = [k for k, v in by.items() if num((v or {}).get("value")) == value]
    deg = f" (degree {', '.join(degs)})" if degs else ""
    out.append(
        f"The matching distance is {fmt_distance(d)}{deg}, "
        f"{_reached(d.get('reached_on'), d.get('at'), d.get('component'))}{_tol(d.get('tolerance'))}."
    )
    if len(by) > 1:
        parts = [
            f"D_{k} = {fmt_distance(d, k)} ({(v or {}).get('reached_on', 'n/a')})"
            for k, v in sorted(by.items(), key=lambda kv: int(num(kv[0])) if kv[0].isdigit() else 0)
        ]
        out.append("Per degree: " + "; ".join(parts) + ".")
    inf = d.get("infinite") or []
    if inf:
        out.append(
            f"Infinite costs were recorded for: {', '.join(str(x) for x in inf)} "
            "(unmatched essential classes); they are excluded from the finite value."
        )
    dense, red = d.get("dense"), d.get("reduced")
    tol = d.get("tolerance")
    if dense and red:
        out.append(
            f"The dense sweep ({dense.get('lines', 'n/a')} lines, {fmt(dense.get('seconds'), 3)} s) "
            f"gives {fmt_to(dense.get('value'), tol)} with error bound {fmt(dense.get('error_bound'), 3)}; the "
            f"reduced search ({red.get('lines', 'n/a')} lines, {fmt(red.get('seconds'), 3)} s) gives "
            f"{fmt_to(red.get('value'), tol)}."
        )
    elif dense:
        out.append(
            f"Only the dense sweep was run ({dense.get('lines', 'n/a')} lines): "
            f"{fmt_to(dense.get('value'), tol)} with error bound {fmt(dense.get('error_bound'), 3)}."
        )
    elif red:
        out.append(
            f"Only the reduced search was run ({red.get('lines', 'n/a')} lines): {fmt_to(red.get('value'), tol)}; "
            "no dense sweep checks it."
        )
    out.extend(audit_sentences(d))
    return out


def _perturb_sentences(res: dict[str, Any]) -> list[str]:
    pert = res.get("perturb") or {}
    s = pert.get("summary")
    if not s:
        return []
    runs = int(num(s.get("runs")) or 0)
    k = int(num(s.get("runs_with_patch"))) if s.get("runs_with_patch") is not None else None
    ta, hd = s.get("total_area") or {}, s.get("hausdorff") or {}
    cm, pc = s.get("curve_movement") or {}, s.get("patch_change") or {}
    out = [
        f"{runs} perturbed runs ({s.get('model', 'n/a')} model, size {fmt(s.get('size'), 3)}): "
        + (
            f"{k} had a patch (95% interval for the fraction "
            f"{fmt_interval(fraction_interval(s.get('runs_with_patch_ci95'), runs))}); "
            if k is not None
            else ""
        )
        + f"total patch area mean {fmt(ta.get('mean'), 3)}, max {fmt(ta.get('max'), 3)}; "
        + (
            f"the tie curves moved by mean {fmt(cm.get('mean'), 3)}, max {fmt(cm.get('max'), 3)} and the patch "
            f"region changed by mean {fmt_pct(pc.get('mean'))} of the window."
            if cm or pc
            else f"Hausdorff distance of the special set mean {fmt(hd.get('mean'), 3)}, max "
            f"{fmt(hd.get('max'), 3)}."
        )
    ]
    viol = s.get("stability_violations")
    if viol is not None and int(num(viol)) > 0:
        out.append(
            f"{WARNING} {int(num(viol))} perturbed runs changed the matching distance by more than the "
            "perturbation size allows: this contradicts the stability theorem and points to a numerical "
            "error."
        )
    elif viol is not None and s.get("distance"):
        out.append("Every perturbed run respected the stability bound on the matching distance.")
    sweep = s.get("sweep") or []
    if len(sweep) >= 2:
        rows = sorted(sweep, key=lambda r: num(r.get("size")))
        parts = [
            f"{int(num(r.get('runs_with_patch')))}/{int(num(r.get('runs')))} at size {fmt(r.get('size'), 3)}"
            for r in rows
        ]
        out.append("Size sweep, runs with a patch: " + ", ".join(parts) + ".")
    slope = num(s.get("curve_movement_slope"))
    per = num((s.get("curve_movement_per_size") or {}).get("mean"))
    ratios = [
        (num(r.get("size")), num(r.get("curve_movement_mean")) / num(r.get("size")))
        for r in sorted(sweep, key=lambda r: num(r.get("size")))
        if num(r.get("size")) > 0 and math.isfinite(num(r.get("curve_movement_mean")))
    ]
    spread = [q for _, q in ratios if q > 0]
    if len(spread) >= 2 and max(spread) > 3 * min(spread):
        out.append(
            f"The tie-curve movement does not scale with the size ({fmt(ratios[0][1], 2)} per unit at size "
            f"{fmt(ratios[0][0], 3)}, {fmt(ratios[-1][1], 2)} at {fmt(ratios[-1][0], 3)}): the perturbed curves "
            "are not small moves of the unperturbed ones (e.g. where a patch vanished), so no rate is given."
        )
    elif math.isfinite(slope):
        out.append(
            f"The tie curves move by about {fmt(slope, 2)} in (a, b) per unit of perturbation size "
            "(least-squares slope of the mean curve movement over the sweep, curve parts only)."
        )
    elif math.isfinite(per):
        out.append(
            f"The tie curves move by about {fmt(per, 2)} in (a, b) per unit of perturbation size "
            "(mean over the runs, curve parts only)."
        )
    if s.get("verdict"):
        out.append(f"Verdict of the perturbation study: {s['verdict']}")
    return [t if t.endswith(".") else t + "." for t in out]


def findings(results: dict[str, Any]) -> list[str]:
    """Sentences stating what the result files show.

    Parameters
    ----------
    results : dict
        As returned by :func:`specmap.report.load.load_results`: keys
        ``grid_f``, ``grid_g``, ``special``, ``distance``, ``perturb``
        (``{"summary", "runs"}``); absent stages may be ``None`` or missing.

    Returns
    -------
    list of str
        One finding per sentence; disagreements with the theory start with
        ``"WARNING:"`` and come first.

    Examples
    --------
    >>> findings({"special": {"counts": {"curve": 2, "patch": 0, "point": 0}, "tolerance": 1e-6}})[1]
    'No patch was found: at this resolution and tolerance the special set has zero area.'
    """
    out = (
        _grid_sentences(results)
        + _special_sentences(results)
        + _distance_sentences(results)
        + _perturb_sentences(results)
    )
    if not out:
        out = ["No stage has written results yet: there is nothing to report."]
    loud = [s for s in out if s.startswith(WARNING)]
    return loud + [s for s in out if not s.startswith(WARNING)]
