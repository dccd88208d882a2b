"""A certified 2-D branch and bound of sup h_k over a region of the strip (issue 13 item 1, issue 16 item 4).

The slope-one search (:mod:`specmap.distance.slope_one`) is the 1-D case; this module bounds and
searches h_k on rectangles of the whole strip ]0, 1[ x [b-, b+], the strip's ends included.

Coordinates [D] (math.md section 2, explicit forms). A line a <= 1/2 is written t = a / (1 - a)
(form ``"below"``, F* = max(f1 - b, t (f2 + b))), a line a >= 1/2 as t = (1 - a) / a (form
``"above"``, F* = max(t (f1 - b), f2 + b)); in both forms t runs over [0, 1], t = 1 is the
slope-one line and t = 0 the limit line (a -> 0 or a -> 1). A window [a_lo, a_hi] x [b-, b+] is one
or two rectangles [t_lo, t_hi] x [b-, b+] of these forms (:func:`strip_segments`); lines with b
outside [b-, b+] give nothing new (math.md section 3), so the strip is compact in these coordinates.

Cell bound. For a cell C = [t0, t1] x [b0, b1] and a corner q, every line p of C satisfies

    h_k(p) <= h_k(q) + ||F*_f(p) - phi_p(F*_f(q))||_inf + ||F*_g(p) - phi_p(F*_g(q))||_inf

for every non-decreasing 1-Lipschitz map phi_p (stability for lower-star filtrations of one mesh
[CDFFL13], each map on its own mesh, the triangle inequality for d_B, and
d_B(phi D, phi D') <= d_B(D, D')). The sups over p are computed exactly, vertex by vertex (F* is a
max of a constant and a bilinear function of (t, b), extreme at corners and kinks), for three maps:
the identity, the common shift by the unit-rate b term, and a clipped shift exact along the limit
line; cells on which one branch of F* is active at every vertex of both maps have h in closed form
(constant, or t times the bottleneck distance of the second components). This is the per-cell
Lipschitz bound with exact constants: no global constant, so it stays finite up to a -> 0 and 1
(the derivations are in :mod:`specmap.distance.ends` and DEVELOPERS.md). The cell's bound is the
smallest over its corners and maps, capped by an a-priori bound of h on every line
(:func:`~specmap.distance.bounds.distance_upper_bound`).

Search. The region starts as a grid of cells; every corner line is evaluated through the shared
:class:`~specmap.distance.evaluator.LineEvaluator` (its memo: lines of other stages are free). The
cell whose bound exceeds the goal goal_k = max(floor_k, best_k) + tolerance the most (over the
degrees still open) is split in two along the direction whose move is larger, two new lines; a
cell at or below every goal is closed for good (the goals only grow). When no open cell is left,
sup h_k over the region <= best_k + tolerance (or floor_k + tolerance): the interval
[best_k, bound_k] is certified. The budget stops it otherwise, with a valid bound.

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, Math. Methods Appl. Sci. 36 (2013):
   the foliation method, stability of h_k under sup-norm changes of the filtration.
"""

from __future__ import annotations

import heapq
import math
import time
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from specmap.distance.cellbound import SUB, SUB_FINE, closed_connected, split_moves, sub_bound
from specmap.distance.ends import (
    Cell,
    _cell_bound,
    _Corners,
    _corners,
    _one_branch,
    _plain_move,
    _shifted_move,
    end_a,
)
from specmap.distance.refine import pattern_search
from specmap.strip import Window

Point = tuple[float, float]
Key = tuple[str, float, float]
Segment = tuple[str, float, float]

T_NODES = 5
"""Initial nodes in t of each rectangle."""
B_NODES = 17
"""Initial nodes in b."""
CLIPPED_BELOW = 0.1
"""Cells with t0 below this also use the clipped map of the cell bound (exact along the limit line)."""
MAX_LINES = 4000
POLISH_STEP = 1.0 / 32
"""First step of the polish, as a fraction of the a-range (1/2) and of the b-range."""
POLISH_A = (1e-6, 1.0 - 1e-6)
"""The a-range the polish may move in (the limit lines themselves are corner lines)."""
"""Default line budget of one search (corner lines, memo hits included)."""


