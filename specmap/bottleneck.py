"""Exact bottleneck distance between finite persistence diagrams.

The bottleneck distance [DFL10] is the smallest t for which a perfect matching exists in the
*threshold graph* of the usual bipartite construction [EH10, section VIII.4]: the left side holds
the points of the first diagram and one diagonal copy of each point of the second, the right side
the points of the second diagram and one diagonal copy of each point of the first. Edges:

- point p to point q, cost max(|p_b - q_b|, |p_d - q_d|) (L-infinity);
- point p to its own diagonal copy, cost (p_d - p_b) / 2;
- diagonal copy to diagonal copy, cost 0.

The answer is one of the finitely many edge costs, so it is found exactly by a search over the
sorted costs with a maximum bipartite matching (Hopcroft-Karp, :func:`scipy.sparse.csgraph.
maximum_bipartite_matching`) as the feasibility test. gudhi's approximate value is used only as a
starting guess: in the common case two matchings confirm it (or correct it to the neighbouring
cost); otherwise a binary search over the costs decides.

References
----------
.. [DFL10] d'Amico, Frosini, Landi, "Natural pseudo-distance and optimal matching between reduced
   size functions", Acta Appl. Math. 109 (2010): the matching cost.
.. [EH10] Edelsbrunner, Harer, "Computational Topology: An Introduction", AMS (2010): the
   bipartite construction and the threshold-graph search.
"""

from __future__ import annotations

import gudhi
import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_bipartite_matching


def cost_matrix(d1: np.ndarray, d2: np.ndarray) -> np.ndarray:
    """Square cost matrix of the bipartite construction, size n + m (``inf`` = no edge).

    Parameters
    ----------
    d1, d2 : ndarray (n, 2), (m, 2)
        Finite diagrams, rows (birth, death).

    Returns
    -------
    ndarray (n + m, n + m)
        Rows: points of ``d1`` then diagonal copies of ``d2``; columns: points of ``d2`` then
        diagonal copies of ``d1``.

    Examples
    --------
    >>> cost_matrix(np.array([[0.0, 1.0]]), np.array([[0.0, 2.0]]))
    array([[1. , 0.5],
           [1. , 0. ]])
    """
    d1 = np.asarray(d1, dtype=float).reshape(-1, 2)
    d2 = np.asarray(d2, dtype=float).reshape(-1, 2)
    n, m = len(d1), len(d2)
    c = np.full((n + m, n + m), np.inf)
    if n and m:
        c[:n, :m] = np.maximum(
            np.abs(d1[:, None, 0] - d2[None, :, 0]), np.abs(d1[:, None, 1] - d2[None, :, 1])
        )
    idx1, idx2 = np.arange(n), np.arange(m)
    c[idx1, m + idx1] = (d1[:, 1] - d1[:, 0]) / 2.0
    c[n + idx2, idx2] = (d2[:, 1] - d2[:, 0]) / 2.0
    c[n:, m:] = 0.0
    return c


def _perfect(c: np.ndarray, t: float) -> bool:
    """Whether the threshold graph {cost <= t} has a perfect matching."""
    graph = csr_matrix(c <= t)
    match = maximum_bipartite_matching(graph, perm_type="column")
    return bool(np.all(match >= 0))


def exact_bottleneck(d1: np.ndarray, d2: np.ndarray, *, guess: float | None = None) -> float:
    """Exact bottleneck distance between two finite diagrams.

    Parameters
    ----------
    d1, d2 : ndarray (n, 2), (m, 2)
        Finite diagrams (no points at infinity), rows (birth, death) with birth <= death.
    guess : float, optional
        A value close to the answer (e.g. gudhi's approximate distance); it only speeds the search
        up, the result does not depend on it. Default: gudhi's value.

    Returns
    -------
    float
        The smallest edge cost t whose threshold graph has a perfect matching (exact: it is one
        of the computed costs, no tolerance).

    Examples
    --------
    >>> exact_bottleneck(np.array([[0.0, 1.0]]), np.array([[0.0, 2.0]]))
    1.0
    >>> exact_bottleneck(np.array([[0.0, 1.0]]), np.zeros((0, 2)))
    0.5
    """
    d1 = np.asarray(d1, dtype=float).reshape(-1, 2)
    d2 = np.asarray(d2, dtype=float).reshape(-1, 2)
    if len(d1) == 0 and len(d2) == 0:
        return 0.0
    c = cost_matrix(d1, d2)
    costs = np.unique(c[np.isfinite(c)])
    if guess is None:
        guess = float(gudhi.bottleneck_distance(d1, d2))
    lo, hi = 0, len(costs) - 1  # invariant: the answer's index lies in [lo, hi]; costs[-1] is feasible
    if np.isfinite(guess):
        k = int(np.searchsorted(costs, guess * (1 + 1e-12) + 1e-300, side="right")) - 1
        if k >= 0 and _perfect(c, costs[k]):
            hi = k
            below = int(np.searchsorted(costs, guess * (1 - 1e-12), side="left")) - 1
            if below < 0 or not _perfect(c, costs[below]):
                lo = max(below + 1, 0)
            else:
                hi = below
        else:
            lo = k + 1
    while lo < hi:
        mid = (lo + hi) // 2
        if _perfect(c, costs[mid]):
            hi = mid
        else:
            lo = mid + 1
    return float(costs[lo])
