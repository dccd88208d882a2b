"""The PDF report of one result folder (matplotlib ``PdfPages`` only).

Pages, each present only when its stage was run:

1. summary -- D per degree with its certification status, where it is reached (the line
   drawn on the grids), the special set's counts and patch share, the genericity verdict,
   and one boxed note (the most severe) with what to do, then the other notes ranked;
1b. study and provenance -- study, shapes and maps, window, tolerances, version, date,
   command lines, and which stages were run (a missing stage says "not run");
2. grids -- both extended Pareto grids;
3. special set -- the map and a component table;
4. matching distance -- h over the strip (distance_map.png), value per degree, where it is reached, audits;
5. perturbations -- distributions, runs with a patch, size sweep, verdict;
6. findings -- plain sentences (:func:`specmap.report.findings.findings`);
7. methods appendix -- definitions, references, tolerances, caution.

Text pages flow onto continuation pages, so nothing is clipped or overlaps.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import FigureBase

from specmap.errors import ResultsError
from specmap.io import check_out_dir
from specmap.report.figures import (
    clip_bbox,
    distance_map_figure,
    grids_figure,
    perturb_figure,
    save_png,
    special_figure,
)
from specmap.report.findings import WARNING, audit_sentences, findings
from specmap.report.fmt import (
    fmt,
    fmt_distance,
    fmt_interval,
    fmt_pct,
    fmt_point,
    fmt_to,
    fraction_interval,
    num,
    nums,
    plural,
)
from specmap.report.layout import RED, Pager, fit_plots
from specmap.report.load import STAGE_VERB, load_results
from specmap.report.summary import (
    SEVERITY_NAMES,
    audits_sentence,
    component_counts,
    costs_sentence,
    degree_rows,
    grid_only,
    mesh_term_sentence,
    ranked_notes,
    reason_sentence,
    special_lines,
    tie_curve_count,
    where_sentence,
    why_sentences,
)
from specmap.report.ties import TieIndex, family, index_ties

MAX_TABLE_ROWS = 18


# -- helpers ---------------------------------------------------------------------
def _draw(stage: str, file: str, draw: Callable[[], FigureBase]) -> FigureBase:
    """Run a figure function; a malformed result file becomes a ResultsError."""
    try:
        return draw()
    except (ValueError, KeyError, TypeError, IndexError) as exc:
        raise ResultsError(
            f"cannot draw the {stage} figure ({exc})",
            file=file,
            field="(contents)",
            fix=f"rerun specmap {STAGE_VERB[stage]} to rewrite it",
        ) from None


def _describe_shape(spec: Any) -> str:
    if not isinstance(spec, dict):
        return str(spec) if spec is not None else "n/a"
    desc = spec.get("description") or ""
    src = spec.get("source")
    return f"{desc} (source: {src})" if src and src not in desc else (desc or f"source: {src}")


def _tie_text(tie: dict[str, Any]) -> str:
    pairs = tie.get("pairs") or []
    p = ["-".join(str(x) for x in pair) for pair in pairs]
    if len(p) < 2:
        return str(tie)
    if tie.get("condition") == "half":
        return f"|{p[0]}| = 2|{p[1]}|"
    return f"|{p[0]}| = |{p[1]}|"


def _stat(row: dict[str, Any], key: str, stat: str) -> Any:
    """``row[key][stat]``, or the flat form ``row[f"{key}_{stat}"]``."""
    nested = row.get(key)
    if isinstance(nested, dict):
        return nested.get(stat)
    return row.get(f"{key}_{stat}")


def _short_value(v: Any) -> str:
    """One value of a free-form dict, kept short (nested values are only counted)."""
    if isinstance(v, bool) or v is None:
        return str(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return fmt(v)
    if isinstance(v, (dict, list)):
        return f"({len(v)} {'entries' if isinstance(v, dict) else 'items'})"
    text = str(v)
    return text if len(text) <= 40 else text[:37] + "..."


INDEX_NAMES = {0: "min", 1: "saddle", 2: "max"}


def _count_phrase(counts: dict[str, Any]) -> str:
    return ", ".join(f"{k} {_short_value(v)}" for k, v in counts.items())


def _crit_change(before: Any, after: Any) -> str:
    """``"f1 min 5 -> 1, max 4 -> 1; f2 ..."``: critical vertices by index, before -> after."""
    per = []
    for fn in sorted(set(before or {}) | set(after or {})):
        b, a = (before or {}).get(fn) or {}, (after or {}).get(fn) or {}
        idx = [k for k in ("min", "saddle", "max") if k in b or k in a]
        per.append(f"{fn} " + ", ".join(f"{k} {b.get(k, 'n/a')} -> {a.get(k, 'n/a')}" for k in idx))
    return "; ".join(per)


def simplification_words(rec: dict[str, Any]) -> str:
    """A simplification record (:func:`specmap.simplify.simplify_values`) in one sentence.

    It names the method (``method`` of the record: ``joint`` is the tube, fold straightening and
    persistence at 2 tau of :mod:`specmap.jacobi_smooth`, with the bound 4 tau on the change;
    ``persistence`` cancels the critical pairs of persistence below delta, changing each
    function by at most delta [EMP06]) and the measured sup-norm change of f1 and f2.

    Examples
    --------
    >>> simplification_words({"setting": "auto", "method": "joint", "tube": 0.0125, "delta": 0.05,
    ...     "sup_change": [0.049, 0.03], "contours_before": 40, "contours_after": 12, "budget": 60,
    ...     "met": True, "critical_before": {"f1": {"min": 5, "max": 4}},
    ...     "critical_after": {"f1": {"min": 1, "max": 1}}})
    'simplified jointly (tube 0.0125, fold straightening, persistence at 2 tau; chosen automatically for a budget of 60 contours, met): contours 40 -> 12; measured sup-norm change f1 0.049, f2 0.03 (bound 4 tau = 0.05); critical vertices f1 min 5 -> 1, max 4 -> 1'
    >>> simplification_words({"setting": 0.1, "method": "persistence", "delta": 0.1,
    ...     "sup_change": [0.08, 0.0], "contours_before": 9, "contours_after": 5})
    'simplified by persistence at delta 0.1 (pairs of persistence below delta cancelled): contours 9 -> 5; measured sup-norm change f1 0.08, f2 0 (at most delta)'
    """
    how = ""
    if rec.get("setting") == "auto":
        met = {True: "met", False: "not met"}.get(rec.get("met"), "n/a")
        how = f"chosen automatically for a budget of {rec.get('budget', 'n/a')} contours, {met}"
    sup = rec.get("sup_change") or []
    change = ", ".join(f"f{i + 1} {fmt(x, 3)}" for i, x in enumerate(sup)) if isinstance(sup, list) else "n/a"
    delta = fmt(rec.get("delta"), 3)
    if rec.get("method") == "joint" and rec.get("tube") is None:  # the pair was left as it is
        return (
            f"not simplified ({how or 'joint method'}): contours {rec.get('contours_before', 'n/a')}; "
            f"measured sup-norm change {change}"
        )
    if rec.get("method") == "joint":
        tube = rec.get("tube")
        what = f"jointly (tube {fmt(tube, 3)}, fold straightening, persistence at 2 tau" + (
            f"; {how})" if how else ")"
        )
        bound = f" (bound 4 tau = {delta})"
    else:  # "persistence", and records written before ``method`` was stored
        what = "by persistence at delta " + delta + " (pairs of persistence below delta cancelled"
        what += f"; {how})" if how else ")"
        bound = " (at most delta)"
    text = (
        f"simplified {what}: contours {rec.get('contours_before', 'n/a')} "
        f"-> {rec.get('contours_after', 'n/a')}; measured sup-norm change {change}{bound}"
    )
    crit = _crit_change(rec.get("critical_before"), rec.get("critical_after"))
    return text + (f"; critical vertices {crit}" if crit else "")


def summarise_meta(meta: Any) -> str:
    """A grid's ``meta`` in words: critical points by index, hygiene counts, notes in full.

    Examples
    --------
    >>> summarise_meta({"critical_points": {"f1": [{"index": 0}, {"index": 2}]}, "note": "two half-lines"})
    'critical points: f1 min 1, max 1; note: two half-lines'
    >>> summarise_meta({"mesh_hygiene": {"loose_vertices": 0, "components": 1}, "vertices": 2562})
    'mesh hygiene: nothing to repair, 1 component; vertices 2562'
    """
    if not isinstance(meta, dict) or not meta:
        return "none"
    parts = []
    for key, v in meta.items():
        name = key.replace("_", " ")
        if key == "critical_points" and isinstance(v, dict):
            per = []
            for fn, pts in v.items():
                if isinstance(pts, list):
                    idx: dict[str, int] = {}
                    for p in pts:
                        i = p.get("index") if isinstance(p, dict) else None
                        label = INDEX_NAMES.get(i, f"index {i}") if isinstance(i, int) else "unknown index"
                        idx[label] = idx.get(label, 0) + 1
                    per.append(f"{fn} " + (", ".join(f"{k} {n}" for k, n in idx.items()) if idx else "none"))
            parts.append(f"{name}: " + "; ".join(per))
        elif key == "simplification" and isinstance(v, dict):
            parts.append(simplification_words(v))
        elif key == "n_points" and isinstance(v, (int, float)):
            parts.append(f"proper contours sampled at {int(v)} points")
        elif key == "mesh_hygiene" and isinstance(v, dict):
            comps = v.get("components")
            repairs = {k: n for k, n in v.items() if k != "components" and isinstance(n, (int, float)) and n}
            text = (
                "repaired " + _count_phrase({k.replace("_", " "): n for k, n in repairs.items()})
                if repairs
                else "nothing to repair"
            )
            if comps is not None:
                text += f", {plural(int(num(comps)), 'component')}"
            parts.append(f"{name}: {text}")
        elif isinstance(v, dict) and all(isinstance(x, dict) for x in v.values()):
            parts.append(f"{name}: " + "; ".join(f"{k} {_count_phrase(x)}" for k, x in v.items()))
        elif isinstance(v, dict):
            parts.append(f"{name}: {_count_phrase(v)}")
        elif isinstance(v, list):
            parts.append(f"{name}: {plural(len(v), 'item')}")
        elif isinstance(v, str):
            parts.append(f"{name}: {v}")  # notes in full; the paragraph wraps them
        else:
            parts.append(f"{name} {_short_value(v)}")
    return "; ".join(parts)


def _short_dict(d: Any, limit: int = 8) -> str:
    if not isinstance(d, dict) or not d:
        return "n/a"
    items = [f"{k}={_short_value(v)}" for k, v in list(d.items())[:limit]]
    more = f", and {len(d) - limit} more" if len(d) > limit else ""
    return ", ".join(items) + more


# -- pages -------------------------------------------------------------------------
def _summary_page(pg: Pager, res: dict[str, Any]) -> None:
    """Page 1: the answers (D and how sure, where, genericity, what to do next)."""
    st = res["study"]
    d = res.get("distance")
    line = d.get("at") if d else None
    have_grids = res["stages"]["grids"]
    sub = pg.page(f"Summary: {st.get('name', 'n/a')}", 0.28 if have_grids else 0.0)
    if sub is not None:
        lbl = "line r(a, b) where D is reached" if line is not None else None
        _draw(
            "grids",
            "grid_f.json / grid_g.json",
            lambda: grids_figure(
                res.get("grid_f"), res.get("grid_g"), fig=sub, line=line, line_label=lbl, labels=False
            ),
        )
    pg.heading("Matching distance")
    if d:
        pg.para(
            f"D = {fmt_distance(d)} (maximum over degrees; tolerance {fmt(d.get('tolerance'), 3)}).",
            weight="bold",
        )
        pg.mono(f"{'degree':<8}{'D_k':>10}  {'interval':<20}{'at (a, b)':<20}status")
        for row in degree_rows(d):
            pg.mono(
                f"{row.degree:<8}{row.value_text:>10}  {row.interval_text:<20}{fmt_point(row.at):<20}"
                f"{'certified' if row.status == 'certified' else 'not certified'}"
            )
        reasons: dict[str, list[str]] = {}
        for row in degree_rows(d):
            if row.status != "certified":
                reasons.setdefault(row.status, []).append(f"D_{row.degree}")
        for status, who in reasons.items():
            # the first reason only: page 1 keeps room for the boxed note; all of them on the distance page
            first = why_sentences(status.removeprefix("not certified: ").split("; ")[0])
            more = "; " in status
            why = first + (" Further reasons are on the Matching distance page." if more else "")
            pg.para(
                f"{' and '.join(who)} {'is' if len(who) == 1 else 'are'} not certified. {why}",
                8.5,
                color="0.25",
            )
        pg.para(where_sentence(d))
        pg.para(audits_sentence(d), 8.5, color="0.25")
        pg.para(mesh_term_sentence(d), 8.5, color="0.25")
    elif grid_only(res):
        pg.para("Not available: f and g are given as grid files, which have no mesh, so no slice diagrams.")
    else:
        pg.para("Not computed (run specmap distance).")
    pg.heading("Special set and genericity")
    lines = special_lines(res)
    for text in lines or ["Not mapped (run specmap map)."]:
        pg.para(text)
    notes = ranked_notes(res)
    pg.heading("What to do next")
    if not notes:
        pg.para("Nothing: every audit recorded passed and every stage was run.")
        return
    top, rest = notes[0], notes[1:]
    edge = RED if top.severity <= 2 else "#8a6d00"
    face = "#fdecee" if top.severity <= 2 else "#fff8e1"
    pg.box(
        f"{SEVERITY_NAMES[top.severity].capitalize()}: {top.title}",
        [top.text, f"What to do: {top.todo}"],
        edge=edge,
        face=face,
    )
    full = [
        f"{i}. [{SEVERITY_NAMES[n.severity]}] {n.title}: {n.text} What to do: {n.todo}"
        for i, n in enumerate(rest, 2)
    ]
    if sum(pg.height(t, 8) for t in full) <= pg.room():
        for t in full:
            pg.para(t, 8)
        return
    # page 1 stays one page: the other notes by title, in full on the Findings page
    titles = [f"{i}. {n.title}" for i, n in enumerate(rest, 2)]
    for keep in range(len(titles), 0, -1):
        more = f"; and {len(titles) - keep} more" if keep < len(titles) else ""
        text = (
            "Also (in full, with what to do, on the Findings page): " + "; ".join(titles[:keep]) + more + "."
        )
        if pg.height(text, 8) <= pg.room():
            break
    pg.para(text, 8)


def _cover(pg: Pager, res: dict[str, Any]) -> None:
    st = res["study"]
    pg.page("Study and provenance")
    pg.para(f"Study: {st.get('name', 'n/a')}", 14, weight="bold")
    pg.field("Study file", st.get("study_file", "n/a"))
    pg.field("Seed", st.get("seed", "n/a"))
    pg.heading("Shapes and maps")
    pg.field("f", _describe_shape(st.get("f")))
    pg.field("g", _describe_shape(st.get("g")))
    consts = st.get("constants") or {}
    if isinstance(consts, dict) and consts:
        pg.field("Constants", ", ".join(f"{k} = {_short_value(v)}" for k, v in consts.items()))
    win = st.get("window") or {}
    pg.field("Window", f"a in {fmt_interval(win.get('a'))}, b in {fmt_interval(win.get('b'))}")
    pg.heading("Stages")
    stages = res["stages"]
    gf, gg = res.get("grid_f"), res.get("grid_g")
    details = {
        "grids": (
            f"run: {len((gf or {}).get('contours', []))} contours in grid f, "
            f"{len((gg or {}).get('contours', []))} in grid g"
            + ("" if gf and gg else " (one grid file is missing)")
        ),
        "special": "run: special set atlas (special.json"
        + (", special.geojson)" if res.get("geojson") else "; special.geojson missing)"),
        "distance": "run: matching distance (distance.json)",
        "perturb": f"run: {len((res.get('perturb') or {}).get('runs') or [])} perturbation records",
    }
    names = {
        "grids": "Extended Pareto grids",
        "special": "Special set",
        "distance": "Matching distance",
        "perturb": "Perturbation study",
    }
    for key, title in names.items():
        if stages[key]:
            pg.field(title, details[key])
        else:
            pg.field(title, f"not run (no result file; run specmap {STAGE_VERB[key]})")
    pg.heading("Tolerances")
    for label, src in (
        ("grid f", gf),
        ("grid g", gg),
        ("special set", res.get("special")),
        ("matching distance", res.get("distance")),
    ):
        if src is not None:
            pg.field(label, fmt(src.get("tolerance"), 3))
    pg.heading("Provenance")
    pg.field("specmap version", st.get("specmap_version", "n/a"))
    pg.field("Report date", _dt.datetime.now().isoformat(timespec="seconds"))
    cmds = st.get("commands") or []
    pg.para(f"Command lines ({len(cmds)}):")
    for c in cmds:
        if isinstance(c, dict):
            pg.mono(f"{c.get('date', '')}  {c.get('command', '')}")
        else:
            pg.mono(str(c))


def _grids_page(pg: Pager, res: dict[str, Any]) -> None:
    sub = pg.page("Extended Pareto grids", 0.6)
    at = (res.get("distance") or {}).get("at")
    if sub is not None:
        _draw(
            "grids",
            "grid_f.json / grid_g.json",
            lambda: grids_figure(
                res.get("grid_f"),
                res.get("grid_g"),
                fig=sub,
                line=at,
                line_label="line r(a, b) where D is reached" if at else None,
            ),
        )
    for name in ("f", "g"):
        grid = res.get(f"grid_{name}")
        if grid is None:
            pg.para(f"Grid {name}: grid_{name}.json is missing.")
            continue
        kinds = [c.get("kind") for c in grid.get("contours", [])]
        pg.para(
            f"Grid {name}: {len(kinds)} contours ({kinds.count('proper')} proper, "
            f"{kinds.count('vertical')} vertical, {kinds.count('horizontal')} horizontal); route "
            f"{grid.get('route', 'n/a')}; tolerance {fmt(grid.get('tolerance'), 3)}; "
            f"{summarise_meta(grid.get('meta'))}."
        )
    pg.para(
        "Solid: proper contours (images of the Pareto critical set). Dashed: improper contours, "
        "half-lines from a critical value, drawn from their start (o) to the plot edge (arrow head). "
        "Labels are the contour ids used in the special set's tie lists (f:p0 = proper contour 0 of f, "
        "v vertical, h horizontal).",
        8.5,
        color="0.3",
    )


def _component_rows(comps: list[dict[str, Any]]) -> list[dict[str, Any]]:
    order = {"patch": 0, "point": 1, "curve": 2}
    return sorted(
        comps,
        key=lambda c: (
            order.get(str(c.get("kind")), 3),
            -num(c.get("area") or 0),
            -num(c.get("length") or 0),
        ),
    )


def _tie_index(res: dict[str, Any]) -> TieIndex:
    """The curves of special.geojson labelled by tie (computed once per report)."""
    if "_tie_index" not in res:
        res["_tie_index"] = index_ties(
            res.get("special"), res.get("geojson"), res.get("grid_f"), res.get("grid_g")
        )
    return res["_tie_index"]


def _special_figure(res: dict[str, Any], fig: FigureBase | None = None) -> FigureBase:
    return special_figure(
        res["special"],
        res.get("geojson"),
        fig=fig,
        grid_f=res.get("grid_f"),
        grid_g=res.get("grid_g"),
        distance=res.get("distance"),
        index=_tie_index(res),
    )


def _drawn_words(total: int, drawn: int) -> str:
    """``"1961 tie curves (1561 drawn, coincident ones merged)."``"""
    if drawn and drawn != total:
        return f"{plural(total, 'tie curve')} ({drawn} drawn, coincident ones merged)."
    return f"{plural(total or drawn, 'tie curve')} drawn."


def _family_counts(ties: list[dict[str, Any]], only: list[int] | None = None) -> str:
    fams: dict[str, int] = {}
    for i, t in enumerate(ties):
        if only is None or i in only:
            fams[family(t)] = fams.get(family(t), 0) + 1
    top = sorted(fams.items(), key=lambda kv: -kv[1])
    text = ", ".join(f"{k} {v}" for k, v in top[:4])
    return text + (f", {len(top) - 4} more families" if len(top) > 4 else "")


def _special_page(pg: Pager, res: dict[str, Any]) -> None:
    sp = res["special"]
    sub = pg.page("Special set", 0.52)
    if sub is not None:
        _draw("special", "special.json", lambda: _special_figure(res, sub))
    ix = _tie_index(res)
    partial = costs_sentence(sp)
    if partial:
        pg.para(partial)
    pg.para(
        f"{component_counts(sp).capitalize()} (connected components); "
        + _drawn_words(tie_curve_count(sp), len(ix.curves))
        + " "
        f"Total patch area {fmt(sp.get('total_area'))} = {fmt_pct(sp.get('area_fraction'))} of the window. "
        f"Method {sp.get('method', 'n/a')}, resolution {sp.get('resolution', 'n/a')}, pairs "
        f"{sp.get('pairs', 'n/a')}, tolerance {fmt(sp.get('tolerance'), 3)}; search statistics in the "
        "appendix."
    )
    pg.para(
        "Families name the condition and the grids of the two pairs: 'equal fg=fg' ties two differences "
        "between an f and a g contour (two matching costs); 'half ff=2fg' a same-grid difference twice a "
        "cross one (a diagonal cost against a matching cost). Curve colours are faint where thousands "
        "overlap (the darker, the denser). Each curve's tie is the one whose residual vanishes on it, "
        "evaluated from the grid files.",
        8.5,
        color="0.3",
    )
    if res.get("geojson") is None:
        pg.warn("special.geojson is missing: components are drawn as their bounding boxes.")
    comps = _component_rows(list(sp.get("components") or []))
    win = sp.get("window") or {}
    wa, wb = nums(win.get("a", [0.0, 1.0]))[:2], nums(win.get("b", [0.0, 1.0]))[:2]
    pg.heading("Components")
    shown = comps[:MAX_TABLE_ROWS]
    if len(comps) > len(shown):
        pg.para(
            f"Table truncated: the first {len(shown)} of {len(comps)} components are listed "
            "(patches, then points, then curves; larger first). All are in special.json.",
            8.5,
        )
    pg.mono(f"{'id':<10}{'kind':<7}{'area':>11}{'length':>11}{'ties':>7}  box in the window [a0, b0, a1, b1]")
    for comp in shown:
        bbox = clip_bbox(comp.get("bbox"), (wa[0], wb[0], wa[1], wb[1]))
        bb = "[" + ", ".join(fmt(x, 3) for x in bbox) + "]" if bbox else "n/a"
        ties = comp.get("ties") or []
        pg.mono(
            f"{str(comp.get('id')):<10}{str(comp.get('kind')):<7}{fmt(comp.get('area'), 3):>11}"
            f"{fmt(comp.get('length'), 3):>11}{len(ties):>7}  {bb}"
        )
        why = reason_sentence({"components": [comp]}) if comp.get("kind") == "patch" else None
        if why and comp.get("reasons"):
            pg.para(
                "why: " + why.split(": ", 1)[1].replace("it is explained", "explained", 1), 8, color="0.3"
            )
        held = ix.patch_ties.get(str(comp.get("id")))
        if held:
            pg.mono(
                "    holds on the patch: "
                + "; ".join(_tie_text(ties[i]) for i in held[:3])
                + (f" (+{len(held) - 3} more)" if len(held) > 3 else ""),
                color="0.3",
            )
        if ties:
            pg.mono(f"    tie families: {_family_counts(ties)}", color="0.3")
    if len(comps) > len(shown):
        pg.mono(f"... and {len(comps) - len(shown)} more components (not listed)")


REACHED_SHORT = {
    "slope-one": "a = 1/2",
    "special": "special set",
    "both": "a = 1/2 and special set",
    "dense": "dense sweep",
}
"""distance.json's ``reached_on`` in the degree table of the distance page."""


