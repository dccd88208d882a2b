"""The reduced search: D_k from the slope-one line and a short candidate list on the special set.

By the main theorem [EFQT23, FMQT] D_k is reached on the slope-one line
a = 1/2 or at a special value, so h_k is evaluated on a = 1/2
(:mod:`specmap.distance.slope_one`) and at candidates of the special set
(:mod:`specmap.distance.candidates`) in descending order of their tied cost,
skipping those that provably cannot be the maximum.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, fields
from typing import Any

import numpy as np

from specmap.distance.bounds import LocalBound, line_upper_bound
from specmap.distance.boxes import BoxBound
from specmap.distance.candidates import ORIGINS, special_candidates
from specmap.distance.evaluator import LineEvaluator
from specmap.distance.node_bounds import NodeBounds, node_upper_bounds
from specmap.distance.paths import normalise
from specmap.distance.refine import polish_along
from specmap.distance.result import Best, Candidates, ReducedSearch, SlopeOneSearch
from specmap.distance.slope_one import slope_one_search
from specmap.settings import DistanceSettings
from specmap.strip import Window

_DEFAULTS = DistanceSettings()
_RULES = {1: "above_bound", 2: "line_bound", 3: "box_bound", 4: "local_bound"}
"""Names of the pruning rules by their code in :meth:`_Descent._verdicts` (the counters of the result)."""


@dataclass(frozen=True)
class ReducedSettings:
    """Settings of :func:`reduced_search` (defaults from :class:`~specmap.settings.DistanceSettings`).

    Attributes
    ----------
    slope_samples : int
        Initial equally spaced lines on a = 1/2.
    slope_max_lines : int
        Lines after which the slope-one search stops uncertified.
    spacing : float
        Candidate sampling step along special curves, as a fraction of the window.
    roles : bool
        Use the f/g roles of contours to skip ties of no two costs (math.md section 5).
    certify : {"max", "each"}
        The slope-one line is certified per degree either way (issue 16); on the special set
        ``"each"`` certifies every degree, ``"max"`` the max over the finite degrees.
    polish : bool
        Refine the best special candidate along its curve.
    batch : int or None
        Candidates per evaluation round (default 4 whatever the jobs, so ``--jobs`` does not change
        the search; None: 1 for one job, else 2 per job).
    local_bound : bool
        Use the stability bound between evaluated lines (each map on its own mesh: any meshes).
    bound_grid : int
        Lines per side of the coarse grid that bounds h at the nodes of a focused atlas.
    polish_iters : int
        Golden-section steps of the polish.
    special_max_lines : int
        Lines the special-set pass may evaluate before it stops with candidates left.
    """

    slope_samples: int = _DEFAULTS.slope_samples
    slope_max_lines: int = _DEFAULTS.slope_max_lines
    spacing: float = _DEFAULTS.spacing
    roles: bool = _DEFAULTS.roles
    certify: str = _DEFAULTS.certify
    polish: bool = _DEFAULTS.polish
    batch: int | None = _DEFAULTS.batch
    local_bound: bool = _DEFAULTS.local_bound
    bound_grid: int = _DEFAULTS.bound_grid
    polish_iters: int = _DEFAULTS.polish_iters
    special_max_lines: int = _DEFAULTS.special_max_lines

    @classmethod
    def of(cls, settings: DistanceSettings) -> ReducedSettings:
        """The reduced-search part of a :class:`~specmap.settings.DistanceSettings`."""
        return cls(**{f.name: getattr(settings, f.name) for f in fields(cls)})


def _same_mesh(ev: LineEvaluator) -> bool:
    return ev.val_f.shape == ev.val_g.shape and np.array_equal(ev.tri_f, ev.tri_g)


def _top_index(ev: LineEvaluator) -> int | None:
    """Index of degree 2 in the evaluator's degrees when both meshes are closed connected surfaces."""
    from specmap.distance.cellbound import closed_connected

    if 2 not in ev.degrees:
        return None
    if not all(closed_connected(t, len(v)) for t, v in ((ev.tri_f, ev.val_f), (ev.tri_g, ev.val_g))):
        return None
    return list(ev.degrees).index(2)


