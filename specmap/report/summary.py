"""What the first page of the report says: the answers, from the result files only.

Four questions a reader opens the report with, each answered from the JSON:

- what is D, degree by degree, and how sure are we (:func:`degree_rows`);
- where is it reached (the line r(a, b), drawn on the grids by the summary figure);
- is the special set generic, and what do the perturbed runs say (:func:`special_lines`);
- what should I do next (:func:`ranked_notes`: one note per issue, ranked by severity, each
  with what to do about it; the report boxes only the first).

The fields ``bounds: [lo, hi]``, ``certified`` and ``why_not`` of ``distance.json``
``by_degree[k]`` are shown when present; without ``bounds`` the status is derived from what
the file records (the slope-one branch and bound, the dense sweep's error bound).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from specmap.report.findings import MESH_AWARE, POSITION_FIX, StripCheck, strip_check, worst_position
from specmap.report.fmt import (
    fmt,
    fmt_bounds,
    fmt_interval,
    fmt_pct,
    fmt_point,
    fmt_to,
    fraction_interval,
    num,
    plural,
    round_values,
)
from specmap.report.genericity import breaking_size, evidence, reason_sentence

RESOLVED_FACTOR = 3.0
"""D must exceed this multiple of the distance tolerance to count as resolved (issue 13, item 3)."""


@dataclass(frozen=True)
class DegreeRow:
    """One line of the summary's distance table.

    Attributes
    ----------
    degree : str
    value : float
    at : (a, b) or None
    reached_on : str
    certified : bool or None
        ``None`` when the file records no status.
    interval : (lo, hi) or None
        ``bounds`` of the file, when present.
    status : str
        ``"certified"`` or ``"not certified: <reason>"`` (its values to the digits the tolerance
        resolves, :func:`specmap.report.fmt.round_values`).
    tolerance : float
        The distance tolerance of the file (``nan`` if absent).
    """

    degree: str
    value: float
    at: tuple[float, float] | None
    reached_on: str
    certified: bool | None
    interval: tuple[float, float] | None
    status: str
    tolerance: float = math.nan

    @property
    def value_text(self) -> str:
        """D_k to the digits its interval (else the tolerance) resolves."""
        return fmt_to(self.value, self.tolerance, self.interval)

    @property
    def interval_text(self) -> str:
        """The interval rounded outward at the place of its width; ``"none recorded"`` without one."""
        return fmt_bounds(self.interval, self.tolerance) if self.interval else "none recorded"


@dataclass(frozen=True)
class Note:
    """One issue of the result, ranked: severity 1 (the numbers contradict the theory) to 4 (missing work).

    Attributes
    ----------
    severity : int
    title : str
    text : str
    todo : str
        What to do about it.
    """

    severity: int
    title: str
    text: str
    todo: str


SEVERITY_NAMES = {0: "outside the theory", 1: "contradiction", 2: "unsure value", 3: "caveat", 4: "missing"}


def _pt(p: Any) -> tuple[float, float] | None:
    if not isinstance(p, (list, tuple)) or len(p) < 2:
        return None
    return (num(p[0]), num(p[1]))


def _slope_search(d: dict[str, Any]) -> dict[str, Any]:
    return ((d.get("reduced") or {}).get("slope_search")) or {}


def _derived_reason(d: dict[str, Any], k: str, v: dict[str, Any], vmax: float) -> str:
    """Why a degree is not certified, from what distance.json records (no ``why_not`` field)."""
    red = d.get("reduced") or {}
    settings = red.get("settings") or {}
    tol = num(d.get("tolerance"))
    if v.get("certified") is False and num(v.get("value")) < vmax - (tol if math.isfinite(tol) else 0.0):
        return (
            f"a lower bound only; the search certified the maximum over degrees "
            f"(settings.certify = {settings.get('certify', 'max')})"
        )
    ss = _slope_search(d)
    if ss and ss.get("certified") is False:
        return (
            f"the slope-one search stopped at its line cap after {ss.get('lines', 'n/a')} lines "
            f"(bound {fmt_to(_first(ss.get('bound')), tol)} against best {fmt_to(_first(ss.get('best')), tol)})"
        )
    parts = ["no interval over the whole strip is recorded"]
    if ss and ss.get("certified"):
        parts.append(
            f"the slope-one search bounds a = 1/2 only: max there in "
            f"{fmt_bounds([_first(ss.get('best')), _first(ss.get('bound'))], tol)}"
        )
    dense = d.get("dense") or {}
    eb = num(dense.get("error_bound"))
    if math.isfinite(eb) and eb > num(v.get("value")):
        parts.append(f"the dense sweep's error bound {fmt_to(eb, tol)} exceeds the value")
    return "; ".join(parts)


_NUM = r"(-?[0-9][0-9.e+-]*)"
_REWORDS = (
    (r"(^|; )slope-one search", r"\1the slope-one search"),
    (
        r'the special-set pass bounds the maximum over degrees only \(\[distance\] certify = "(\w+)"\), '
        rf"here by {_NUM}",
        r"the pass over the special set bounds only the largest of the D_k, here by \2, because the "
        r'[distance] table of the study sets certify = "\1"',
    ),
    (
        r'certify = "each" closes every degree',
        r'with certify = "each" it would bound every degree on its own',
    ),
    (
        rf"the dense sweep bounds it by {_NUM} only \(cell error bound {_NUM}\)",
        r"the dense sweep bounds it only by \1, as its cell error bound is \2",
    ),
    (
        rf"stopped at its (\d+)-line (cap|budget): bound {_NUM} against best {_NUM}",
        r"stopped at its \1-line \2 with the bound \3 against the best value \4",
    ),
    (
        rf"are not covered: they are bounded by {_NUM} only, above D = {_NUM} \+ tolerance",
        r"are not covered, as they are bounded only by \1, which is above D = \2 plus the tolerance",
    ),
)
"""Known clauses of distance.json's ``why_not`` and their wording as prose (regex, replacement)."""