def _distance_page(pg: Pager, res: dict[str, Any]) -> None:
    d = res["distance"]
    st = res["study"]
    sub = pg.page("Matching distance", 0.44)
    if sub is not None:
        _draw(
            "distance",
            "distance.json",
            lambda: distance_map_figure(d, res.get("geojson"), window=st.get("window"), fig=sub),
        )
    on = {
        "slope-one": "the slope-one line a = 1/2",
        "special": "the special set",
        "both": "the slope-one line and the special set alike",
    }.get(str(d.get("reached_on")), d.get("reached_on"))
    pg.para(
        f"Matching distance D = {fmt_distance(d)}, reached on {on or 'n/a'} at "
        f"(a, b) = {fmt_point(d.get('at'))}"
        + (f", component {d['component']}" if d.get("component") is not None else "")
        + f"; tolerance {fmt(d.get('tolerance'), 3)}."
    )
    by = d.get("by_degree") or {}
    if by:
        pg.mono(f"{'degree':<8}{'value':>12}  {'at (a, b)':<24}reached on")
        for k, v in by.items():
            v = v or {}
            pg.mono(
                f"{k:<8}{fmt_distance(d, k):>12}  {fmt_point(v.get('at')):<24}"
                + REACHED_SHORT.get(str(v.get("reached_on")), str(v.get("reached_on", "n/a")))
            )
        if any(str((v or {}).get("reached_on")) == "both" for v in by.values()):
            pg.para(
                "'a = 1/2 and special set': the slope-one line and the special set give the same "
                "maximum, within the tolerance.",
                8.5,
                color="0.3",
            )
    if d.get("infinite"):
        pg.para(f"Infinite costs: {', '.join(str(x) for x in d['infinite'])}.")
    for row in degree_rows(d):
        if row.status != "certified":
            why = why_sentences(row.status.removeprefix("not certified: "))
            pg.para(f"D_{row.degree} is not certified. {why}", 8.5, color="0.25")
    pg.heading("Dense sweep and reduced search")
    dense, red = d.get("dense"), d.get("reduced")
    if dense:
        pg.para(
            f"Dense sweep: {fmt_to(dense.get('value'), d.get('tolerance'))} at {fmt_point(dense.get('at'))}; "
            f"{dense.get('lines', 'n/a')} lines in {fmt(dense.get('seconds'), 3)} s; error bound "
            f"{fmt(dense.get('error_bound'), 3)}."
        )
    else:
        pg.para("Dense sweep: not run.")
    if red:
        pg.para(
            f"Reduced search: {fmt_to(red.get('value'), d.get('tolerance'))} at {fmt_point(red.get('at'))}; "
            f"{red.get('lines', 'n/a')} lines in {fmt(red.get('seconds'), 3)} s (its pruning counters are "
            "in the appendix table of search statistics)."
        )
    else:
        pg.para("Reduced search: not run.")
    pg.heading("Audits")
    if not d.get("audit"):
        pg.para("No audit was recorded.")
    for sentence in audit_sentences(d):  # the same sentences as the Findings page
        (pg.warn if sentence.startswith(WARNING) else pg.para)(sentence)


