"""max over b of h on the slope-one line a = 1/2, by a certified branch and bound (Piyavskii-Shubert)."""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np

from specmap.distance.bounds import SLOPE_ONE_LIPSCHITZ, slope_one_sup_norm_max
from specmap.distance.evaluator import LineEvaluator
from specmap.distance.result import SlopeOneSearch
from specmap.distance.top_degree import agrees, slope_one_top_cap
from specmap.strip import Window


def _group_values(ev: LineEvaluator, groups: Sequence[Sequence[int]], b: np.ndarray) -> np.ndarray:
    """G(b): max of h over each group of degree indices on the lines (1/2, b), shape (len(b), n_groups)."""
    H = ev(np.full(b.shape, 0.5), b)  # (n_deg, n)
    G = [[float(np.max(H[list(g), i])) for g in groups] for i in range(len(b))]
    return np.array(G).reshape(-1, len(groups))


def _sup_norm_cap(values: tuple[np.ndarray, np.ndarray]) -> Callable[[float, float], float]:
    """Memoised :func:`slope_one_sup_norm_max` of the two maps over [lo, hi]."""
    cache: dict[tuple[float, float], float] = {}

    def cap(lo: float, hi: float) -> float:
        key = (lo, hi)
        if key not in cache:
            cache[key] = slope_one_sup_norm_max(values[0], values[1], lo, hi)
        return cache[key]

    return cap


def _top_cap(
    ev: LineEvaluator,
    group: Sequence[int],
    xs: np.ndarray,
    tcap: Callable[[float, float], float],
    cap: Callable[[float, float], float] | None,
) -> Callable[[float, float], float] | None:
    """The closed-form cap of the top degree, min with ``cap``, if the slices at ``xs`` agree with it."""
    G = _group_values(ev, [group], xs)[:, 0]
    scale = float(max(np.abs(ev.val_f).max(initial=0.0), np.abs(ev.val_g).max(initial=0.0)))
    if not all(agrees(float(h), tcap(float(x), float(x)), scale) for h, x in zip(G, xs, strict=True)):
        return cap
    if cap is None:
        return tcap
    inner = cap
    return lambda lo, hi: min(inner(lo, hi), tcap(lo, hi))


def _split_points(
    xs: np.ndarray, G: np.ndarray, gap: np.ndarray, idx: np.ndarray, lipschitz: float
) -> np.ndarray:
    """Where the intervals ``idx`` are split: the apex x* of the group with the largest gap, 5% off the ends."""
    new = []
    for i in idx:
        g = int(np.argmax(np.where(np.isnan(gap[i]), -np.inf, gap[i])))
        lo, hi = xs[i], xs[i + 1]
        x = (lo + hi) / 2 + (G[i + 1, g] - G[i, g]) / (2 * lipschitz)
        x = min(max(x, lo + 0.05 * (hi - lo)), hi - 0.05 * (hi - lo))
        new.append(x)
    return np.array(new)


