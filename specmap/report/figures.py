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
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure, FigureBase
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, PathPatch, Rectangle
from matplotlib.path import Path as MplPath
from shapely.geometry import shape as geo_shape
from shapely.geometry.base import BaseGeometry

from specmap.report.fmt import fmt, fraction_interval, num, nums, plural

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


def grids_figure(grid_f: dict[str, Any] | None, grid_g: dict[str, Any] | None, *,
                 fig: FigureBase | None = None, line: Any = None, line_label: str | None = None,
                 labels: bool = True) -> FigureBase:
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
            elif kind in ("vertical", "horizontal"):
                sx, sy = nums(c.get("start", [math.nan, math.nan]))[:2]
                ex, ey = (sx, y1) if kind == "vertical" else (x1, sy)
                ax.plot([sx, ex], [sy, ey], ls=dash, color=col, lw=1.2)
                ax.plot([sx], [sy], "o", color=col, mfc="white", ms=5, mew=1.3)
                ax.plot([ex], [ey], "^" if kind == "vertical" else ">", color=col, ms=6, clip_on=False)
            else:
                continue
            counts[kind] += 1
        tag = rf"$\Gamma({name})$"
        handles.append(Line2D([], [], color=col, lw=1.6, label=f"{tag} proper ({counts['proper']})"))
        n_half = counts["vertical"] + counts["horizontal"]
        handles.append(Line2D([], [], color=col, lw=1.2, ls=dash, marker="o", mfc="white",
                              label=f"{tag} half-lines ({n_half}), o = start"))
    if line is not None and len(line) >= 2 and 0.0 < num(line[0]) < 1.0:
        la, lb = num(line[0]), num(line[1])
        xs = np.linspace(x0, x1, 2)
        ax.plot(xs, (1.0 - la) / la * (xs - lb) - lb, color="#c2185b", lw=1.8, zorder=5)
        handles.append(Line2D([], [], color="#c2185b", lw=1.8,
                              label=line_label or f"line r(a, b), (a, b) = ({fmt(la, 3)}, {fmt(lb, 3)})"))
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_xlabel("f1 / g1")
    ax.set_ylabel("f2 / g2")
    ax.set_title("Extended Pareto grids (half-lines continue past the arrow heads)", fontsize=10)
    ax.grid(alpha=0.25)
    if line is not None and not labels:
        ax.set_title("Where D is reached: the line r(a, b) over both grids", fontsize=10)
    ax.legend(handles=handles, fontsize=LEGEND_SIZE, loc="upper center",
              bbox_to_anchor=(0.5, -0.11 if labels else -0.2), ncol=2 if labels else 3, frameon=False)
    return fig


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
        out.append({"id": cid, "kind": kind, "area": num(comp.get("area", props.get("area"))),
                    "condition": _condition_of(comp.get("ties", props.get("ties")), props),
                    "part_conditions": props.get("conditions"), "geometry": shp,
                    "bbox": comp.get("bbox", props.get("bbox"))})
        seen.add(cid)
    for cid, comp in comps.items():
        if cid not in seen:
            out.append({"id": cid, "kind": str(comp.get("kind", "curve")), "area": num(comp.get("area")),
                        "condition": _condition_of(comp.get("ties"), {}), "part_conditions": None,
                        "geometry": None, "bbox": comp.get("bbox")})
    return out


def _draw_special(ax: Any, feats: list[dict[str, Any]], *, thin: bool = False,
                  mono: str | None = None) -> list[Any]:
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
                ax.add_patch(Rectangle((a0, b0), a1 - a0, b1 - b0, fill=False, ls=":", lw=0.8,
                                       ec="0.4"))
                handles.setdefault("bbox", Line2D([], [], color="0.4", ls=":",
                                                  label="component box (no geometry stored)"))
            continue
        leaves = list(_parts(shp))
        pc = rec.get("part_conditions")
        per_part = isinstance(pc, list) and len(pc) == len(leaves)
        if rec["kind"] == "patch" or any(g.geom_type == "Polygon" for g in leaves):
            col = mono or PATCH_COLOURS[patch_no % len(PATCH_COLOURS)]
            for g in leaves:
                if g.geom_type == "Polygon":
                    ax.add_patch(PathPatch(_polygon_path(g), fc="none" if thin else col,
                                           ec=mono or col, alpha=1.0 if thin else 0.45,
                                           lw=lw, hatch="//" if thin else None))
            if not thin:
                if patch_no < MAX_PATCH_LABELS:
                    area = fmt(rec["area"], 3) if math.isfinite(rec["area"]) else "not recorded"
                    handles[f"patch{patch_no}"] = Patch(fc=col, alpha=0.45, ec=col,
                                                        label=f"patch {rec['id']}: area {area}")
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
                ax.plot([g.x], [g.y], "o", color=col, mec="black" if not mono else col, ms=4 if thin else 6,
                        zorder=4)
                handles.setdefault("point", Line2D([], [], marker="o", color="0.3", mec="black", ls="",
                                                   label="isolated special point"))
            elif g.geom_type in ("LineString", "LinearRing"):
                batches.setdefault((col, ls, line_w), []).append(np.asarray(g.coords)[:, :2])
                if not mono:
                    handles.setdefault(cond, Line2D([], [], color=col, ls=st["linestyle"], lw=lw,
                                                    label=st["label"]))
    # one collection per style: tens of thousands of tie curves draw in one call each
    for (col, ls, w), segs in batches.items():
        ax.add_collection(LineCollection(segs, colors=col, linestyles=ls, linewidths=w, zorder=3))
    if patch_rest:
        handles["patchrest"] = Patch(fc="none", ec="0.3",
                                     label=f"{patch_rest} more patches (area {fmt(patch_area_rest, 3)})")
    return list(handles.values())


