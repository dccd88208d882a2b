"""The explorer's data: the result files of a folder, thinned and labelled for the page.

Everything comes from the result files (grid_f.json, grid_g.json, special.json,
special.geojson, distance.json); nothing is recomputed except which tie each curve
belongs to (:func:`specmap.report.ties.index_ties`, evaluated from the grid files) and the
slice diagrams with their optimal matching on the few lines distance.json names
(:mod:`specmap.explore.lines`, from the meshes the study file rebuilds).
Polylines are thinned to a point budget so that the page stays small and fast; the
thinning keeps end points and takes every k-th vertex.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from specmap.explore.lines import explorer_lines
from specmap.report.figures import distance_map_samples
from specmap.report.fmt import MAX_DIGITS, decimals_for, fmt_distance, num, nums
from specmap.report.summary import costs_band, costs_sentence, reason_sentence, tie_curve_count
from specmap.report.ties import TieIndex, family, index_ties

CURVE_POINTS = 120_000
"""Budget of curve vertices over the whole special set."""
CONTOUR_POINTS = 600
"""Most vertices kept per proper contour."""
PATCH_POINTS = 4_000
"""Most vertices kept per patch ring."""
DIGITS = 6
"""Significant digits written for coordinates."""
NO_SPECIAL = (
    "no special set in this folder: special.json is missing (the map was not run, or it was refused "
    'as too large, as on scanned meshes; simplify = "auto" on the meshes makes it smaller). '
    "The page shows the grids, h over the strip and the slice diagrams only"
)
"""What the page says when the folder has a distance but no special set."""


def _thin(xy: np.ndarray, most: int) -> np.ndarray:
    """Every k-th vertex (ends kept) so that at most ``most`` remain."""
    if len(xy) <= most or most < 2:
        return xy
    idx = np.unique(np.concatenate([np.linspace(0, len(xy) - 1, most).round().astype(int), [len(xy) - 1]]))
    return xy[idx]


def _round(x: Any) -> Any:
    """Plain floats with DIGITS significant digits (None for non-finite values)."""
    arr = np.asarray(x, dtype=float)
    out = np.where(np.isfinite(arr), arr, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        mag = np.where(out != 0, np.floor(np.log10(np.abs(out))), 0)
    dec = np.clip(DIGITS - 1 - np.nan_to_num(mag), 0, 15).astype(int)
    flat = [
        None if not math.isfinite(v) else round(float(v), int(d))
        for v, d in zip(out.ravel(), dec.ravel(), strict=True)
    ]
    return np.array(flat, dtype=object).reshape(arr.shape).tolist()


def _grid(grid: dict[str, Any] | None) -> list[dict[str, Any]]:
    out = []
    for c in (grid or {}).get("contours", []):
        kind = c.get("kind")
        if kind == "proper":
            pts = nums(c.get("points", [])).reshape(-1, 2)
            out.append({"id": str(c.get("id")), "kind": kind, "points": _round(_thin(pts, CONTOUR_POINTS))})
        elif kind in ("vertical", "horizontal"):
            out.append({"id": str(c.get("id")), "kind": kind, "start": _round(nums(c.get("start"))[:2])})
    return out


def _tie_json(t: dict[str, Any]) -> dict[str, Any]:
    return {
        "pairs": [[str(x) for x in p] for p in t.get("pairs") or []],
        "condition": t.get("condition"),
        "family": family(t),
    }


def explorer_data(
    res: dict[str, Any], index: TieIndex | None = None, *, lines: bool = True
) -> dict[str, Any]:
    """The JSON payload of the explorer page.

    Parameters
    ----------
    res : dict
        :func:`specmap.report.load.load_results` of a result folder.
    index : TieIndex, optional
        A precomputed :func:`specmap.report.ties.index_ties`.
    lines : bool
        Compute slice diagrams and their optimal matching on the lines distance.json names
        (:func:`specmap.explore.lines.explorer_lines`; rebuilds f and g from the study file).

    Returns
    -------
    dict
        ``study``, ``window``, ``grids`` {f, g: contours}, ``components`` (id, kind, area,
        ties, patch_ties), ``patches`` (component, ring, ties), ``curves`` (component,
        family, ties, xy: the tie curves drawn, coincident ones merged), ``tie_curves`` (the
        count of special.json, :func:`specmap.report.summary.tie_curve_count`), ``families``, ``distance`` (value, at, reached_on, tolerance,
        by_degree, samples {a, b, h, by_degree} or None), ``tolerance`` (special set), ``lines``
        ({lines: [...] or None, why_not}), ``special_missing`` (a sentence when the folder has no
        ``special.json``, else None).
    """
    sp = res.get("special") or {}
    st = res.get("study") or {}
    win = sp.get("window") or st.get("window") or {"a": [0.02, 0.98], "b": [-1.0, 1.0]}
    ix = (
        index
        if index is not None
        else index_ties(sp, res.get("geojson"), res.get("grid_f"), res.get("grid_g"))
    )
    comps = []
    for c in sp.get("components") or []:
        cid = str(c.get("id"))
        comps.append(
            {
                "id": cid,
                "kind": c.get("kind"),
                "area": num(c.get("area")),
                "ties": [_tie_json(t) for t in c.get("ties") or [] if isinstance(t, dict)],
                "patch_ties": ix.patch_ties.get(cid, []),
                "why": (reason_sentence({"components": [c]}) or "")
                .partition(": ")[2]
                .replace("it is explained", "explained", 1)
                or None,
            }
        )
    patches = []
    for cid, polys in ix.polygons.items():
        per = ix.polygon_ties.get(cid, [[] for _ in polys])
        for poly, ties in zip(polys, per, strict=False):
            ring = _thin(np.asarray(poly.exterior.coords)[:, :2], PATCH_POINTS)
            patches.append({"component": cid, "ring": _round(ring), "ties": ties})
    total = sum(len(c.xy) for c in ix.curves) or 1
    keep = max(2, int(CURVE_POINTS * 1.0 / max(len(ix.curves), 1))) if total > CURVE_POINTS else None
    curves = [
        {
            "component": c.component,
            "family": c.family,
            "ties": list(c.ties),
            "xy": _round(_thin(c.xy, keep) if keep else c.xy),
        }
        for c in ix.curves
    ]
    fams: dict[str, int] = {}
    for c in ix.curves:
        fams[c.family] = fams.get(c.family, 0) + 1
    d = res.get("distance")
    dist = None
    if d:
        samples = distance_map_samples(d)
        dist = {
            "value": num(d.get("value")),
            "at": _round(nums(d.get("at"))[:2]) if d.get("at") else None,
            "reached_on": d.get("reached_on"),
            "tolerance": num(d.get("tolerance")),
            # the report's rule (report/fmt.py): D and D_k as printed there, and the decimals of
            # what the page computes (h on a line: the tolerance; interpolated h: the dense error bound)
            "text": fmt_distance(d),
            "decimals": decimals_for(d.get("tolerance")),
            "map_decimals": decimals_for((d.get("dense") or {}).get("error_bound"))
            if decimals_for((d.get("dense") or {}).get("error_bound")) is not None
            else decimals_for(d.get("tolerance")),
            "max_digits": MAX_DIGITS,
            "by_degree": {
                str(k): {
                    "value": num((v or {}).get("value")),
                    "at": _round(nums((v or {}).get("at"))[:2]) if (v or {}).get("at") else None,
                    "text": fmt_distance(d, k),
                }
                for k, v in (d.get("by_degree") or {}).items()
            },
            "samples": None,
        }
        if samples:
            dist["samples"] = {
                "a": _round(nums(samples.get("a"))),
                "b": _round(nums(samples.get("b"))),
                "h": _round(nums(samples.get("h"))),
                "by_degree": {str(k): _round(nums(v)) for k, v in (samples.get("by_degree") or {}).items()},
            }
    return {
        "study": str(st.get("name", "")),
        "window": {"a": _round(nums(win.get("a"))[:2]), "b": _round(nums(win.get("b"))[:2])},
        "tolerance": num(sp.get("tolerance")),
        "grids": {"f": _grid(res.get("grid_f")), "g": _grid(res.get("grid_g"))},
        "components": comps,
        "patches": patches,
        "curves": curves,
        "tie_curves": tie_curve_count(sp),
        "families": sorted(fams, key=lambda k: -fams[k]),
        "labelled": ix.labelled,
        "distance": dist,
        "lines": explorer_lines(res) if lines else {"lines": None, "why_not": "not computed (lines=False)"},
        "special_missing": None if res.get("special") is not None else NO_SPECIAL,
        # a map restricted to a band of tied costs ([map] costs): the band and the report's sentence
        "costs_band": list(costs_band(sp) or []) or None,
        "costs_note": costs_sentence(sp),
    }
