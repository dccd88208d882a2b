"""Tied costs at many candidate lines at once.

The role rules and the tied cost of one tie have one home, :mod:`specmap.special.pairs`
(math.md section 5: :func:`~specmap.special.pairs.tie_code`,
:func:`~specmap.special.pairs.costs_from_differences`, :func:`~specmap.special.pairs.tie_costs`);
this module evaluates them for a batch of candidates, each with its own tie.
"""

from __future__ import annotations

import numpy as np

from specmap.special.pairs import costs_from_differences, tie_code, tie_costs
from specmap.strip import line_parameter, push_scale

__all__ = ["costs_at", "tie_code", "tie_costs"]


def costs_at(
    codes: np.ndarray, quads: np.ndarray, columns: dict, contours_by_id: dict, a: np.ndarray, b: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Tie costs (lo, hi) at many lines at once: line i for the tie (codes[i], quads[i] (column indices)).

    ``codes`` are :func:`~specmap.special.pairs.tie_code` values; ``quads`` the columns
    (positions in ``columns``, the contour ids) of the four contours of each tie. Each
    contour is met only by the lines of the ties that use it (line parameters are
    computed line by line, so this equals evaluating every contour on every line).
    """
    ids = list(columns)
    a, b = np.asarray(a, float), np.asarray(b, float)
    quads = np.asarray(quads, dtype=np.int64).reshape(-1, 4)
    n = len(a)
    # (slot, row) entries grouped by contour: one line_parameter call per contour on its rows
    cols = quads.T.ravel()
    order = np.argsort(cols, kind="stable")
    cuts = np.flatnonzero(np.diff(cols[order])) + 1
    flat = np.full(4 * n, np.nan)
    for idx in np.split(order, cuts) if n else ():
        rows = idx % n
        flat[idx] = line_parameter(contours_by_id[ids[int(cols[idx[0]])]], a[rows], b[rows])
    s = flat.reshape(4, n)
    m = push_scale(a)
    return costs_from_differences(codes, np.abs(s[0] - s[1]) * m, np.abs(s[2] - s[3]) * m)
