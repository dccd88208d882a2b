"""The strip's ends: an upper bound of sup h_k over a < a0 and over a > 1 - a0 (issue 16 item 4).

The searches run on a window a in [a0, 1 - a0]; D_k is a supremum over ]0, 1[. This module
bounds h_k on the two *end strips* ]0, a0[ x [b-, b+] and ]1 - a0, 1[ x [b-, b+] by a
branch and bound whose cells carry rigorous upper bounds (stability, exact vertex values),
and says per degree whether the ends are *covered*: bound <= D_k(window) + tolerance.

Derivation [D] (math.md section 2, explicit forms; stability [CDFFL13]). Write
t = a / (1 - a) on the lower end (a <= a0 <=> t in [0, t0], t0 = a0 / (1 - a0)) and
t = (1 - a) / a on the upper end (a >= 1 - a0 <=> t in [0, t0]). Then, per vertex v,

    lower end:  F*(t, b)(v) = max(f1(v) - b, t (f2(v) + b)),
    upper end:  F*(t, b)(v) = max(t (f1(v) - b), f2(v) + b),

and t = 0 is the limit line (a -> 0: max(f1 - b, 0); a -> 1: max(0, f2 + b)).

1. *Monotone in t.* For fixed b and v, t |-> F*(t, b)(v) is a max of a constant and a
   linear function of t, hence monotone on [t_lo, t_hi]; so
   sup_{t in [t_lo, t_hi]} |F*(t, b)(v) - F*(t_q, b)(v)| is reached at the other end of
   the interval when t_q is one end (exact, vertex by vertex).
2. *1-Lipschitz in b.* dF*/db is -1, t or 0 (lower end) and -t, 1 or 0 (upper end),
   with t <= 1: |F*(t, b)(v) - F*(t, b')(v)| <= |b - b'|.
3. *Stability and the triangle inequality.* For lower-star filtrations of one mesh,
   d_B(Dgm_k F, Dgm_k G) <= ||F - G||_inf over the vertices [CDFFL13]. For two lines p, q,
   h_k(p) <= h_k(q) + ||F*_f(p) - F*_f(q)||_inf + ||F*_g(p) - F*_g(q)||_inf, f and g each
   on its own mesh.

Hence for a cell C = [t_lo, t_hi] x [b_lo, b_hi] (t in [0, 1]: a window without a = 1/2 gives an
end strip across it, in both forms) and a corner q, for every non-decreasing 1-Lipschitz map phi_p,

    h_k(p) <= h_k(q) + sum over maps of ||F*(p) - phi_p(F*(q))||_inf,

since d_B(phi D, phi D') <= d_B(D, D') (points (u, v) -> (phi u, phi v)) and stability. Three
maps are used, each sup over the cell computed exactly vertex by vertex (a max of a constant and
a bilinear function of (t, b) is extreme at corners and kinks): phi = id; the common shift
phi(s) = s - (b_p - b_q) (below; + above), which cancels the part moving with b at unit rate;
and phi(s) = max(s - (b_p - b_q), 0) from the lower-b corner, exact along the limit line. Cells on
which one branch of F* is active at every vertex of both maps are closed in closed form: h is
constant (x-branch, a common shift) or t d_B(f2, g2) (t-branch, a scaling). The cell's bound is
the smallest over corners and maps; lines with b outside the window's [b-, b+] give nothing new
(math.md section 3), so the end strips are compact. Cells whose bound exceeds the target are
split (along the direction whose move is larger) until every degree is covered or the line budget
is spent; the reported bound is the largest cell bound, capped by the a-priori bound of
:func:`~specmap.distance.bounds.distance_upper_bound` (its derivation holds for every t in [0, 1]).
Where both branches mix the b term shrinks slowly, so some ends stay uncovered within the budget.

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, Math. Methods Appl. Sci. 36 (2013):
   the foliation method, stability of h_k under sup-norm changes of the filtration.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from specmap.strip import Window, star_values

METHOD = "stability bound from the window's edge lines (branch and bound in (a, b), exact vertex values)"
B_NODES = 17
"""Initial nodes in b of each end strip (two rows in t: the limit line and the window's edge)."""
MAX_LINES = 300
"""Default line budget per end strip (initial nodes included)."""

Point = tuple[float, float]


@dataclass(frozen=True)
class EndStrip:
    """The bound of one end strip.

    Attributes
    ----------
    side : {"below", "above"}
        a < a0, or a > 1 - a0.
    bound : list of float
        Per degree index: an upper bound of sup h_k over the end strip (value units);
        ``-inf`` when the strip is empty (the window reaches the end).
    best : list of float
        Per degree index: the largest h_k evaluated there (a lower bound of that sup).
    at : list of (a, b)
        Where ``best`` was evaluated.
    lines, cells : int
        Distinct lines evaluated, cells at the end.
    """

    side: str
    bound: list[float]
    best: list[float]
    at: list[Point]
    lines: int
    cells: int


def end_a(form: str, t: np.ndarray | float) -> np.ndarray:
    """The strip coordinate a of t: t / (1 + t) in the form ``"below"``, 1 / (1 + t) in ``"above"``."""
    t = np.asarray(t, float)
    return t / (1.0 + t) if form == "below" else 1.0 / (1.0 + t)


def _segments(side: str, window: Window) -> list[tuple[str, float, float]]:
    """The end strip as pieces (form, t_lo, t_hi) of the two explicit forms, t in [0, 1].

    Form ``"below"`` is a = t / (1 + t) (a in [0, 1/2]), form ``"above"`` is a = 1 / (1 + t)
    (a in [1/2, 1]); a window that leaves out a = 1/2 gives an end strip across it, in two pieces.
    """
    if side == "below":
        a = window.a[0]
        if a <= 0.0:
            return []
        if a <= 0.5:
            return [("below", 0.0, a / (1.0 - a))]
        return [("below", 0.0, 1.0), ("above", (1.0 - a) / a, 1.0)]
    a = window.a[1]
    if a >= 1.0:
        return []
    if a >= 0.5:
        return [("above", 0.0, (1.0 - a) / a)]
    return [("above", 0.0, 1.0), ("below", a / (1.0 - a), 1.0)]


Key = tuple[str, float, float]


class _Corners:
    """h and F* (per map) at corner lines (form, t, b) of an end strip, each computed once."""

    def __init__(self, ev, values_f: np.ndarray, values_g: np.ndarray) -> None:
        self.ev = ev
        self.vf, self.vg = np.asarray(values_f, float), np.asarray(values_g, float)
        self.h: dict[Key, np.ndarray] = {}
        self.star: dict[Key, tuple[np.ndarray, np.ndarray]] = {}

    def need(self, keys: Sequence[Key]) -> None:
        todo = list(dict.fromkeys(k for k in keys if k not in self.h))
        if not todo:
            return
        a = np.array([float(end_a(k[0], k[1])) for k in todo])
        b = np.array([k[2] for k in todo])
        H = np.asarray(self.ev(a, b), float)  # (n_deg, n)
        for i, k in enumerate(todo):
            self.h[k] = H[:, i]
            self.star[k] = (star_values(self.vf, a[i], b[i]), star_values(self.vg, a[i], b[i]))

    def move(self, p: Key, q: Key) -> float:
        """||F*_f(p) - F*_f(q)||_inf + ||F*_g(p) - F*_g(q)||_inf over the vertices."""
        (fp, gp), (fq, gq) = self.star[p], self.star[q]
        return float(np.abs(fp - fq).max(initial=0.0) + np.abs(gp - gq).max(initial=0.0))


Cell = tuple[str, float, float, float, float]


def _corners(cell: Cell) -> list[Key]:
    form, t0, t1, b0, b1 = cell
    return [(form, t, b) for t in (t0, t1) for b in (b0, b1)]


def _range_below(
    v: np.ndarray, t0: float, t1: float, b0: float, b1: float, bq: float
) -> tuple[np.ndarray, np.ndarray]:
    """(sup, inf) per vertex of G = F*(t, b) + (b - bq) over [t0, t1] x [b0, b1], exactly (0 <= t0 <= t1).

    In the form ``"below"``, F* = max(v1 - b, t (v2 + b)), so
    G = max(v1 - bq, t (v2 + b) + b - bq): a constant against a bilinear function of
    (t, b), whose extremes over a rectangle are at its corners. Hence
    sup G = max(v1 - bq, max over corners) and inf G = max(v1 - bq, min over corners).
    """
    x, y = v[:, 0], v[:, 1]
    lin = [t * (y + b) + (b - bq) for t in (t0, t1) for b in (b0, b1)]
    const = x - bq
    return np.maximum(const, np.maximum.reduce(lin)), np.maximum(const, np.minimum.reduce(lin))


def _shifted_move(form: str, v: np.ndarray, cell: Cell, q: Key, fq: np.ndarray) -> float:
    """sup over lines p of the cell of ||F*(p) - kappa(p) - F*(q)||_inf, kappa(p) = -(b_p - b_q) below.

    A constant common to f and g on one line does not change h (both diagrams move
    by it), so each line p of the cell is compared with q after the shift
    kappa(p) = -(b_p - b_q) in the form ``"below"`` and +(b_p - b_q) in ``"above"``: the
    part of F* that moves with b at unit rate cancels. The form "above" is "below" with
    (v1, v2) and b exchanged for (v2, v1) and -b (math.md section 6).
    """
    form_, t0, t1, b0, b1 = cell
    if form == "below":
        sup, inf = _range_below(v, t0, t1, b0, b1, q[2])
    else:
        sup, inf = _range_below(v[:, ::-1], t0, t1, -b1, -b0, -q[2])
    return float(np.maximum(sup - fq, fq - inf).max(initial=0.0))


def _plain_move(form: str, v: np.ndarray, cell: Cell, fq: np.ndarray) -> float:
    """sup over lines p of the cell of ||F*(p) - F*(q)||_inf, exactly (no shift).

    F* = max(v1 - b, t (v2 + b)) (form "below"; "above" by the exchange of
    :func:`_shifted_move`): v1 - b is extreme at b0 or b1, t (v2 + b) is bilinear, so
    the sup of F* over the cell is the largest corner value; its inf is at most the
    smallest corner value and at least max(v1 - b1, min over corners of t (v2 + b)).
    """
    _, t0, t1, b0, b1 = cell
    if form == "below":
        x, y, lo, hi = v[:, 0], v[:, 1], b0, b1
    else:
        x, y, lo, hi = v[:, 1], v[:, 0], -b1, -b0
    lin = [t * (y + b) for t in (t0, t1) for b in (lo, hi)]
    sup = np.maximum(x - lo, np.maximum.reduce(lin))
    inf = np.maximum(x - hi, np.minimum.reduce(lin))
    return float(np.maximum(sup - fq, fq - inf).max(initial=0.0))


def _clipped_move(form: str, v: np.ndarray, cell: Cell, tq: float, fq: np.ndarray) -> float:
    """sup over lines p of the cell of ||F*(p) - phi_p(F*(q))||_inf, q = (tq, lower b), phi_p(s) = max(s - d, 0).

    In the form "below" (the form "above" by the exchange of :func:`_shifted_move`) with
    q = (tq, b0) and p = (t, b), d = b - b0 >= 0: phi_p(F*(q)) = max(u, B) with
    u = v1 - b and B = max(tq (v2 + b0) - d, 0), while F*(p) = max(u, A), A = t (v2 + b).
    |max(u, A) - max(u, B)| <= min(|A - B|, max(0, max(A, B) - u)); A is bilinear in
    (t, b) and B piecewise linear in b with one kink b_k = b0 + tq (v2 + b0), so both sups
    are reached at t in {t0, t1}, b in {b0, b1, clip(b_k)}. On the limit line (t = tq = 0)
    the move is 0: a non-decreasing 1-Lipschitz phi maps diagrams into diagrams with
    d_B(phi D, phi D') <= d_B(D, D') (points (u, v) -> (phi u, phi v)).
    """
    _, t0, t1, b0, b1 = cell
    if form == "below":
        x, y, lo, hi = v[:, 0], v[:, 1], b0, b1
    else:
        x, y, lo, hi = v[:, 1], v[:, 0], -b1, -b0
    base = tq * (y + lo)
    kink = np.clip(lo + base, lo, hi)
    sup1 = np.zeros_like(x)
    sup2 = np.zeros_like(x)
    for t in (t0, t1):
        for b in (lo, hi, kink):
            A = t * (y + b)
            B = np.maximum(base - (b - lo), 0.0)
            sup1 = np.maximum(sup1, np.abs(A - B))
            sup2 = np.maximum(sup2, np.maximum(A, B) - (x - b))
    return float(np.minimum(sup1, sup2).max(initial=0.0))


def _one_branch(form: str, maps: Sequence[np.ndarray], cell: Cell) -> str | None:
    """``"x"`` or ``"t"`` when one branch of F* is active at every vertex of both maps on the whole cell.

    In the form "below", F* = max(v1 - b, t (v2 + b)) and the sign of
    v1 - b - t (v2 + b) (bilinear in (t, b)) over the cell is read off its corners.
    - ``"x"``: F*(t, b) = v1 - b: every line of the cell gives the same diagrams up to the
      common shift -b, so h is constant on the cell (d_B is invariant under a common shift).
    - ``"t"``: F*(t, b) = t v2 + t b: the diagrams are those of v2 scaled by t and shifted,
      so h(t, b) = t d_B(Dgm v2_f, Dgm v2_g) (points at infinity too), largest at t = t1.
    The form "above" by the exchange of :func:`_shifted_move`.
    """
    _, t0, t1, b0, b1 = cell
    lo = hi = True
    for v in maps:
        if form == "below":
            x, y, bb = v[:, 0], v[:, 1], (b0, b1)
        else:
            x, y, bb = v[:, 1], v[:, 0], (-b1, -b0)
        d = np.array([x - b - t * (y + b) for t in (t0, t1) for b in bb])
        lo = lo and bool((d >= 0).all())
        hi = hi and bool((d <= 0).all())
    return "x" if lo else "t" if hi else None


def _cell_bound(
    c: _Corners, cell: Cell, *, clipped: bool = True, moves: bool = True
) -> tuple[np.ndarray, float, float]:
    """(bound per degree, the t-sibling move, the b-sibling move) of a cell (form, t0, t1, b0, b1).

    bound_k = min over corners q of h_k(q) + M_f(q) + M_g(q), M the exact sup of
    :func:`_shifted_move` (stability [CDFFL13] after a common shift of both maps).
    ``clipped=False`` leaves out the clipped map (it helps near the limit line t = 0 only) and
    ``moves=False`` the two direction moves (returned as 0): both only save time.
    """
    form = cell[0]
    branch = _one_branch(form, (c.vf, c.vg), cell)
    if branch is not None:  # h is known in closed form on the cell from its corners
        _, t0, t1, b0, b1 = cell
        rows = [(form, t1, b0), (form, t1, b1)] if branch == "t" else _corners(cell)
        ub = np.maximum.reduce([c.h[k] for k in rows])
        return ub, 0.0, 0.0
    best = None
    for q in _corners(cell):
        fq, gq = c.star[q]
        shifted = _shifted_move(form, c.vf, cell, q, fq) + _shifted_move(form, c.vg, cell, q, gq)
        plain = _plain_move(form, c.vf, cell, fq) + _plain_move(form, c.vg, cell, gq)
        ub = c.h[q] + min(shifted, plain)
        best = ub if best is None else np.minimum(best, ub)
    assert best is not None
    lower = cell[3] if form == "below" else cell[4]  # the corner row the clipped move starts from
    if not clipped:
        return best, 0.0, 0.0
    for tq in (cell[1], cell[2]):
        q = (form, tq, lower)
        fq, gq = c.star[q]
        m = _clipped_move(form, c.vf, cell, tq, fq) + _clipped_move(form, c.vg, cell, tq, gq)
        best = np.minimum(best, c.h[q] + m)
    if not moves:
        return best, 0.0, 0.0
    # what each direction costs alone (the clipped move of a cell flat in the other direction)
    _, t0, t1, b0, b1 = cell
    tm = bm = 0.0
    for tq in (t0, t1):
        q = (form, tq, lower)
        for v, fq in zip((c.vf, c.vg), c.star[q], strict=True):
            bm += 0.5 * _clipped_move(form, v, (form, tq, tq, b0, b1), tq, fq)
            tm += 0.5 * _clipped_move(form, v, (form, t0, t1, lower, lower), tq, fq)
    return best, tm, bm


def end_strip_bound(
    ev,
    values_f: np.ndarray,
    values_g: np.ndarray,
    window: Window,
    targets: Sequence[float],
    *,
    side: str,
    tolerance: float,
    b_nodes: int = B_NODES,
    max_lines: int = MAX_LINES,
    upper: float = math.inf,
) -> EndStrip:
    """Upper bound of sup h_k over one end strip, refined until it is at most target_k + tolerance.

    Parameters
    ----------
    ev : callable
        ``ev(a, b)`` -> h, shape (n_degrees, n) (a :class:`~specmap.distance.evaluator.LineEvaluator`;
        its memo is shared with the other stages and a = 0 or 1 gives the limit lines).
    values_f, values_g : ndarray (n_f, 2), (n_g, 2)
        Vertex values of f and g (each on its own mesh).
    window : Window
        The searched window: the end strip is a < a_lo (``side="below"``) or a > a_hi
        (``"above"``), b in the window's b-range.
    targets : sequence of float
        Per degree index, the value the ends must not exceed (D_k on the window, value units);
        infinite or NaN targets need no refinement.
    side : {"below", "above"}
    tolerance : float
        Value units.
    b_nodes : int
        Initial nodes in b.
    max_lines : int
        Line budget of this strip.
    upper : float
        An a-priori bound of h_k on every line (value units); the bound is capped by it and
        the search stops where it already covers a degree.

    Returns
    -------
    EndStrip
    """
    if side not in ("below", "above"):
        raise ValueError(f"side must be 'below' or 'above', not {side!r}")
    n_deg = len(targets)
    segs = _segments(side, window)
    if not segs:
        empty = [-math.inf] * n_deg
        return EndStrip(side, empty, list(empty), [(math.nan, math.nan)] * n_deg, 0, 0)
    goal = np.array([t + tolerance if np.isfinite(t) else math.inf for t in targets], float)
    goal[goal >= upper] = math.inf  # already covered by the a-priori bound
    c = _Corners(ev, values_f, values_g)
    bv = [float(b) for b in np.linspace(window.b[0], window.b[1], max(2, int(b_nodes)))]
    c.need([(form, t, b) for form, t0, t1 in segs for t in (t0, t1) for b in bv])
    heap: list[tuple[float, int, Cell, np.ndarray, float, float]] = []
    count = 0

    def push(cell: Cell) -> None:
        nonlocal count
        ub, tm, bm = _cell_bound(c, cell)
        if not np.all(ub <= goal):  # the sub-cell bound with the shift c* = (1 - t) / 2 (issue 13 item 2)
            from specmap.distance.cellbound import sub_bound

            ub = np.minimum(ub, sub_bound(c, cell))
        # excess over the goal, counted only for degrees still coverable (no corner above the goal)
        corner = np.maximum.reduce([c.h[k] for k in _corners(cell)])
        live = (corner <= goal) & np.isfinite(goal)
        with np.errstate(invalid="ignore"):
            ex = float(np.max(np.where(live, ub - goal, -math.inf), initial=-math.inf))
        heapq.heappush(heap, (-ex, count, cell, ub, tm, bm))
        count += 1

    for form, t0, t1 in segs:
        for b0, b1 in zip(bv[:-1], bv[1:], strict=True):
            push((form, t0, t1, b0, b1))
    splits = 0  # a split whose corners are known adds no line: cap the splits too
    while heap and -heap[0][0] > 0 and len(c.h) + 2 <= max_lines and splits < 4 * max_lines:
        splits += 1
        _, _, (form, t0, t1, b0, b1), _, tm, bm = heapq.heappop(heap)
        if bm >= tm:
            mid = 0.5 * (b0 + b1)
            c.need([(form, t0, mid), (form, t1, mid)])
            push((form, t0, t1, b0, mid))
            push((form, t0, t1, mid, b1))
        else:
            mid = 0.5 * (t0 + t1)
            c.need([(form, mid, b0), (form, mid, b1)])
            push((form, t0, mid, b0, b1))
            push((form, mid, t1, b0, b1))
    bound = np.minimum(np.max(np.array([e[3] for e in heap]), axis=0), upper)
    keys = list(c.h)
    H = np.array([c.h[k] for k in keys])  # (n_keys, n_deg)
    Hm = np.where(np.isnan(H), -math.inf, H)
    idx = np.argmax(Hm, axis=0)
    at = [(float(end_a(keys[i][0], keys[i][1])), float(keys[i][2])) for i in idx]
    best = [float(Hm[i, j]) for j, i in enumerate(idx)]
    return EndStrip(side, [float(x) for x in bound], best, at, len(keys), len(heap))


def end_bounds(
    ev,
    values_f: np.ndarray,
    values_g: np.ndarray,
    window: Window,
    targets: Sequence[float],
    *,
    tolerance: float,
    max_lines: int = MAX_LINES,
    upper: float = math.inf,
) -> tuple[EndStrip, EndStrip]:
    """Both end strips (:func:`end_strip_bound` with ``side="below"`` and ``"above"``)."""
    return tuple(  # type: ignore[return-value]
        end_strip_bound(
            ev,
            values_f,
            values_g,
            window,
            targets,
            side=s,
            tolerance=tolerance,
            max_lines=max_lines,
            upper=upper,
        )
        for s in ("below", "above")
    )


def ends_entry(j: int, value: float, below: EndStrip, above: EndStrip, tolerance: float) -> dict[str, Any]:
    """The ``ends`` block of ``by_degree[k]`` for degree index j: bounds per end, method, covered.

    ``covered`` is True when both end bounds are at most ``value + tolerance`` (an infinite
    D_k is covered: nothing exceeds it).
    """
    lo, hi = below.bound[j], above.bound[j]
    if math.isinf(value) and value > 0:
        covered = True
    else:
        covered = bool(max(lo, hi) <= value + tolerance * (1 + 1e-9) + 1e-15)
    pick = below if below.best[j] >= above.best[j] else above
    return {
        "a_below": lo,
        "a_above": hi,
        "method": METHOD,
        "covered": covered,
        "best": pick.best[j],
        "best_at": [pick.at[j][0], pick.at[j][1]],
        "lines": below.lines + above.lines,
    }


def apply_ends(entry: dict[str, Any], ends: dict[str, Any], a_range: tuple[float, float]) -> None:
    """Fold an ``ends`` block into a by-degree certificate: it never claims more than the ends allow.

    The interval becomes [max(lower, best h on the ends), max(upper, end bounds)]; when the
    ends are not covered, ``certified`` is False and ``why_not`` says why.
    """
    entry["ends"] = ends
    lo, up = entry.get("bounds", [entry["value"], entry["value"]])
    top = max(ends["a_below"], ends["a_above"])
    entry["bounds"] = [max(lo, ends["best"]), max(up, top)]
    if not ends["covered"]:
        entry["certified"] = False
        found = ends["best"] > entry["value"]
        what = f"h = {ends['best']:.4g} was found there" if found else f"they are bounded by {top:.4g} only"
        why = (
            f"the strip's ends a < {a_range[0]:.3g} and a > {a_range[1]:.3g} are not covered: {what}, "
            f"above D = {entry['value']:.4g} + tolerance"
        )
        entry["why_not"] = why if not entry.get("why_not") else f"{entry['why_not']}; {why}"


def fold_ends(
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
) -> dict[str, Any]:
    """Bound both end strips against every degree's value and fold them into ``by_degree`` (in place).

    Each ``by_degree[k]`` gains ``ends`` (:func:`ends_entry`) and its certificate is
    narrowed by :func:`apply_ends`. ``upper`` is an a-priori bound of h on every line of
    ]0, 1[ (:func:`~specmap.distance.bounds.distance_upper_bound`: its derivations hold for
    every t in [0, 1], the ends included); each end bound is capped by it. Returns
    ``{"lines", "seconds", "method"}`` for the meta block.
    """
    import time

    t0 = time.perf_counter()
    targets = [float(by_degree[k]["value"]) for k in degrees]
    below, above = end_bounds(
        ev,
        np.asarray(shape_f.values, float),
        np.asarray(shape_g.values, float),
        window,
        targets,
        tolerance=tolerance,
        max_lines=max_lines,
        upper=upper,
    )
    for j, k in enumerate(degrees):
        apply_ends(by_degree[k], ends_entry(j, targets[j], below, above, tolerance), window.a)
    return {"lines": below.lines + above.lines, "seconds": time.perf_counter() - t0, "method": METHOD}
