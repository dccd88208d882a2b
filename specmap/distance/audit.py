"""Audits of a distance result: the dense sweep against the reduced search, diagram points against the grid."""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np

from specmap.distance.result import DenseSweep, point_json
from specmap.slices import SliceEngine
from specmap.strip import Window, line_parameter, push_scale


def _line(at) -> list[float] | None:
    return point_json(at) if all(math.isfinite(x) for x in at) else None


def theorem_audit(
    dense: DenseSweep | None,
    by_degree: dict[int, dict[str, Any]],
    degrees: Sequence[int],
    tolerance: float,
    *,
    upper: float,
) -> dict[str, Any]:
    """The reduced search against two independent checks, both ways, per degree [EFQT23, FMQT].

    For each degree k with reduced value R_k:

    (a) ``reduced_above_upper``: R_k > U_k + tol, U_k the smallest *rigorous* upper bound
        (the a-priori ``upper`` of :func:`~specmap.distance.bounds.distance_upper_bound`,
        and the dense sweep's node max plus cell error bound when it ran). R_k is a value
        of h_k, so this flags an evaluation or bound error;
    (b) ``dense_above_reduced``: the dense sweep's best D^dense_k > R_k + tol: the
        reduced search missed a larger value (the theorem's hypotheses fail on the
        grids, or a search stopped early). Not run (None) without a dense sweep.
    (c) ``strip_above_reduced``: the whole-strip branch and bound
        (:mod:`specmap.distance.branch`, ``by_degree[k]["strip"]``) found h_k > R_k + tol; its
        certified bound also enters U_k in (a). Not run (None) where that search did not run.

    The two computations share the evaluator's memo, not their decisions (the
    reduced search takes only its own lines as its values).

    Returns
    -------
    dict
        ``theorem_gap`` (any flag; None when neither (b) nor (c) ran), ``gap`` (largest
        D^dense_k - R_k), ``degree``, ``line`` (where the worst flag, else the
        largest gap, happens), and ``theorem`` with ``reduced_above_upper``,
        ``dense_above_reduced``, ``strip_above_reduced`` and ``by_degree[k]`` (the differences
        ``reduced_minus_upper``, ``dense_minus_reduced``, ``strip_minus_reduced``, the flags, the line).

    Warns
    -----
    UserWarning
        For each flag.
    """
    rows: dict[str, dict[str, Any]] = {}
    flags: list[tuple[float, str, int, Any]] = []
    gaps: list[tuple[float, int, Any]] = []
    for j, k in enumerate(degrees):
        r, r_at = by_degree[k]["value"], by_degree[k]["at"]
        u = min(upper, dense.upper(j)) if dense is not None else upper
        strip = by_degree[k].get("strip")
        if strip is not None:
            u = min(u, strip["bounds"][1])
        row: dict[str, Any] = {
            "reduced_minus_upper": None,
            "reduced_above_upper": None,
            "dense_minus_reduced": None,
            "dense_above_reduced": None,
            "strip_minus_reduced": None,
            "strip_above_reduced": None,
            "line": None,
        }
        if strip is not None and math.isfinite(r):
            diff = float(strip["bounds"][0] - r)
            row["strip_minus_reduced"] = diff
            row["strip_above_reduced"] = bool(diff > tolerance)
            if diff > tolerance:
                flags.append((diff, "the whole-strip search exceeds the reported value", k, strip["best_at"]))
                row["line"] = _line(strip["best_at"])
        if math.isfinite(r) and math.isfinite(u):
            row["reduced_minus_upper"] = float(r - u)
            row["reduced_above_upper"] = bool(r - u > tolerance)
            if row["reduced_above_upper"]:
                flags.append((r - u, "reduced above the certified upper bound", k, r_at))
                row["line"] = _line(r_at)
        elif math.isfinite(r) or math.isfinite(u):
            row["reduced_above_upper"] = bool(r > u)  # inf against a finite bound: a contradiction
        if dense is not None:
            d, d_at = dense.best[j]
            with np.errstate(invalid="ignore"):
                diff = float(d - r) if not (math.isinf(d) and math.isinf(r)) else 0.0
            if not math.isnan(diff):
                row["dense_minus_reduced"] = diff
                row["dense_above_reduced"] = bool(diff > tolerance)
                gaps.append((diff, k, d_at))
                if diff > tolerance:
                    flags.append((diff, "dense sweep exceeds the reduced search", k, d_at))
                    row["line"] = _line(d_at)
        rows[str(k)] = row
    above = [r["reduced_above_upper"] for r in rows.values() if r["reduced_above_upper"] is not None]
    below = [r["dense_above_reduced"] for r in rows.values() if r["dense_above_reduced"] is not None]
    strip_rows = [r["strip_above_reduced"] for r in rows.values() if r["strip_above_reduced"] is not None]
    out: dict[str, Any] = {
        "theorem_gap": None,
        "gap": None,
        "degree": None,
        "line": None,
        "theorem": {
            "reduced_above_upper": any(above) if above else None,
            "dense_above_reduced": any(below) if below else None,
            "strip_above_reduced": any(strip_rows) if strip_rows else None,
            "by_degree": rows,
        },
    }
    if gaps:
        gap, k, at = max(gaps, key=lambda g: g[0])
        out.update(gap=float(gap), degree=k, line=_line(at))
    if dense is not None or strip_rows or flags:  # a check ran: (b) or (c)
        out["theorem_gap"] = bool(flags)
    if flags:
        size, what, k, at = max(flags, key=lambda f: f[0])
        out.update(degree=k, line=_line(at))
        for size, what, k, at in flags:
            # stacklevel 3: the caller of matching_distance
            warnings.warn(
                f"{what} by {size:.4g} > tolerance {tolerance:.3g} in degree {k} at (a, b) = "
                f"({at[0]:.4g}, {at[1]:.4g})",
                stacklevel=3,
            )
    return out


