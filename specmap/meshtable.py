"""The edge/face table of a triangle mesh (a leaf module: numpy only).

Every edge of a triangle array once, with its incident triangles, the vertex
opposite to it in each, and, per triangle, the ids of its three edges. This is
the one place the table is computed: the mesh checks
(:mod:`specmap.shapes.meshes`), the PL and smooth grid routes
(:mod:`specmap.grids.piecewise`, :mod:`specmap.grids.smooth`) and the slice
diagrams (:mod:`specmap.slices`) all use it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class EdgeTable:
    """The edges of a triangle mesh with their incident triangles.

    Attributes
    ----------
    edges : ndarray (E, 2) of int
        Vertex pairs with ``edges[:, 0] < edges[:, 1]``, sorted lexicographically.
    counts : ndarray (E,) of int
        Number of triangles on each edge (2 on a closed 2-manifold).
    faces : ndarray (E, 2) of int
        For edges with ``counts == 2``: the two triangles (lower index first); -1 elsewhere.
    opposite : ndarray (E, 2) of int
        For edges with ``counts == 2``: the vertex of each of those triangles
        that is not on the edge; -1 elsewhere.
    triangle_edges : ndarray (m, 3) of int
        Row ``t``: the ids (rows of ``edges``) of the edges (t0 t1, t1 t2, t2 t0)
        of triangle ``t = (t0, t1, t2)``.
    """

    edges: np.ndarray
    counts: np.ndarray
    faces: np.ndarray
    opposite: np.ndarray
    triangle_edges: np.ndarray


def edges_and_faces(T: np.ndarray) -> EdgeTable:
    """Edge table of a triangle array: each edge, its triangles, opposite vertices, edge ids.

    Parameters
    ----------
    T : ndarray (m, 3) of int

    Returns
    -------
    EdgeTable

    Examples
    --------
    >>> table = edges_and_faces(np.array([[0, 1, 2], [0, 2, 3]]))
    >>> table.edges.tolist(), table.counts.tolist()
    ([[0, 1], [0, 2], [0, 3], [1, 2], [2, 3]], [1, 2, 1, 1, 1])
    >>> table.triangle_edges.tolist()
    [[0, 3, 1], [1, 4, 2]]
    """
    T = np.asarray(T, dtype=np.int64).reshape(-1, 3)
    m = len(T)
    a = T[:, [0, 1, 2]].reshape(-1)
    b = T[:, [1, 2, 0]].reshape(-1)
    c = T[:, [2, 0, 1]].reshape(-1)
    face = np.repeat(np.arange(m), 3)
    lo = np.minimum(a, b)
    hi = np.maximum(a, b)
    order = np.lexsort((hi, lo))  # stable: the two triangles of an edge stay in index order
    lo, hi, c, face = lo[order], hi[order], c[order], face[order]
    if len(lo) == 0:
        empty = np.empty((0, 2), dtype=np.int64)
        return EdgeTable(empty, np.empty(0, dtype=np.int64), empty, empty, np.empty((0, 3), dtype=np.int64))
    new = np.ones(len(lo), dtype=bool)
    new[1:] = (lo[1:] != lo[:-1]) | (hi[1:] != hi[:-1])
    starts = np.nonzero(new)[0]
    counts = np.diff(np.append(starts, len(lo)))
    edges = np.stack([lo[starts], hi[starts]], axis=1)
    faces = np.full((len(starts), 2), -1, dtype=np.int64)
    opposite = np.full((len(starts), 2), -1, dtype=np.int64)
    two = counts == 2
    s2 = starts[two]
    faces[two] = np.stack([face[s2], face[s2 + 1]], axis=1)
    opposite[two] = np.stack([c[s2], c[s2 + 1]], axis=1)
    edge_id = np.empty(3 * m, dtype=np.int64)
    edge_id[order] = np.cumsum(new) - 1
    return EdgeTable(edges, counts, faces, opposite, edge_id.reshape(m, 3))


def mesh_edges(triangles: np.ndarray) -> np.ndarray:
    """Unique edges (E, 2) of a triangle array, each sorted, in lexicographic order.

    Examples
    --------
    >>> mesh_edges(np.array([[2, 1, 0]])).tolist()
    [[0, 1], [0, 2], [1, 2]]
    """
    return edges_and_faces(triangles).edges