@dataclass(frozen=True)
class BoxSearch:
    """What the 2-D branch and bound proved about a region.

    Attributes
    ----------
    bound : list of float
        Per degree index: an upper bound of sup h_k over the region (value units).
    best : list of float
        Per degree index: the largest h_k evaluated at a corner line (a lower bound of that sup).
    at : list of (a, b)
        Where ``best`` was evaluated.
    closed : list of bool
        Per degree index: bound_k <= max(floor_k, best_k) + tolerance (the search closed).
    lines : int
        Distinct corner lines (memo hits included).
    new_lines : int
        Lines new to the evaluator.
    cells : int
        Cells at the end.
    seconds : float
    """

    bound: list[float]
    best: list[float]
    at: list[Point]
    closed: list[bool]
    lines: int
    new_lines: int
    cells: int
    seconds: float


def strip_segments(a_lo: float, a_hi: float) -> list[Segment]:
    """The a-range [a_lo, a_hi] (0 <= a_lo < a_hi <= 1) as pieces (form, t_lo, t_hi), t in [0, 1].

    Form ``"below"``: a = t / (1 + t) in [0, 1/2]; form ``"above"``: a = 1 / (1 + t) in [1/2, 1].

    Examples
    --------
    >>> strip_segments(0.0, 1.0)
    [('below', 0.0, 1.0), ('above', 0.0, 1.0)]
    >>> strip_segments(0.0, 0.2)
    [('below', 0.0, 0.25)]
    """
    out: list[Segment] = []
    if a_lo < 0.5:
        out.append(("below", a_lo / (1.0 - a_lo), min(a_hi, 0.5) / (1.0 - min(a_hi, 0.5))))
    if a_hi > 0.5:
        lo = max(a_lo, 0.5)
        out.append(("above", (1.0 - a_hi) / a_hi, (1.0 - lo) / lo))
    return [s for s in out if s[2] > s[1]]


def _quadrant_bound(c: _Corners, cell: Cell) -> np.ndarray:
    """Per degree: max over the four quarters of the cell of h(q) + the exact move from q, q its corner.

    Every line of the cell lies in a quarter, and each quarter is bounded from the corner of the cell
    it contains (the bound of :func:`~specmap.distance.ends._cell_bound` over the quarter, identity and
    common shift, exact vertex by vertex): half the distance of a bound from one corner over the whole
    cell, so about half the move, with no new line.
    """
    form, t0, t1, b0, b1 = cell
    tm, bm = 0.5 * (t0 + t1), 0.5 * (b0 + b1)
    out = None
    for tq, ta, tb in ((t0, t0, tm), (t1, tm, t1)):
        for bq, ba, bb in ((b0, b0, bm), (b1, bm, b1)):
            q = (form, tq, bq)
            quarter = (form, ta, tb, ba, bb)
            move = 0.0
            for v, fq in zip((c.vf, c.vg), c.star[q], strict=True):
                move += min(_plain_move(form, v, quarter, fq), _shifted_move(form, v, quarter, q, fq))
            ub = c.h[q] + move
            out = ub if out is None else np.maximum(out, ub)
    assert out is not None
    return out


def _bound(c: _Corners, cell: Cell, sub: int, top: int | None = None) -> np.ndarray:
    """Per degree: the cell's bound, the smallest of the closed forms, the clipped map and the sub-cells.

    A cell where one branch of F* rules every vertex of both maps has h in closed form
    (:func:`~specmap.distance.ends._one_branch`); near the limit line (t0 below
    :data:`CLIPPED_BELOW`) the corner and clipped bounds of :func:`~specmap.distance.ends._cell_bound`
    also enter; every other cell takes :func:`~specmap.distance.cellbound.sub_bound` (``sub`` 0: the
    quarters of :func:`_quadrant_bound` and the corner bound, the bound before issue 13 item 2).
    """
    if sub <= 0:
        ub, _, _ = _cell_bound(c, cell, clipped=cell[1] < CLIPPED_BELOW, moves=False)
        return np.minimum(ub, _quadrant_bound(c, cell))
    if cell[1] < CLIPPED_BELOW:
        ub, _, _ = _cell_bound(c, cell, clipped=True, moves=False)
        return np.minimum(ub, sub_bound(c, cell, sub, top))
    if _one_branch(cell[0], (c.vf, c.vg), cell) is not None:
        ub, _, _ = _cell_bound(c, cell, clipped=False, moves=False)
        return ub
    return sub_bound(c, cell, sub, top)