def why_sentences(why: str) -> str:
    """A ``why_not`` of distance.json as sentences: clauses split at ``;``, known ones reworded.

    The file keeps the compact form (clauses joined by ``;``, settings in brackets); the page
    reads better in sentences. Unknown clauses are kept word for word.

    Examples
    --------
    >>> why_sentences('the special-set pass bounds the maximum over degrees only ([distance] certify = '
    ...     '"max"), here by 0.2744; the dense sweep bounds it by 0.6697 only (cell error bound 0.495)')
    ... # doctest: +NORMALIZE_WHITESPACE
    'The pass over the special set bounds only the largest of the D_k, here by 0.2744, because the
    [distance] table of the study sets certify = "max". The dense sweep bounds it only by 0.6697, as its
    cell error bound is 0.495.'
    """
    import re

    text = " ".join(str(why).split())
    for pattern, repl in _REWORDS:
        text = re.sub(pattern, repl, text)
    clauses = [c.strip().rstrip(".") for c in text.split("; ") if c.strip()]
    return " ".join(c[0].upper() + c[1:] + "." for c in clauses)


def _first(x: Any) -> Any:
    return x[0] if isinstance(x, list) and x else x


def degree_rows(d: dict[str, Any] | None) -> list[DegreeRow]:
    """One row per degree of ``distance.json`` (``by_degree``, else the top-level value).

    Examples
    --------
    >>> rows = degree_rows({"value": 0.3, "tolerance": 1e-3, "by_degree": {"0": {"value": 0.3,
    ...     "at": [0.5, 0.1], "reached_on": "slope-one", "certified": True, "bounds": [0.3, 0.3004]}}})
    >>> rows[0].status, rows[0].interval
    ('certified', (0.3, 0.3004))
    """
    if not d:
        return []
    by = d.get("by_degree") or {}
    if not by:
        by = {"max": {k: d.get(k) for k in ("value", "at", "reached_on", "certified", "bounds", "why_not")}}
    vmax = max((num((v or {}).get("value")) for v in by.values()), default=math.nan)
    tol = num(d.get("tolerance"))
    rows = []
    for k in sorted(by, key=lambda s: (not str(s).isdigit(), int(s) if str(s).isdigit() else 0)):
        v = by[k] or {}
        bounds = v.get("bounds")
        interval = (num(bounds[0]), num(bounds[1])) if isinstance(bounds, list) and len(bounds) == 2 else None
        cert = v.get("certified")
        if cert is True and (interval is not None or "why_not" in v):
            status = "certified"
        elif cert is True:
            status = "not certified: " + _derived_reason(d, str(k), v, vmax)
        elif v.get("why_not"):
            status = f"not certified: {v['why_not']}"
        else:
            status = "not certified: " + _derived_reason(d, str(k), v, vmax)
        rows.append(
            DegreeRow(
                str(k),
                num(v.get("value")),
                _pt(v.get("at")),
                str(v.get("reached_on", "n/a")),
                cert if isinstance(cert, bool) else None,
                interval,
                round_values(status, tol),
                tol,
            )
        )
    return rows


