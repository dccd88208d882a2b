"""Which tie each drawn curve of the special set belongs to, read back from the result files.

``special.geojson`` stores one geometry per connected component: the union of its tie
curves (a MultiLineString) and its patches, with the component's list of ties beside
it, but not which curve is which tie. The figures and the explorer need that, to draw
curves by family and to emphasise the ties that matter for the distance. It follows
from the grid files: at a vertex of a curve, the tie that holds is the one whose
residual |c_P| - k |c_Q| vanishes there (:func:`specmap.special.evaluate.residual_from_slots`).
Ties that hold identically on a patch of the component vanish everywhere in it, so
they are found first (at points inside the patch) and not used to label curves.

A tie's *family* is its condition and where its four contours come from, e.g.
``"equal fg=fg"`` (two cross pairs) or ``"half ff=2fg"`` (a same-grid difference twice a
cross difference): the families differ in what cost they tie (math.md section 5).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023): special values.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from shapely.geometry import Point
from shapely.geometry import shape as _geo_shape
from shapely.geometry.base import BaseGeometry as _Base

from specmap.grids.model import Contour, grid_from_json
from specmap.special.evaluate import SlotEvaluator, residual_from_slots, sample_contours
from specmap.special.pairs import grid_of

CHUNK = 2_000_000
"""Largest ties x points block evaluated at once."""
PATCH_SAMPLES = 40
"""Points inside a patch used to find the ties that hold identically on it."""
PATCH_HOLDS = 0.1
"""Fraction of those points where a tie must hold to count as holding on the patch (a patch can be
the union of the regions of several ties; a tie that holds on curves only holds at almost no random
point)."""


def geo_shape(geom: Any) -> Any:
    """A GeoJSON geometry as shapely; a shapely geometry as it is (:meth:`Atlas.shape_features`)."""
    return geom if isinstance(geom, _Base) else _geo_shape(geom)


def family(tie: dict[str, Any]) -> str:
    """The family of a tie: condition and the grids of its two pairs.

    Examples
    --------
    >>> family({"pairs": [["f:v0", "g:v1"], ["f:h0", "f:h1"]], "condition": "equal"})
    'equal ff=fg'
    >>> family({"pairs": [["f:v0", "f:v1"], ["f:h0", "g:h1"]], "condition": "half"})
    'half ff=2fg'
    """
    tags = []
    for pair in tie.get("pairs") or []:
        g = sorted(str(grid_of(str(c)) or "?") for c in pair)
        tags.append("".join(g))
    if len(tags) != 2:
        return "unknown"
    if tie.get("condition") == "half":
        return f"half {tags[0]}=2{tags[1]}"
    return f"equal {'='.join(sorted(tags))}"


@dataclass(frozen=True)
class Curve:
    """One drawn tie curve of a component.

    Attributes
    ----------
    component : str
    xy : ndarray (n, 2)
        Vertices in (a, b).
    ties : tuple of int
        Indices into the component's ``ties`` that hold on it (empty: none found).
    family : str
        Family of the first of them (``"unknown"`` without grids).
    tied_value : ndarray (n,)
        Tied value (push units) of that tie at each vertex; NaN when not known.
    """

    component: str
    xy: np.ndarray
    ties: tuple[int, ...]
    family: str
    tied_value: np.ndarray


@dataclass(frozen=True)
class TieIndex:
    """Curves of every component labelled by tie, and the ties that hold on patches.

    Attributes
    ----------
    curves : list of Curve
    patch_ties : dict
        Component id -> indices of its ties that hold identically on its patches.
    polygon_ties : dict
        Component id -> for each of its patch polygons, the indices of the ties holding on it.
    points : dict
        Component id -> (n, 2) isolated points (components of kind ``point`` only).
    polygons : dict
        Component id -> list of shapely polygons (patches).
    labelled : bool
        Whether grids were available to label the curves.
    """

    curves: list[Curve]
    patch_ties: dict[str, list[int]]
    polygon_ties: dict[str, list[list[int]]]
    points: dict[str, np.ndarray]
    polygons: dict[str, list[Any]]
    labelled: bool


def _contours(grid_f: dict[str, Any] | None, grid_g: dict[str, Any] | None) -> dict[str, Contour] | None:
    if not grid_f or not grid_g:
        return None
    try:
        grids = [grid_from_json(grid_f), grid_from_json(grid_g)]
    except Exception:  # a grid the report can draw but not rebuild: curves stay unlabelled
        return None
    return {c.id: c for g in grids for c in g.contours}


def _leaves(geom: Any) -> list[Any]:
    if geom is None or geom.is_empty:
        return []
    if hasattr(geom, "geoms"):
        return [x for g in geom.geoms for x in _leaves(g)]
    return [geom]


def _setup(
    ties: list[dict[str, Any]], contours: dict[str, Contour]
) -> tuple[list[Contour], np.ndarray, np.ndarray]:
    """The contours a list of ties uses, each tie's four slots into them, and its factor (1 or 2)."""
    ids = sorted({c for t in ties for pair in t["pairs"] for c in pair})
    col = {c: i for i, c in enumerate(ids)}
    slots = np.array([[col[c] for pair in t["pairs"] for c in pair] for t in ties], dtype=np.int64).reshape(
        -1, 4
    )
    factor = np.array([2.0 if t.get("condition") == "half" else 1.0 for t in ties])
    return [contours[c] for c in ids], slots, factor


