"""Exact evaluation of tie residuals at arbitrary lines (a, b).

Every contour is *extended* so that every line of positive slope meets it:
a half-line to its full straight line, a proper contour by prolonging its
first and last segments (a single point by the line of slope -1 through it).
The extended parameter s̄ equals the true line parameter where the line meets
the contour and continues it smoothly across the domain boundary, so a tie
residual built from s̄ is continuous (and smooth across that boundary);
whether a tie *exists* is decided by the true ``met`` flags.

The residual of a tie (P, Q) is, in push units (math.md section 5),

    R = min(a, 1-a) * (|s̄_P1 - s̄_P2| - k |s̄_Q1 - s̄_Q2|),   k = 1 (equal) or 2 (half).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, Math. Methods Appl. Sci. 36 (2013).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from specmap.grids.model import Contour
from specmap.special.pairs import Tie
from specmap.strip import BISECT_MIN_POINTS, line_parameter, push_scale


def extended_parameter(contour: Contour, a, b) -> tuple[np.ndarray, np.ndarray]:
    """Extended line parameter s̄ and the flag ``met`` of a contour.

    Parameters
    ----------
    contour : Contour
    a, b : array_like
        Line parameters (broadcast), 0 < a < 1.

    Returns
    -------
    s_ext : ndarray
        The true parameter where met; otherwise where the line meets the
        prolongation (continuous in (a, b)).
    met : ndarray of bool

    Examples
    --------
    >>> from specmap.grids.model import Contour
    >>> s, met = extended_parameter(Contour("f:v0", "vertical", [0.0, 5.0]), 0.5, 0.0)
    >>> float(s), bool(met)
    (0.0, False)
    """
    s, met, _ = _extended(contour, a, b)
    return s, met


def _short(contour: Contour) -> bool:
    return contour.kind == "proper" and 2 <= len(contour.points) < BISECT_MIN_POINTS


def _extended(contour: Contour, a, b, kguess: np.ndarray | None = None):
    """:func:`extended_parameter`, plus the segment index of short proper contours.

    ``kguess`` (short proper contours, 1-d ``a``/``b``): a guess of the segment
    index, checked exactly (see :func:`_rows_guess`).
    """
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    k = None
    if _short(contour):
        if kguess is None:
            s1, k = _rows(contour.points, a.reshape(-1), b.reshape(-1))
        else:
            s1, k = _rows_guess(contour.points, a, b, kguess)
        s = s1.reshape(a.shape)
    else:
        s = line_parameter(contour, a, b)
    met = ~np.isnan(s)
    if met.all():
        return s, met, k
    pts = contour.points
    x0, y0 = pts[0]
    # the prolongation only where the contour is missed (elementwise, same values)
    miss = ~met
    a, b = a[miss], b[miss]
    with np.errstate(divide="ignore", invalid="ignore"):
        if contour.kind == "vertical":
            ext = (x0 - b) / a
        elif contour.kind == "horizontal":
            ext = (y0 + b) / (1.0 - a)
        else:
            ext = np.where(
                _g(pts[0], a, b) > 0,
                _through(pts[0], pts[1] if len(pts) > 1 else None, a, b),
                _through(pts[-1], pts[-2] if len(pts) > 1 else None, a, b),
            )
    out = s.copy()
    out[miss] = ext
    return out, met, k


def _finish(pts, a1, b1, k, g0, g1, met):
    xs, ys = pts[:, 0], pts[:, 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        denom = g1 - g0
        if met is None:  # g0 <= 0 < g1: denom > 0
            t = -g0 / denom
        else:
            t = np.where(denom > 0, -g0 / np.where(denom > 0, denom, 1.0), 0.0)
        t = np.clip(t, 0.0, 1.0)
        px = xs[k] + t * np.diff(xs)[k]
        py = ys[k] + t * np.diff(ys)[k]
        s = (a1 * (px - b1) + (1.0 - a1) * (py + b1)) / (a1 * a1 + (1.0 - a1) ** 2)
    return s if met is None else np.where(met, s, np.nan)


def _rows(pts: np.ndarray, a1: np.ndarray, b1: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(s, segment index) on 1-d lines, the formulas of strip's dense evaluation."""
    n = len(pts)
    oma = 1.0 - a1
    G = np.empty((n, a1.size))
    count = np.zeros(a1.size, dtype=np.int64)
    for v in range(n):
        G[v] = oma * (pts[v, 0] - b1) - a1 * (pts[v, 1] + b1)
        count += G[v] <= 0.0
    met = (count >= 1) & (G[-1] >= 0.0)
    k = np.clip(count - 1, 0, n - 2)
    q = np.arange(a1.size)
    return _finish(pts, a1, b1, k, G[k, q], G[k + 1, q], met), k