def box_search(
    ev,
    values_f: np.ndarray,
    values_g: np.ndarray,
    segments: Sequence[Segment],
    b_range: tuple[float, float],
    floors: Sequence[float],
    *,
    tolerance: float,
    max_lines: int = MAX_LINES,
    upper: float = math.inf,
    t_nodes: int = T_NODES,
    b_nodes: int = B_NODES,
    one_mesh: bool = False,
    sub: int = SUB,
    sub_fine: int = SUB_FINE,
    polish: bool = True,
    top_degree: int | None = None,
    t_extra: Sequence[float] = (),
) -> BoxSearch:
    """Certified branch and bound of sup h_k over the rectangles ``segments`` x ``b_range``.

    Parameters
    ----------
    ev : callable
        ``ev(a, b)`` -> h, shape (n_degrees, n) (a :class:`~specmap.distance.evaluator.LineEvaluator`).
    values_f, values_g : ndarray (n_f, 2), (n_g, 2)
        Vertex values of f and g, each on its own mesh.
    segments : sequence of (form, t_lo, t_hi)
        The region in the coordinates of :func:`strip_segments`.
    b_range : (b_lo, b_hi)
    floors : sequence of float
        Per degree index, a value known to be at most D_k (e.g. found by another stage): cells
        whose bound is within ``tolerance`` of it need no refinement. ``inf`` (an infinite D_k) or
        ``nan`` (a degree not asked for) leaves the degree out.
    tolerance : float
        Value units: the certified width.
    max_lines : int
        Corner lines after which the search stops (memo hits included).
    upper : float
        A-priori bound of h on every line (value units); the bound is capped by it.
    t_nodes, b_nodes : int
        Initial grid per rectangle.
    one_mesh : bool
        f and g live on one mesh (same triangles, vertex by vertex): each cell's bound is also capped
        by sup over the cell of ||F*_f - F*_g||_inf <= max(X, t1 Y) in the form "below" (max(t1 X, Y)
        "above"), X = max |f1 - g1|, Y = max |f2 - g2| over the vertices, since
        |max(u, v) - max(u', v')| <= max(|u - u'|, |v - v'|) (stability [CDFFL13], no diagram).
    sub : int
        Sub-rectangles per side of the cell bound (:func:`~specmap.distance.cellbound.sub_bound`);
        0 is the bound before issue 13 item 2 (quarters from their own corner, plain or unit shift).
    sub_fine : int
        Sub-rectangles per side tried on a cell that ``sub`` leaves open (0: none).
    polish : bool
        After the initial grid, a compass search (:func:`~specmap.distance.refine.pattern_search`)
        from the best corner of each degree raises best_k, so the goals start near the maximum and
        fewer cells need splitting (issue 13 item 2); its lines count against ``max_lines``.

    top_degree : int, optional
        Degree index of degree 2 when both meshes are closed connected surfaces
        (:func:`~specmap.distance.cellbound.closed_connected`): its cells are also bounded by the
        top-vertex interval of :func:`~specmap.distance.cellbound.sub_parts`.

    t_extra : sequence of float
        More initial t nodes (e.g. the window's edges t0 of the strip's ends, whose lines the ends
        stage has evaluated: memo hits).

    Returns
    -------
    BoxSearch
    """
    t_start = time.perf_counter()
    n0 = getattr(ev, "lines", 0)
    floor = np.array([float(x) for x in floors], float)
    n_deg = len(floor)
    active = np.isfinite(floor)
    if one_mesh:
        d = np.abs(np.asarray(values_f, float) - np.asarray(values_g, float))
        X, Y = (float(d[:, 0].max(initial=0.0)), float(d[:, 1].max(initial=0.0)))

    def sup_norm(cell: Cell) -> float:
        if not one_mesh:
            return math.inf
        return max(X, cell[2] * Y) if cell[0] == "below" else max(cell[2] * X, Y)

    c = _Corners(ev, values_f, values_g)
    bv = np.linspace(b_range[0], b_range[1], max(2, int(b_nodes)))
    cells0: list[Cell] = []
    for form, t0, t1 in segments:
        tv = np.linspace(t0, t1, max(2, int(t_nodes)))
        tv = np.unique(np.r_[tv, [x for x in t_extra if t0 < x < t1]])
        for ta, tb in zip(tv[:-1], tv[1:], strict=True):
            for ba, bb in zip(bv[:-1], bv[1:], strict=True):
                cells0.append((form, float(ta), float(tb), float(ba), float(bb)))
    c.need([k for cell in cells0 for k in _corners(cell)])

    def best_now() -> tuple[np.ndarray, list]:
        keys = list(c.h)
        H = np.array([c.h[k] for k in keys]).reshape(len(keys), n_deg)
        Hm = np.where(np.isnan(H), -math.inf, H)
        idx = np.argmax(Hm, axis=0) if len(keys) else np.zeros(n_deg, int)
        return Hm[idx, np.arange(n_deg)] if len(keys) else np.full(n_deg, -math.inf), [keys[i] for i in idx]

    best, _ = best_now()
    polished: dict[int, tuple[float, Point]] = {}
    polish_lines = 0

    def polish_from(key: Key) -> None:
        """Raise best_k by a compass search from a corner (values of h: lower bounds; goals grow)."""
        nonlocal best, polish_lines
        n_before = getattr(ev, "lines", 0)
        start = (float(end_a(key[0], key[1])), float(key[2]))
        step = (POLISH_STEP * 0.5, POLISH_STEP * (b_range[1] - b_range[0]))
        for j in np.flatnonzero(active):
            if start[0] <= 0.0 or start[0] >= 1.0:
                continue
            v, at = pattern_search(
                ev, int(j), start, step, Window(POLISH_A, b_range), levels=4, max_batches=12
            )
            if v > best[j]:
                best[j] = v
                polished[int(j)] = (v, at)
        polish_lines += getattr(ev, "lines", 0) - n_before

    if polish and len(c.h):
        _, keys0 = best_now()
        for key in dict.fromkeys(keys0[j] for j in np.flatnonzero(active)):
            polish_from(key)

    def goal() -> np.ndarray:
        g = np.maximum(floor, best) + tolerance
        return np.where(active & (g < upper), g, math.inf)

    def excess(ub: np.ndarray) -> float:
        with np.errstate(invalid="ignore"):
            ex = np.where(np.isfinite(goal()), np.minimum(ub, upper) - goal(), -math.inf)
        return float(np.max(ex, initial=-math.inf))

    heap: list[tuple[float, int, Cell, np.ndarray, float, float]] = []
    closed: list[np.ndarray] = []
    count = 0

    def push(cell: Cell) -> None:
        nonlocal count
        ub = _bound(c, cell, sub, top_degree)
        ub = np.minimum(ub, sup_norm(cell))
        ex = excess(ub)
        if ex > 0 and sub_fine > sub > 0:  # finer sub-rectangles only for cells that stay open
            ub = np.minimum(ub, sub_bound(c, cell, sub_fine, top_degree))
            ex = excess(ub)
        if ex <= 0:
            closed.append(ub)
            return
        tm, bm = split_moves(c, cell)
        heapq.heappush(heap, (-ex, count, cell, ub, tm, bm))
        count += 1

    for cell in cells0:
        push(cell)
    splits = 0
    while heap and len(c.h) + polish_lines + 2 <= max_lines and splits < 4 * max_lines:
        neg, _, cell, ub, tm, bm = heapq.heappop(heap)
        ex = excess(ub)  # the goals grew since the push: re-rank lazily
        if ex <= 0:
            closed.append(ub)
            continue
        if heap and ex < -heap[0][0]:
            heapq.heappush(heap, (-ex, count, cell, ub, tm, bm))
            count += 1
            continue
        splits += 1
        form, t0, t1, b0, b1 = cell
        if bm >= tm:
            mid = 0.5 * (b0 + b1)
            new = [(form, t0, mid), (form, t1, mid)]
            halves = [(form, t0, t1, b0, mid), (form, t0, t1, mid, b1)]
        else:
            mid = 0.5 * (t0 + t1)
            new = [(form, mid, b0), (form, mid, b1)]
            halves = [(form, t0, mid, b0, b1), (form, mid, t1, b0, b1)]
        c.need(new)
        for k in new:
            best = np.maximum(best, np.where(np.isnan(c.h[k]), -math.inf, c.h[k]))
        for h in halves:
            push(h)
    ubs = closed + [e[3] for e in heap]
    bound = np.minimum(np.max(np.array(ubs), axis=0), upper) if ubs else np.full(n_deg, -math.inf)
    corner_best, keys = best_now()
    at = [(float(end_a(k[0], k[1])), float(k[2])) for k in keys]
    for j, (v, p) in polished.items():
        if v > corner_best[j]:
            at[j] = p
    best = np.maximum(best, corner_best)
    g = np.maximum(floor, best) + tolerance * (1 + 1e-9) + 1e-15
    return BoxSearch(
        bound=[float(x) for x in bound],
        best=[float(x) for x in best],
        at=at,
        closed=[bool(x) for x in (bound <= g) | ~active],
        lines=len(c.h) + polish_lines,
        new_lines=getattr(ev, "lines", 0) - n0,
        cells=len(ubs),
        seconds=time.perf_counter() - t_start,
    )


