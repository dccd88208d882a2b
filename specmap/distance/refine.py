"""Local maximisation of h: a compass search in the strip, a golden-section search along a path.

Both only refine a value already found (they can raise it, never certify it).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np

from specmap.distance.evaluator import LineEvaluator
from specmap.distance.paths import denormalise, normalise
from specmap.strip import Window


def pattern_search(
    ev: LineEvaluator,
    j: int,
    start: tuple[float, float],
    step: tuple[float, float],
    window: Window,
    levels: int = 5,
    max_batches: int = 40,
) -> tuple[float, tuple[float, float]]:
    """Compass search (8 directions) maximising h_{degrees[j]} from ``start``; halves the step ``levels`` times."""
    (a_lo, a_hi), (b_lo, b_hi) = window.a, window.b
    x = start
    fx = float(ev(*x)[j])
    da, db = step
    dirs = [(1, 0), (-1, 0), (0, 1), (0, -1), (1, 1), (1, -1), (-1, 1), (-1, -1)]
    level = 0
    for _ in range(max_batches):
        cand = [(min(max(x[0] + u * da, a_lo), a_hi), min(max(x[1] + v * db, b_lo), b_hi)) for u, v in dirs]
        cand = [c for c in dict.fromkeys(cand) if c != x]
        if cand:
            vals = ev(np.array([c[0] for c in cand]), np.array([c[1] for c in cand]))[j]
            i = int(np.argmax(vals))
            if vals[i] > fx:
                x, fx = cand[i], float(vals[i])
                continue
        level += 1
        if level > levels:
            break
        da, db = da / 2, db / 2
    return fx, x


def golden_max(fun: Callable[[float], float], lo: float, hi: float, iters: int) -> tuple[float, float]:
    """Golden-section search for a max of ``fun`` on [lo, hi]; returns the best (value, t) seen."""
    g = (math.sqrt(5.0) - 1) / 2
    best = (-math.inf, lo)
    x1, x2 = hi - g * (hi - lo), lo + g * (hi - lo)
    f1, f2 = fun(x1), fun(x2)
    best = max(best, (f1, x1), (f2, x2))
    for _ in range(iters):
        if f1 >= f2:
            hi, x2, f2 = x2, x1, f1
            x1 = hi - g * (hi - lo)
            f1 = fun(x1)
            best = max(best, (f1, x1))
        else:
            lo, x1, f1 = x1, x2, f2
            x2 = lo + g * (hi - lo)
            f2 = fun(x2)
            best = max(best, (f2, x2))
    return best


def polish_along(
    ev: LineEvaluator,
    j_group: Sequence[int],
    path: np.ndarray,
    point: tuple[float, float],
    window: Window,
    spacing: float,
    iters: int,
) -> tuple[float, tuple[float, float]]:
    """Golden-section search of max over ``j_group`` of h along a (normalised) path, within 2 spacings of ``point``."""
    from shapely.geometry import LineString, Point

    if len(path) < 2:
        return -math.inf, point
    line = LineString(path)
    d0 = line.project(Point(normalise(np.array(point), window)))
    lo, hi = max(0.0, d0 - 2 * spacing), min(line.length, d0 + 2 * spacing)

    def fun(d: float) -> float:
        a, b = denormalise(np.asarray(line.interpolate(d).coords[0]), window)
        return float(ev(float(a), float(b))[list(j_group)].max())

    v, d = golden_max(fun, lo, hi, iters)
    a, b = denormalise(np.asarray(line.interpolate(d).coords[0]), window)
    return v, (float(a), float(b))