def _perturb_page(pg: Pager, res: dict[str, Any]) -> None:
    s = res["perturb"]["summary"]
    runs = res["perturb"]["runs"]
    sub = pg.page("Perturbation study", 0.45 if s.get("sweep") else 0.3)
    if sub is not None:
        _draw("perturb", "perturb/summary.json", lambda: perturb_figure(s, runs, fig=sub))
    n = s.get("runs")
    ci = fraction_interval(s.get("runs_with_patch_ci95"), n)
    base = s.get("base") or {}
    pg.para(
        f"{n} runs, model {s.get('model', 'n/a')}, size {fmt(s.get('size'), 3)} "
        f"({len(runs)} run records read from runs.jsonl)."
    )
    pg.para(
        f"Unperturbed: {_counts_words(base.get('counts'))}; total patch area {fmt(base.get('total_area'))}."
    )
    pg.para(
        f"Runs with a patch: {s.get('runs_with_patch', 'n/a')} of {n} "
        f"(95% interval for the fraction {fmt_interval(ci)}); total patch area over the runs: mean "
        f"{fmt((s.get('total_area') or {}).get('mean'), 3)}, max {fmt((s.get('total_area') or {}).get('max'), 3)}."
    )
    cm, pc, hd = s.get("curve_movement") or {}, s.get("patch_change") or {}, s.get("hausdorff") or {}
    if cm or pc:
        pg.para(
            f"Tie curves and points (patches left out) moved by mean {fmt(cm.get('mean'), 3)}, max "
            f"{fmt(cm.get('max'), 3)} in (a, b) units, as the Hausdorff distance to the unperturbed ones. "
            f"The patch region changed by mean {fmt_pct(pc.get('mean'))}, max {fmt_pct(pc.get('max'))} of the window "
            "(area of the symmetric difference)"
            + (": the unperturbed patch vanished." if _vanished(s, base, res.get("special")) else ".")
        )
        pg.para(
            f"The Hausdorff distance of the whole special set (mean {fmt(hd.get('mean'), 3)}, max "
            f"{fmt(hd.get('max'), 3)}) mixes both: a vanishing patch dominates it.",
            8.5,
            color="0.3",
        )
    else:
        pg.para(
            f"Hausdorff distance to the unperturbed special set: mean {fmt(hd.get('mean'), 3)}, max "
            f"{fmt(hd.get('max'), 3)} (curve movement and patch change not recorded: rerun specmap perturb)."
        )
    dist = s.get("distance")
    if isinstance(dist, dict) and dist:
        ch, bd = dist.get("abs_change") or {}, dist.get("bound") or {}
        pg.para(
            f"Matching distance over {dist.get('runs', 'n/a')} runs: |change of D| mean {fmt(ch.get('mean'), 3)}, "
            f"max {fmt(ch.get('max'), 3)}, against the stability bound (mean {fmt(bd.get('mean'), 3)}, max "
            f"{fmt(bd.get('max'), 3)})."
            if ch or bd
            else f"Matching distance under perturbation: {_short_dict(dist)}."
        )
    viol = s.get("stability_violations")
    if viol is not None and num(viol) > 0:
        pg.warn(f"{WARNING} {viol} runs violate the stability bound of the matching distance.")
    else:
        pg.para(
            f"Stability violations: {viol}."
            if viol is not None
            else "Stability of the distance: not tracked (set distance = true in [perturb] to check it)."
        )
    if s.get("runs_per_minute") is not None:
        pg.para(f"Throughput: {fmt(s.get('runs_per_minute'), 3)} runs per minute.")
    sweep = s.get("sweep") or []
    if sweep:
        pg.heading("Size sweep")
        pg.mono(
            f"{'size':>8}{'runs':>6}{'patch':>7}  {'95% interval':<16}{'area mean':>10}{'curves moved':>14}"
            f"{'patch change':>14}"
        )
        for r in sorted(sweep, key=lambda r: num(r.get("size"))):
            iv = fmt_interval(fraction_interval(r.get("runs_with_patch_ci95"), r.get("runs")))
            pc_mean = _stat(r, "patch_change", "mean")
            pg.mono(
                f"{fmt(r.get('size'), 3):>8}{str(r.get('runs')):>6}{str(r.get('runs_with_patch')):>7}  "
                f"{iv:<16}{fmt(_stat(r, 'total_area', 'mean'), 3):>10}"
                f"{fmt(_stat(r, 'curve_movement', 'mean'), 3):>14}"
                f"{(fmt_pct(pc_mean) if pc_mean is not None else 'n/a'):>14}"
            )
        pg.para(
            "Means over the runs of each size; curves moved in (a, b) units, patch change as a share of "
            "the window.",
            8.5,
            color="0.3",
        )
    pg.heading("Verdict")
    pg.para(str(s.get("verdict", "n/a")), weight="bold")