def where_sentence(d: dict[str, Any]) -> str:
    """Where D (max over degrees) is reached, with the line in the (f1, f2) plane."""
    at = _pt(d.get("at"))
    on = d.get("reached_on")
    if at is None or not all(math.isfinite(x) for x in at):
        return "Where D is reached is not recorded."
    a, b = at
    line = line_equation(a, b)
    where = {
        "slope-one": "on the slope-one line a = 1/2",
        "special": "on the special set" + (f" (component {d['component']})" if d.get("component") else ""),
        "both": "on the slope-one line and on the special set alike (equal within the tolerance)",
        "dense": "by the dense sweep (no reduced search)",
    }.get(str(on), f"on {on}")
    return f"D is reached {where}, at (a, b) = ({fmt(a)}, {fmt(b)}): the filtering line {line}, drawn on the grids."


def audits_sentence(d: dict[str, Any]) -> str:
    """How the two audits of ``distance.json`` went, in one short sentence for page 1.

    Passed, failed or not run, for the theorem audit (which of its checks ran:
    :func:`specmap.distance.audit.theorem_audit`) and the position audit (the fraction of
    coordinates explained, and whether its tolerance has the mesh term). Details and what to do
    are in the notes and on the Matching distance page.

    Examples
    --------
    >>> audits_sentence({"audit": {"theorem_gap": False, "theorem": {"dense_above_reduced": False},
    ...     "position": {"fraction_explained": 1.0, "coordinates": 412, "mesh_aware": True}}})
    'Audits: theorem check passed (dense lower bound below the reduced value within tolerance); position check explained 100% of 412 coordinates (mesh-aware tolerance).'
    """
    audit = d.get("audit") or {}
    th = audit.get("theorem") or {}
    ran = [
        what
        for key, what in (
            ("dense_above_reduced", "dense lower bound"),
            ("strip_above_reduced", "whole-strip search"),
        )
        if th.get(key) is not None
    ]
    if not ran and d.get("dense") is not None:
        ran = ["dense lower bound"]
    gap = audit.get("theorem_gap")
    if gap is None:
        theorem = "theorem check not run (no dense sweep or whole-strip search)"
    elif gap:
        theorem = "theorem check failed (see What to do next)"
    else:
        theorem = "theorem check passed" + (
            f" ({' and '.join(ran)} below the reduced value within tolerance)" if ran else ""
        )
    pos = audit.get("position") or {}
    frac = num(pos.get("fraction_explained"))
    if not pos or not math.isfinite(frac):
        position = "position check not run"
    else:
        n = pos.get("coordinates")
        of = f" of {int(num(n))} coordinates" if isinstance(n, (int, float)) else " of the coordinates"
        aware = pos.get("mesh_aware") is True
        how = "mesh-aware tolerance" if aware else "tolerance without the mesh term"
        verdict = "" if frac >= 1.0 else ("; failed, see What to do next" if aware else "; a caveat")
        position = f"position check explained {fmt_pct(frac)}{of} ({how}{verdict})"
    return f"Audits: {theorem}; {position}."


