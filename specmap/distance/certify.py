"""Per-degree certificates of a distance result: an interval [lower, upper] for D_k, and whether it is resolved.

Every degree is judged on its own (issue 13 item 1, issue 16 item 6):

- ``lower`` = the best h_k evaluated by any stage (a value of h_k at a line, so
  D_k >= lower for the meshed maps);
- ``upper`` = the smallest valid one of
  - the a-priori bound U of :func:`~specmap.distance.bounds.distance_upper_bound`
    (sup norm on one mesh, else value ranges; stability [CDFFL13], rigorous);
  - the dense sweep's node maximum plus its cell error bound
    (:func:`~specmap.distance.bounds.cell_error_bound`, rigorous);
  - the reduced search's bound max(B_k, R_g + tol): B_k the slope-one branch and
    bound's bound on a = 1/2, R_g + tol what the descending pass over the special
    candidates guarantees for the group g of degrees it bounded together (k alone with
    ``certify="each"``, the finite degrees with ``"max"``) (every candidate with tied cost above R_k + tol was evaluated
    or provably below its cost). This one rests on the main theorem [EFQT23, FMQT]
    applied to the computed grids; it is dropped when the dense sweep found a value
    above it by more than the tolerance (the theorem audit flags that case).

``certified`` is True when the slope-one search closed for this degree and the
reduced bound is valid, or when a rigorous upper bound lies within the tolerance of
``lower``; ``why_not`` then is None, else one sentence. An infinite D_k (different
numbers of essential classes: the Betti numbers of the two complexes differ) is exact.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from specmap.distance.result import DenseSweep, ReducedSearch

RESOLVED_FACTOR = 3.0
"""D_k counts as resolved when it is at least this multiple of the resolution floor (issue 13 item 3)."""


def _finite_or(x: float, default: float) -> float:
    return float(x) if not math.isnan(x) else default


def degree_certificate(
    j: int,
    value: float,
    dense: DenseSweep | None,
    red: ReducedSearch | None,
    *,
    tolerance: float,
    upper: float,
    upper_kind: str,
    max_lines: int | None = None,
) -> dict[str, Any]:
    """``{"bounds", "certified", "why_not", "upper_kind"}`` of degree index j.

    Parameters
    ----------
    j : int
        Degree index (position in the degrees of the run).
    value : float
        The reported D_k (value units).
    dense, red : DenseSweep, ReducedSearch or None
        The stages that ran.
    tolerance : float
        Value units; the width a certified interval may have.
    upper, upper_kind : float, str
        A-priori bound of :func:`~specmap.distance.bounds.distance_upper_bound`.
    max_lines : int, optional
        Line budget per degree of the slope-one search (for the sentence).

    Returns
    -------
    dict
    """
    if math.isinf(value) and value > 0:
        return {"bounds": [math.inf, math.inf], "certified": True, "why_not": None, "upper_kind": "exact"}
    lower = _finite_or(value, -math.inf)
    if dense is not None:
        lower = max(lower, _finite_or(dense.best[j][0], -math.inf))
    slack = tolerance * (1 + 1e-9) + 1e-15
    rigorous = [(float(upper), upper_kind)]
    if dense is not None:
        rigorous.append((dense.upper(j), "dense"))
    best_rig = min(rigorous, key=lambda u: u[0])
    why: str | None = None
    theorem: float | None = None
    if red is None:
        why = "no reduced search ran"
    elif red.slope_search is None:
        why = "the window leaves out the slope-one line a = 1/2, so the theorem's bound is not available"
    else:
        ss = red.slope_search
        group = next((g for g in red.groups if j in g), [j])
        r = max(max(red.slope[i].value, red.special[i].value) for i in group)
        theorem = max(float(ss.bound[j]), r + tolerance)
        open_groups = [red.groups[g] for g in (red.left or {}).get("groups", [])]
        left = red.left if group in open_groups else None
        if left is not None:  # the pass stopped at its budget: D <= the largest cost not refuted
            theorem = max(theorem, float(left["top"]))
        if lower > theorem + tolerance:
            a, b = dense.best[j][1] if dense is not None else (math.nan, math.nan)
            why = (
                f"the dense sweep found {lower:.4g} at (a, b) = ({a:.4g}, {b:.4g}), above the reduced "
                f"search's bound {theorem:.4g}: the theorem does not hold on these grids and meshes"
            )
            theorem = None
        elif not ss.certified_groups[j]:
            cap = f"its {max_lines}-line cap" if max_lines else "its line budget"
            why = (
                f"slope-one search stopped at {cap}: bound {ss.bound[j]:.4g} against best {ss.best[j]:.4g}; "
                "raise [distance] slope_max_lines to close it"
            )
        elif left is not None and theorem - lower > slack:
            why = (
                f"the special-set pass stopped at its {left['budget']}-line budget with "
                f"{left['candidates']} candidates left, tied costs up to {left['top']:.4g} not refuted "
                "([distance] special_max_lines)"
            )
        elif theorem - lower > slack:
            why = (
                f"the special-set pass bounds the maximum over degrees only ([distance] certify = "
                f'"{red.settings.certify}"), here by {theorem:.4g}; certify = "each" closes every degree'
            )
    ups = [u for u in rigorous if math.isfinite(u[0])]
    if theorem is not None and math.isfinite(theorem):
        ups.append((theorem, "slope-one+special"))
    up, kind = min(ups, key=lambda u: u[0]) if ups else (math.inf, "none")
    certified = (why is None) or (best_rig[0] - lower <= slack)
    if certified:
        why = None
        if best_rig[0] - lower <= slack and best_rig[0] <= up:
            up, kind = best_rig
    elif why is not None and dense is not None:
        why += (
            f"; the dense sweep bounds it by {dense.upper(j):.4g} only (cell error bound "
            f"{dense.error_bounds[j]:.3g})"
        )
    return {"bounds": [lower, up], "certified": bool(certified), "why_not": why, "upper_kind": kind}


def mesh_tolerance(shape) -> float:
    """Value resolution of a mesh: the largest umbrella deviation max_v ||v - mean of its neighbours||_inf.

    A piecewise-linear map on a mesh of a smooth surface differs from the smooth map
    by O(h^2) (chords against the surface, h the edge length); the umbrella operator
    v - mean(neighbours) measures that second-order term vertex by vertex (it is
    zero for a map linear on a flat patch). On every line F* changes with (v1, v2) by
    at most max(|Δv1|, |Δv2|) (t1, t2 in [0, 1] in its explicit form), so the same
    number bounds how much the slices move with it (value units).
    """
    T = np.asarray(shape.triangles)
    V = np.asarray(shape.values, float)
    if not len(T):
        return 0.0
    e = np.concatenate([T[:, [0, 1]], T[:, [1, 2]], T[:, [2, 0]]])
    e = np.unique(np.sort(e, axis=1), axis=0)
    both = np.r_[e, e[:, ::-1]]
    deg = np.bincount(both[:, 0], minlength=len(V)).astype(float)
    acc = np.zeros_like(V)
    np.add.at(acc, both[:, 0], V[both[:, 1]])
    used = deg > 0
    dev = np.abs(V[used] - acc[used] / deg[used, None]).max(axis=1)
    return float(dev.max()) if len(dev) else 0.0


def resolution_check(
    value: float, *, tolerance: float, grid_tolerance: float, mesh_tol: float
) -> dict[str, Any]:
    """``{"resolved", "resolved_why"}``: is D_k at least 3 times the largest tolerance in play?

    The floor is max(distance tolerance, grid tolerance, mesh tolerance); below
    ``RESOLVED_FACTOR`` times it the value is not told apart from the errors of
    the inputs.
    """
    if not math.isfinite(value):
        return {"resolved": True, "resolved_why": None}
    parts = {"distance tolerance": tolerance, "grid tolerance": grid_tolerance, "mesh tolerance": mesh_tol}
    name, floor = max(((k, v) for k, v in parts.items() if math.isfinite(v)), key=lambda kv: kv[1])
    if value >= RESOLVED_FACTOR * floor:
        return {"resolved": True, "resolved_why": None}
    fix = {
        "mesh tolerance": "raise the mesh resolution of f and g ([f]/[g] resolution)",
        "grid tolerance": "use an exact grid route or a finer grid (smaller grid tolerance)",
        "distance tolerance": "lower [distance] tolerance",
    }[name]
    return {
        "resolved": False,
        "resolved_why": (
            f"D = {value:.4g} is below {RESOLVED_FACTOR:g} x the {name} {floor:.3g}: {fix}, then rerun"
        ),
    }
