"""D_2 of two closed connected surfaces in closed form: h_2 = |max F*_f - max F*_g| over the whole strip.

On a closed connected triangulated surface (every edge in two triangles, one component:
:func:`~specmap.distance.cellbound.closed_connected`) a lower-star filtration F has Dgm_2 =
{(max F, inf)} or nothing [standard simplicial homology: a 2-complex has no 3-simplices, so its
2-classes never die, and a proper subcomplex carries no 2-cycle], so on every line p

    h_2(p) = |M_f(p) - M_g(p)|,   M(p) = max over vertices of F*(p)

when both surfaces carry the class (else h_2 is 0 or inf on every line). [D] In the explicit forms
of :mod:`specmap.distance.branch` (``"below"``: x = f1, y = f2, beta = b; ``"above"``: x = f2,
y = f1, beta = -b; t in [0, 1]), F* = max(x - beta, t (y + beta)) and t >= 0, so the max over the
vertices commutes with the two branches:

    M(t, beta) = max(X - beta, t (Y + beta)),   X = max_v x, Y = max_v y,

four numbers per pair and form. For fixed t, M_f - M_g is piecewise linear in beta with its
breakpoints at the kinks beta = (X - t Y) / (1 + t) of M_f and M_g, so sup over beta of |M_f - M_g|
(S(t)) is exact at the ends of the beta range and the kinks inside it. In t, each M moves by at most
|Y + beta| per unit of t, so S is L_t-Lipschitz with L_t = max over the two beta ends of
|Y_f + beta| + |Y_g + beta| (|Y + beta| is convex in beta), and between two t nodes
S <= (S_i + S_{i+1}) / 2 + L_t (t_{i+1} - t_i) / 2 (the Piyavskii-Shubert bound). With nodes
L_t dt <= tol / 2 apart this is a certified interval of sup h_2 over the strip (ends included:
the limit line t = 0 is a node) of width at most the tolerance, at the cost of a numpy sweep and
one or two slices: the evaluated h_2 at the best node (a line with t > 0) is the lower end, and the
slices check the closed form there and at the other stages' best line (a surface whose 2-class is
missing over the slices' field, or any other departure, leaves the degree to the other stages).

The slope-one line (t = 1) is the 1-D case: :func:`slope_one_top_cap` is the exact max of h_2 over
an interval of b, used by :func:`~specmap.distance.slope_one.slope_one_search`.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from specmap.distance.branch import apply_strip, top_degree_index
from specmap.distance.ends import end_a
from specmap.strip import Window

METHOD = "closed form of h_2 = |max F*_f - max F*_g| (closed connected surfaces), swept over the whole strip"
MAX_NODES = 4_000_000
"""Largest number of t nodes per form (the bound stays valid above it, only wider)."""
AGREE = 1e-9
"""Relative agreement of a slice's h_2 with the closed form (value units times the value scale)."""


@dataclass(frozen=True)
class TopSup:
    """sup of |M_f - M_g| over the strip: ``bound`` (certified), ``best`` at the line ``at`` = (a, b)."""

    bound: float
    best: float
    at: tuple[float, float]
    nodes: int


def _form_tops(values: np.ndarray, form: str) -> tuple[float, float]:
    """(X, Y) = (max x, max y) of one map in a form: x = f1, y = f2 below; x = f2, y = f1 above."""
    v = np.asarray(values, float)
    top = v.max(axis=0)
    return (float(top[0]), float(top[1])) if form == "below" else (float(top[1]), float(top[0]))


def _m(x: float, y: float, t: np.ndarray, beta: np.ndarray) -> np.ndarray:
    return np.maximum(x - beta, t * (y + beta))


def top_h(values_f: np.ndarray, values_g: np.ndarray, a, b) -> np.ndarray:
    """|M_f - M_g| at lines (a, b): the closed form of h_2 (value units), vectorised."""
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    out = np.empty(a.shape)
    lo = a <= 0.5
    for form, mask in (("below", lo), ("above", ~lo)):
        if not mask.any():
            continue
        am = a[mask]
        t = am / (1.0 - am) if form == "below" else (1.0 - am) / am
        beta = b[mask] if form == "below" else -b[mask]
        (xf, yf), (xg, yg) = _form_tops(values_f, form), _form_tops(values_g, form)
        out[mask] = np.abs(_m(xf, yf, t, beta) - _m(xg, yg, t, beta))
    return out


def _form_sup(
    tf: tuple[float, float], tg: tuple[float, float], beta_lo: float, beta_hi: float, tolerance: float
) -> tuple[float, float, float, float, int]:
    """(bound, best value, t of best (t > 0), beta of best, nodes) of one form over [0, 1] x [beta_lo, beta_hi]."""
    (xf, yf), (xg, yg) = tf, tg
    lip = max(abs(yf + e) + abs(yg + e) for e in (beta_lo, beta_hi))
    n = int(min(MAX_NODES, max(2, math.ceil(2.0 * lip / max(tolerance, 1e-300)) + 1)))
    t = np.linspace(0.0, 1.0, n)
    cands = [np.full(n, beta_lo), np.full(n, beta_hi)]
    for x, y in ((xf, yf), (xg, yg)):
        cands.append(np.clip((x - t * y) / (1.0 + t), beta_lo, beta_hi))
    B = np.stack(cands)  # (4, n)
    phi = np.abs(_m(xf, yf, t[None], B) - _m(xg, yg, t[None], B))
    k = phi.argmax(axis=0)
    S = phi[k, np.arange(n)]
    dt = 1.0 / (n - 1)
    bound = float(((S[:-1] + S[1:]) / 2).max() + lip * dt / 2)
    i = 1 + int(np.argmax(S[1:]))  # a line: t > 0
    return max(bound, float(S.max())), float(S[i]), float(t[i]), float(B[k[i], i]), n