def _counts_words(counts: Any) -> str:
    """``{"curve": 1, "patch": 1, "point": 0}`` as ``"1 patch, 1 curve component and 0 point components"``."""
    return component_counts({"counts": counts}) if isinstance(counts, dict) else "counts n/a"


def _vanished(s: dict[str, Any], base: dict[str, Any], sp: dict[str, Any] | None) -> bool:
    """Whether the mean patch change equals the base patch share while no run kept a patch."""
    share = num((sp or {}).get("area_fraction"))
    mean = num((s.get("patch_change") or {}).get("mean"))
    return (
        int(num(s.get("runs_with_patch")) or 0) == 0
        and num(base.get("total_area")) > 0
        and math.isfinite(share)
        and abs(mean - share) <= 1e-6 * max(share, 1.0)
    )


def _findings_page(pg: Pager, res: dict[str, Any]) -> None:
    pg.page("Findings")
    for i, sentence in enumerate(findings(res), 1):
        if sentence.startswith(WARNING):
            pg.warn(f"{i}. {sentence}")
        else:
            pg.para(f"{i}. {sentence}")
        pg.gap(0.4)
    notes = ranked_notes(res)
    if notes:
        pg.heading("Notes, ranked by severity (as on page 1)")
        for i, n in enumerate(notes, 1):
            pg.para(f"{i}. [{SEVERITY_NAMES[n.severity]}] {n.title}: {n.text} What to do: {n.todo}", 8.5)
            pg.gap(0.3)