def special_figure(special: dict[str, Any], geojson: dict[str, Any] | None, *,
                   fig: FigureBase | None = None) -> FigureBase:
    """The special set in the parameter strip (a horizontal, b vertical).

    Curves are coloured by their tie condition (equal difference, half
    difference, or a third style when a component carries both); patches are
    shaded with their area in the legend; isolated points are markers; the
    slope-one line a = 1/2 is dotted.

    Parameters
    ----------
    special : dict
        Parsed ``special.json``.
    geojson : dict or None
        Parsed ``special.geojson``. Per-part colours are used when a feature's
        properties carry ``"conditions"``, one per part of its geometry.
    fig : Figure or SubFigure, optional

    Returns
    -------
    Figure or SubFigure

    References
    ----------
    .. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol.
       (2023): special values.
    """
    fig = _new_figure(fig, (7.0, 5.6))
    ax = fig.add_subplot()
    win = special.get("window") or {}
    a_lo, a_hi = nums(win.get("a", [0.0, 1.0]))[:2]
    b_lo, b_hi = nums(win.get("b", [0.0, 1.0]))[:2]
    handles = _draw_special(ax, _features(special, geojson))
    if a_lo <= 0.5 <= a_hi:
        ax.axvline(0.5, color="0.35", ls=":", lw=1.0)
        handles.append(Line2D([], [], color="0.35", ls=":", label="a = 1/2 (slope-one lines)"))
    ax.set_xlim(a_lo, a_hi)
    ax.set_ylim(b_lo, b_hi)
    ax.set_xlabel("a   (line direction: slope (1-a)/a)")
    ax.set_ylabel("b   (line offset)")
    counts = special.get("counts") or {}
    ax.set_title(
        "Special set: " + ", ".join([
            plural(int(counts.get("curve", 0)), "curve"),
            plural(int(counts.get("patch", 0)), "patch", "patches"),
            plural(int(counts.get("point", 0)), "point"),
        ]) + f"  (tolerance {fmt(special.get('tolerance'), 3)})",
        fontsize=10,
    )
    ax.grid(alpha=0.2)
    if handles:
        ax.legend(handles=handles, fontsize=LEGEND_SIZE, loc="upper center", bbox_to_anchor=(0.5, -0.13),
                  ncol=2, frameon=False)
    return fig