def _slope_one_phase(
    ev: LineEvaluator,
    window: Window,
    groups: list[list[int]],
    tolerance: float,
    settings: ReducedSettings,
    step: int,
    same_mesh: bool,
) -> tuple[list[Best], SlopeOneSearch | None]:
    """Branch and bound on a = 1/2 to tolerance / 2, then the best line *of that search* per degree.

    Lines of a = 1/2 evaluated by another stage (the dense sweep) share the
    evaluator's memo but are not taken as slope-one values: the theorem audit
    compares two computations that share no decision.
    """
    nd = len(ev.degrees)
    slope = [Best() for _ in range(nd)]
    if not window.a[0] <= 0.5 <= window.a[1]:
        return slope, None
    info = slope_one_search(
        ev,
        window,
        groups,
        tolerance=tolerance / 2,
        samples=settings.slope_samples,
        max_lines=settings.slope_max_lines,
        batch=step,
        values=(ev.val_f, ev.val_g) if same_mesh else None,
        top=_top_index(ev),
    )
    for g, (v, b) in enumerate(zip(info.best, info.at, strict=True)):
        for j in groups[g]:  # one degree per group
            slope[j].offer(v, (0.5, b), "slope-one")
    return slope, info


def _seeded_local_bound(
    ev: LineEvaluator, window: Window, groups: list[list[int]], lines: list[tuple[float, float]]
) -> tuple[LocalBound, BoxBound]:
    """A :class:`LocalBound` and a :class:`BoxBound` holding the ``lines`` this search evaluated.

    Lines of other stages (the dense sweep) are not used: the search shares no decision with them.
    """
    local = LocalBound(ev.val_f, ev.val_g, window)
    boxes = BoxBound(ev.val_f, ev.val_g, window)
    known = [(p, ev.memo[p]) for p in dict.fromkeys(lines) if p in ev.memo]
    if known:
        P = np.array([p for p, _ in known])
        V = np.array([[np.max(v[g]) for g in groups] for _, v in known])
        local.add(P[:, 0], P[:, 1], V)
        boxes.add(P[:, 0], P[:, 1], V)
    return local, boxes


def _node_bounds_of(
    ev: LineEvaluator, window: Window, finite: list[int], own: list[tuple[float, float]], grid: int
) -> tuple[Callable[[np.ndarray, np.ndarray], NodeBounds], float]:
    """Evaluate a ``grid`` x ``grid`` set of lines; return the node-bound map and max h over them.

    The bounds come from these lines and the search's own (``own``), with h the max over the
    ``finite`` degree indices; the max of h over the coarse lines is returned for the audit (it
    must not exceed the search's value: D is a supremum over all lines).
    """
    a = np.linspace(window.a[0], window.a[1], grid)
    b = np.linspace(window.b[0], window.b[1], grid)
    A, B = (x.ravel() for x in np.meshgrid(a, b))
    ev.plan(len(A))
    H = ev(A, B)
    top = float(np.max(H[finite])) if len(finite) and H.size else -math.inf
    lines = [(float(x), float(y)) for x, y in zip(A, B, strict=True)] + [p for p in own if p in ev.memo]
    h = np.array([float(np.max(np.asarray(ev.memo[p])[finite])) for p in lines])
    P = np.array(lines, dtype=float)
    vf, vg = ev.val_f, ev.val_g
    bounds = (np.r_[vf.min(axis=0), vf.max(axis=0)], np.r_[vg.min(axis=0), vg.max(axis=0)])

    def at(av: np.ndarray, bv: np.ndarray) -> NodeBounds:
        return node_upper_bounds(vf, vg, bounds, window, av, bv, P, h)

    return at, top


