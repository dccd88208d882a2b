"""Slice diagrams and their optimal matching on a few lines, computed when the explorer is written.

The result files hold no diagrams, so the explorer rebuilds f and g from the study file that
``study.json`` names (checked against the ``inputs`` fingerprint the run recorded, so a study
file edited since is refused, not silently shown) and evaluates a handful of lines: where D
and each D_k are reached, and where the dense sweep and the reduced search found their
maxima. Each line gets, per degree, both persistence diagrams of F*(a, b) (the slice
diagrams, :class:`specmap.slices.SliceEngine`) and an optimal bottleneck matching between
them [DFL10]: finite points through the threshold graph of :mod:`specmap.bottleneck` at the
exact bottleneck value, points at infinity in sorted order of births.

References
----------
.. [DFL10] d'Amico, Frosini, Landi, "Natural pseudo-distance and optimal matching between reduced
   size functions", Acta Appl. Math. 109 (2010): the matching cost, points at infinity.
.. [EH10] Edelsbrunner, Harer, "Computational Topology: An Introduction", AMS (2010), section
   VIII.4: the bipartite construction and the threshold graph.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_bipartite_matching

from specmap.bottleneck import cost_matrix, exact_bottleneck
from specmap.report.fmt import num, nums

MAX_LINES = 8
"""Most lines evaluated when the explorer is written (each costs one persistence per map)."""
SAME_LINE = 1e-9
"""Two recorded positions closer than this in a and b are one line."""


@dataclass(frozen=True)
class Pair:
    """One edge of a matching: indices into the two diagrams (None: the diagonal) and its cost.

    Attributes
    ----------
    f, g : int or None
        Row of the first / second diagram; ``None`` where the point is matched to the diagonal
        (or, for a point at infinity, left unmatched: cost ``inf``).
    cost : float
        L-infinity distance of the two points, half the persistence for a diagonal edge,
        |u - u'| for two points at infinity.
    """

    f: int | None
    g: int | None
    cost: float


def optimal_matching(d1: np.ndarray, d2: np.ndarray) -> tuple[float, list[Pair]]:
    """Bottleneck distance of two diagrams (points at infinity allowed) and a matching that reaches it.

    Parameters
    ----------
    d1, d2 : ndarray (n, 2), (m, 2)
        Rows (birth, death); a death of ``inf`` is a point at infinity.

    Returns
    -------
    value : float
        max over the pairs of their cost (``inf`` when the numbers of points at infinity differ).
    pairs : list of Pair
        Every point of both diagrams appears once.

    Examples
    --------
    >>> v, ps = optimal_matching(np.array([[0.0, np.inf], [0.0, 1.0]]), np.array([[0.25, np.inf]]))
    >>> v, [(p.f, p.g, p.cost) for p in ps]
    (0.5, [(0, 0, 0.25), (1, None, 0.5)])
    """
    d1 = np.asarray(d1, dtype=float).reshape(-1, 2)
    d2 = np.asarray(d2, dtype=float).reshape(-1, 2)
    inf1, inf2 = np.flatnonzero(np.isinf(d1[:, 1])), np.flatnonzero(np.isinf(d2[:, 1]))
    inf1, inf2 = inf1[np.argsort(d1[inf1, 0], kind="stable")], inf2[np.argsort(d2[inf2, 0], kind="stable")]
    pairs = [Pair(int(i), int(j), abs(float(d1[i, 0] - d2[j, 0]))) for i, j in zip(inf1, inf2, strict=False)]
    k = min(len(inf1), len(inf2))
    pairs += [Pair(int(i), None, math.inf) for i in inf1[k:]] + [
        Pair(None, int(j), math.inf) for j in inf2[k:]
    ]
    fin1, fin2 = np.flatnonzero(~np.isinf(d1[:, 1])), np.flatnonzero(~np.isinf(d2[:, 1]))
    n, m = len(fin1), len(fin2)
    if n or m:
        c = cost_matrix(d1[fin1], d2[fin2])
        t = exact_bottleneck(d1[fin1], d2[fin2])
        match = maximum_bipartite_matching(csr_matrix(c <= t), perm_type="column")
        for r, col in enumerate(match):
            if r < n and col < m:
                pairs.append(Pair(int(fin1[r]), int(fin2[col]), float(c[r, col])))
            elif r < n:
                pairs.append(Pair(int(fin1[r]), None, float(c[r, col])))
            elif col == r - n:  # d2's point r - n goes to the diagonal (its own diagonal copy)
                pairs.append(Pair(None, int(fin2[col]), float(c[r, col])))
    value = max((p.cost for p in pairs), default=0.0)
    return value, pairs


def _point(x: Any) -> tuple[float, float] | None:
    v = nums(x) if isinstance(x, (list, tuple)) else np.empty(0)
    if len(v) < 2 or not np.all(np.isfinite(v[:2])):
        return None
    return (float(v[0]), float(v[1]))


def recorded_lines(distance: dict[str, Any] | None) -> list[tuple[str, tuple[float, float]]]:
    """The lines distance.json names, labelled, duplicates merged (labels joined), at most MAX_LINES.

    Examples
    --------
    >>> recorded_lines({"at": [0.5, 0.1], "by_degree": {"0": {"at": [0.5, 0.1]}, "1": {"at": [0.3, 0.2]}}})
    [('D, D_0', (0.5, 0.1)), ('D_1', (0.3, 0.2))]
    """
    d = distance or {}
    named: list[tuple[str, Any]] = [("D", d.get("at"))]
    named += [(f"D_{k}", (v or {}).get("at")) for k, v in sorted((d.get("by_degree") or {}).items())]
    named += [("dense sweep max", (d.get("dense") or {}).get("at"))]
    named += [("reduced search max", (d.get("reduced") or {}).get("at"))]
    out: list[tuple[str, tuple[float, float]]] = []
    for label, at in named:
        p = _point(at)
        if p is None or not 0.0 < p[0] < 1.0:
            continue
        for i, (lab, q) in enumerate(out):
            if abs(p[0] - q[0]) <= SAME_LINE and abs(p[1] - q[1]) <= SAME_LINE:
                out[i] = (f"{lab}, {label}", q)
                break
        else:
            out.append((label, p))
    return out[:MAX_LINES]


def study_shapes(res: dict[str, Any]) -> tuple[Any, Any] | str:
    """f and g rebuilt from the study file study.json names, or the reason they cannot be.

    The rebuilt inputs must give the ``inputs`` fingerprint recorded in study.json (or, for a
    folder written before fingerprints, the same f and g settings), else the reason says so.
    """
    st = res.get("study") or {}
    path = st.get("study_file")
    if not path or not Path(str(path)).is_file():
        return f"the study file {path or '(not recorded)'} named in study.json is not found"
    from specmap.errors import SpecmapInputError
    from specmap.fingerprint import inputs_part
    from specmap.pipeline import StudyRun
    from specmap.study import load_study

    try:
        study = load_study(path)
        recorded = (st.get("fingerprint_parts") or {}).get("inputs")
        if recorded is not None and recorded != inputs_part(study):
            return (
                f"the study file {path} or its input files changed since the run (inputs fingerprint differs)"
            )
        if recorded is None and (study.f.to_json() != st.get("f") or study.g.to_json() != st.get("g")):
            return f"the study file {path} no longer gives the f and g of this run"
        shapes = StudyRun(study, show_progress=False).shapes
    except SpecmapInputError as exc:
        return f"the study cannot be rebuilt ({str(exc).splitlines()[0]})"
    if shapes[0] is None or shapes[1] is None:
        return "f or g is given as a grid file, which has no mesh"
    return shapes


def _diagram_json(d: np.ndarray) -> list[list[float | None]]:
    return [
        [float(b), None if math.isinf(x) else float(x)] for b, x in np.asarray(d, dtype=float).reshape(-1, 2)
    ]


def line_panels(
    shape_f: Any, shape_g: Any, lines: list[tuple[str, tuple[float, float]]], degrees: list[int]
) -> list[dict[str, Any]]:
    """Slice diagrams and an optimal matching per degree on each line (see the module text).

    Returns
    -------
    list of dict
        ``{"label", "a", "b", "degrees": {k: {"f": [[birth, death|None]], "g": [...], "h": float|None,
        "pairs": [[i|None, j|None, cost|None]], "worst": int|None}}}``; ``None`` for ``inf``.
    """
    from specmap.slices import SliceEngine

    eng_f, eng_g = SliceEngine.from_shape(shape_f), SliceEngine.from_shape(shape_g)
    out = []
    for label, (a, b) in lines:
        df, dg = eng_f.diagrams(a, b, degrees), eng_g.diagrams(a, b, degrees)
        per: dict[str, Any] = {}
        for k in degrees:
            h, pairs = optimal_matching(df[k], dg[k])
            costs = [p.cost for p in pairs]
            per[str(k)] = {
                "f": _diagram_json(df[k]),
                "g": _diagram_json(dg[k]),
                "h": h if math.isfinite(h) else None,
                "pairs": [[p.f, p.g, p.cost if math.isfinite(p.cost) else None] for p in pairs],
                "worst": int(np.argmax(costs)) if costs else None,
            }
        out.append({"label": label, "a": float(a), "b": float(b), "degrees": per})
    return out


def _same(v: Any, panel: dict[str, Any]) -> bool:
    q = _point((v or {}).get("at"))
    return q is not None and abs(q[0] - panel["a"]) <= SAME_LINE and abs(q[1] - panel["b"]) <= SAME_LINE


def explorer_lines(res: dict[str, Any]) -> dict[str, Any]:
    """``{"lines": [...] or None, "why_not": str or None, "recorded": {label: h}}`` for the page."""
    d = res.get("distance")
    if d is None:
        st = res.get("study") or {}
        grids = [s for s in ("f", "g") if (st.get(s) or {}).get("source") == "grid"]
        if grids:  # `specmap distance` refuses such a study: a grid file has no mesh to slice
            return {
                "lines": None,
                "why_not": f"no distance.json in this folder, and none can be computed: "
                f"{' and '.join(grids)} {'is a grid file' if len(grids) == 1 else 'are grid files'}, "
                "which have no mesh to take slice diagrams of",
            }
        return {"lines": None, "why_not": "no distance.json in this folder (run specmap distance)"}
    lines = recorded_lines(d)
    if not lines:
        return {"lines": None, "why_not": "distance.json records no line (run specmap distance)"}
    shapes = study_shapes(res)
    if isinstance(shapes, str):
        return {"lines": None, "why_not": shapes}
    degrees = sorted({int(k) for k in ((d or {}).get("by_degree") or {}) if str(k).isdigit()}) or [0, 1, 2]
    panels = line_panels(shapes[0], shapes[1], lines, degrees)
    by = (d or {}).get("by_degree") or {}
    for p in panels:  # what distance.json says at the lines it names, to compare with
        p["recorded"] = {str(k): num((v or {}).get("value")) for k, v in by.items() if _same(v, p)}
    return {"lines": panels, "why_not": None}