# -- landscape ----------------------------------------------------------------
def landscape_figure(distance: dict[str, Any], geojson: dict[str, Any] | None = None, *,
                     window: dict[str, Any] | None = None, degree: int | str | None = None,
                     fig: FigureBase | None = None) -> FigureBase:
    """Heat map of h(a, b) with the special set drawn over it and the maximum starred.

    Parameters
    ----------
    distance : dict
        Parsed ``distance.json``. ``landscape.h`` has one row per value of
        ``landscape.b``; non-finite entries are left blank.
    geojson : dict, optional
        Parsed ``special.geojson``; drawn as thin white lines.
    window : dict, optional
        ``{"a": [lo, hi], "b": [lo, hi]}``, used when no landscape is stored.
    degree : int or str, optional
        Show ``landscape.by_degree[degree]`` instead of the max over degrees.
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
    land = distance.get("landscape") or None
    title = "h(a, b): bottleneck distance on the line r(a, b)"
    if land:
        a = nums(land.get("a", []))
        b = nums(land.get("b", []))
        h_raw = land.get("h") if degree is None else (land.get("by_degree") or {}).get(str(degree))
        if h_raw is None:
            raise ValueError(f"landscape has no values for degree {degree}")
        h = nums(h_raw)
        if h.shape != (len(b), len(a)):
            raise ValueError(f"landscape h has shape {h.shape}, expected (len(b), len(a)) = "
                             f"({len(b)}, {len(a)})")
        masked = np.ma.masked_invalid(h)
        mesh = ax.pcolormesh(a, b, masked, shading="nearest", cmap="viridis",
                             rasterized=True)
        label = "h(a, b)" + (" (max over degrees)" if degree is None else f" (degree {degree})")
        fig.colorbar(mesh, ax=ax, label=label, shrink=0.9)
        ax.set_xlim(a.min(), a.max())
        ax.set_ylim(b.min(), b.max())
        n_bad = int((~np.isfinite(h)).sum())
        if n_bad:
            title += f"; {plural(n_bad, 'non-finite cell')} left blank"
    else:
        title += " (no landscape stored)"
        if window:
            ax.set_xlim(*nums(window.get("a", [0, 1]))[:2])
            ax.set_ylim(*nums(window.get("b", [0, 1]))[:2])
    handles: list[Any] = []
    over = "white" if land else "0.25"
    if geojson:
        _draw_special(ax, _features(None, geojson), thin=True, mono=over)
        handles.append(Line2D([], [], color=over, lw=0.8, label="special set"))
    at = distance.get("at")
    if at is not None and len(at) >= 2:
        value = distance.get("value")
        if degree is not None:
            bd = (distance.get("by_degree") or {}).get(str(degree)) or {}
            at, value = bd.get("at", at), bd.get("value", value)
        ax.plot([num(at[0])], [num(at[1])], "*", ms=16, color="#ff3b3b", mec="black", mew=0.8, zorder=6)
        handles.append(Line2D([], [], marker="*", ls="", ms=12, color="#ff3b3b", mec="black",
                              label=f"maximum {fmt(value)} at (a, b) = ({fmt(at[0], 3)}, {fmt(at[1], 3)})"))
    ax.axvline(0.5, color="0.85", ls=":", lw=0.8)
    ax.set_xlabel("a")
    ax.set_ylabel("b")
    ax.set_title(title, fontsize=10)
    if handles:
        leg = ax.legend(handles=handles, fontsize=LEGEND_SIZE, loc="upper center", bbox_to_anchor=(0.5, -0.12),
                        ncol=2, frameon=True, facecolor="0.55" if land else "white")
        for t in leg.get_texts():
            t.set_color("white" if land else "black")
    return fig


# -- perturbations ------------------------------------------------------------
def _hist(ax: Any, values: np.ndarray, xlabel: str, base: float | None = None) -> None:
    finite = values[np.isfinite(values)]
    n_bad = len(values) - len(finite)
    notes = [f"{n_bad} non-finite omitted"] if n_bad else []
    if len(finite):
        bins = min(30, max(5, int(np.sqrt(len(finite)))))
        ax.hist(finite, bins=bins, color="#4a7fb5", edgecolor="white")
        if np.ptp(finite) == 0:
            notes.append(f"all {len(finite)} values are {fmt(finite[0], 3)}")
    else:
        ax.text(0.5, 0.5, "no finite values recorded" if len(values) else "no run records", ha="center",
                va="center", transform=ax.transAxes, fontsize=9, bbox={"fc": "white", "ec": "none"}, zorder=5)
    if base is not None and math.isfinite(base):
        ax.axvline(base, color="#c0392b", ls="--", lw=1.2, label=f"unperturbed: {fmt(base, 3)}")
        ax.legend(fontsize=LEGEND_SIZE, loc="upper right")
    ax.set_xlabel(xlabel + (f"\n({'; '.join(notes)})" if notes else ""))
    ax.set_ylabel("runs")


def perturb_figure(summary: dict[str, Any], runs: list[dict[str, Any]], *,
                   fig: FigureBase | None = None) -> FigureBase:
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
    ax_haus = fig.add_subplot(gs[0, 1])
    area = nums([r.get("total_area") for r in runs])
    haus = nums([r.get("hausdorff") for r in runs])
    base = summary.get("base") or {}
    _hist(ax_area, area, "total patch area", num(base.get("total_area")))
    ax_area.set_title(f"Patch area over {plural(len(runs), 'run')}", fontsize=10)
    _hist(ax_haus, haus, "Hausdorff distance to the unperturbed set")
    ax_haus.set_title(f"Movement of the special set (size {fmt(summary.get('size'), 3)})", fontsize=10)
    if sweep:
        ax = fig.add_subplot(gs[1, :])
        size = nums([s.get("size") for s in sweep])
        n = nums([s.get("runs") for s in sweep])
        k = nums([s.get("runs_with_patch") for s in sweep])
        frac = np.where(n > 0, k / np.where(n > 0, n, 1), np.nan)
        ci = np.array([fraction_interval(s.get("runs_with_patch_ci95"), s.get("runs")) for s in sweep])
        lo = np.clip(frac - ci[:, 0], 0, None)
        hi = np.clip(ci[:, 1] - frac, 0, None)
        ok = np.isfinite(lo) & np.isfinite(hi)
        yerr = np.vstack([np.where(ok, lo, 0), np.where(ok, hi, 0)])
        order = np.argsort(size)
        ax.errorbar(size[order], frac[order], yerr=yerr[:, order], fmt="o-", color="#2e8b57", capsize=4,
                    label="runs with a patch (95% interval)")
        ax.set_xscale("log")
        ax.set_ylim(-0.05, 1.05)
        ax.set_xlabel("perturbation size")
        ax.set_ylabel("fraction of runs with a patch")
        ax.set_title("Size sweep", fontsize=10)
        ax.grid(alpha=0.3, which="both")
        ax.legend(fontsize=LEGEND_SIZE, loc="best")
    return fig