def _stat_rows(d: Any, prefix: str = "") -> list[tuple[str, str]]:
    rows: list[tuple[str, str]] = []
    for k, v in (d or {}).items():
        if isinstance(v, dict):
            rows.extend(_stat_rows(v, f"{prefix}{k}."))
        elif isinstance(v, list):
            rows.append(
                (prefix + k, ", ".join(_short_value(x) for x in v[:4]) + (" ..." if len(v) > 4 else ""))
            )
        else:
            rows.append((prefix + k, _short_value(v)))
    return rows


def _statistics_page(pg: Pager, res: dict[str, Any]) -> None:
    """Appendix: the search counters (developer detail, kept out of the result pages)."""
    sp, d = res.get("special"), res.get("distance")
    red = (d or {}).get("reduced") or {}
    tables = [
        ("Special-set search (special.json stats)", (sp or {}).get("stats")),
        ("Reduced search: pruning counters (distance.json reduced.pruned)", red.get("pruned")),
        ("Reduced search: slope-one branch and bound (reduced.slope_search)", red.get("slope_search")),
        ("Reduced search: settings (reduced.settings)", red.get("settings")),
    ]
    tables = [(t, v) for t, v in tables if v]
    if not tables:
        return
    pg.page("Appendix: search statistics")
    pg.para(
        "Counters of the searches, for whoever checks or tunes them; the result pages do not need them.",
        8.5,
        color="0.3",
    )
    for title, data in tables:
        pg.heading(title)
        for line in stat_columns(_stat_rows(data)):
            pg.mono(line)