@dataclass
class _Descent:
    """The descending pass over the candidates (step 2 of :func:`reduced_search`), its state and counters."""

    ev: LineEvaluator
    cand: Candidates
    groups: list[list[int]]
    best: np.ndarray  # per group
    tolerance: float
    upper: float
    step: int
    same_mesh: bool
    local: LocalBound | None
    max_lines: int = 1 << 62
    boxes: BoxBound | None = None
    special: list[Best] = field(init=False)  # per degree index
    counts: dict[str, int] = field(init=False)  # candidates pruned, by rule
    evaluated: list[int] = field(init=False, default_factory=list)
    stop: dict[str, Any] | None = field(init=False, default=None)
    order: np.ndarray = field(init=False)  # candidates by descending hi
    line_b: np.ndarray = field(init=False)  # line_upper_bound per candidate, NaN until computed
    open_g: np.ndarray = field(init=False)  # groups not yet stopped early
    pos: int = field(init=False, default=0)  # next position in ``order``
    local_b: np.ndarray = field(init=False)  # smallest LocalBound value so far per candidate, NaN if none
    left: dict[str, Any] | None = field(init=False, default=None)  # set when the line budget stopped the pass
    box_id: np.ndarray = field(init=False)  # the box of each candidate (when ``boxes``)

    def __post_init__(self) -> None:
        self.special = [Best() for _ in self.ev.degrees]
        built = self.cand.pruned  # rules applied while the list was built count as the pass's
        self.counts = {
            "below_best": int(self.cand.below_floor),
            "above_bound": int(built.get("above_bound", 0)),
            "line_bound": 0,
            "box_bound": int(built.get("box_bound", 0)),
            "local_bound": 0,
        }
        self.box_id = (
            self.boxes.box_of(self.cand.a, self.cand.b)
            if self.boxes is not None
            else np.zeros(len(self.cand.a), dtype=np.int64)
        )
        self.order = np.argsort(-self.cand.hi, kind="stable")
        self.line_b = np.full(len(self.cand.a), np.nan)
        self.local_b = np.full(len(self.cand.a), np.nan)
        self.open_g = ~np.isposinf(self.best)  # an infinite degree is exact: nothing to look for

    def run(self) -> None:
        n = len(self.cand.a)
        while self.pos < n and self.open_g.any():
            if len(self.evaluated) >= self.max_lines and self._budget_spent():
                return
            take = self._next_batch()
            if take:
                self._evaluate(take)
        self.counts["below_best"] += n - self.pos  # after an early stop every later t is <= best + tol

    def _budget_spent(self) -> bool:
        """Stop at the line budget when a candidate above the best is left: record what is left."""
        i = int(self.order[self.pos])
        thr = float(self.best[self.open_g].min())
        if not self.cand.hi[i] > thr + self.tolerance:
            return False  # every later candidate is below the best: the pass ends as usual
        n = len(self.cand.a)
        self.left = {
            "budget": int(self.max_lines),
            "candidates": int(n - self.pos),
            "top": float(self.cand.hi[i]),  # the largest tied cost not refuted (descending order)
            "groups": [int(g) for g in np.nonzero(self.open_g)[0]],
        }
        self.counts["not_examined"] = int(n - self.pos)
        return True

    def _verdicts(self, idx: np.ndarray) -> np.ndarray:
        """Why each candidate of ``idx`` cannot beat the best line: a rule code (0 = it may), vectorised.

        The rules in order (codes 1-4: ``_RULES``): its lower cost above the upper bound of D, above
        the sup-norm bound of its line (one mesh), above the bound of its box, above the stability
        bound from the nearest evaluated lines. Every bound holds whatever lines it was computed
        from, so a stored one refutes still and a fresh one (from the lines now) is kept when smaller.
        """
        c, tol = self.cand, self.tolerance
        lo = c.lo[idx]
        why = np.where(lo > self.upper + tol, 1, 0)
        if self.same_mesh:
            open_ = idx[why == 0]
            need = open_[np.isnan(self.line_b[open_])]
            if len(need):
                self.line_b[need] = line_upper_bound(self.ev.val_f, self.ev.val_g, c.a[need], c.b[need])
            why[(why == 0) & (lo > self.line_b[idx] + tol)] = 2
        if self.boxes is not None:  # one bound per box, recomputed when lines were added since
            box = self.boxes
            bid = self.box_id[idx]
            stale = (why == 0) & ~(lo > box.value[bid] + tol) & (box.lines_at[bid] < box.lines)
            if stale.any():
                box.refresh(bid[stale])
            why[(why == 0) & (lo > box.value[bid] + tol)] = 3
        if self.local is not None:
            old = self.local_b[idx]
            why[(why == 0) & (lo > old + tol)] = 4
            fresh = np.nonzero(why == 0)[0]
            if len(fresh):
                j = idx[fresh]
                now = self.local.many(c.a[j], c.b[j], (c.lo[j], tol)).max(axis=1)
                self.local_b[j] = np.fmin(self.local_b[j], now)
                why[fresh[lo[fresh] > now + tol]] = 4
        return why

    def _next_batch(self) -> list[int]:
        """Up to ``step`` candidates, in descending order of ``hi``, that survive the pruning rules.

        No line is evaluated while a batch is chosen, so the rules are applied to blocks of the
        order at once (:meth:`_verdicts`); a block's candidates past the batch are left for the next
        one (their bounds are kept).
        """
        n = len(self.cand.a)
        thr = float(self.best[self.open_g].min())
        take: list[int] = []
        block = 4 * self.step
        while self.pos < n and len(take) < self.step:
            idx = self.order[self.pos : self.pos + block]
            below = ~(self.cand.hi[idx] > thr + self.tolerance)
            cut = int(np.argmax(below)) if below.any() else len(idx)
            why = self._verdicts(idx[:cut])
            ok = np.nonzero(why == 0)[0]
            need = self.step - len(take)
            used = int(ok[need - 1]) + 1 if len(ok) >= need else cut
            for code, k in zip(*np.unique(why[:used], return_counts=True), strict=True):
                if code:
                    self.counts[_RULES[code]] += int(k)
            take.extend(int(i) for i in idx[ok[:need]])
            self.pos += used
            if used == cut < len(idx):  # the rest is at or below the best
                self.counts["below_best"] += n - self.pos
                self.pos = n
                break
            block = min(2 * block, 4096)
        return take

    def _evaluate(self, take: list[int]) -> None:
        """h at the candidates ``take``: update the bests, the local bound and the early stop."""
        c, tol = self.cand, self.tolerance
        self.ev.plan(len(take))
        H = self.ev(c.a[take], c.b[take])
        self.evaluated.extend(take)
        G = np.array([[np.max(H[g, k]) for g in self.groups] for k in range(len(take))])
        if self.local is not None:
            self.local.add(c.a[take], c.b[take], G)
        if self.boxes is not None:
            self.boxes.add(c.a[take], c.b[take], G)
        for k, i in enumerate(take):
            for j in range(len(self.ev.degrees)):
                if self.special[j].offer(H[j, k], (c.a[i], c.b[i]), "special"):
                    self.special[j].tag = (int(c.piece[i]), i)
            self.best = np.maximum(self.best, G[k])
            hit = self.open_g & (G[k] >= c.hi[i] - tol)
            if hit.any() and self.stop is None:
                self.stop = {
                    "a": float(c.a[i]),
                    "b": float(c.b[i]),
                    "t": float(c.hi[i]),
                    "h": float(G[k].max()),
                    "origin": ORIGINS[int(c.origin[i])],
                    "rank": len(self.evaluated) - len(take) + k + 1,
                }
            self.open_g &= ~hit