def mesh_term_sentence(d: dict[str, Any]) -> str:
    """The mesh-to-surface term of ``distance.json`` (``mesh_term``) in one short sentence for page 1.

    With the block: how far each D_k moves between the study's mesh and the finer ones
    (max_m |D_k(m) - D_k(1)|, :mod:`specmap.meshterm`), at the digits the distance tolerance
    resolves; without it, "not measured" and the short reason (``mesh_term_why_not``).

    Examples
    --------
    >>> mesh_term_sentence({"tolerance": 0.004, "mesh_term": {"factors": [1, 2, 4],
    ...     "vertices": {"f": [1442, 2892, 5762]}, "by_degree": {
    ...     "0": {"values": [0.2702, 0.2624, 0.2467], "movement": 0.02355, "moved_most_at": 4},
    ...     "1": {"values": [0.184, 0.1748, 0.184], "movement": 0.00923, "moved_most_at": 2},
    ...     "2": {"values": [0.1617, 0.1633, 0.1633], "movement": 0.0016, "moved_most_at": 4}}}})
    'Mesh term: D_0 moves by 0.024 between 1x and 4x the mesh resolution (f: 1442 to 5762 vertices); D_1 by 0.009 (1x to 2x); D_2 by 0.0016 (below the tolerance 0.004). The certified intervals hold the meshed maps: the surface values are known to about these movements (measured, not bounded).'
    >>> mesh_term_sentence({"mesh_term": None})
    'Mesh term: not measured (set [distance] mesh_check = [2, 4] to see how D moves with the mesh).'
    """
    block = d.get("mesh_term")
    if not isinstance(block, dict):
        why = str(d.get("mesh_term_why_not") or "")
        if why.startswith("not finished"):
            return "Mesh term: not finished (rerun specmap distance: the finished factors are read back)."
        if "cannot be re-meshed" in why:
            who = why.removeprefix("not measured: ").split(", which")[0]
            return f"Mesh term: not measured ({who}: it cannot be re-meshed)."
        return (
            "Mesh term: not measured (set [distance] mesh_check = [2, 4] to see how D moves with the mesh)."
        )
    tol = num(d.get("tolerance"))
    factors = list(block.get("factors") or [1])
    vf = (block.get("vertices") or {}).get("f") or []
    parts, big = [], False
    for i, (k, e) in enumerate((block.get("by_degree") or {}).items()):
        move = num(e.get("movement"))
        span = f"1x and {e.get('moved_most_at')}x"
        vals = [num(x) for x in e.get("values") or []]
        if vals and all(math.isinf(x) for x in vals):
            what = "is infinite at every resolution"
        elif math.isinf(move):
            what = f"changes between finite and infinite ({span})"
            big = True
        elif math.isfinite(tol) and move < tol:
            what = f"{'moves ' if i == 0 else ''}by {fmt(move, 2)} (below the tolerance {fmt(tol, 2)})"
        else:
            big = True
            if i == 0:
                verts = f" (f: {int(num(vf[0]))} to {int(num(vf[-1]))} vertices)" if len(vf) > 1 else ""
                what = f"moves by {fmt_to(move, tol)} between {span} the mesh resolution{verts}"
            else:
                what = f"by {fmt_to(move, tol)} ({span.replace(' and ', ' to ')})"
        parts.append(f"D_{k} {what}")
    if not parts:
        return f"Mesh term: no degree recorded at {', '.join(f'{m}x' for m in factors)}."
    tail = (
        " The certified intervals hold the meshed maps: the surface values are known to about these "
        "movements (measured, not bounded)."
        if big
        else " Every degree moves by less than the tolerance (measured, not bounded)."
    )
    return "Mesh term: " + "; ".join(parts) + "." + tail