# long by its docstring (the bound and the search); the body is about 40 lines
def slope_one_search(
    ev: LineEvaluator,
    window: Window,
    groups: Sequence[Sequence[int]],
    *,
    tolerance: float,
    samples: int = 17,
    max_lines: int = 200,
    batch: int = 1,
    lipschitz: float = SLOPE_ONE_LIPSCHITZ,
    values: tuple[np.ndarray, np.ndarray] | None = None,
    top: int | None = None,
) -> SlopeOneSearch:
    """max over b of h on the slope-one line a = 1/2, by branch and bound, certified to ``tolerance``.

    Bound. On a = 1/2, F* = max(f1 - b, f2 + b) moves by at most |b - b'| at every
    vertex, so by stability for each map and the triangle inequality for d_B,
    G(b) = max over a group of degrees of h_k(1/2, b) is L-Lipschitz in b with
    L = 2 (the L_b = 1 of :func:`~specmap.distance.bounds.lipschitz_constants`,
    doubled as in the dense sweep's error bound). Between two evaluated lines l < r,
    G <= min(G(l) + L (x - l), G(r) + L (r - x)), whose largest value is

        UB(l, r) = (G(l) + G(r)) / 2 + L (r - l) / 2,

    reached at x* = (l + r) / 2 + (G(r) - G(l)) / (2 L). For two maps on one mesh
    (``values``) the interval bound is min(UB, S(l, r)) with S the exact max over
    [l, r] of ||F*_f - F*_g||_inf (:func:`~specmap.distance.bounds.slope_one_sup_norm_max`,
    no diagram): stability closes intervals where h cannot exceed best + tolerance
    whatever its slope, e.g. the flat h = |c| of g = f + (c, c). For the top degree of two
    closed connected surfaces (``top``, the group ``[top]``) h_2 = |max F*_f - max F*_g| is
    piecewise linear in b with two kinks, and its exact max over [l, r]
    (:func:`~specmap.distance.top_degree.slope_one_top_cap`) is the interval bound; the kinks
    join the starting lines, and the bound is used only when every starting line agrees with
    the closed form.

    Search (Piyavskii-Shubert). ``samples`` equally spaced values of b over the
    window, then repeatedly: the interval with the largest UB - best is split
    at its x* (kept at least 5% of the interval away from its ends), ``batch``
    intervals per round (one slice each); an interval is dropped for good once
    UB <= best + tolerance for every group. Every line is evaluated once
    (:class:`~specmap.distance.evaluator.LineEvaluator` keeps a memo by (a, b)). When
    no interval is left, max_b G <= best + tolerance: the slope-one part of D is
    certified. Each group is searched and certified on its own (``certified_groups``),
    one after the other from the same ``samples`` starting lines (lines of other groups
    are shared through the memo, never their decisions); a group stops after
    ``max_lines`` lines of its own, memo hits included (it is then uncertified, its
    ``bound`` still a valid upper bound). A group whose h is ``inf`` on a line is
    exactly ``inf`` on every line (the numbers of essential classes are the Betti numbers
    of the two complexes): it is certified at once and takes no part in the stopping rule.

    Parameters
    ----------
    ev : LineEvaluator
    window : Window
        Its b range is searched.
    groups : sequence of sequences of int
        Degree indices whose max is bounded together (one group per certified value).
    tolerance : float
    samples, max_lines, batch : int
    lipschitz : float
        L above; only a larger value keeps the bound valid.
    values : (ndarray (n, 2), ndarray (n, 2)), optional
        Vertex values of f and g on one mesh (same triangles), for the sup-norm bound.
    top : int, optional
        Degree index of degree 2 when both meshes are closed connected surfaces
        (:func:`~specmap.distance.branch.top_degree_index`).

    Returns
    -------
    SlopeOneSearch
        ``best`` and ``at`` (b of the best line searched here, per group), ``bound`` (per
        group: best + the largest remaining UB - best, an upper bound of max_b G over the
        window), ``certified_groups`` and ``certified`` (all of them), ``lines`` (distinct
        lines new to the evaluator), ``rounds``, ``max_lines`` (the budget).

    References
    ----------
    .. [CDFFL13] Cerri et al. (2013): stability; Piyavskii (1972), Shubert (1972):
       sequential search for the global maximum of a Lipschitz function.
    """
    b_lo, b_hi = (float(x) for x in window.b)
    n0 = ev.lines
    xs = np.linspace(b_lo, b_hi, max(2, int(samples)))
    ev.plan(len(xs))
    cap = _sup_norm_cap(values) if values is not None else None
    out = []
    for g in groups:
        gcap, gxs = cap, xs
        if top is not None and list(g) == [top]:
            tcap, kinks = slope_one_top_cap(ev.val_f, ev.val_g)
            gxs = np.unique(np.r_[xs, [k for k in kinks if b_lo < k < b_hi]])
            gcap = _top_cap(ev, g, gxs, tcap, cap)
        out.append(
            _search_group(
                ev,
                g,
                gxs,
                b_lo,
                b_hi,
                tolerance=tolerance,
                max_lines=max_lines,
                batch=batch,
                lipschitz=lipschitz,
                cap=gcap,
            )
        )
    cert = [o[2] for o in out]
    return SlopeOneSearch(
        best=[o[0] for o in out],
        bound=[o[1] for o in out],
        certified=all(cert),
        lines=ev.lines - n0,
        rounds=sum(o[4] for o in out),
        at=[o[3] for o in out],
        certified_groups=cert,
        max_lines=int(max_lines),
    )


def _search_group(
    ev: LineEvaluator,
    group: Sequence[int],
    xs: np.ndarray,
    b_lo: float,
    b_hi: float,
    *,
    tolerance: float,
    max_lines: int,
    batch: int,
    lipschitz: float,
    cap: Callable[[float, float], float] | None,
) -> tuple[float, float, bool, float, int]:
    """The branch and bound of one group from the lines ``xs``: (best, bound, certified, b of best, rounds)."""
    G = _group_values(ev, [group], xs)[:, 0]
    best = float(np.where(np.isnan(G), -np.inf, G).max())
    if math.isinf(best) and best > 0:
        # h_k = inf on one line means different numbers of essential classes (Betti numbers of the
        # complexes, the same on every line): the max is exactly inf, nothing to search
        return math.inf, math.inf, True, float(xs[int(np.argmax(G))]), 0
    budget = max(int(max_lines), len(xs))
    min_len = 1e-12 * max(1.0, b_hi - b_lo)
    rounds = 0
    while True:
        length = np.diff(xs)
        ub = (G[:-1] + G[1:]) / 2 + lipschitz * length / 2
        if cap is not None:
            ub = np.minimum(ub, [cap(float(lo), float(hi)) for lo, hi in zip(xs[:-1], xs[1:], strict=True)])
        with np.errstate(invalid="ignore"):
            gap = np.where(np.isnan(ub), -np.inf, ub - (best + tolerance))
        live = (gap > 0) & (length > min_len)
        if not live.any() or len(xs) >= budget:  # its own lines, memo hits included
            break
        idx = np.nonzero(live)[0]
        idx = idx[np.argsort(-gap[idx], kind="stable")][: max(1, int(batch))]
        new = _split_points(xs, G[:, None], gap[:, None], idx, lipschitz)
        ev.plan(len(new))
        Gn = _group_values(ev, [group], new)[:, 0]
        best = max(best, float(np.where(np.isnan(Gn), -np.inf, Gn).max()))
        at = np.searchsorted(xs, new)
        xs = np.insert(xs, at, new)
        G = np.insert(G, at, Gn)
        order = np.argsort(xs, kind="stable")  # several splits in one round: keep xs sorted
        xs, G = xs[order], G[order]
        rounds += 1
    # a NaN value bounds nothing, an open interval (even one below min_len) is not closed
    nan = bool(np.isnan(G).any())
    certified = not (gap > 0).any() and not nan
    bound = (
        math.inf if nan else max(best, float(np.where(np.isnan(ub), -np.inf, ub).max()) if len(ub) else best)
    )
    at_b = float(xs[int(np.argmax(np.where(np.isnan(G), -np.inf, G)))])
    return best, bound, certified, at_b, rounds
