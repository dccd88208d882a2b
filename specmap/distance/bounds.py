"""Upper bounds of h_k and D_k without diagrams: Lipschitz constants, sup norms, value ranges.

Every bound here rests on stability of persistence under sup-norm changes of
the filtration [CDFFL13] and on the explicit forms of F* (math.md section 2,
:func:`specmap.strip.star_values`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from specmap.distance.paths import normalise
from specmap.strip import Window, star_values

SLOPE_ONE_LIPSCHITZ = 2.0
"""|h_k(1/2, b) - h_k(1/2, b')| <= 2 |b - b'| for every k (:func:`lipschitz_constants`, L_b = 1 per map)."""


def lipschitz_constants(
    bounds_f: Sequence[float], bounds_g: Sequence[float], window: Window
) -> tuple[float, float]:
    """Constants (L_a, L_b) with ||F*(a, b) - F*(a', b')||_inf <= L_a |a - a'| + L_b |b - b'|.

    Derivation (math.md section 2, explicit forms). For a <= 1/2,
    F* = max(f1 - b, t (f2 + b)) with t = a / (1 - a) in [0, 1]:
    |d/db| <= max(1, t) = 1 and |d/da| <= |f2 + b| / (1 - a)^2 <= 4 |f2 + b|.
    For a >= 1/2, F* = max((1 - a)/a (f1 - b), f2 + b): |d/db| <= 1 and
    |d/da| = |f1 - b| / a^2 <= 4 |f1 - b|. A max of Lipschitz functions keeps
    the largest constant, so L_b = 1 and L_a = 4 M with
    M = max over both maps and b in the window of max(|f1 - b|, |f2 + b|).

    Since d_B is 1-Lipschitz in the sup norm of the filtration (stability,
    also for lower-star filtrations of one mesh) and both F*_f and F*_g move,
    |h_k(a, b) - h_k(a', b')| <= 2 (L_a |a - a'| + L_b |b - b'|).

    Parameters
    ----------
    bounds_f, bounds_g : (min f1, min f2, max f1, max f2)
    window : Window

    Returns
    -------
    (L_a, L_b) : tuple of float

    References
    ----------
    .. [CDFFL13] Cerri et al. (2013): stability of d_B under sup-norm perturbations.
    """
    b_lo, b_hi = window.b
    m = 0.0
    for lo1, lo2, hi1, hi2 in (bounds_f, bounds_g):
        m = max(
            m,
            abs(hi1 - b_lo),
            abs(lo1 - b_hi),
            abs(hi2 + b_hi),
            abs(lo2 + b_lo),
            abs(hi1 - b_hi),
            abs(lo1 - b_lo),
            abs(hi2 + b_lo),
            abs(lo2 + b_hi),
        )
    return 4.0 * m, 1.0


def distance_upper_bound(shape_f, shape_g) -> tuple[float, str]:
    """An upper bound U >= D_k(f, g) for every k, and how it was obtained.

    - Same triangles (so the same simplicial complex): U = ||f - g||_inf over the
      vertices [CDFFL13] (|F*_f - F*_g| <= max(|f1 - g1|, |f2 - g2|) vertex-wise).
    - Otherwise, from the value ranges [D]: on a line with a <= 1/2,
      F* = max(f1 - b, t (f2 + b)), t in [0, 1], so
      max F*_f - min F*_g <= max(max f1 - min g1, t (max f2 - min g2)); every
      bottleneck cost (|u - u'|, or a half persistence) is at most the largest of
      max f1 - min g1, max g1 - min f1, max f2 - min g2, max g2 - min f2
      (the same for a >= 1/2 with the roles of f1, f2 exchanged).
    """
    vf, vg = shape_f.values, shape_g.values
    same = (
        vf.shape == vg.shape
        and shape_f.triangles is not None
        and shape_g.triangles is not None
        and np.array_equal(shape_f.triangles, shape_g.triangles)
    )
    if same:
        return float(np.abs(vf - vg).max()), "sup_norm"
    f1lo, f2lo, f1hi, f2hi = shape_f.value_bounds()
    g1lo, g2lo, g1hi, g2hi = shape_g.value_bounds()
    return float(max(f1hi - g1lo, g1hi - f1lo, f2hi - g2lo, g2hi - f2lo, 0.0)), "value_ranges"


def value_range(shape_f, shape_g) -> float:
    """Largest extent of f1, f2, g1, g2 (value units); scales default tolerances."""
    f1lo, f2lo, f1hi, f2hi = shape_f.value_bounds()
    g1lo, g2lo, g1hi, g2hi = shape_g.value_bounds()
    return float(max(f1hi - f1lo, f2hi - f2lo, g1hi - g1lo, g2hi - g2lo, 1e-12))


def cell_error_bound(
    H: np.ndarray, av: np.ndarray, bv: np.ndarray, bounds_f: Sequence[float], bounds_g: Sequence[float]
) -> float:
    """Sampling error of a node grid: sup of h over the window minus max of h over the nodes (upper bound).

    Cell by cell, with the local constants of :func:`lipschitz_constants`
    (|dF*/da| <= |f2 + b| / (1 - a)^2 for a <= 1/2 and |f1 - b| / a^2 for
    a >= 1/2, maximised over the cell; |dF*/db| <= 1): a line of the cell is within
    (h_a/2, h_b/2) of a corner, so h there is at most
    max over corners of h + 2 (L_a h_a/2 + L_b h_b/2).

    Returns
    -------
    float
        max over cells of that quantity, minus the node maximum (>= 0); ``inf`` if
        any node value is infinite.
    """
    Hm = np.where(np.isnan(H), -math.inf, H)
    if not np.all(np.isfinite(Hm)):
        return math.inf
    lo1, lo2 = min(bounds_f[0], bounds_g[0]), min(bounds_f[1], bounds_g[1])
    hi1, hi2 = max(bounds_f[2], bounds_g[2]), max(bounds_f[3], bounds_g[3])
    a0, a1 = av[:-1], av[1:]
    b0, b1 = bv[:-1], bv[1:]
    m2 = np.maximum.reduce([np.abs(hi2 + b0), np.abs(hi2 + b1), np.abs(lo2 + b0), np.abs(lo2 + b1)])
    m1 = np.maximum.reduce([np.abs(hi1 - b0), np.abs(hi1 - b1), np.abs(lo1 - b0), np.abs(lo1 - b1)])
    left = np.where(a0 <= 0.5, 1.0 / (1.0 - np.minimum(a1, 0.5)) ** 2, 0.0)  # (n_a - 1,)
    right = np.where(a1 >= 0.5, 1.0 / np.maximum(a0, 0.5) ** 2, 0.0)
    La = np.maximum(left[None, :] * m2[:, None], right[None, :] * m1[:, None])  # (n_b - 1, n_a - 1)
    ha, hb = np.diff(av)[None, :], np.diff(bv)[:, None]
    corner = np.maximum.reduce([Hm[..., :-1, :-1], Hm[..., 1:, :-1], Hm[..., :-1, 1:], Hm[..., 1:, 1:]])
    top = corner + (La * ha + 1.0 * hb)
    return float(max(0.0, top.max() - Hm.max()))


def star_rows(values: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """F*(a, b) at every vertex for many lines: shape (len(a), n) (:func:`specmap.strip.star_values`)."""
    return star_values(values[None, :, :], np.asarray(a, float)[:, None], np.asarray(b, float)[:, None])


def line_upper_bound(values_f: np.ndarray, values_g: np.ndarray, a, b, *, chunk: int = 256) -> np.ndarray:
    """||F*_f(a, b) - F*_g(a, b)||_inf over the vertices, per line: h_k(a, b) <= it for every k.

    For two maps on the same triangulation the lower-star filtrations of one
    line differ on every simplex by at most their largest vertex difference, so
    by stability of persistence (points at infinity included)
    h_k(a, b) <= max_v |F*_f(a, b)(v) - F*_g(a, b)(v)| [CDFFL13]. No diagram is
    needed: O(n) per line (math.md section 2, explicit forms of F*).

    Parameters
    ----------
    values_f, values_g : ndarray (n, 2)
        Values at the same vertices (same triangles).
    a, b : array_like
        Lines, broadcast together.
    chunk : int
        Lines per vectorised block.

    Returns
    -------
    ndarray of the broadcast shape of a and b.

    Examples
    --------
    >>> v = np.array([[0.0, 1.0], [2.0, -1.0]])
    >>> round(float(line_upper_bound(v, v + [0.3, 0.1], 0.5, 0.0)), 12)
    0.3
    """
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    af, bf = a.ravel(), b.ravel()
    vf, vg = np.asarray(values_f, float), np.asarray(values_g, float)
    out = np.empty(af.shape)
    for i in range(0, len(af), chunk):
        aa, bb = af[i : i + chunk], bf[i : i + chunk]
        out[i : i + chunk] = np.abs(
            star_values(vf[:, None, :], aa, bb) - star_values(vg[:, None, :], aa, bb)
        ).max(axis=0)
    return out.reshape(a.shape)


def slope_one_sup_norm_max(values_f: np.ndarray, values_g: np.ndarray, lo: float, hi: float) -> float:
    """max over b in [lo, hi] of ||F*_f(1/2, b) - F*_g(1/2, b)||_inf, exactly (maps on one mesh).

    On a = 1/2, F*(v) = max(v1 - b, v2 + b), so d_v(b) = F*_f(v) - F*_g(v) is
    piecewise linear in b with breakpoints only at the creases (f1 - f2)(v) / 2
    and (g1 - g2)(v) / 2; |d_v| on [lo, hi] is largest at lo, hi or a crease
    inside. By stability (:func:`line_upper_bound`) the result bounds h_k(1/2, b)
    for every k and every b in [lo, hi].
    """
    vf, vg = np.asarray(values_f, float), np.asarray(values_g, float)

    def d(b):  # per vertex; b a scalar or one value per vertex
        return np.abs(star_values(vf, 0.5, b) - star_values(vg, 0.5, b))

    m = max(float(d(lo).max(initial=0.0)), float(d(hi).max(initial=0.0)))
    for crease in ((vf[:, 0] - vf[:, 1]) / 2, (vg[:, 0] - vg[:, 1]) / 2):
        inside = (crease > lo) & (crease < hi)
        if inside.any():
            m = max(m, float(d(crease)[inside].max()))
    return m


def _ratios(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(r1, r2) of F* = max(r1 (v1 - b), r2 (v2 + b)) on lines of slope parameter a (:func:`star_values`)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(a <= 0.5, 1.0, (1.0 - a) / a), np.where(a <= 0.5, a / (1.0 - a), 1.0)


def coarse_moves(
    extremes: np.ndarray, a: np.ndarray, b: np.ndarray, aq: np.ndarray, bq: np.ndarray
) -> np.ndarray:
    """An upper bound of max_v |F*(a, b)(v) - F*(aq, bq)(v)| from the value extremes alone, O(1) a pair.

    With F* = max(A, B), A = r1 (v1 - b), B = r2 (v2 + b) (:func:`specmap.strip.star_values`),
    |max(A, B) - max(A', B')| <= max(|A - A'|, |B - B'|), and A - A' = (r1 - r1') v1 - (r1 b - r1' b')
    is affine in v1 alone (B - B' in v2 alone), so its largest size over the vertices is at the
    smallest or largest v1 (v2). Never below the vertex-wise sup norm; often close to it for near
    lines. A relative slack of 1e-12 keeps it above that norm in floating point too.

    Parameters
    ----------
    extremes : ndarray (4,)
        (min v1, max v1, min v2, max v2) over the vertices (value units).
    a, b : ndarray (k, 1)
        The lines bounded.
    aq, bq : ndarray (k, m)
        The lines they are compared with.

    Returns
    -------
    ndarray (k, m), value units.
    """
    lo1, hi1, lo2, hi2 = (float(x) for x in extremes)
    r1, r2 = _ratios(a)
    q1, q2 = _ratios(aq)
    d1, e1 = r1 - q1, r1 * b - q1 * bq
    d2, e2 = r2 - q2, r2 * b - q2 * bq
    with np.errstate(invalid="ignore"):
        m = np.maximum.reduce(
            [np.abs(d1 * lo1 - e1), np.abs(d1 * hi1 - e1), np.abs(d2 * lo2 + e2), np.abs(d2 * hi2 + e2)]
        )
    return np.where(np.isfinite(m), m * (1.0 + 1e-12) + 1e-300, np.inf)


def _extremes(values: np.ndarray) -> np.ndarray:
    v = np.asarray(values, float)
    if not len(v):
        return np.zeros(4)
    return np.array([v[:, 0].min(), v[:, 0].max(), v[:, 1].min(), v[:, 1].max()])


class LocalBound:
    """h at a line from h at evaluated lines: h(p) <= h(q) + ||F*_f(p) - F*_f(q)|| + ||F*_g(p) - F*_g(q)||.

    Stability [CDFFL13] applied to each map between the lines p and q (F*_f(p) and
    F*_f(q) are two filtrations of f's mesh, F*_g(p), F*_g(q) of g's: f and g may
    live on different meshes), plus the triangle inequality for d_B. Exact
    vertex-wise sup norms, no Lipschitz constant; only the ``near`` evaluated
    lines closest to p (normalised window distance) are used, which keeps it an
    upper bound. :meth:`many` with ``refute`` first tries the O(1) bound of the same
    lines (:func:`coarse_moves`) and computes the vertex-wise norms only where that
    one does not refute the line.
    """

    def __init__(self, values_f: np.ndarray, values_g: np.ndarray, window: Window, near: int = 16) -> None:
        self.vf, self.vg = values_f, values_g
        self.window = window
        self.near = near
        self.pts: list[np.ndarray] = []
        self.ab: list[np.ndarray] = []
        self.h: list[np.ndarray] = []
        self.Ff: list[np.ndarray] = []
        self.Fg: list[np.ndarray] = []
        self.ext_f, self.ext_g = _extremes(values_f), _extremes(values_g)

    def add(self, a: np.ndarray, b: np.ndarray, H: np.ndarray) -> None:
        """Record lines (a, b) with h values H (n_lines, n_groups)."""
        a, b = np.atleast_1d(a).astype(float), np.atleast_1d(b).astype(float)
        self.pts.append(normalise(np.c_[a, b], self.window))
        self.ab.append(np.c_[a, b])
        self.h.append(np.asarray(H, float).reshape(len(a), -1))
        self.Ff.append(star_rows(self.vf, a, b))
        self.Fg.append(star_rows(self.vg, a, b))
        self.pts, self.h, self.ab = (
            [np.concatenate(self.pts)],
            [np.concatenate(self.h)],
            [np.concatenate(self.ab)],
        )
        self.Ff, self.Fg = [np.concatenate(self.Ff)], [np.concatenate(self.Fg)]

    def __call__(self, a: float, b: float, refute: tuple[float, float] | None = None) -> np.ndarray:
        """Upper bound of h (per group) at the line (a, b); ``inf`` before any line is recorded."""
        if not self.pts:
            return np.array([math.inf])
        r = None if refute is None else (np.array([refute[0]]), refute[1])
        return self.many(np.array([a]), np.array([b]), r)[0]

    def many(
        self, a: np.ndarray, b: np.ndarray, refute: tuple[np.ndarray, float] | None = None
    ) -> np.ndarray:
        """Upper bounds of h at many lines at once: shape (len(a), groups); ``inf`` before any line.

        ``refute`` = (lo, tol): a line whose O(1) bound from the same near lines already has
        lo > its max over groups + tol gets that bound (it refutes the line as the vertex-wise one
        would, which is never larger); the others get the vertex-wise bound. Without it every
        line gets the vertex-wise bound.
        """
        a, b = np.atleast_1d(a).astype(float), np.atleast_1d(b).astype(float)
        if not self.pts:
            return np.full((len(a), 1), math.inf)
        P, H = self.pts[0], self.h[0]
        x = normalise(np.c_[a, b], self.window)
        d2 = (x[:, None, 0] - P[None, :, 0]) ** 2 + (x[:, None, 1] - P[None, :, 1]) ** 2
        k = min(self.near, len(P))  # the k nearest in any order: the bound is a min over them
        near = np.argpartition(d2, k - 1, axis=1)[:, :k] if k < len(P) else np.argsort(d2, axis=1)
        idx = np.ascontiguousarray(near)
        from specmap.distance.kernels import near_line_bound

        out = None
        rest = np.arange(len(a))
        if refute is not None:
            lo, tol = refute
            aq, bq = self.ab[0][idx, 0], self.ab[0][idx, 1]
            move = coarse_moves(self.ext_f, a[:, None], b[:, None], aq, bq) + coarse_moves(
                self.ext_g, a[:, None], b[:, None], aq, bq
            )
            out = (H[idx] + move[:, :, None]).min(axis=1)
            rest = np.nonzero(~(np.asarray(lo, float) > out.max(axis=1) + tol))[0]
            if not len(rest):
                return out
        # = (H[idx] + max_v |Ff[idx] - F*_f| + max_v |Fg[idx] - F*_g|).min over the near lines, compiled
        exact = near_line_bound(
            self.Ff[0],
            self.Fg[0],
            H,
            np.ascontiguousarray(idx[rest]),
            star_rows(self.vf, a[rest], b[rest]),
            star_rows(self.vg, a[rest], b[rest]),
        )
        if out is None:
            return exact
        out[rest] = exact
        return out