def _rows_guess(
    pts: np.ndarray, a1: np.ndarray, b1: np.ndarray, kg: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_rows` given a guess ``kg`` of the segment index.

    G is non-decreasing along the polyline (also in floating point), so
    G[kg] <= 0 < G[kg + 1] (same formula as the dense rows) proves that
    ``kg + 1`` vertices have G <= 0 and that the line meets the contour; only
    the other lines are evaluated densely. Same values as :func:`_rows`.
    """
    oma = 1.0 - a1
    x0, y0 = pts[kg, 0], pts[kg, 1]
    x1, y1 = pts[kg + 1, 0], pts[kg + 1, 1]
    g0 = oma * (x0 - b1) - a1 * (y0 + b1)
    g1 = oma * (x1 - b1) - a1 * (y1 + b1)
    ok = (g0 <= 0.0) & (g1 > 0.0)
    s = _finish(pts, a1, b1, kg, g0, g1, None)
    k = kg.copy()
    bad = np.nonzero(~ok)[0]
    if bad.size:
        s[bad], k[bad] = _rows(pts, a1[bad], b1[bad])
    return s, k


def _g(p, a, b):
    """(1-a)(x-b) - a(y+b): zero on r(a, b), positive below it."""
    return (1.0 - a) * (p[0] - b) - a * (p[1] + b)


def _through(p, q, a, b):
    """Parameter where r(a, b) meets the full straight line through p and q.

    On r(a, b), x + y = s. Without q (single-point contour) the line of slope -1
    through p is used.
    """
    q = p + np.array([1.0, -1.0]) if q is None or np.allclose(p, q) else q
    gp = _g(p, a, b)
    gq = _g(q, a, b)
    t = -gp / (gq - gp)
    return p[0] + p[1] + t * ((q[0] - p[0]) + (q[1] - p[1]))


def sample_contours(contours: Sequence[Contour], a, b) -> tuple[np.ndarray, np.ndarray]:
    """Stack of :func:`extended_parameter`: (s_ext, met), each of shape (C, *shape)."""
    shape = np.broadcast_shapes(np.shape(a), np.shape(b))
    s = np.empty((len(contours), *shape))
    met = np.empty((len(contours), *shape), dtype=bool)
    for i, c in enumerate(contours):
        s[i], met[i] = extended_parameter(c, a, b)
    return s, met


class SlotEvaluator:
    """Evaluate many (contour set, point) items, each with its own point.

    Parameters
    ----------
    contours : sequence of Contour
    slots : ndarray of int, shape (K, m)
        Contour indices of each item.

    Notes
    -----
    The items are grouped by contour once; each call then costs one vectorised
    :func:`extended_parameter` per distinct contour.
    """

    def __init__(self, contours: Sequence[Contour], slots: np.ndarray) -> None:
        self.contours = contours
        self.slots = np.asarray(slots, dtype=np.int64)
        flat = self.slots.ravel()
        order = np.argsort(flat, kind="stable")
        uniq, starts = np.unique(flat[order], return_index=True)
        bounds = np.append(starts, flat.size)
        self.groups = [(int(c), order[bounds[i] : bounds[i + 1]]) for i, c in enumerate(uniq)]
        m = max(self.slots.shape[1], 1)
        self.rows = [idx // m for _, idx in self.groups]
        # segment indices of short proper contours at the last call (guesses for the next)
        self.kguess: list = [None] * len(self.groups)

    def __call__(self, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(s_ext, met) of shape (K, m) at points (a[k], b[k])."""
        k, m = self.slots.shape
        s = np.empty(k * m)
        met = np.empty(k * m, dtype=bool)
        for gi, ((c, idx), r) in enumerate(zip(self.groups, self.rows, strict=True)):
            s[idx], met[idx], kk = _extended(self.contours[c], a[r], b[r], self.kguess[gi])
            self.kguess[gi] = kk
        return s.reshape(k, m), met.reshape(k, m)


def residual_from_slots(s: np.ndarray, factor: np.ndarray, a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Residual R and tied value (push units) from slot parameters (K, 4)."""
    m = push_scale(a)
    dp = np.abs(s[:, 0] - s[:, 1]) * m
    dq = np.abs(s[:, 2] - s[:, 3]) * m * factor
    return dp - dq, np.minimum(dp, dq / factor)


def _tie_differences(
    tie: Tie, contours_by_id: Mapping[str, Contour], a, b
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """|c_P|, |c_Q| (push units) of a tie's two pairs at lines (a, b), and where all four are met."""
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    vals = []
    ok = np.ones(a.shape, dtype=bool)
    for cid in (c for pair in tie.pairs for c in pair):
        s, met = extended_parameter(contours_by_id[cid], a, b)
        vals.append(s)
        ok &= met
    m = push_scale(a)
    return np.abs(vals[0] - vals[1]) * m, np.abs(vals[2] - vals[3]) * m, ok


def tie_value(tie: Tie, contours_by_id: Mapping[str, Contour], a, b) -> np.ndarray:
    """The tied value of a tie at lines (a, b), in push units; NaN where not all met.

    The tied value is the common |c| for ``equal`` and the smaller |c| for
    ``half`` (each side uses its own difference, so off the tie curve this is
    the smaller of |c_P| and |c_Q|, resp. |c_P|/2 and |c_Q|); it is what the
    distance search compares with its running bounds (math.md section 5).

    Parameters
    ----------
    tie : Tie
    contours_by_id : mapping id -> Contour
    a, b : array_like

    Returns
    -------
    ndarray of the broadcast shape of a and b.

    References
    ----------
    .. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
    """
    dp, dq, ok = _tie_differences(tie, contours_by_id, a, b)
    out = np.minimum(dp, dq) if tie.condition == "equal" else np.minimum(dp / 2.0, dq)
    return np.where(ok, out, np.nan)


def tie_residual(tie: Tie, contours_by_id: Mapping[str, Contour], a, b) -> np.ndarray:
    """Residual |c_P| - k |c_Q| (push units) of a tie at lines (a, b); NaN where not all met."""
    dp, dq, ok = _tie_differences(tie, contours_by_id, a, b)
    k = 1.0 if tie.condition == "equal" else 2.0
    r = dp - k * dq
    return np.where(ok, r, np.nan)