STAT_KEY, STAT_VALUE = 28, 18
"""Character widths of one column of the statistics table (two columns fit the mono line)."""


def stat_columns(rows: list[tuple[str, str]]) -> list[str]:
    """Rows ``(key, value)`` as lines of two columns (read down the left, then the right).

    Rows too wide for a column get a full line each, after the two-column block.

    Examples
    --------
    >>> for line in stat_columns([("swaps", "12"), ("lines", "245"), ("rounds", "66")]):
    ...     print(line.replace(" ", "_"))
    swaps_______________________________________12____rounds______________________________________66
    lines______________________________________245
    """
    short = [(k, v) for k, v in rows if len(k) <= STAT_KEY and len(v) <= STAT_VALUE]
    wide = [(k, v) for k, v in rows if (k, v) not in short]
    half = (len(short) + 1) // 2
    left, right = short[:half], short[half:]
    lines = []
    for i, (k, v) in enumerate(left):
        line = f"{k:<{STAT_KEY}}{v:>{STAT_VALUE}}"
        if i < len(right):
            line += f"    {right[i][0]:<{STAT_KEY}}{right[i][1]:>{STAT_VALUE}}"
        lines.append(line.rstrip())
    lines.extend(f"{k:<42}{v:>20}" if len(k) <= 42 else f"{k}: {v}" for k, v in wide)
    return lines


