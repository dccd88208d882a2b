"""Index arithmetic of the sample lattice of a window: nodes, edges and cells.

Nodes are (j, i) with j along b (rows) and i along a (columns), node id
``j * n_a + i``. Horizontal edges (along a) come first, id ``j * (n_a - 1) + i``
joins (j, i)-(j, i+1); vertical edges (along b) follow, id
``NH + j * n_a + i`` joins (j, i)-(j+1, i). Cell (j, i) has id
``j * (n_a - 1) + i``, corners (j, i), (j, i+1), (j+1, i+1), (j+1, i) and edges
bottom, right, top, left.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from specmap.strip import Window


@dataclass(frozen=True, eq=False)
class Lattice:
    """Sample nodes of a window.

    Attributes
    ----------
    av, bv : ndarray
        Node coordinates along a (n_a,) and along b (n_b,).
    """

    av: np.ndarray
    bv: np.ndarray

    @staticmethod
    def of(window: Window, n_a: int, n_b: int) -> Lattice:
        if n_a < 2 or n_b < 2:
            raise ValueError("resolution must be at least 2 x 2")
        return Lattice(np.linspace(*window.a, n_a), np.linspace(*window.b, n_b))

    @property
    def n_a(self) -> int:
        return int(self.av.size)

    @property
    def n_b(self) -> int:
        return int(self.bv.size)

    @property
    def n_h(self) -> int:
        return self.n_b * (self.n_a - 1)

    @property
    def n_edges(self) -> int:
        return self.n_h + (self.n_b - 1) * self.n_a

    @property
    def n_cells(self) -> int:
        return (self.n_b - 1) * (self.n_a - 1)

    def mesh(self) -> tuple[np.ndarray, np.ndarray]:
        """Node coordinates A, B of shape (n_b, n_a)."""
        return np.meshgrid(self.av, self.bv)

    def node_ab(self, nodes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        j, i = np.divmod(np.asarray(nodes, np.int64), self.n_a)
        return self.av[i], self.bv[j]

    def edge_nodes(self, edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Start and end node ids of edges (start has the smaller a or b)."""
        e = np.asarray(edges, np.int64)
        na = self.n_a
        horiz = e < self.n_h
        j, i = np.divmod(e, na - 1)
        jv, iv = np.divmod(e - self.n_h, na)
        start = np.where(horiz, j * na + i, jv * na + iv)
        end = np.where(horiz, start + 1, start + na)
        return start, end

    def edge_cells(self, edges: np.ndarray) -> np.ndarray:
        """The (up to) two cells beside each edge: shape (E, 2), -1 where absent."""
        e = np.asarray(edges, np.int64)
        na, nb = self.n_a, self.n_b
        horiz = e < self.n_h
        j, i = np.divmod(e, na - 1)
        jv, iv = np.divmod(e - self.n_h, na)
        h0 = np.where(j > 0, (j - 1) * (na - 1) + i, -1)
        h1 = np.where(j < nb - 1, j * (na - 1) + i, -1)
        v0 = np.where(iv > 0, jv * (na - 1) + iv - 1, -1)
        v1 = np.where(iv < na - 1, jv * (na - 1) + iv, -1)
        return np.stack([np.where(horiz, h0, v0), np.where(horiz, h1, v1)], axis=-1)

    def cell_box(self, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(a0, b0, a1, b1) of cells."""
        j, i = np.divmod(np.asarray(cells, np.int64), self.n_a - 1)
        return self.av[i], self.bv[j], self.av[i + 1], self.bv[j + 1]