def coordinate_slack(values: np.ndarray, edges: np.ndarray, coords: np.ndarray) -> np.ndarray:
    """Per diagram coordinate: the largest change of F* along a mesh edge at a vertex carrying it.

    In a lower-star filtration every finite coordinate is the value F*(v) of a vertex v
    [standard PL persistence]; the grid of the smooth (or exact) map meets the line within one
    mesh edge of v, where F* changes by at most max over the edges uv of |F*(u) - F*(v)|
    (F* is linear on each edge of the PL map). That change, taken at the vertices whose value is
    the coordinate (ties included), is the mesh term of the position tolerance (value units).

    Parameters
    ----------
    values : ndarray (n,)
        F* at the vertices of one line.
    edges : ndarray (E, 2)
        Mesh edges (:func:`specmap.meshtable.mesh_edges`).
    coords : ndarray (m,)
        Finite coordinates of the line's diagrams.
    """
    d = np.abs(values[edges[:, 0]] - values[edges[:, 1]])
    per_vertex = np.zeros(len(values))
    np.maximum.at(per_vertex, edges[:, 0], d)
    np.maximum.at(per_vertex, edges[:, 1], d)
    order = np.argsort(values)
    sv, sp = values[order], per_vertex[order]
    scale = 1e-12 * max(1.0, float(np.abs(sv).max(initial=0.0)))
    lo = np.searchsorted(sv, coords - scale, side="left")
    hi = np.searchsorted(sv, coords + scale, side="right")
    run = np.maximum.accumulate(sp)  # fallback: a coordinate not found (should not happen)
    out = np.empty(len(coords))
    for i, (a, b) in enumerate(zip(lo, hi, strict=True)):
        out[i] = sp[a:b].max() if b > a else run[-1]
    return out


def significant_coordinates(diagrams: dict[int, np.ndarray], delta: float) -> tuple[np.ndarray, int]:
    """The finite coordinates the position theorem speaks for, and the count of those left out.

    The slices are lower-star filtrations of the vertex values of F*; the grid is that of the
    map whose F* is max of the interpolated pair, and the two differ by at most ``delta``, the
    largest change of F* along a mesh edge. By bottleneck stability [CDFFL13] a pair of
    persistence above 2 ``delta`` is matched within ``delta`` to a pair of that map, where the
    theorem holds; a shorter one may be interpolation noise along the crease (no contour explains
    it: :mod:`specmap.grids.piecewise`). So the coordinates of finite pairs of persistence at most
    2 ``delta`` are left out (counted), and the births of essential classes always kept;
    ``delta`` = 0 keeps everything.

    References
    ----------
    .. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in multidimensional
       persistent homology are stable functions", Math. Methods Appl. Sci. 36 (2013).
    """
    keep: list[np.ndarray] = []
    short = 0
    for dgm in diagrams.values():
        dgm = np.asarray(dgm, dtype=float).reshape(-1, 2)
        finite = np.isfinite(dgm[:, 1])
        noise = finite & (dgm[:, 1] - dgm[:, 0] <= 2.0 * delta) if delta > 0 else np.zeros(len(dgm), bool)
        short += 2 * int(noise.sum())
        kept = dgm[~noise]
        keep.append(kept.ravel())
    coords = np.concatenate(keep) if keep else np.zeros(0)
    return coords[np.isfinite(coords)], short