METHODS = [
    (
        "Filtering lines",
        "A pair (a, b) in ]0,1[ x R names the line r(a, b) = {s(a, 1-a) + (b, -b)}. "
        "On it an R^2-valued function f = (f1, f2) gives the one-parameter function "
        "F*(a,b) = min(a, 1-a) max((f1 - b)/a, (f2 + b)/(1 - a)) [CDFFL13].",
    ),
    (
        "Matching distance",
        "D_k(f, g) is the supremum over (a, b) of h_k(a, b), the bottleneck distance "
        "between the degree-k persistence diagrams of F*_f(a,b) and F*_g(a,b) [CDFFL13; DFL10]. The report "
        "also gives the maximum over degrees.",
    ),
    (
        "Extended Pareto grid",
        "The image of the Pareto critical set of f (where the two gradients vanish or "
        "point in opposite directions), cut into non-increasing pieces (proper contours), together with a "
        "vertical half-line from each critical value of f1 and a horizontal one from each critical value of f2 "
        "(improper contours) [CEF19]. Every finite coordinate of a slice diagram is the push coordinate of a "
        "point where the line meets the grid (position theorem) [CEF19].",
    ),
    (
        "Special values",
        "(a, b) is special when, for two different pairs of grid contours met by r(a, b), "
        "the differences of their push coordinates are equal, or one is twice the other [EFQT23]. For normal "
        "(generic) pairs the matching distance is reached on a = 1/2 or at special values [EFQT23; FMQT]. A "
        "patch is a region of positive area where one such tie holds identically; curves and points have zero "
        "area.",
    ),
    (
        "Dense sweep, reduced search and audits",
        "The dense sweep evaluates h on a regular grid of lines over "
        "the window; the reduced search evaluates it only on a = 1/2 and on the special set, as the theorem "
        "allows. The theorem audit flags a dense value that exceeds the reduced maximum by more than the "
        "tolerance. The position audit checks, on sampled lines, that every finite diagram coordinate is the push "
        "coordinate of a contour met by the line.",
    ),
    (
        "Perturbation study",
        "The study is rerun on many perturbed inputs (model and size as recorded in "
        "perturb/summary.json), each with its own seed. Each run reports its patch area, how far its tie "
        "curves and points moved (Hausdorff distance to the unperturbed ones, patches left out), how much the "
        "patch region changed (area of the symmetric difference, as a share of the window) and, when "
        "computed, the change of the matching distance, "
        "which the stability theorem bounds by the sup-norm size of the perturbation [CDFFL13]. The 95% "
        "interval is for the fraction of runs with a patch.",
    ),
]
TOL_MEANING = {
    "grid_f": "accuracy of contour positions, value units",
    "grid_g": "accuracy of contour positions, value units",
    "special": "tie conditions and patch detection",
    "distance": "values of h and the audits",
}
REFERENCES = [
    "[CDFFL13] A. Cerri, B. Di Fabio, M. Ferri, P. Frosini, C. Landi. Betti numbers in multidimensional "
    "persistent homology are stable functions. Math. Methods Appl. Sci. 36 (2013).",
    "[CEF19] A. Cerri, M. Ethier, P. Frosini. On the geometrical properties of the coherent matching distance "
    "in 2D persistent homology. J. Appl. Comput. Topol. 3 (2019).",
    "[EFQT23] M. Ethier, P. Frosini, N. Quercioli, F. Tombari. Geometry of the matching distance for 2D "
    "filtering functions. J. Appl. Comput. Topol. (2023).",
    "[FMQT] P. Frosini, E. Mósig García, N. Quercioli, F. Tombari. Matching distance via the extended Pareto "
    "grid. arXiv:2312.04201.",
    "[DFL10] M. d'Amico, P. Frosini, C. Landi. Natural pseudo-distance and optimal matching between reduced "
    "size functions. Acta Appl. Math. 109 (2010).",
]