def _polish(
    ev: LineEvaluator,
    special: list[Best],
    slope: list[Best],
    cand: Candidates,
    window: Window,
    tolerance: float,
    settings: ReducedSettings,
) -> None:
    """Refine the best special candidate of each certified degree along its curve (golden section)."""
    top = max(max(s.value, p.value) for s, p in zip(slope, special, strict=True))
    for j, rec in enumerate(special):
        if not (settings.polish and rec.tag is not None and math.isfinite(rec.value)):
            continue
        if rec.value < slope[j].value - tolerance or (
            settings.certify == "max" and rec.value < top - tolerance
        ):
            continue
        ip, _ = rec.tag
        paths = cand.paths_of.get(ip, [])
        if not paths:
            continue
        norm = normalise(np.array(rec.at), window)
        k = min(paths, key=lambda p: float(np.min(np.linalg.norm(cand.paths[p] - norm, axis=1))))
        ev.plan(settings.polish_iters + 2)
        v, at = polish_along(ev, [j], cand.paths[k], rec.at, window, settings.spacing, settings.polish_iters)
        if v > rec.value:
            rec.offer(v, at, "special")


def _component_of(piece, point: tuple[float, float], components: Sequence) -> str | None:
    """Id of the atlas component nearest to ``point`` among those holding the piece's tie (else all)."""
    if not components:
        return None
    from shapely.geometry import Point

    p = Point(point)
    same = [c for c in components if piece.tie in tuple(getattr(c, "ties", ()))]
    pool = [c for c in (same or list(components)) if c.geometry is not None]
    if not pool:
        return None
    return str(min(pool, key=lambda c: c.geometry.distance(p)).id)


