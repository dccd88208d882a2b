"""Tied costs: how a tie of two contour-coordinate differences gives a candidate bottleneck cost.

math.md section 5 (role-aware refinement): an ``equal`` tie d_P = d_Q ties two
matching costs (two cross pairs) at d or two diagonal costs (two same-grid
pairs) at d/2; a ``half`` tie d_big = 2 d_small ties the diagonal cost of a
same-grid pair with the matching cost of a cross pair at d_small [EFQT23].
"""

from __future__ import annotations

import numpy as np

from specmap.strip import line_parameter, push_scale

# How the two differences d_P, d_Q of a tie give its candidate costs (see tie_costs).
EQUAL_CROSS, EQUAL_SAME, HALF_P, HALF_Q, ANY_EQUAL, ANY_HALF = range(6)


def _grid_of(cid: str) -> str | None:
    return cid.split(":", 1)[0] if ":" in cid else None


def tie_code(tie, *, roles: bool = True) -> int | None:
    """How the tied cost of ``tie`` follows from its differences; ``None`` for a tie of no two costs.

    With roles known (ids ``"<grid>:..."`` and ``roles=True``): equal ties of
    two cross pairs or two same-grid pairs; half ties of a same-grid pair (the
    larger difference) against a cross pair; any other tie compares costs of
    different kinds and gives ``None`` (math.md section 5, role-aware refinement).
    """
    (p1, p2), (q1, q2) = tie.pairs
    gp, gq = (_grid_of(p1), _grid_of(p2)), (_grid_of(q1), _grid_of(q2))
    if not roles or None in gp + gq:
        return ANY_EQUAL if tie.condition == "equal" else ANY_HALF
    cross_p, cross_q = gp[0] != gp[1], gq[0] != gq[1]
    if tie.condition == "equal":
        if cross_p == cross_q:
            return EQUAL_CROSS if cross_p else EQUAL_SAME
        return None
    if cross_p != cross_q:
        return HALF_Q if cross_p else HALF_P
    return None


def costs_from_differences(code, dp, dq) -> tuple[np.ndarray, np.ndarray]:
    """(lo, hi) of :func:`tie_costs` from the codes of :func:`tie_code` and the differences (value units)."""
    code, dp, dq = np.broadcast_arrays(np.asarray(code), np.asarray(dp, float), np.asarray(dq, float))
    with np.errstate(invalid="ignore"):
        lo_d, hi_d = np.minimum(dp, dq), np.maximum(dp, dq)
        half_lo, half_hi = np.minimum(hi_d / 2, lo_d), np.maximum(hi_d / 2, lo_d)
        conds = [code == EQUAL_CROSS, code == EQUAL_SAME, code == ANY_EQUAL]
        lo = np.select(conds, [lo_d, lo_d / 2, lo_d / 2], half_lo)
        hi = np.select(conds, [hi_d, hi_d / 2, hi_d], half_hi)
        bad = ((code == HALF_P) & ~(dp >= dq)) | ((code == HALF_Q) & ~(dq >= dp))
    return np.where(bad, np.nan, lo), np.where(bad, np.nan, hi)


def tie_costs(tie, contours_by_id: dict, a, b, *, roles: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper candidate bottleneck cost of a tie at lines (a, b), in value units.

    With the differences d_P = |c_a - c_b|, d_Q = |c_c - c_d| of push
    coordinates (value units, min(a, 1-a) times the line-parameter difference):

    - ``equal`` (d_P = d_Q = d): two matching costs tie at d when both pairs are
      cross pairs (one contour of each grid), two diagonal costs tie at d/2
      when both are same-grid pairs; a mixed equal tie compares d with d/2 and is
      no tie of costs (math.md, role-aware refinement [D]).
    - ``half`` (d_big = 2 d_small): the diagonal cost d_big/2 of a same-grid pair
      ties with the matching cost d_small of a cross pair: the tied cost is the
      smaller difference, d_small [EFQT23].

    Off the curve the two sides differ; ``lo`` and ``hi`` bracket both sides
    (min and max); on the curve both equal the tied cost t. Where the roles make
    the tie impossible, or a contour is not met, both are NaN. Without role
    information (ids without a grid prefix, or ``roles=False``) an equal tie
    brackets [d/2, d].

    Returns
    -------
    lo, hi : ndarray of the broadcast shape of a and b.
    """
    (p1, p2), (q1, q2) = tie.pairs
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    m = push_scale(a)
    s = [line_parameter(contours_by_id[c], a, b) for c in (p1, p2, q1, q2)]
    code = tie_code(tie, roles=roles)
    if code is None:
        return np.full(a.shape, np.nan), np.full(a.shape, np.nan)
    return costs_from_differences(code, np.abs(s[0] - s[1]) * m, np.abs(s[2] - s[3]) * m)


def costs_at(codes: np.ndarray, quads: np.ndarray, columns: dict, contours_by_id: dict,
             a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Tie costs (lo, hi) at many lines at once: line i for the tie (codes[i], quads[i] (column indices)).

    Each contour is met only by the lines of the ties that use it (line parameters are
    computed line by line, so this equals evaluating every contour on every line).
    """
    ids = list(columns)
    a, b = np.asarray(a, float), np.asarray(b, float)
    quads = np.asarray(quads, dtype=np.int64).reshape(-1, 4)
    s = np.full((4, len(a)), np.nan)
    for col in np.unique(quads):
        slots = quads == col
        rows = slots.any(axis=1)
        vals = np.empty(len(a))
        vals[rows] = line_parameter(contours_by_id[ids[int(col)]], a[rows], b[rows])
        for k in range(4):
            s[k, slots[:, k]] = vals[slots[:, k]]
    m = push_scale(a)
    return costs_from_differences(codes, np.abs(s[0] - s[1]) * m, np.abs(s[2] - s[3]) * m)