def _methods_page(pg: Pager, res: dict[str, Any]) -> None:
    pg.page("Methods appendix")
    for title, text in METHODS:
        pg.heading(title)
        pg.para(text)
    pg.heading("Tolerances used")
    any_tol = False
    for label, key in (
        ("grid f", "grid_f"),
        ("grid g", "grid_g"),
        ("special set", "special"),
        ("matching distance", "distance"),
    ):
        if res.get(key) is not None:
            any_tol = True
            pg.para(
                f"{label}: {fmt(res[key].get('tolerance'), 3)} ({TOL_MEANING[key]}; from "
                f"{'grid_f.json' if key == 'grid_f' else 'grid_g.json' if key == 'grid_g' else key + '.json'})"
            )
    if not any_tol:
        pg.para("No stage with a tolerance was run.")
    pg.heading("Caution")
    pg.para(
        "All numbers here are numerical evidence computed at finite resolution and within the stated "
        "tolerances. They are not a proof: a patch may be an artefact of resolution, a curve may be missed "
        "between sample points, and agreement with a theorem on finitely many lines does not establish it."
    )
    pg.heading("References")
    for ref in REFERENCES:
        pg.para(ref, 8.5)
        pg.gap(0.2)


# -- entry point -------------------------------------------------------------------
def _write_pages(pg: Pager, res: dict[str, Any]) -> Pager:
    """Every page of the report on ``pg`` (a measuring Pager draws no figure); returns ``pg``."""
    stages = res["stages"]
    _summary_page(pg, res)
    _cover(pg, res)
    if stages["grids"]:
        _grids_page(pg, res)
    if stages["special"]:
        _special_page(pg, res)
    if stages["distance"]:
        _distance_page(pg, res)
    if stages["perturb"]:
        _perturb_page(pg, res)
    _findings_page(pg, res)
    _methods_page(pg, res)
    _statistics_page(pg, res)
    pg.close()
    return pg


def _check_out_pdf(out: Path, overwrite: bool) -> None:
    """Refuse, in one line, a PDF path that is a folder, an existing file (unless ``overwrite``),
    lies under a file, or sits in a folder that cannot be written."""
    if out.is_dir():
        raise ResultsError(
            "is a folder, not a PDF file",
            file=str(out),
            field="--out",
            fix=f"give --out a file path, e.g. {out / 'report.pdf'}",
        )
    if out.exists() and not overwrite:
        raise ResultsError(
            "already exists",
            file=str(out),
            field="--out",
            fix="give --out a new path, or add --force to overwrite it",
        )
    check_out_dir(out.parent, "--out")  # under a file, or a folder that cannot be written
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ResultsError(
            f"its folder cannot be created ({exc.strerror or exc})",
            file=str(out),
            field="--out",
            fix="give --out a path in a folder you can write",
        ) from None


def build_report(
    result_dir: str | Path, out_pdf: str | Path | None = None, *, overwrite: bool = True
) -> Path:
    """Build the PDF report and the PNG figures of a result folder.

    Parameters
    ----------
    result_dir : str or Path
        Folder with ``study.json`` and the result files of the stages run.
    out_pdf : str or Path, optional
        Output path; default ``<result_dir>/report.pdf``.
    overwrite : bool
        Replace an existing file at the output path (the CLI passes ``False`` for an
        explicit ``--out`` without ``--force``).

    Returns
    -------
    Path
        The PDF written. PNG figures go to ``<result_dir>/figures/`` (``grids.png``,
        ``special.png``, ``distance_map.png``, ``perturb.png``, one per stage run).

    Raises
    ------
    ResultsError
        If the folder or ``study.json`` is missing, or a result file is malformed;
        or the output path is a folder, lies under a file, is not writable, or exists
        and ``overwrite`` is false.

    Examples
    --------
    >>> build_report("results/demo")                 # doctest: +SKIP
    PosixPath('results/demo/report.pdf')
    """
    res = load_results(result_dir)
    root: Path = res["dir"]
    out = Path(out_pdf) if out_pdf is not None else root / "report.pdf"
    _check_out_pdf(out, overwrite)
    stages = res["stages"]
    figs = root / "figures"
    if stages["grids"]:
        save_png(
            _draw(
                "grids", str(root / "grid_f.json"), lambda: grids_figure(res.get("grid_f"), res.get("grid_g"))
            ),
            figs / "grids.png",
        )
    if stages["special"]:
        save_png(
            _draw("special", str(root / "special.json"), lambda: _special_figure(res)), figs / "special.png"
        )
    if stages["distance"]:
        save_png(
            _draw(
                "distance",
                str(root / "distance.json"),
                lambda: distance_map_figure(
                    res["distance"], res.get("geojson"), window=res["study"].get("window")
                ),
            ),
            figs / "distance_map.png",
        )
    if stages["perturb"]:
        save_png(
            _draw(
                "perturb",
                str(root / "perturb" / "summary.json"),
                lambda: perturb_figure(res["perturb"]["summary"], res["perturb"]["runs"]),
            ),
            figs / "perturb.png",
        )
    name = str(res["study"].get("name", root.name))
    tmp = out.with_name(f".{out.name}.tmp")
    try:
        fit = fit_plots(lambda f: _write_pages(Pager(None, name, fit=f), res))
        with PdfPages(tmp, metadata={"Title": f"specmap report: {name}", "Creator": "specmap"}) as pdf:
            _write_pages(Pager(pdf, name, fit=fit), res)
        tmp.replace(out)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return out
