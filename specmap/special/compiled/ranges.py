"""Cost range of every contour pair over the lattice nodes, in one pass per pair (numba).

Tested against numpy array formulas (``pair_costs_arrays`` in ``tests/test_focus.py``).
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, parallel=True, error_model="numpy")
def pair_ranges(
    s: np.ndarray, met: np.ndarray, m: np.ndarray, first: np.ndarray, second: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(min, max, largest neighbour step) of |s_i - s_j| * m over the nodes where both are met.

    ``s``, ``met``: (C, n_b, n_a) contour parameters and met flags; ``m`` (n_a,) push scale;
    ``first``, ``second`` (P,) contour indices. A pair met at no node gets NaN, NaN, 0; a step
    counts only between two neighbouring nodes (along a or along b) where the pair is met.
    """
    n = first.size
    nb, na = s.shape[1], s.shape[2]
    lo = np.full(n, np.nan)
    hi = np.full(n, np.nan)
    step = np.zeros(n)
    for p in numba.prange(n):
        i, j = first[p], second[p]
        mn, mx, st = np.inf, -np.inf, 0.0
        for r in range(nb):
            for c in range(na):
                if not (met[i, r, c] and met[j, r, c]):
                    continue
                d = abs(s[i, r, c] - s[j, r, c]) * m[c]
                mn = min(mn, d)
                mx = max(mx, d)
                if c > 0 and met[i, r, c - 1] and met[j, r, c - 1]:
                    st = max(st, abs(d - abs(s[i, r, c - 1] - s[j, r, c - 1]) * m[c - 1]))
                if r > 0 and met[i, r - 1, c] and met[j, r - 1, c]:
                    st = max(st, abs(d - abs(s[i, r - 1, c] - s[j, r - 1, c]) * m[c]))
        if mx >= mn:
            lo[p], hi[p], step[p] = mn, mx, st
    return lo, hi, step


@numba.njit(cache=True, nogil=True, parallel=True, error_model="numpy")
def pairs_in_band(
    s: np.ndarray,
    met: np.ndarray,
    m: np.ndarray,
    first: np.ndarray,
    second: np.ndarray,
    cost_lo: np.ndarray,
    cost_hi: np.ndarray,
    margin: np.ndarray,
    floor: float,
    node_hi: np.ndarray,
) -> np.ndarray:
    """Whether each pair has a met node where its cost can lie in (floor, node_hi[node]].

    The cost at a node is |s_i - s_j| * m times ``cost_lo[p]`` .. ``cost_hi[p]``, widened by
    ``margin[p]`` (value units); ``node_hi`` (n_b, n_a) already holds what h can add between nodes.
    """
    n = first.size
    nb, na = s.shape[1], s.shape[2]
    out = np.zeros(n, dtype=np.bool_)
    for p in numba.prange(n):
        i, j = first[p], second[p]
        for r in range(nb):
            if out[p]:
                break
            for c in range(na):
                if not (met[i, r, c] and met[j, r, c]):
                    continue
                d = abs(s[i, r, c] - s[j, r, c]) * m[c]
                if d * cost_hi[p] + margin[p] > floor and d * cost_lo[p] - margin[p] <= node_hi[r, c]:
                    out[p] = True
                    break
    return out