STRIP_METHOD = "branch and bound over ]0, 1[ x [b-, b+] (stability bounds per cell, exact vertex values)"


def strip_entry(j: int, box: BoxSearch) -> dict[str, Any]:
    """The ``strip`` block of ``by_degree[k]`` for degree index j: what the whole-strip search proved."""
    return {
        "method": STRIP_METHOD,
        "bounds": [box.best[j], box.bound[j]],
        "best_at": [box.at[j][0], box.at[j][1]],
        "closed": box.closed[j],
        "lines": box.lines,
        "new_lines": box.new_lines,
        "seconds": box.seconds,
    }


def apply_strip(entry: dict[str, Any], strip: dict[str, Any], tolerance: float, a_range: Point) -> None:
    """Fold a ``strip`` block into a by-degree certificate (in place).

    The interval becomes [max(lower, strip best), min(upper, strip bound)] (both bounds are valid,
    so is their intersection); a closed strip search certifies the degree, and the strip's ends are
    then ``"searched"`` and covered (the search ran over them). The reported value stays the other
    stages' (the theorem audit compares them with the strip's best).
    """
    entry["strip"] = strip
    lo, up = entry["bounds"]
    s_lo, s_up = strip["bounds"]
    lo, up = max(lo, s_lo), min(up, s_up)
    entry["bounds"] = [lo, up]
    ends = entry.get("ends")
    if ends is not None and not ends["covered"]:
        ends["method"] = "searched"
        ends["covered"] = bool(strip["closed"])
        if ends["covered"]:
            ends["a_below"] = min(ends["a_below"], s_up)
            ends["a_above"] = min(ends["a_above"], s_up)
    if strip["closed"] and up - lo <= tolerance * (1 + 1e-9) + 1e-15:
        entry["certified"], entry["why_not"] = True, None
        entry["upper_kind"] = "strip"
    elif not entry.get("certified"):
        why = (
            f"the branch and bound over the whole strip stopped at its {strip['lines']}-line budget: "
            f"bound {s_up:.4g} against best {s_lo:.4g}; raise [distance] strip_budget (lines per dense node) "
            f"to narrow it"
        )
        entry["why_not"] = why if not entry.get("why_not") else f"{entry['why_not']}; {why}"