def line_equation(a: float, b: float) -> str:
    """The line r(a, b) as an equation in the (x, y) = (f1, f2) plane.

    r(a, b) = {s (a, 1 - a) + (b, -b)}, so y = (1 - a)/a (x - b) - b (math.md section 2).

    Examples
    --------
    >>> line_equation(0.5, 0.25)
    'y = x - 0.5'
    """
    m = (1.0 - a) / a
    c = -m * b - b
    slope = "x" if abs(m - 1.0) < 1e-12 else f"{fmt(m, 3)} x"
    if abs(c) < 1e-15:
        return f"y = {slope}"
    return f"y = {slope} {'+' if c > 0 else '-'} {fmt(abs(c), 3)}"


def tie_curve_count(sp: dict[str, Any]) -> int:
    """Number of tie curves: ``stats.tie_curves`` when recorded, else the ties of curve components."""
    stats = sp.get("stats") or {}
    if isinstance(stats.get("tie_curves"), (int, float)):
        return int(stats["tie_curves"])
    return sum(len(c.get("ties") or []) for c in sp.get("components") or [] if c.get("kind") == "curve")


def costs_band(sp: dict[str, Any] | None) -> tuple[float, float] | None:
    """The band [lo, hi] of tied costs a map is restricted to (``special.json`` ``costs``), None for a whole map."""
    band = ((sp or {}).get("costs") or {}).get("band")
    vals = [num(x) for x in band] if isinstance(band, list) else []
    ok = len(vals) == 2 and all(isinstance(v, float) and math.isfinite(v) for v in vals)
    return (float(vals[0]), float(vals[1])) if ok else None


def costs_sentence(sp: dict[str, Any] | None) -> str | None:
    """What a banded map holds, in one sentence (None for a whole map).

    >>> costs_sentence({"costs": {"band": [0.95, 1.3], "pairs_kept": 10, "pairs_total": 100}})[:78]
    'This map is restricted to the ties whose tied cost lies in [0.95, 1.3] (10 of '
    """
    band = costs_band(sp)
    if band is None:
        return None
    c = (sp or {}).get("costs") or {}
    kept, total = c.get("pairs_kept"), c.get("pairs_total")
    of = (
        f" ({int(num(kept))} of {int(num(total))} contour pairs can carry such a cost)"
        if isinstance(kept, (int, float)) and isinstance(total, (int, float))
        else ""
    )
    return (
        f"This map is restricted to the ties whose tied cost lies in [{fmt(band[0], 4)}, {fmt(band[1], 4)}]"
        f"{of}: a partial special set, its curves cut where their cost leaves the band (give or take one "
        "lattice cell), patches of the kept pairs whole; ties of other costs are not shown."
    )


def component_counts(sp: dict[str, Any]) -> str:
    """``"1 patch, 1 curve component and 0 point components"``."""
    c = sp.get("counts") or {}
    n = {k: int(num(c.get(k, 0))) for k in ("curve", "patch", "point")}
    return (
        f"{plural(n['patch'], 'patch', 'patches')}, {plural(n['curve'], 'curve component')} and "
        f"{plural(n['point'], 'point component')}"
    )