# long by its docstring only (why the short candidate list suffices); the body is about 35 lines
def reduced_search(
    ev: LineEvaluator,
    window: Window,
    atlas,
    contours_by_id: dict,
    *,
    tolerance: float,
    upper: float,
    settings: ReducedSettings = ReducedSettings(),
) -> ReducedSearch:
    """D_k = max(max_b h_k(1/2, b), sup of h_k over the special set) [EFQT23, FMQT].

    Write t(p) for the tied cost of a tie at p (value units,
    :func:`~specmap.distance.ties.tie_costs`): |d| for an equal tie of two cross pairs
    (matching costs), |d|/2 for one of two same-grid pairs (diagonal costs), the
    smaller difference for a half tie of a same-grid pair (larger difference) against
    a cross pair. Other ties compare costs of different kinds and carry no maximum
    (math.md 5, role-aware refinement): they are skipped (``pruned["roles"]``).

    Why a short list suffices. If D is not reached on a = 1/2 it is reached at
    a special point p* where the active cost ties with another, so
    h(p*) = t(p*) = D for a tie through p*; along that curve h = t while the
    tie stays active, so p* is a local maximum of t along the curve, an end of
    the active arc (a crossing with a tie sharing a pair) or an end of the curve
    (:func:`~specmap.distance.candidates.special_candidates`). Every candidate c has
    h(c) <= D, so a candidate with t(c) > D has h(c) < t(c).

    1. Slope-one line: :func:`~specmap.distance.slope_one.slope_one_search`, a branch
       and bound in b with the Lipschitz constant 2 of h along a = 1/2, from
       ``slope_samples`` equally spaced lines until max_b h <= best + tolerance / 2
       is certified (at most ``slope_max_lines`` lines); ``best`` is its value.
    2. Candidates in descending order of t (sort key ``hi``, the larger side
       off the curve); a candidate is dropped when
       - ``below_best``: t <= best + tol (then so is every later one);
       - ``above_bound``: ``lo`` > U + tol, U an upper bound of D (``upper``);
       - ``line_bound``: ``lo`` > ||F*_f - F*_g||_inf on its line + tol
         (:func:`~specmap.distance.bounds.line_upper_bound`, same mesh only): then h(c) < t(c);
       - ``local_bound``: ``lo`` > h(q) + ||F*_f(c) - F*_f(q)|| + ||F*_g(c) - F*_g(q)|| + tol
         for an evaluated line q (stability of each map between the two lines, on its own mesh,
         and the triangle inequality: valid when f and g live on different meshes).
       The others are evaluated in batches (``batch``, default 4 whatever the
       number of jobs) and ``best`` grows. **Early stop**: the first evaluated c
       with h(c) >= t(c) - tol gives D = max(best, h(c)) up to tol: any
       candidate with t > D has h < t, so the first one with h = t has t = D,
       and every later one has t <= t(c) <= h(c) + tol (it is then
       ``below_best``).
    3. Polish: the best special candidate of each certified degree is refined by
       a golden-section search of h along its curve (``polish_iters``).

    On meshes the grid, hence the special set, is approximate; nothing above is
    used to *hide* a larger value: :func:`~specmap.distance.matching_distance` audits
    the result against the dense sweep both ways (``theorem_gap``).

    On a = 1/2 every degree is searched and certified on its own. On the special set
    ``certify="each"`` runs one group per degree (each D_k certified, more candidates
    evaluated), ``"max"`` one group of the finite degrees (the max over degrees is
    certified; a lower degree gets the group's bound, see ``groups``). An infinite degree
    is exact and closed at once. Lines evaluated by other stages share the memo but
    never count as values of this search.

    Parameters
    ----------
    ev : LineEvaluator
    window : Window
    atlas : object or callable
        ``pieces`` (tie, kind, geometry) and ``components`` (id, geometry, ties); or a source
        ``atlas(floor, upper, bounds_at)`` called once the slope-one floor is known, returning
        the atlas of the ties whose cost can lie in (floor, upper] (value units, tolerance
        included), below the node bounds of h ``bounds_at(av, bv) -> NodeBounds`` (None when
        ``bound_grid`` is 0; :mod:`specmap.distance.node_bounds`), e.g.
        :func:`specmap.distance.focused.focused_source`: the search then never maps
        the whole special set, ``focus`` records the pairs kept, and ``component`` stays None
        (the focused atlas's components are not those of the map).
    contours_by_id : dict
        Contours of both grids by id.
    tolerance, upper : float
        Value units; ``upper`` is an upper bound of D.
    settings : ReducedSettings

    Returns
    -------
    ReducedSearch
        ``pruned`` holds ties (``roles``, ``unknown_contour``, ``not_met``,
        ``outside_window``), candidates (``below_best``, ``above_bound``,
        ``line_bound``, ``local_bound``), ``candidates_total``, ``candidates_evaluated``,
        ``crossings``, ``early_stop``; ``stop`` the stopping candidate or None.
    """
    s = settings
    if s.certify not in ("max", "each"):
        raise ValueError("certify must be 'max' or 'each'")
    t0 = time.perf_counter()
    n0 = ev.lines
    nd = len(ev.degrees)
    # the slope-one line: every degree searched and certified on its own (issue 16 item 6)
    per_degree = [[j] for j in range(nd)]
    step = s.batch or (1 if ev.jobs == 1 else 2 * ev.jobs)
    same_mesh = _same_mesh(ev)
    before = set(ev.memo)
    slope, slope_info = _slope_one_phase(ev, window, per_degree, tolerance, s, step, same_mesh)
    own = [p for p in ev.memo if p not in before] + [
        (0.5, float(b)) for b in (slope_info.at if slope_info else [])
    ]
    # the special set: one group per degree ("each"), or the finite degrees together ("max", cheaper:
    # lower degrees then get the group's bound); an infinite degree is exact, a group of its own
    infinite = [j for j in range(nd) if math.isinf(slope[j].value) and slope[j].value > 0]
    finite = [j for j in range(nd) if j not in infinite]
    groups = per_degree if s.certify == "each" else ([finite] if finite else []) + [[j] for j in infinite]
    best = np.array([max(slope[j].value for j in g) for g in groups])
    t1 = time.perf_counter()
    # every threshold of the descending pass is >= min(best) over the finite degrees (an infinite
    # degree is exact and closed at once): candidates under it are below_best anyway
    rest = best[~np.isposinf(best)]
    floor = float(rest.min()) if len(rest) and np.isfinite(rest).all() else -math.inf
    focus = None
    if callable(atlas):  # a source: only the ties that can lie in (floor, upper] are mapped
        bounds_at, grid_top = None, None
        if s.bound_grid > 1 and finite:
            seen = set(ev.memo)
            bounds_at, grid_top = _node_bounds_of(ev, window, finite, own, s.bound_grid)
            own += [p for p in ev.memo if p not in seen]  # this search's lines: they bound h too
        atlas = atlas(floor + tolerance, upper + tolerance, bounds_at)
        focus = dict((getattr(atlas, "stats", None) or {}).get("focus") or {}) or None
        if focus is not None:
            focus["grid_lines"] = s.bound_grid**2 if bounds_at is not None else 0
            focus["grid_max_h"] = grid_top
    local, boxes = _seeded_local_bound(ev, window, groups, own) if s.local_bound else (None, None)
    cand = special_candidates(
        atlas,
        contours_by_id,
        window,
        spacing=s.spacing,
        roles=s.roles,
        floor=floor,
        tolerance=tolerance,
        upper=upper,
        bound=boxes.at if boxes is not None and boxes.lines else None,
    )
    cand_seconds = time.perf_counter() - t1
    pieces = tuple(getattr(atlas, "pieces", ()) or ())
    components = tuple(getattr(atlas, "components", ()) or ())
    walk = _Descent(
        ev, cand, groups, best, tolerance, upper, step, same_mesh, local, s.special_max_lines, boxes
    )
    walk.run()
    special = walk.special
    _polish(ev, special, slope, cand, window, tolerance, s)
    for rec in special:
        if rec.tag is not None and focus is None:  # a focused atlas's components are not the map's
            rec.component = _component_of(pieces[rec.tag[0]], rec.at, components) or f"piece:{rec.tag[0]}"
    n = len(cand.a)
    pruned = {
        **cand.pruned,
        **walk.counts,
        "ties_total": len(pieces),
        "ties_live": len(cand.live),
        "ties_evaluated": len({int(cand.piece[i]) for i in walk.evaluated}),
        "candidates_total": n + int(cand.below_floor),
        "candidates_evaluated": len(walk.evaluated),
        "crossings": cand.crossings,
        "early_stop": walk.stop is not None,
    }
    return ReducedSearch(
        slope=slope,
        special=special,
        lines=ev.lines - n0,
        seconds=time.perf_counter() - t0,
        pruned=pruned,
        stop=walk.stop,
        candidate_seconds=cand_seconds,
        slope_search=slope_info,
        settings=s,
        groups=[list(g) for g in groups],
        focus=focus,
        left=walk.left,
    )