def top_sup(values_f: np.ndarray, values_g: np.ndarray, b_range: Sequence[float], tolerance: float) -> TopSup:
    """Certified sup of |M_f - M_g| over ]0, 1[ x [b-, b+] (both forms), to within ``tolerance``.

    Returns the bound, the closed-form value at the best node and that node as a line (a, b).
    """
    b0, b1 = float(b_range[0]), float(b_range[1])
    best: tuple[float, float, float] | None = None
    bound, nodes = -math.inf, 0
    for form, (lo, hi) in (("below", (b0, b1)), ("above", (-b1, -b0))):
        ub, val, t, beta, n = _form_sup(
            _form_tops(values_f, form), _form_tops(values_g, form), lo, hi, tolerance
        )
        bound, nodes = max(bound, ub), nodes + n
        a = float(end_a(form, t))
        b = beta if form == "below" else -beta
        if best is None or val > best[0]:
            best = (val, a, b)
    assert best is not None
    return TopSup(bound=bound, best=best[0], at=(best[1], best[2]), nodes=nodes)


def slope_one_top_cap(
    values_f: np.ndarray, values_g: np.ndarray
) -> tuple[Callable[[float, float], float], list[float]]:
    """(cap, kinks): cap(lo, hi) = max over b in [lo, hi] of |M_f - M_g| on a = 1/2, exactly.

    On t = 1, M(b) = max(X1 - b, X2 + b) (X = the maxima of f1, f2) is piecewise linear with its kink
    at b = (X1 - X2) / 2, so the max of |M_f - M_g| over an interval is at its ends or the kinks in it.
    """
    (xf, yf), (xg, yg) = _form_tops(values_f, "below"), _form_tops(values_g, "below")
    kinks = sorted({(xf - yf) / 2.0, (xg - yg) / 2.0})

    def h(b: float) -> float:
        return abs(max(xf - b, yf + b) - max(xg - b, yg + b))

    def cap(lo: float, hi: float) -> float:
        return max(h(x) for x in [lo, hi, *(k for k in kinks if lo < k < hi)])

    return cap, kinks


def agrees(h: float, closed: float, scale: float) -> bool:
    """Whether a slice's h_2 equals the closed form to :data:`AGREE` of the value scale."""
    return bool(abs(h - closed) <= AGREE * max(1.0, scale))


def fold_top(
    ev,
    shape_f,
    shape_g,
    window: Window,
    by_degree: dict[int, dict[str, Any]],
    degrees: Sequence[int],
    tolerance: float,
) -> dict[str, Any] | None:
    """Certify degree 2 of two closed connected surfaces by the closed form, when still open (in place).

    The interval is folded into ``by_degree[2]`` as its ``strip`` block
    (:func:`~specmap.distance.branch.apply_strip`: intersection of the intervals, the strip's ends
    covered). Returns ``{"lines", "seconds", "nodes", "method", "agrees"}``, or None when degree 2 is
    not asked, already certified, infinite, or the meshes are not closed connected surfaces; with
    ``agrees`` False (a slice departs from the closed form) nothing is folded.
    """
    j = top_degree_index(shape_f, shape_g, degrees)
    if j is None:
        return None
    entry = by_degree[degrees[j]]
    if entry.get("certified") or not math.isfinite(entry["value"]):
        return None
    t0 = time.perf_counter()
    n0 = ev.lines
    vf, vg = np.asarray(shape_f.values, float), np.asarray(shape_g.values, float)
    sup = top_sup(vf, vg, window.b, tolerance)
    lines = [sup.at]
    if entry.get("at") is not None:
        lines.append((float(entry["at"][0]), float(entry["at"][1])))
    a = np.array([p[0] for p in lines])
    b = np.array([p[1] for p in lines])
    H = np.asarray(ev(a, b), float)[j]
    closed = top_h(vf, vg, a, b)
    scale = float(max(np.abs(vf).max(initial=0.0), np.abs(vg).max(initial=0.0)))
    ok = all(agrees(float(h), float(c), scale) for h, c in zip(H, closed, strict=True))
    meta = {
        "method": METHOD,
        "lines": len(lines),
        "new_lines": ev.lines - n0,
        "nodes": sup.nodes,
        "agrees": ok,
        "seconds": time.perf_counter() - t0,
    }
    if not ok:
        return meta
    best = float(H[0])
    block = {
        "method": METHOD,
        "bounds": [best, sup.bound],
        "best_at": [sup.at[0], sup.at[1]],
        "closed": bool(sup.bound - best <= tolerance * (1 + 1e-9) + 1e-15),
        "lines": len(lines),
        "new_lines": meta["new_lines"],
        "seconds": meta["seconds"],
    }
    apply_strip(entry, block, tolerance, window.a)
    if entry.get("ends") is not None and entry["ends"].get("method") == "searched":
        entry["ends"]["method"] = "closed form"
    return meta