def position_audit(
    shape_f,
    shape_g,
    grids,
    window: Window,
    *,
    tolerance: float,
    lines: int = 20,
    seed: int = 0,
    mesh_aware: bool = True,
    worst: int = 5,
) -> dict[str, Any]:
    """How many finite diagram coordinates sit at push coordinates of the grid [CEF19].

    For ``lines`` lines drawn uniformly in the window (fixed seed), every finite
    coordinate (birth, finite death) of Dgm_k F*_f is compared with the push
    coordinates min(a, 1-a) s of the contours of Γ(f) met by the line (the same
    for g); the deviation is the distance to the nearest one. A coordinate is
    explained when its deviation is at most ``tolerance`` + the grid's tolerance +
    (with ``mesh_aware``) the mesh term of :func:`coordinate_slack`: the position theorem
    holds for the smooth map, the slices are of its PL interpolation (issue 13 item 2).

    Returns
    -------
    dict ``{"fraction_explained", "max_deviation", "lines", "coordinates", "tolerance",
    "mesh_aware", "short_pair_coordinates", "max_excess", "worst"}`` (``short_pair_coordinates``:
    coordinates of pairs within the interpolation noise, :func:`significant_coordinates`, not
    checked); ``worst`` lists the coordinates furthest beyond their
    tolerance (``{"map", "a", "b", "coordinate", "deviation", "allowed"}``).

    References
    ----------
    .. [CEF19] Cerri, Ethier, Frosini, J. Appl. Comput. Topol. 3 (2019): position
       of diagram points on the extended Pareto grid.
    """
    from specmap.meshtable import mesh_edges

    rng = np.random.default_rng(seed)
    A = rng.uniform(*window.a, lines)
    B = rng.uniform(*window.b, lines)
    devs: list[float] = []
    allowed: list[float] = []
    short = 0
    where: list[tuple[str, float, float, float]] = []
    for name, shape, grid in zip(("f", "g"), (shape_f, shape_g), grids, strict=True):
        eng = SliceEngine.from_shape(shape)
        edges = mesh_edges(np.asarray(shape.triangles))
        base = float(tolerance) + float(getattr(grid, "tolerance", 0.0) or 0.0)
        for a, b in zip(A, B, strict=True):
            push = np.array([line_parameter(c, a, b) for c in grid.contours], dtype=float) * float(
                push_scale(a)
            )
            push = push[np.isfinite(push)]
            d = eng.diagrams(a, b)
            values = eng.filtration_values(a, b)
            delta = float(np.abs(values[edges[:, 0]] - values[edges[:, 1]]).max()) if len(edges) else 0.0
            coords, n_short = significant_coordinates(d, delta if mesh_aware else 0.0)
            short += n_short
            if not len(coords):
                continue
            slack = coordinate_slack(values, edges, coords) if mesh_aware else 0.0
            allowed.extend((base + np.zeros(len(coords)) + slack).tolist())
            where.extend((name, float(a), float(b), float(x)) for x in coords)
            if not len(push):
                devs.extend([math.inf] * len(coords))
                continue
            devs.extend(np.abs(coords[:, None] - push[None, :]).min(axis=1).tolist())
    devs_a = np.asarray(devs, dtype=float)
    allow_a = np.asarray(allowed, dtype=float)
    excess = devs_a - allow_a
    top = np.argsort(-excess)[:worst] if len(excess) else np.array([], int)
    return {
        "fraction_explained": float(np.mean(excess <= 0)) if len(devs_a) else 1.0,
        "max_deviation": float(devs_a.max()) if len(devs_a) else 0.0,
        "lines": int(lines),
        "coordinates": int(len(devs_a)),
        "tolerance": float(tolerance),
        "mesh_aware": bool(mesh_aware),
        "short_pair_coordinates": int(short),
        "max_excess": float(excess.max()) if len(excess) else 0.0,
        "worst": [
            {
                "map": where[i][0],
                "a": where[i][1],
                "b": where[i][2],
                "coordinate": where[i][3],
                "deviation": float(devs_a[i]),
                "allowed": float(allow_a[i]),
            }
            for i in top
            if excess[i] > 0
        ],
    }
