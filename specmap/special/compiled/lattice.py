"""Index arithmetic of the sample lattice inside compiled loops.

The numbering is that of :class:`specmap.special.lattice.Lattice`: horizontal
edges (j, i)-(j, i+1) first, id ``j * (n_a - 1) + i``; vertical edges
(j, i)-(j+1, i) after them, id ``n_b * (n_a - 1) + j * n_a + i``; cell (j, i)
spans nodes (j, i) to (j+1, i+1).
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, error_model="numpy")
def edge_position(e: int, n_a: int, n_b: int) -> tuple[bool, int, int]:
    """(horizontal, j, i) of edge ``e``: its first node is (j, i)."""
    n_h = n_b * (n_a - 1)
    if e < n_h:
        j = e // (n_a - 1)
        return True, j, e - j * (n_a - 1)
    j = (e - n_h) // n_a
    return False, j, (e - n_h) - j * n_a


@numba.njit(cache=True, nogil=True, error_model="numpy")
def edge_side_cell(e: int, side: int, n_a: int, n_b: int) -> tuple[int, int]:
    """Cell (cj, ci) below/left (``side`` 0) or above/right (1) of edge ``e``; (-1, -1) outside the lattice.

    Same order as :meth:`specmap.special.lattice.Lattice.edge_cells`.
    """
    horizontal, j, i = edge_position(e, n_a, n_b)
    if horizontal:
        cj, ci = j - 1 + side, i
    else:
        cj, ci = j, i - 1 + side
    if cj < 0 or cj >= n_b - 1 or ci < 0 or ci >= n_a - 1:
        return -1, -1
    return cj, ci


@numba.njit(cache=True, nogil=True, error_model="numpy")
def interval_of(nodes: np.ndarray, x: float) -> int:
    """Index k of the interval [nodes[k], nodes[k+1]] holding x, clipped to the first and last."""
    k = int(np.searchsorted(nodes, x, side="right")) - 1
    return min(max(k, 0), nodes.size - 2)
