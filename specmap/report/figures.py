"""Figures drawn from parsed result files (JSON dicts), never from recomputation.

Every ``*_figure`` function is pure: it reads the dicts of one stage and returns
a matplotlib figure. Pass ``fig=`` (a Figure or a SubFigure) to draw into an
existing canvas, e.g. the upper part of a report page; otherwise a standalone
figure is made. :func:`save_png` writes one to disk.

No pyplot state is used, so the functions are safe in worker processes.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure, FigureBase
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, PathPatch, Rectangle
from matplotlib.path import Path as MplPath
from matplotlib.ticker import MaxNLocator, NullLocator
from shapely.geometry.base import BaseGeometry

from specmap.report.fmt import fmt, fmt_distance, fraction_interval, num, nums, plural
from specmap.report.summary import costs_band, tie_curve_count
from specmap.report.ties import TieIndex, geo_shape, index_ties

GRID_COLOURS = {"f": "#1f5fa8", "g": "#d9730d"}
CONDITION_STYLE = {
    "equal": {"color": "#1f5fa8", "linestyle": "-", "label": "curve: equal difference"},
    "half": {"color": "#c0392b", "linestyle": "--", "label": "curve: half difference"},
    "both": {"color": "#7d3c98", "linestyle": "-.", "label": "curve: equal and half ties"},
    "unknown": {"color": "#555555", "linestyle": ":", "label": "curve: condition not recorded"},
}
PATCH_COLOURS = ("#2e8b57", "#8fbc8f", "#556b2f", "#66cdaa", "#228b22", "#9acd32")
MAX_PATCH_LABELS = 5
LEGEND_SIZE = 8


def _new_figure(fig: FigureBase | None, size: tuple[float, float]) -> FigureBase:
    return fig if fig is not None else Figure(figsize=size, layout="constrained")


def save_png(fig: FigureBase, path: str | Path, dpi: int = 150) -> Path:
    """Save a figure as PNG (parent folders are created).

    Parameters
    ----------
    fig : Figure
    path : str or Path
    dpi : int, default 150

    Returns
    -------
    Path
    """
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    fig.figure.savefig(p, dpi=dpi, format="png")
    return p


# -- grids ------------------------------------------------------------------
def _grid_points(grid: dict[str, Any]) -> np.ndarray:
    pts = []
    for c in grid.get("contours", []):
        if c.get("kind") == "proper":
            pts.extend(c.get("points", []))
        elif "start" in c:
            pts.append(c["start"])
    return nums(pts).reshape(-1, 2) if pts else np.empty((0, 2))


def grids_figure(
    grid_f: dict[str, Any] | None,
    grid_g: dict[str, Any] | None,
    *,
    fig: FigureBase | None = None,
    line: Any = None,
    line_label: str | None = None,
    labels: bool = True,
) -> FigureBase:
    """Both extended Pareto grids in the plane of values.

    Proper contours are solid polylines; improper contours (half-lines) are
    dashed, start at a round marker and run to the plot edge, where an arrow
    head shows that they continue. f is blue, g is orange.

    Parameters
    ----------
    grid_f, grid_g : dict or None
        Parsed ``grid_f.json`` / ``grid_g.json`` (``specmap-grid/1``); one may be
        ``None`` if only one grid was written.
    fig : Figure or SubFigure, optional
        Draw into it instead of a new figure.
    line : (a, b), optional
        A filtering line r(a, b) = {s (a, 1 - a) + (b, -b)} to draw over both grids
        (e.g. where the matching distance is reached).
    line_label : str, optional
        Its legend entry.
    labels : bool
        Write each contour's id beside it (placed without overlap).

    Returns
    -------
    Figure or SubFigure

    References
    ----------
    .. [CEF19] Cerri, Ethier, Frosini, J. Appl. Comput. Topol. 3 (2019): the
       extended Pareto grid.
    .. [CDFFL13] Cerri et al., Math. Methods Appl. Sci. 36 (2013): the lines r(a, b).

    Examples
    --------
    >>> g = {"format": "specmap-grid/1", "contours": [{"id": "f:v0", "kind": "vertical", "start": [0, 0]}]}
    >>> grids_figure(g, None).axes[0].get_xlabel()
    'f1 / g1'
    """
    grids = {"f": grid_f, "g": grid_g}
    present = {k: v for k, v in grids.items() if v is not None}
    if not present:
        raise ValueError("grids_figure needs at least one grid")
    fig = _new_figure(fig, (7.0, 5.6))
    ax = fig.add_subplot()
    pts = np.concatenate([_grid_points(g) for g in present.values()] + [np.empty((0, 2))])
    pts = pts[np.all(np.isfinite(pts), axis=1)]
    if len(pts):
        lo, hi = pts.min(axis=0), pts.max(axis=0)
    else:
        lo, hi = np.zeros(2), np.ones(2)
    span = np.maximum(hi - lo, 1e-9 + 0.05 * max(float(np.max(np.abs(hi))), 1.0))
    x0, y0 = lo - 0.08 * span
    x1, y1 = hi + 0.12 * span
    handles: list[Any] = []
    label_items: list[tuple[str, str, np.ndarray]] = []
    for name, grid in present.items():
        col = GRID_COLOURS[name]
        # f and g dashes are out of phase, so coinciding half-lines show both colours
        dash = (0.0, (4.0, 4.0)) if name == "f" else (4.0, (4.0, 4.0))
        counts = {"proper": 0, "vertical": 0, "horizontal": 0}
        for c in grid.get("contours", []):
            kind = c.get("kind")
            if kind == "proper":
                p = nums(c.get("points", [])).reshape(-1, 2)
                if len(p) == 1:
                    ax.plot(p[:, 0], p[:, 1], "D", color=col, ms=4)
                else:
                    ax.plot(p[:, 0], p[:, 1], "-", color=col, lw=1.6)
                if len(p):
                    idx = [int(f * (len(p) - 1)) for f in LABEL_FRACTIONS]
                    label_items.append((str(c.get("id")), col, p[idx]))
            elif kind in ("vertical", "horizontal"):
                sx, sy = nums(c.get("start", [math.nan, math.nan]))[:2]
                ex, ey = (sx, y1) if kind == "vertical" else (x1, sy)
                ax.plot([sx, ex], [sy, ey], ls=dash, color=col, lw=1.2)
                along = np.array([[sx + f * (ex - sx), sy + f * (ey - sy)] for f in (0.0, *LABEL_FRACTIONS)])
                label_items.append((str(c.get("id")), col, along))
                ax.plot([sx], [sy], "o", color=col, mfc="white", ms=5, mew=1.3)
                ax.plot([ex], [ey], "^" if kind == "vertical" else ">", color=col, ms=6, clip_on=False)
            else:
                continue
            counts[kind] += 1
        tag = rf"$\Gamma({name})$"
        n_half = counts["vertical"] + counts["horizontal"]
        if counts["proper"] or not n_half:  # no legend entry for a kind the grid does not have
            handles.append(Line2D([], [], color=col, lw=1.6, label=f"{tag} proper ({counts['proper']})"))
        if n_half:
            handles.append(
                Line2D(
                    [],
                    [],
                    color=col,
                    lw=1.2,
                    ls=dash,
                    marker="o",
                    mfc="white",
                    label=f"{tag} half-lines ({n_half}), o = start",
                )
            )
    if line is not None and len(line) >= 2 and 0.0 < num(line[0]) < 1.0:
        la, lb = num(line[0]), num(line[1])
        xs = np.linspace(x0, x1, 2)
        ax.plot(xs, (1.0 - la) / la * (xs - lb) - lb, color="#c2185b", lw=1.8, zorder=5)
        handles.append(
            Line2D(
                [],
                [],
                color="#c2185b",
                lw=1.8,
                label=line_label or f"line r(a, b), (a, b) = ({fmt(la, 3)}, {fmt(lb, 3)})",
            )
        )
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_xlabel("f1 / g1")
    ax.set_ylabel("f2 / g2")
    ax.set_title("Extended Pareto grids (half-lines continue past the arrow heads)", fontsize=10)
    ax.grid(alpha=0.25)
    if line is not None and not labels:
        ax.set_title("Where D is reached: the line r(a, b) over both grids", fontsize=10)
    if labels and label_items:
        hidden = place_labels(ax, label_items)
        if hidden:
            handles.append(Line2D([], [], ls="", label=f"{plural(hidden, 'contour id')} not shown (no room)"))
    ax.legend(
        handles=handles,
        fontsize=LEGEND_SIZE,
        loc="upper center",
        bbox_to_anchor=(0.5, -0.11 if labels else -0.2),
        ncol=2 if labels else 3,
        frameon=False,
    )
    return fig


LABEL_FRACTIONS = (0.5, 0.3, 0.7, 0.15, 0.85)
"""Where along a contour its id may go (fractions of its points / of the visible half-line)."""
LABEL_OFFSETS = ((4, 3), (4, -11), (-4, 3), (-4, -11), (6, -4), (-6, -4), (0, 8), (0, -14))
"""Offsets (points) from an anchor tried in turn; negative x puts the text to the left."""


def place_labels(ax: Any, items: list[tuple[str, str, np.ndarray]], *, fontsize: float = 7.0) -> int:
    """Write each item's text near one of its anchor points without overlapping another label.

    Greedy placement with a collision test: for every item, the anchors (data
    coordinates) and offsets are tried in order and the first text box that stays
    inside the axes and meets no box placed before is kept.

    Parameters
    ----------
    ax : Axes
    items : list of (text, colour, anchors (n, 2))
    fontsize : float

    Returns
    -------
    int
        Number of items that found no room (not drawn).
    """
    root = ax.figure.figure  # the Figure (ax.figure may be a SubFigure)
    if not hasattr(root.canvas, "get_renderer"):
        FigureCanvasAgg(root)  # figures made without pyplot have no renderer until a canvas is attached
    root.canvas.draw()  # lay the figure out so that the data-to-pixel transform is final
    renderer = root.canvas.get_renderer()
    frame = ax.get_window_extent(renderer)
    placed: list[Any] = []
    hidden = 0
    for text, col, anchors in items:
        done = False
        for x, y in anchors:
            if not (math.isfinite(x) and math.isfinite(y)):
                continue
            for dx, dy in LABEL_OFFSETS:
                t = ax.annotate(
                    text,
                    (x, y),
                    xytext=(dx, dy),
                    textcoords="offset points",
                    fontsize=fontsize,
                    color=col,
                    ha="left" if dx >= 0 else "right",
                    va="bottom",
                    annotation_clip=True,
                    zorder=7,
                    bbox={"boxstyle": "square,pad=0.1", "fc": "white", "ec": "none", "alpha": 0.8},
                )
                t.set_in_layout(False)
                box = t.get_window_extent(renderer)
                inside = (
                    box.x0 >= frame.x0 and box.x1 <= frame.x1 and box.y0 >= frame.y0 and box.y1 <= frame.y1
                )
                if inside and not any(box.overlaps(b) for b in placed):
                    placed.append(box)
                    done = True
                    break
                t.remove()
            if done:
                break
        hidden += not done
    return hidden


# -- special set geometry -----------------------------------------------------
def _parts(geom: BaseGeometry) -> Iterator[BaseGeometry]:
    """Leaf geometries (Point, LineString, Polygon) of any geometry."""
    if geom.is_empty:
        return
    if hasattr(geom, "geoms"):
        for g in geom.geoms:
            yield from _parts(g)
    else:
        yield geom


def _polygon_path(poly: BaseGeometry) -> MplPath:
    verts: list[np.ndarray] = []
    codes: list[int] = []
    for ring in [poly.exterior, *poly.interiors]:
        xy = np.asarray(ring.coords)[:, :2]
        verts.append(xy)
        codes.extend([MplPath.MOVETO] + [MplPath.LINETO] * (len(xy) - 2) + [MplPath.CLOSEPOLY])
    return MplPath(np.concatenate(verts), codes)


def _condition_of(ties: list[dict[str, Any]] | None, props: dict[str, Any]) -> str:
    """``equal``, ``half``, ``both`` or ``unknown`` for one component."""
    conds = {str(t.get("condition")) for t in (ties or []) if isinstance(t, dict)}
    if not conds and props.get("condition"):
        conds = {str(props["condition"])}
    conds &= {"equal", "half"}
    if conds == {"equal"}:
        return "equal"
    if conds == {"half"}:
        return "half"
    return "both" if conds else "unknown"


def _features(special: dict[str, Any] | None, geojson: dict[str, Any] | None) -> list[dict[str, Any]]:
    """One record per component: id, kind, area, condition, geometry (shapely or None)."""
    comps = {str(c.get("id")): c for c in (special or {}).get("components", [])}
    out: list[dict[str, Any]] = []
    seen: set[str] = set()
    for feat in (geojson or {}).get("features", []):
        props = dict(feat.get("properties") or {})
        cid = str(props.get("id"))
        comp = comps.get(cid, {})
        geom = feat.get("geometry")
        shp = geo_shape(geom) if geom else None
        kind = str(comp.get("kind", props.get("kind", "curve")))
        out.append(
            {
                "id": cid,
                "kind": kind,
                "area": num(comp.get("area", props.get("area"))),
                "condition": _condition_of(comp.get("ties", props.get("ties")), props),
                "part_conditions": props.get("conditions"),
                "geometry": shp,
                "bbox": comp.get("bbox", props.get("bbox")),
            }
        )
        seen.add(cid)
    for cid, comp in comps.items():
        if cid not in seen:
            out.append(
                {
                    "id": cid,
                    "kind": str(comp.get("kind", "curve")),
                    "area": num(comp.get("area")),
                    "condition": _condition_of(comp.get("ties"), {}),
                    "part_conditions": None,
                    "geometry": None,
                    "bbox": comp.get("bbox"),
                }
            )
    return out


def _draw_special(
    ax: Any, feats: list[dict[str, Any]], *, thin: bool = False, mono: str | None = None
) -> list[Any]:
    """Draw components on ``ax``; return legend handles (one per style used)."""
    handles: dict[str, Any] = {}
    batches: dict[tuple[str, str, float], list[np.ndarray]] = {}
    lw = 0.8 if thin else 1.6
    patch_no = 0
    patch_area_rest, patch_rest = 0.0, 0
    for rec in feats:
        shp = rec["geometry"]
        if shp is None:
            bb = rec.get("bbox")
            if bb and len(bb) == 4:
                a0, b0, a1, b1 = nums(bb)
                ax.add_patch(Rectangle((a0, b0), a1 - a0, b1 - b0, fill=False, ls=":", lw=0.8, ec="0.4"))
                handles.setdefault(
                    "bbox", Line2D([], [], color="0.4", ls=":", label="component box (no geometry stored)")
                )
            continue
        leaves = list(_parts(shp))
        pc = rec.get("part_conditions")
        per_part = isinstance(pc, list) and len(pc) == len(leaves)
        if rec["kind"] == "patch" or any(g.geom_type == "Polygon" for g in leaves):
            col = mono or PATCH_COLOURS[patch_no % len(PATCH_COLOURS)]
            for g in leaves:
                if g.geom_type == "Polygon":
                    ax.add_patch(
                        PathPatch(
                            _polygon_path(g),
                            fc="none" if thin else col,
                            ec=mono or col,
                            alpha=1.0 if thin else 0.45,
                            lw=lw,
                            hatch="//" if thin else None,
                        )
                    )
            if not thin:
                if patch_no < MAX_PATCH_LABELS:
                    area = fmt(rec["area"], 3) if math.isfinite(rec["area"]) else "not recorded"
                    handles[f"patch{patch_no}"] = Patch(
                        fc=col, alpha=0.45, ec=col, label=f"patch {rec['id']}: area {area}"
                    )
                else:
                    patch_rest += 1
                    patch_area_rest += rec["area"] if math.isfinite(rec["area"]) else 0.0
            patch_no += 1
            if thin:
                continue
        # tie curves are drawn for patch components too (thinner): they cross the patch and
        # carry the changes of the cost formula there (math.md section 5, reduced search)
        line_w = lw * 0.45 if rec["kind"] == "patch" else lw
        for i, g in enumerate(leaves):
            if g.geom_type == "Polygon":
                continue
            cond = str(pc[i]) if per_part else rec["condition"]
            st = CONDITION_STYLE.get(cond, CONDITION_STYLE["unknown"])
            col = mono or st["color"]
            ls = "-" if mono else st["linestyle"]
            if g.geom_type == "Point":
                ax.plot(
                    [g.x],
                    [g.y],
                    "o",
                    color=col,
                    mec="black" if not mono else col,
                    ms=4 if thin else 6,
                    zorder=4,
                )
                handles.setdefault(
                    "point",
                    Line2D(
                        [], [], marker="o", color="0.3", mec="black", ls="", label="isolated special point"
                    ),
                )
            elif g.geom_type in ("LineString", "LinearRing"):
                batches.setdefault((col, ls, line_w), []).append(np.asarray(g.coords)[:, :2])
                if not mono:
                    handles.setdefault(
                        cond, Line2D([], [], color=col, ls=st["linestyle"], lw=lw, label=st["label"])
                    )
    # one collection per style: tens of thousands of tie curves draw in one call each
    for (col, ls, w), segs in batches.items():
        ax.add_collection(LineCollection(segs, colors=col, linestyles=ls, linewidths=w, zorder=3))
    if patch_rest:
        handles["patchrest"] = Patch(
            fc="none", ec="0.3", label=f"{patch_rest} more patches (area {fmt(patch_area_rest, 3)})"
        )
    return list(handles.values())


FAMILY_COLOURS = (
    "#1f77b4",
    "#d62728",
    "#2ca02c",
    "#9467bd",
    "#ff7f0e",
    "#17becf",
    "#8c564b",
    "#e377c2",
    "#7f7f7f",
    "#bcbd22",
    "#393b79",
    "#637939",
    "#8c6d31",
    "#843c39",
    "#7b4173",
)
PATCH_FILL, PATCH_EDGE = "#9fd8b5", "#1b6e3c"
MAX_FAMILIES = 8
REACH_FRACTION = 0.05
"""Tie curves whose tied value is within max(3 tolerance, 5% of D) of D are emphasised."""


def reach_of(distance: dict[str, Any] | None) -> tuple[float, float] | None:
    """(D, reach): a tied value v is within reach of D when |v - D| <= reach; None without D."""
    if not distance:
        return None
    value, tol = num(distance.get("value")), num(distance.get("tolerance"))
    if not math.isfinite(value):
        return None
    return value, max(3.0 * tol if math.isfinite(tol) else 0.0, REACH_FRACTION * value)


def _curve_alpha(n: int) -> float:
    """Alpha for n overplotted curves: opaque for a few, a density rendering for thousands."""
    return float(min(1.0, max(0.06, 25.0 / max(n, 1))))


def special_figure(
    special: dict[str, Any],
    geojson: dict[str, Any] | None,
    *,
    fig: FigureBase | None = None,
    grid_f: dict[str, Any] | None = None,
    grid_g: dict[str, Any] | None = None,
    distance: dict[str, Any] | None = None,
    index: TieIndex | None = None,
) -> FigureBase:
    """The special set in the parameter strip (a horizontal, b vertical).

    Patches are filled regions with an outline. Tie curves are coloured by family
    (condition and the grids of the four contours, :func:`specmap.report.ties.family`;
    this needs the grid files) and drawn with an alpha that falls with their number,
    rasterised, so thousands of overplotted curves read as a density. Curves whose tied
    value is within reach of D (:func:`reach_of`) are drawn black on top. Markers only
    for components of kind ``point``. The slope-one line a = 1/2 is dotted.

    Parameters
    ----------
    special : dict
        Parsed ``special.json``.
    geojson : dict or None
        Parsed ``special.geojson``.
    fig : Figure or SubFigure, optional
    grid_f, grid_g : dict, optional
        Parsed grid files: curves are labelled by tie (else coloured by condition of their component).
    distance : dict, optional
        Parsed ``distance.json``: for the emphasis of ties within reach of D.
    index : TieIndex, optional
        A precomputed :func:`specmap.report.ties.index_ties`.

    Returns
    -------
    Figure or SubFigure

    References
    ----------
    .. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol.
       (2023): special values.
    """
    fig = _new_figure(fig, (7.0, 6.0))
    ax = fig.add_subplot()
    win = special.get("window") or {}
    a_lo, a_hi = nums(win.get("a", [0.0, 1.0]))[:2]
    b_lo, b_hi = nums(win.get("b", [0.0, 1.0]))[:2]
    ix = index if index is not None else index_ties(special, geojson, grid_f, grid_g)
    comps = {str(c.get("id")): c for c in special.get("components") or []}
    handles: list[Any] = []
    win_area = max((a_hi - a_lo) * (b_hi - b_lo), 1e-300)
    for n, (cid, polys) in enumerate(ix.polygons.items()):
        for poly in polys:
            ax.add_patch(
                PathPatch(_polygon_path(poly), fc=PATCH_FILL, ec=PATCH_EDGE, lw=1.2, alpha=0.55, zorder=1)
            )
            ax.add_patch(PathPatch(_polygon_path(poly), fc="none", ec=PATCH_EDGE, lw=1.2, zorder=4))
        if n < MAX_PATCH_LABELS:
            area = num(comps.get(cid, {}).get("area"))
            held = ix.patch_ties.get(cid)
            txt = (
                f"patch {cid}: area {fmt(area, 3)} ({100 * area / win_area:.3g}%)"
                if math.isfinite(area)
                else f"patch {cid}: area not recorded"
            )
            if held is not None:
                txt += f", {plural(len(held), 'tie')} hold"
            handles.append(Patch(fc=PATCH_FILL, ec=PATCH_EDGE, alpha=0.8, label=txt))
    if len(ix.polygons) > MAX_PATCH_LABELS:
        handles.append(
            Patch(fc=PATCH_FILL, ec=PATCH_EDGE, label=f"{len(ix.polygons) - MAX_PATCH_LABELS} more patches")
        )
    # tie curves by family (or by their component's condition without grids)
    groups: dict[str, list[np.ndarray]] = {}
    condition: dict[str, str] = {}  # per component: its ties are scanned once, not once per curve
    for c in ix.curves:
        if ix.labelled and c.family != "unknown":
            key = c.family
        else:
            if c.component not in condition:
                condition[c.component] = _condition_of(comps.get(c.component, {}).get("ties"), {})
            key = "condition: " + condition[c.component]
        groups.setdefault(key, []).append(c.xy)
    order = sorted(groups, key=lambda k: -len(groups[k]))
    if len(order) > MAX_FAMILIES:  # the rarest families share one grey style
        rest = [xy for k in order[MAX_FAMILIES - 1 :] for xy in groups[k]]
        n_rest = len(order) - MAX_FAMILIES + 1
        order = order[: MAX_FAMILIES - 1] + [f"{n_rest} other families"]
        groups[order[-1]] = rest
    for i, key in enumerate(order):
        segs = groups[key]
        col = "#8a8a8a" if key.endswith("other families") else FAMILY_COLOURS[i % len(FAMILY_COLOURS)]
        ax.add_collection(
            LineCollection(
                segs, colors=col, linewidths=0.9, alpha=_curve_alpha(len(segs)), zorder=2, rasterized=True
            )
        )
        handles.append(Line2D([], [], color=col, lw=1.6, label=f"{key} ({len(segs)})"))
    reach = reach_of(distance)
    if reach is not None and ix.labelled:
        d_val, r = reach
        near = []
        for c in ix.curves:
            with np.errstate(invalid="ignore"):
                ok = np.abs(c.tied_value - d_val) <= r
            if ok.any() and len(c.xy) > 1:
                seg_ok = ok[:-1] & ok[1:]
                near.extend(np.stack([c.xy[:-1][seg_ok], c.xy[1:][seg_ok]], axis=1))
        if near:
            # thin enough that thousands of near ties do not hide the families under them
            ax.add_collection(LineCollection(near, colors="black", linewidths=1.0, alpha=0.85, zorder=5))
        handles.append(
            Line2D(
                [],
                [],
                color="black",
                lw=1.4,
                label=f"tied value within {fmt(r, 2)} of D" + ("" if near else " (none)"),
            )
        )
    pts = [p for p in ix.points.values()]
    if pts:
        xy = np.concatenate(pts)
        ax.plot(xy[:, 0], xy[:, 1], "o", color="#333333", mec="black", ms=6, zorder=6, ls="")
        handles.append(
            Line2D(
                [],
                [],
                marker="o",
                color="#333333",
                mec="black",
                ls="",
                label=f"isolated special point ({len(xy)})",
            )
        )
    if geojson is None:
        for comp in special.get("components") or []:
            bb = clip_bbox(comp.get("bbox"), (a_lo, b_lo, a_hi, b_hi))
            if bb is not None:
                a0, b0, a1, b1 = bb
                ax.add_patch(Rectangle((a0, b0), a1 - a0, b1 - b0, fill=False, ls=":", lw=0.8, ec="0.4"))
        if special.get("components"):
            handles.append(Line2D([], [], color="0.4", ls=":", label="component box (no geometry stored)"))
    if a_lo <= 0.5 <= a_hi:
        ax.axvline(0.5, color="0.35", ls=":", lw=1.0, zorder=3)
        handles.append(Line2D([], [], color="0.35", ls=":", label="a = 1/2 (slope-one lines)"))
    ax.set_xlim(a_lo, a_hi)
    ax.set_ylim(b_lo, b_hi)
    ax.set_xlabel("a   (line direction: slope (1-a)/a)")
    ax.set_ylabel("b   (line offset)")
    counts = special.get("counts") or {}
    n_curves = tie_curve_count(special)
    drawn = (
        f"; {len(ix.curves)} drawn, coincident ones merged"
        if ix.curves and len(ix.curves) != n_curves
        else ""
    )
    band = costs_band(special)
    ax.set_title(
        (
            f"Special set, tied costs in [{fmt(band[0], 4)}, {fmt(band[1], 4)}] only: "
            if band
            else "Special set: "
        )
        + "components "
        + ", ".join(
            [
                plural(int(num(counts.get("patch", 0))), "patch", "patches"),
                plural(int(num(counts.get("curve", 0))), "curve"),
                plural(int(num(counts.get("point", 0))), "point"),
            ]
        )
        + f"; {plural(n_curves, 'tie curve')}",
        fontsize=10,
    )
    ax.grid(alpha=0.2)
    if handles:
        ax.legend(
            handles=handles,
            fontsize=7.5,
            loc="upper center",
            bbox_to_anchor=(0.5, -0.11),
            ncol=2 if len(handles) < 7 else 3,
            frameon=False,
            title=f"tie curves by family, with counts{drawn}; the darker, the denser",
            title_fontsize=7.5,
        )
    return fig


def clip_bbox(bb: Any, window: tuple[float, float, float, float]) -> tuple[float, float, float, float] | None:
    """A component box [a0, b0, a1, b1] clipped to the window; None if absent or outside.

    Examples
    --------
    >>> clip_bbox([1e-12, -3.0, 0.5, 0.2], (0.02, -2.0, 0.98, 2.0))
    (0.02, -2.0, 0.5, 0.2)
    """
    if not bb or len(bb) != 4:
        return None
    a0, b0, a1, b1 = (float(x) for x in nums(bb))
    a0, b0 = max(a0, window[0]), max(b0, window[1])
    a1, b1 = min(a1, window[2]), min(b1, window[3])
    if not (a0 <= a1 and b0 <= b1):
        return None
    return (a0, b0, a1, b1)


# -- distance map ---------------------------------------------------------------
def distance_map_samples(distance: dict[str, Any]) -> dict[str, Any] | None:
    """The sampled h(a, b) of ``distance.json``: key ``distance_map``, or the older ``landscape``."""
    return distance.get("distance_map") or distance.get("landscape") or None


def distance_map_figure(
    distance: dict[str, Any],
    geojson: dict[str, Any] | None = None,
    *,
    window: dict[str, Any] | None = None,
    degree: int | str | None = None,
    fig: FigureBase | None = None,
) -> FigureBase:
    """h over the strip: a heat map of h(a, b) with the special set over it and the maximum starred.

    Patches are hatched outlines, curves thin dark lines, a = 1/2 dotted; all are in
    the legend, which is dark text on white.

    Parameters
    ----------
    distance : dict
        Parsed ``distance.json``. ``distance_map`` (or ``landscape``) ``.h`` has one row
        per value of ``.b``; non-finite entries are left blank.
    geojson : dict, optional
        Parsed ``special.geojson``.
    window : dict, optional
        ``{"a": [lo, hi], "b": [lo, hi]}``, used when no samples are stored.
    degree : int or str, optional
        Show ``by_degree[degree]`` instead of the max over degrees.
    fig : Figure or SubFigure, optional

    Returns
    -------
    Figure or SubFigure

    References
    ----------
    .. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, Math. Methods Appl. Sci.
       36 (2013): the matching distance as a sup over filtering lines.
    """
    fig = _new_figure(fig, (7.0, 5.6))
    ax = fig.add_subplot()
    land = distance_map_samples(distance)
    title = "h over the strip: bottleneck distance h(a, b) on each line r(a, b)"
    if land:
        a = nums(land.get("a", []))
        b = nums(land.get("b", []))
        h_raw = land.get("h") if degree is None else (land.get("by_degree") or {}).get(str(degree))
        if h_raw is None:
            raise ValueError(f"distance map has no values for degree {degree}")
        h = nums(h_raw)
        if h.shape != (len(b), len(a)):
            raise ValueError(
                f"distance map h has shape {h.shape}, expected (len(b), len(a)) = ({len(b)}, {len(a)})"
            )
        masked = np.ma.masked_invalid(h)
        mesh = ax.pcolormesh(a, b, masked, shading="nearest", cmap="viridis", rasterized=True)
        label = "h(a, b)" + (" (max over degrees)" if degree is None else f" (degree {degree})")
        fig.colorbar(mesh, ax=ax, label=label, shrink=0.9)
        ax.set_xlim(a.min(), a.max())
        ax.set_ylim(b.min(), b.max())
        n_bad = int((~np.isfinite(h)).sum())
        if n_bad:
            title += f"; {plural(n_bad, 'non-finite cell')} left blank"
    else:
        title += " (no samples stored)"
        if window:
            ax.set_xlim(*nums(window.get("a", [0, 1]))[:2])
            ax.set_ylim(*nums(window.get("b", [0, 1]))[:2])
    handles: list[Any] = []
    over = "white" if land else "0.25"
    if geojson:
        feats = _features(None, geojson)
        _draw_special(ax, feats, thin=True, mono=over)
        if any(f["kind"] == "patch" for f in feats):
            handles.append(Patch(fc="0.55", ec=over, hatch="//", label="patch (hatched outline)"))
        if any(f["kind"] != "patch" for f in feats) or feats:
            handles.append(Line2D([], [], color="0.55", lw=0.8, label="special set: tie curves"))
    at = distance.get("at")
    if at is not None and len(at) >= 2:
        value_text, dname = fmt_distance(distance), "D"
        if degree is not None:
            bd = (distance.get("by_degree") or {}).get(str(degree)) or {}
            at = bd.get("at", at)
            if bd:
                value_text, dname = fmt_distance(distance, degree), f"D_{degree}"
        ax.plot([num(at[0])], [num(at[1])], "*", ms=16, color="#ff3b3b", mec="black", mew=0.8, zorder=6)
        handles.append(
            Line2D(
                [],
                [],
                marker="*",
                ls="",
                ms=12,
                color="#ff3b3b",
                mec="black",
                label=f"{dname} = {value_text} at (a, b) = ({fmt(at[0], 3)}, {fmt(at[1], 3)})",
            )
        )
    ax.axvline(0.5, color="0.85" if land else "0.35", ls=":", lw=1.0)
    handles.append(Line2D([], [], color="0.45", ls=":", lw=1.0, label="a = 1/2 (slope-one lines)"))
    ax.set_xlabel("a")
    ax.set_ylabel("b")
    ax.set_title(title, fontsize=10)
    ax.legend(
        handles=handles,
        fontsize=LEGEND_SIZE,
        loc="upper center",
        bbox_to_anchor=(0.5, -0.12),
        ncol=2,
        frameon=True,
        facecolor="white",
        edgecolor="0.7",
    )
    return fig


# -- perturbations ------------------------------------------------------------
STRIP_MAX = 40
"""Up to this many runs a distribution is drawn as a strip of dots (one per run), not a histogram."""


def _hist(
    ax: Any, values: np.ndarray, xlabel: str, base: float | None = None, empty: str | None = None
) -> None:
    """One distribution over runs: a sentence when all runs agree, dots for a few runs, else a histogram.

    ``empty`` says in words what a value of 0 in every run means (e.g. ``"no patch"``).
    """
    finite = values[np.isfinite(values)]
    n_bad = len(values) - len(finite)
    notes = [f"{n_bad} non-finite omitted"] if n_bad else []
    if len(finite) and np.ptp(finite) == 0:
        same = fmt(finite[0], 3) + (f" ({empty})" if empty and finite[0] == 0 else "")
        ax.text(
            0.5,
            0.5,
            f"all {plural(len(finite), 'run')}: {same}",
            ha="center",
            va="center",
            transform=ax.transAxes,
            fontsize=10,
        )
        ax.set_yticks([])
        ax.set_xticks([])
        ax.set_xlabel(xlabel + (f"\n({'; '.join(notes)})" if notes else ""))
        if base is not None and math.isfinite(base):
            ax.text(
                0.5,
                0.3,
                f"unperturbed: {fmt(base, 3)}",
                ha="center",
                va="center",
                transform=ax.transAxes,
                fontsize=9,
                color="#c0392b",
            )
        return
    if len(finite) and len(finite) <= STRIP_MAX:
        jitter = np.random.default_rng(0).uniform(-0.25, 0.25, len(finite))
        ax.plot(finite, jitter, "o", color="#4a7fb5", ms=5, alpha=0.8, ls="")
        ax.set_ylim(-1, 1)
        ax.set_yticks([])
        ax.xaxis.set_major_locator(MaxNLocator(5))  # a narrow spread gave 9 crowded ticks
        ax.set_ylabel(f"{plural(len(finite), 'run')} (one dot each)")
    elif len(finite):
        bins = min(30, max(5, int(np.sqrt(len(finite)))))
        ax.hist(finite, bins=bins, color="#4a7fb5", edgecolor="white")
        ax.yaxis.set_major_locator(MaxNLocator(integer=True))
        ax.set_ylabel("runs")
    else:
        ax.text(
            0.5,
            0.5,
            "no finite values recorded" if len(values) else "no run records",
            ha="center",
            va="center",
            transform=ax.transAxes,
            fontsize=9,
            bbox={"fc": "white", "ec": "none"},
            zorder=5,
        )
        ax.set_ylabel("runs")
    if base is not None and math.isfinite(base):
        ax.axvline(base, color="#c0392b", ls="--", lw=1.2, label=f"unperturbed: {fmt(base, 3)}")
        ax.legend(fontsize=LEGEND_SIZE, loc="upper right")
    ax.set_xlabel(xlabel + (f"\n({'; '.join(notes)})" if notes else ""))


def perturb_figure(
    summary: dict[str, Any], runs: list[dict[str, Any]], *, fig: FigureBase | None = None
) -> FigureBase:
    """Distributions over perturbed runs and, when present, the size sweep.

    Parameters
    ----------
    summary : dict
        Parsed ``perturb/summary.json``.
    runs : list of dict
        Records of ``perturb/runs.jsonl``.
    fig : Figure or SubFigure, optional

    Returns
    -------
    Figure or SubFigure

    Notes
    -----
    The sweep panel plots the fraction of runs with a patch against the
    perturbation size (log axis) with the stored 95% interval as error bars.
    """
    sweep = summary.get("sweep") or []
    fig = _new_figure(fig, (8.0, 6.4 if sweep else 3.4))
    gs = fig.add_gridspec(2 if sweep else 1, 2)
    ax_area = fig.add_subplot(gs[0, 0])
    ax_move = fig.add_subplot(gs[0, 1])
    area = nums([r.get("total_area") for r in runs])
    base = summary.get("base") or {}
    _hist(ax_area, area, "total patch area, (a, b) units", num(base.get("total_area")), "no patch kept")
    ax_area.set_title(f"Patch area over {plural(len(runs), 'run')}", fontsize=10)
    size_txt = fmt(summary.get("size"), 3)
    if any("curve_movement" in r for r in runs):
        move = nums([r.get("curve_movement") for r in runs])
        _hist(
            ax_move,
            move,
            "Hausdorff distance of the curves and points\nto the unperturbed ones, (a, b) units",
        )
        ax_move.set_title(f"Movement of the tie curves (size {size_txt})", fontsize=10)
    else:  # run records written before curve movement was measured
        _hist(ax_move, nums([r.get("hausdorff") for r in runs]), "Hausdorff distance to the unperturbed set")
        ax_move.set_title(f"Hausdorff distance to the base set (size {size_txt})", fontsize=10)
    if sweep:
        rows = sorted(sweep, key=lambda s: num(s.get("size")))
        size = nums([s.get("size") for s in rows])
        n = nums([s.get("runs") for s in rows])
        k = nums([s.get("runs_with_patch") for s in rows])
        frac = np.where(n > 0, k / np.where(n > 0, n, 1), np.nan)
        ci = np.array([fraction_interval(s.get("runs_with_patch_ci95"), s.get("runs")) for s in rows])
        lo = np.clip(frac - ci[:, 0], 0, None)
        hi = np.clip(ci[:, 1] - frac, 0, None)
        ok = np.isfinite(lo) & np.isfinite(hi)
        yerr = np.vstack([np.where(ok, lo, 0), np.where(ok, hi, 0)])
        ax = fig.add_subplot(gs[1, 0])
        ax.errorbar(size, frac, yerr=yerr, fmt="o-", color="#2e8b57", capsize=4, label="95% interval")
        ax.set_ylim(-0.05, 1.05)
        ax.set_ylabel("fraction of runs with a patch")
        ax.set_title("Size sweep: runs that kept a patch", fontsize=10)
        ax.legend(fontsize=LEGEND_SIZE, loc="best")
        ax2 = fig.add_subplot(gs[1, 1])
        move_mean = nums([_row_stat(s, "curve_movement", "mean") for s in rows])
        if np.isfinite(move_mean).any():
            ax2.plot(size, move_mean, "o-", color="#4a7fb5")
            # room above the largest mean, so its marker is not cut by the frame
            ax2.set_ylim(0, 1.15 * float(np.nanmax(move_mean)) or 1.0)
            ax2.set_title("Size sweep: mean movement of the tie curves", fontsize=10)
            ax2.set_ylabel("(a, b) units")
        else:
            ax2.text(
                0.5, 0.5, "curve movement not recorded", ha="center", va="center", transform=ax2.transAxes
            )
            ax2.set_yticks([])
        for a_ in (ax, ax2):
            a_.set_xscale("log")
            a_.set_xlabel("perturbation size")
            a_.grid(alpha=0.3)
            _size_ticks(a_, size)
    return fig


def _row_stat(row: dict[str, Any], key: str, stat: str) -> Any:
    """``row[key][stat]`` or the flat ``row[f"{key}_{stat}"]`` of a sweep row."""
    nested = row.get(key)
    return nested.get(stat) if isinstance(nested, dict) else row.get(f"{key}_{stat}")


def _size_ticks(ax: Any, size: np.ndarray) -> None:
    """Ticks at the swept sizes only (a log axis over two sizes otherwise labels minor ticks)."""
    ok = np.unique(size[np.isfinite(size) & (size > 0)])
    if not len(ok):
        return
    ax.xaxis.set_minor_locator(NullLocator())
    ax.set_xticks(ok, [fmt(x, 3) for x in ok])
    ax.set_xlim(ok[0] / 1.6, ok[-1] * 1.6)