def _one_mesh(shape_f, shape_g) -> bool:
    """f and g on the same triangles with as many vertices (the maps compare vertex by vertex)."""
    tf, tg = getattr(shape_f, "triangles", None), getattr(shape_g, "triangles", None)
    return (
        tf is not None
        and tg is not None
        and np.shape(shape_f.values) == np.shape(shape_g.values)
        and np.array_equal(tf, tg)
    )


def top_degree_index(shape_f, shape_g, degrees: Sequence[int]) -> int | None:
    """The index of degree 2 in ``degrees`` when both meshes are closed connected surfaces, else None."""
    if 2 not in degrees:
        return None
    for s in (shape_f, shape_g):
        if not closed_connected(getattr(s, "triangles", None), len(s.values)):
            return None
    return list(degrees).index(2)


def fold_strip(
    ev,
    shape_f,
    shape_g,
    window: Window,
    by_degree: dict[int, dict[str, Any]],
    degrees: Sequence[int],
    tolerance: float,
    *,
    upper: float = math.inf,
    max_lines: int = MAX_LINES,
) -> dict[str, Any] | None:
    """Run :func:`box_search` over the whole strip for the degrees not yet certified, fold it in.

    Degrees already certified (and infinite ones) take no part (their floor is NaN); the floor of
    the others is their reported value. Returns ``{"lines", "new_lines", "seconds", "method"}`` for
    the meta block, or None when no degree needed it or ``max_lines`` is 0.
    """
    todo = [j for j, k in enumerate(degrees) if not by_degree[k].get("certified")]
    if not todo or max_lines <= 0:
        return None
    floors = [
        float(by_degree[k]["value"]) if j in todo and math.isfinite(by_degree[k]["value"]) else math.nan
        for j, k in enumerate(degrees)
    ]
    box = box_search(
        ev,
        np.asarray(shape_f.values, float),
        np.asarray(shape_g.values, float),
        strip_segments(0.0, 1.0),
        window.b,
        floors,
        tolerance=tolerance,
        max_lines=max_lines,
        upper=upper,
        one_mesh=_one_mesh(shape_f, shape_g),
        top_degree=top_degree_index(shape_f, shape_g, degrees),
        t_extra=[
            t for t in (window.a[0] / (1.0 - window.a[0]), (1.0 - window.a[1]) / window.a[1]) if 0 < t < 1
        ],
    )
    for j in todo:
        k = degrees[j]
        apply_strip(by_degree[k], strip_entry(j, box), tolerance, window.a)
    return {"lines": box.lines, "new_lines": box.new_lines, "seconds": box.seconds, "method": STRIP_METHOD}