def _evaluate(
    ties: list[dict[str, Any]], contours: dict[str, Contour], a: np.ndarray, b: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Residuals and tied values of every tie at every point, shape (len(ties), len(a)); NaN where not met."""
    if not ties or len(a) == 0:
        return np.full((len(ties), len(a)), np.nan), np.full((len(ties), len(a)), np.nan)
    used, slots, factor = _setup(ties, contours)
    s, met = sample_contours(used, a, b)
    res = np.empty((len(ties), len(a)))
    val = np.empty_like(res)
    step = max(1, CHUNK // max(len(a), 1))
    for t0 in range(0, len(ties), step):
        sl = slots[t0 : t0 + step]
        r, v = residual_from_slots(s[sl], factor[t0 : t0 + step, None], a)  # s[sl]: (T, 4, N)
        ok = met[sl].all(axis=1)
        res[t0 : t0 + step] = np.where(ok, r, np.nan)
        val[t0 : t0 + step] = np.where(ok, v, np.nan)
    return res, val


def _best_ties(
    ties: list[dict[str, Any]], contours: dict[str, Contour], a: np.ndarray, b: np.ndarray, tol: float
) -> tuple[np.ndarray, list[list[int]]]:
    """At each point: the tie of least |residual| (-1 if none is met) and all ties with |residual| <= tol."""
    best = np.full(len(a), -1, dtype=np.int64)
    low = np.full(len(a), np.inf)
    within: list[list[int]] = [[] for _ in range(len(a))]
    if not ties or len(a) == 0:
        return best, within
    used, slots, factor = _setup(ties, contours)
    s, met = sample_contours(used, a, b)
    step = max(1, CHUNK // max(len(a), 1))
    for t0 in range(0, len(ties), step):
        sl = slots[t0 : t0 + step]
        r, _ = residual_from_slots(s[sl], factor[t0 : t0 + step, None], a)
        r = np.where(met[sl].all(axis=1), np.abs(r), np.inf)
        arg = np.argmin(r, axis=0)
        m = r[arg, np.arange(len(a))]
        better = m < low
        best[better], low[better] = arg[better] + t0, m[better]
        for t, j in zip(*np.nonzero(r <= tol), strict=True):
            within[j].append(int(t + t0))
    return best, within


def _vertex_values(
    ties: list[dict[str, Any]], contours: dict[str, Contour], which: np.ndarray, a: np.ndarray, b: np.ndarray
) -> np.ndarray:
    """Tied value of tie ``which[k]`` at point k (one tie per point); NaN where not met or which < 0."""
    out = np.full(len(a), np.nan)
    sel = np.flatnonzero(which >= 0)
    if not len(sel):
        return out
    used, slots, factor = _setup(ties, contours)
    ev = SlotEvaluator(used, slots[which[sel]])
    s, met = ev(a[sel], b[sel])
    _, v = residual_from_slots(s, factor[which[sel]], a[sel])
    out[sel] = np.where(met.all(axis=1), v, np.nan)
    return out


def _inside_points(polys: list[Any], n: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    pts = [np.array(p.representative_point().coords[0]) for p in polys]
    for p in polys:
        a0, b0, a1, b1 = p.bounds
        cand = np.column_stack([rng.uniform(a0, a1, 4 * n), rng.uniform(b0, b1, 4 * n)])
        inside = [q for q in cand if p.contains(Point(q))]
        pts.extend(inside[: max(1, n // max(len(polys), 1))])
    return np.array(pts).reshape(-1, 2)


def index_ties(
    special: dict[str, Any] | None,
    geojson: dict[str, Any] | None,
    grid_f: dict[str, Any] | None = None,
    grid_g: dict[str, Any] | None = None,
    *,
    tolerance: float | None = None,
) -> TieIndex:
    """Label the curves of ``special.geojson`` by the tie that holds on them.

    Parameters
    ----------
    special, geojson : dict or None
        Parsed ``special.json`` and ``special.geojson``.
    grid_f, grid_g : dict or None
        Parsed grid files; without them curves are returned unlabelled.
    tolerance : float, optional
        Residual (push units) under which a tie holds at a curve vertex; default
        1000 times the special set's tolerance (curve vertices are refined roots, so
        their residual is far below it; chords in between are not used).

    Returns
    -------
    TieIndex
    """
    comps = {str(c.get("id")): c for c in (special or {}).get("components", [])}
    contours = _contours(grid_f, grid_g)
    tol = tolerance if tolerance is not None else 1e3 * float((special or {}).get("tolerance") or 1e-9)
    curves: list[Curve] = []
    patch_ties: dict[str, list[int]] = {}
    polygon_ties: dict[str, list[list[int]]] = {}
    points: dict[str, np.ndarray] = {}
    polygons: dict[str, list[Any]] = {}
    for feat in (geojson or {}).get("features", []):
        props = feat.get("properties") or {}
        cid = str(props.get("id", feat.get("id")))
        comp = comps.get(cid, props)
        kind = str(comp.get("kind", props.get("kind", "curve")))
        ties = [t for t in (comp.get("ties") or props.get("ties") or []) if isinstance(t, dict)]
        geom = feat.get("geometry")
        leaves = _leaves(geo_shape(geom)) if geom else []
        polys = [g for g in leaves if g.geom_type == "Polygon"]
        lines = [np.asarray(g.coords)[:, :2] for g in leaves if g.geom_type in ("LineString", "LinearRing")]
        pts = [np.asarray(g.coords)[0, :2] for g in leaves if g.geom_type == "Point"]
        if polys:
            polygons[cid] = polys
        if pts and kind == "point":
            points[cid] = np.array(pts)
        usable = (
            contours is not None and ties and all(c in contours for t in ties for p in t["pairs"] for c in p)
        )
        if not usable:
            curves.extend(Curve(cid, xy, (), "unknown", np.full(len(xy), np.nan)) for xy in lines)
            continue
        skip = np.zeros(len(ties), dtype=bool)
        if polys:
            per_poly = []
            for k, poly in enumerate(polys):  # each part of a patch may carry its own ties
                inside = _inside_points([poly], PATCH_SAMPLES, seed=k)
                r, _ = _evaluate(ties, contours, inside[:, 0], inside[:, 1])
                with np.errstate(invalid="ignore"):
                    holds = np.mean(np.abs(r) <= tol, axis=1) >= PATCH_HOLDS
                per_poly.append([int(i) for i in np.flatnonzero(holds)])
                skip |= holds
            polygon_ties[cid] = per_poly
            patch_ties[cid] = [int(i) for i in np.flatnonzero(skip)]
        if not lines:
            continue
        live = np.flatnonzero(~skip)
        live_ties = [ties[i] for i in live]
        mids = np.array([xy[len(xy) // 2] for xy in lines])
        best, within = _best_ties(live_ties, contours, mids[:, 0], mids[:, 1], tol)
        # every vertex of every curve, evaluated for the curve's best tie only
        lens = np.array([len(xy) for xy in lines])
        allxy = np.concatenate(lines)
        tv = _vertex_values(live_ties, contours, np.repeat(best, lens), allxy[:, 0], allxy[:, 1])
        starts = np.concatenate([[0], np.cumsum(lens)])
        for j, xy in enumerate(lines):
            holding: tuple[int, ...] = ()
            if best[j] >= 0:  # the best first: its tied value is stored
                holding = (int(live[best[j]]), *(int(live[i]) for i in within[j] if i != best[j]))
            fam = family(ties[holding[0]]) if holding else "unknown"
            curves.append(Curve(cid, xy, holding, fam, tv[starts[j] : starts[j + 1]]))
    return TieIndex(curves, patch_ties, polygon_ties, points, polygons, contours is not None)