def special_lines(res: dict[str, Any]) -> list[str]:
    """The special set and its genericity verdict, in sentences."""
    sp = res.get("special")
    out: list[str] = []
    if sp:
        stats = sp.get("stats") or {}
        of = (
            f" of {plural(int(num(stats['ties_with_curves'])), 'tie')}"
            if isinstance(stats.get("ties_with_curves"), (int, float))
            else ""
        )
        holds = (
            f"; {plural(int(num(stats['ties_with_patches'])), 'tie')} hold identically on patches"
            if isinstance(stats.get("ties_with_patches"), (int, float))
            else ""
        )
        band = costs_band(sp)
        which = (
            f"Special set restricted to tied costs in [{fmt(band[0], 4)}, {fmt(band[1], 4)}] (a partial map)"
            if band
            else "Special set"
        )
        out.append(
            f"{which}: {component_counts(sp)} (connected components); "
            f"{plural(tie_curve_count(sp), 'tie curve')}{of} in all{holds}. Patches cover "
            f"{fmt_pct(sp.get('area_fraction'))} of the window."
        )
        why = reason_sentence(sp)
        if why is not None and len(why) > 450:  # page 1 stays one page: the contour lists go
            why = reason_sentence(sp, short=True)
        if why:
            out.append(why)
        elif not int(num((sp.get("counts") or {}).get("patch", 0))):
            out.append(
                "Genericity: no patch among the ties of this band; ties of other costs were not mapped."
                if band
                else "Genericity: no patch, so the special set has zero area, as it has for a generic pair "
                "[EFQT23]: the reduction to a = 1/2 and the special set applies."
            )
    pert = (res.get("perturb") or {}).get("summary")
    if pert:
        runs = int(num(pert.get("runs")) or 0)
        k = pert.get("runs_with_patch")
        if k is not None:
            ci = fraction_interval(pert.get("runs_with_patch_ci95"), runs)
            out.append(
                f"Genericity: {int(num(k))} of {runs} perturbed runs ({pert.get('model', 'n/a')} model, "
                f"size {fmt(pert.get('size'), 3)}) kept a patch (95% interval for the fraction "
                f"{fmt_interval(ci)})"
                + evidence(
                    int(num(((sp or {}).get("counts") or {}).get("patch", 0))) if sp else 0,
                    breaking_size(sp or {}),
                    int(num(k)),
                    num(pert.get("size")),
                )
            )
        elif pert.get("verdict"):
            out.append(f"Verdict: {pert['verdict']}")
    elif sp and int(num((sp.get("counts") or {}).get("patch", 0))):
        out.append(
            "Genericity: not tested (no perturbation study): a patch means the pair is not generic, "
            "so the main theorem's reduction may not apply."
        )
    return out


def _strip_only(audit: dict[str, Any], strip: StripCheck, tol: float) -> bool:
    """Whether the theorem audit failed by the whole-strip check alone (no dense flag)."""
    th = audit.get("theorem") or {}
    if th.get("dense_above_reduced"):
        return False
    return bool(th.get("strip_above_reduced")) or (
        th.get("strip_above_reduced") is None and strip.margin > tol
    )


def grid_only(res: dict[str, Any]) -> bool:
    """Whether f or g is a grid file (``study.json`` source ``grid``): no mesh, so no distance."""
    st = res.get("study") or {}
    return any(isinstance(st.get(k), dict) and st[k].get("source") == "grid" for k in ("f", "g"))


def ranked_notes(res: dict[str, Any]) -> list[Note]:
    """Every issue of the result with what to do about it, most severe first.

    Severity 0: the pair is outside the theory (a non-normal pair the study insisted on, from
    the result files' ``caveats``); 1: the numbers contradict a theorem (theorem gap, stability violations);
    2: a value is not sure (uncertified maximum, D not resolved above the tolerance, a mesh-aware
    position audit below 100%: a contour may be missing);
    3: caveats (a position audit without the mesh term below 100%, a patch without a perturbation study, tie
    curves that cross the slope-one line only); 4: stages not run.

    Examples
    --------
    >>> [n.severity for n in ranked_notes({"stages": {"grids": True, "special": False,
    ...     "distance": False, "perturb": False}})]
    [4, 4, 4]
    """
    notes: list[Note] = [  # severity 0: the study insisted on a non-normal pair (issue 14 item 5)
        Note(
            0,
            "non-normal pair computed on request",
            f"{caveat}.",
            "give two non-constant, functionally independent measurements and remove insist = true.",
        )
        for caveat in res.get("caveats") or ()
    ]
    d = res.get("distance") or {}
    audit = d.get("audit") or {}
    tol = num(d.get("tolerance"))
    if (
        audit.get("theorem_gap")
        and (audit.get("theorem") or {}).get("reduced_above_upper")
        and not (audit.get("theorem") or {}).get("dense_above_reduced")
        and not (audit.get("theorem") or {}).get("strip_above_reduced")
    ):
        notes.append(
            Note(
                1,
                "Theorem audit failed",
                f"the reduced search's value lies above a certified upper bound of D (line "
                f"{fmt_interval(audit.get('line')) if isinstance(audit.get('line'), list) else 'n/a'}).",
                "an evaluation or a bound is wrong: report it with distance.json.",
            )
        )
    elif (
        audit.get("theorem_gap") and (strip := strip_check(d)) is not None and _strip_only(audit, strip, tol)
    ):
        notes.append(
            Note(
                1,
                "Theorem audit failed",
                f"the branch and bound over the whole strip found h_{strip.degree} = {fmt_to(strip.best, tol)} "
                f"at (a, b) = {fmt_point(strip.at)}, above the reduced search's value "
                f"{fmt_to(strip.reduced, tol)} by {fmt_to(strip.margin, tol)}, more than the tolerance "
                f"{fmt(tol, 3)} (certified upper bound over the strip {fmt_to(strip.bound, tol)}).",
                f"take the larger (whole-strip) value as D_{strip.degree}; check the grids (a missing "
                "contour shows here) and rerun specmap distance with larger [distance] slope_max_lines and "
                "special_max_lines if the reduced search stopped at a budget.",
            )
        )
    elif audit.get("theorem_gap"):
        line = audit.get("line")
        notes.append(
            Note(
                1,
                "Theorem audit failed",
                f"the dense sweep exceeds the reduced search by {fmt_to(audit.get('gap'), tol)} at (a, b) = "
                f"{fmt_interval(line) if isinstance(line, list) else line}, more than the tolerance "
                f"{fmt(tol, 3)}.",
                "take the larger (dense) value as D; rerun specmap distance with a higher "
                "[distance] dense_resolution and check the grids (a missing contour shows here).",
            )
        )
    pert = (res.get("perturb") or {}).get("summary") or {}
    viol = pert.get("stability_violations")
    if viol is not None and num(viol) > 0:
        notes.append(
            Note(
                1,
                "Stability violated",
                f"{int(num(viol))} perturbed runs changed D by more than the perturbation size allows.",
                "a numerical error: raise the mesh resolution of f and g and rerun specmap perturb.",
            )
        )
    if d:
        value = num(d.get("value"))
        lower = [
            r
            for r in degree_rows(d)
            if r.status.startswith("not certified")
            and math.isfinite(value)
            and not abs(r.value - value) <= max(tol, 0.0)
        ]
        if lower:  # degrees below the maximum: one caveat for all, with the setting that bounds each
            who = " and ".join(f"D_{r.degree}" for r in lower)
            ivs = " and ".join(r.interval_text for r in lower if r.interval)
            if ivs and len(lower) > 1:
                ivs += " respectively"
            capped = any("cap" in r.status or "budget" in r.status for r in lower)
            notes.append(
                Note(
                    3,
                    f"{who} not certified",
                    f"{who} {'is' if len(lower) == 1 else 'are'} below D and known only to lie in "
                    + (ivs if ivs else "no recorded interval")
                    + "; D itself is not affected.",
                    'set certify = "each" in the study\'s [distance] table to bound every degree on its own'
                    + (", with a larger line budget where a search stopped at its cap," if capped else "")
                    + " and rerun specmap distance.",
                )
            )
        for row in degree_rows(d):
            if not (math.isfinite(value) and abs(row.value - value) <= max(tol, 0.0)):
                continue  # degrees below the maximum: the caveat above
            if row.status.startswith("not certified"):
                sev = 2 if row.certified is False or row.interval is not None else 3
                notes.append(
                    Note(
                        sev,
                        f"D_{row.degree} not certified",
                        why_sentences(row.status[len("not certified: ") :]),
                        "read D as the best value found; the dense sweep (specmap distance --method "
                        "both) gives an independent value, and a larger line budget may close the "
                        "search.",
                    )
                )
        grid_tol = max(
            (num((res.get(g) or {}).get("tolerance")) for g in ("grid_f", "grid_g")), default=math.nan
        )
        floor = max(x for x in (tol, grid_tol, 0.0) if math.isfinite(x))
        top = next(
            (
                v
                for v in (d.get("by_degree") or {}).values()
                if isinstance(v, dict) and "resolved" in v and num(v.get("value")) == value
            ),
            None,
        )
        if top is not None:  # distance.json says it (grid, mesh and distance tolerances)
            if top["resolved"] is False:
                why, _, fix = round_values(
                    str(top.get("resolved_why") or "the value is not resolved"), tol
                ).partition(": ")
                notes.append(
                    Note(
                        2,
                        "D not resolved",
                        f"{why}: the value is not resolved.",
                        (fix or "raise the mesh resolution or use an exact grid route, then rerun") + ".",
                    )
                )
        elif math.isfinite(value) and floor > 0 and value < RESOLVED_FACTOR * floor:
            notes.append(
                Note(
                    2,
                    "D not resolved",
                    f"D = {fmt_to(value, tol)} is less than {fmt(RESOLVED_FACTOR, 2)} times the tolerance "
                    f"{fmt(floor, 3)} (grid or distance): the value is not resolved.",
                    "raise the mesh resolution of f and g ([f]/[g] resolution) or use an exact "
                    "grid route, then rerun.",
                )
            )
        pos = audit.get("position") or {}
        frac = num(pos.get("fraction_explained"))
        of = f"{fmt_pct(frac)} of {pos.get('coordinates', 'the')} diagram coordinates on {pos.get('lines', 'n/a')} lines"
        if math.isfinite(frac) and frac < 1.0 and pos.get("mesh_aware") is True:
            worst = worst_position(pos)
            notes.append(
                Note(
                    2,  # the tolerance includes the mesh term: a contour may be missing, so D may be too low
                    "Position audit failed",
                    f"only {of} are push coordinates of grid contours within the mesh-aware tolerance "
                    f"({MESH_AWARE})" + (f"; {worst}" if worst else "") + ".",
                    POSITION_FIX + ".",
                )
            )
        elif math.isfinite(frac) and frac < 1.0:
            notes.append(
                Note(
                    3,
                    "Position audit below 100%",
                    f"{of} are push coordinates of contours (worst deviation "
                    f"{fmt(pos.get('max_deviation'), 3)}); this distance.json predates the mesh-aware "
                    "audit, whose tolerance omits the mesh error, so surface studies fall short.",
                    "rerun specmap distance: the audit then includes the mesh term; if it stays below 100%, "
                    "a contour is missing.",
                )
            )
    sp = res.get("special") or {}
    if sp and int(num((sp.get("counts") or {}).get("patch", 0))) and not pert:
        notes.append(
            Note(
                3,
                "Patch not tested",
                "the special set has a patch and no perturbation study was run.",
                "add a [perturb] table and run specmap perturb: a patch that vanishes under small "
                "perturbations is non-generic.",
            )
        )
    stages = res.get("stages") or {}
    verbs = {"grids": "grid", "special": "map", "distance": "distance", "perturb": "perturb"}
    for key, verb in verbs.items():
        if key in stages and not stages[key]:
            if key == "distance" and grid_only(res):
                notes.append(
                    Note(
                        4,
                        "distance not available",
                        "f and g are given as grid files, which have no "
                        "mesh, so there are no slice diagrams and no matching distance.",
                        "give a surface or a mesh for f and g ([f]/[g] in the study file) to compute D.",
                    )
                )
                continue
            notes.append(
                Note(
                    4,
                    f"{key} not run",
                    f"no {key} results in this folder.",
                    f"run specmap {verb} on the study.",
                )
            )
    return sorted(notes, key=lambda n: n.severity)
