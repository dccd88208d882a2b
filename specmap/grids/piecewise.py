"""The extended Pareto grid of a piecewise-linear map on a closed triangle mesh.

f = (f1, f2) is given at the vertices and extended linearly over each
triangle (math.md section 7). The grid is built from

- **PL Pareto edges** (after the Jacobi-set edges of [EH04]): edge uv with
  (f1(u) - f1(v)) (f2(u) - f2(v)) <= 0 whose two opposite vertices lie
  strictly on the same side of the level h(u) = h(v) of h = f1 + lambda f2,
  lambda >= 0 (h = f2 when f2(u) = f2(v)). Multiplying h(o) - h(u) by
  f2(u) - f2(v) gives the orientation determinant of f(u), f(v), f(o) in the
  value plane, so the test reads: the images of the two triangles of the edge
  fold onto the same side of the image of the edge;
- **PL critical vertices** of f1 and f2 [Ban67]: count the arcs of the lower
  link (neighbours with smaller value, in the cyclic order of the link):
  0 arcs and no lower neighbour -> minimum, every neighbour lower -> maximum,
  k >= 2 arcs -> saddle of multiplicity k - 1 (a monkey saddle for k >= 3).

Ties are broken by a symbolic perturbation indexed by the vertex number i
(Simulation of Simplicity, [EM90]): f1(i) + eps * i and f2(i) + eps' * i**2
with 1 >> eps >> eps' > 0. Comparisons of one function are then by
(value, index); the orientation determinant falls back on the coefficients of
eps, eps' and eps * eps' in turn, the last of which is (j - i)(k - i)(k - j),
never zero for three distinct vertices. Every test therefore has a definite
answer, and all tests agree with one generic PL map.

Pareto edges are chained into paths, cut at PL critical vertices of f1 and
f2, at vertices whose number of Pareto edges is not 2, and at cusps (the
image turns back); each piece is monotone in f1 (and oppositely in f2), so it
is ordered by increasing (f1, index) and is a non-increasing polyline.

Accuracy and limits. On a mesh of a smooth map the grid converges to the
smooth one: contour vertices lie O(h^2) from the smooth fold in the normal
direction, while contour ends (at PL extrema) move O(h) along it; ``tolerance``
(the largest edge variation of f) bounds both in practice. Slice diagrams
of a lower-star filtration interpolate F*(a, b) from the vertices, which is
not max(g1, g2) of the interpolated functions: near the crease g1 = g2 it
has short-lived pairs (persistence below the edge variation of F*) that no
grid contour explains; longer pairs obey the position theorem [CEF19] to
within a mesh size. Each critical vertex gives one half-line, whatever its
multiplicity.

References
----------
.. [EH04] Edelsbrunner, Harer, "Jacobi sets of multiple Morse functions",
   Foundations of Computational Mathematics, Minneapolis 2002, Cambridge
   Univ. Press (2004).
.. [Ban67] Banchoff, "Critical points and curvature for embedded polyhedra",
   J. Differential Geom. 1 (1967).
.. [EM90] Edelsbrunner, Mücke, "Simulation of simplicity", ACM Trans.
   Graphics 9 (1990).
.. [CEF19] Cerri, Ethier, Frosini, "On the geometrical properties of the
   coherent matching distance in 2D persistent homology", J. Appl. Comput.
   Topol. 3 (2019). The extended Pareto grid.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from specmap.grids.model import Contour, Grid, validate_grid
from specmap.meshtable import EdgeTable, edges_and_faces


@dataclass(frozen=True)
class CriticalVertices:
    """PL critical vertices of one function on a closed triangle mesh.

    Attributes
    ----------
    vertices : ndarray (k,) of int
        Critical vertex indices, increasing.
    index : ndarray (k,) of int
        Morse index: 0 minimum, 1 saddle, 2 maximum.
    multiplicity : ndarray (k,) of int
        1 for extrema; (lower-link arcs - 1) for saddles.
    """

    vertices: np.ndarray
    index: np.ndarray
    multiplicity: np.ndarray

    def counts(self) -> dict[str, int]:
        """{"min", "saddle", "max"}; saddles counted with multiplicity."""
        return {
            "min": int((self.index == 0).sum()),
            "saddle": int(self.multiplicity[self.index == 1].sum()),
            "max": int((self.index == 2).sum()),
        }


def vertex_ranks(values: np.ndarray) -> np.ndarray:
    """Ranks of the vertices by (value, vertex index): the perturbed order of one function."""
    v = np.asarray(values, dtype=float)
    order = np.lexsort((np.arange(len(v)), v))
    ranks = np.empty(len(v), dtype=np.int64)
    ranks[order] = np.arange(len(v))
    return ranks


def pl_critical_vertices(T: np.ndarray, values: np.ndarray) -> CriticalVertices:
    """PL critical vertices of one function on a closed triangulated surface.

    Each vertex's lower link is counted in arcs: the number of link edges with
    exactly one lower endpoint is twice the number of arcs. Ties are broken by
    vertex index.

    Parameters
    ----------
    T : ndarray (m, 3) of int
        Triangles of a closed 2-manifold (every vertex link one cycle).
    values : ndarray (n,)
        The function at the vertices.

    Returns
    -------
    CriticalVertices

    References
    ----------
    .. [Ban67] Banchoff, J. Differential Geom. 1 (1967): PL critical points.
    """
    T = np.asarray(T, dtype=np.int64)
    r = vertex_ranks(values)
    n = len(r)
    changes = np.zeros(n, dtype=np.int64)
    lower_nb = np.zeros(n, dtype=np.int64)
    upper_nb = np.zeros(n, dtype=np.int64)
    for k in range(3):
        a, b, c = T[:, k], T[:, (k + 1) % 3], T[:, (k + 2) % 3]
        lb = r[b] < r[a]
        lc = r[c] < r[a]
        changes += np.bincount(a, weights=(lb != lc), minlength=n).astype(np.int64)
        lower_nb += np.bincount(a, weights=lb | lc, minlength=n).astype(np.int64)
        upper_nb += np.bincount(a, weights=~(lb & lc), minlength=n).astype(np.int64)
    arcs = changes // 2
    is_min = lower_nb == 0
    is_max = upper_nb == 0
    is_saddle = arcs >= 2
    crit = np.nonzero(is_min | is_max | is_saddle)[0]
    index = np.where(is_min[crit], 0, np.where(is_max[crit], 2, 1))
    mult = np.where(index == 1, arcs[crit] - 1, 1)
    return CriticalVertices(crit, index.astype(np.int64), mult.astype(np.int64))


def _orientation_sign(F: np.ndarray, i: np.ndarray, j: np.ndarray, k: np.ndarray) -> np.ndarray:
    """Sign of det[f(j) - f(i), f(k) - f(i)] under the perturbation of the module docstring."""
    fi, fj, fk = F[i], F[j], F[k]
    bj1, bj2 = fj[:, 0] - fi[:, 0], fj[:, 1] - fi[:, 1]
    ck1, ck2 = fk[:, 0] - fi[:, 0], fk[:, 1] - fi[:, 1]
    d0 = bj1 * ck2 - bj2 * ck1
    fi_, fj_, fk_ = (x.astype(float) for x in (i, j, k))
    pj, pk = fj_ - fi_, fk_ - fi_  # eps * index offsets in f1
    qj, qk = fj_**2 - fi_**2, fk_**2 - fi_**2  # eps' * index**2 offsets in f2
    d_eps = pj * ck2 - bj2 * pk
    d_epsp = bj1 * qk - qj * ck1
    d_both = pj * qk - qj * pk  # = (j - i)(k - i)(k - j)
    out = np.sign(d0)
    for term in (d_eps, d_epsp, d_both):
        out = np.where(out == 0, np.sign(term), out)
    return out.astype(np.int64)


def pareto_edges(T: np.ndarray, values: np.ndarray, table: EdgeTable | None = None) -> np.ndarray:
    """Boolean mask over ``edges_and_faces(T).edges``: the PL Pareto edges.

    Parameters
    ----------
    T : ndarray (m, 3) of int
        Triangles of a closed 2-manifold.
    values : ndarray (n, 2)
        (f1, f2) at the vertices.
    table : EdgeTable, optional
        Precomputed ``edges_and_faces(T)``.

    Returns
    -------
    ndarray (E,) of bool

    References
    ----------
    .. [EH04] Edelsbrunner, Harer (2004): Jacobi-set edges of two PL functions.
    """
    F = np.asarray(values, dtype=float)
    table = edges_and_faces(T) if table is None else table
    u, v = table.edges[:, 0], table.edges[:, 1]
    r1 = vertex_ranks(F[:, 0])
    r2 = vertex_ranks(F[:, 1])
    opposite_orders = (r1[u] < r1[v]) != (r2[u] < r2[v])
    s1 = _orientation_sign(F, u, v, table.opposite[:, 0])
    s2 = _orientation_sign(F, u, v, table.opposite[:, 1])
    return opposite_orders & (s1 == s2)


def _pieces(edges: np.ndarray, cut: np.ndarray, r1: np.ndarray) -> list[np.ndarray]:
    """Split a set of edges into paths at cut vertices; each path ordered by r1."""
    if len(edges) == 0:
        return []
    n = len(r1)
    ne = len(edges)
    deg = np.bincount(edges.reshape(-1), minlength=n)
    # cusp: a degree-2 vertex whose two Pareto neighbours are both above or both below in r1
    ends = edges.reshape(-1)
    other = edges[:, ::-1].reshape(-1)
    eid = np.repeat(np.arange(ne), 2)
    above = np.bincount(ends, weights=r1[other] > r1[ends], minlength=n)
    cusp = (deg == 2) & ((above == 0) | (above == 2))
    stop = cut | (deg != 2) | cusp
    # join the two edges at each non-stop vertex
    keep = ~stop[ends]
    order = np.argsort(ends[keep], kind="stable")
    pairs = eid[keep][order].reshape(-1, 2)
    graph = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(ne, ne))
    ncomp, label = connected_components(graph, directed=False)
    # vertices of each piece, ordered by r1 (the piece is monotone in r1)
    lab2 = np.repeat(label, 2)
    key = np.unique(np.stack([lab2, ends]), axis=1)  # unique (piece, vertex) pairs
    order = np.lexsort((r1[key[1]], key[0]))
    lab_sorted = key[0][order]
    verts = key[1][order]
    splits = np.nonzero(np.diff(lab_sorted))[0] + 1
    return np.split(verts, splits)


def piecewise_grid(
    V: np.ndarray,
    T: np.ndarray,
    values: np.ndarray,
    *,
    label: str = "f",
    progress: Callable[[int, int], None] | None = None,
) -> Grid:
    """Extended Pareto grid of the PL map given by vertex values on a closed triangle mesh.

    Parameters
    ----------
    V : ndarray (n, 3)
        Vertex positions (only their number is used).
    T : ndarray (m, 3) of int
        Triangles of a closed 2-manifold (check with
        :func:`specmap.shapes.meshes.check_closed_manifold`).
    values : ndarray (n, 2)
        (f1, f2) at the vertices, value units.
    label : str
        Prefix of the contour ids: ``"<label>:p<k>"`` proper, ``"<label>:v<k>"``
        vertical, ``"<label>:h<k>"`` horizontal. Every Pareto piece is kept; to
        remove short-lived critical pairs, simplify the values first
        (:func:`specmap.simplify.simplify_values`).
    progress : callable ``(done, total)``, optional
        Called after each of the five steps (edge table, critical vertices of f1, of f2,
        Pareto edges, pieces), so a mesh of millions of triangles is not silent.

    Returns
    -------
    Grid
        ``route="piecewise"``, ``tolerance`` = largest edge variation
        max |f(u) - f(v)| (Euclidean, value units), and ``meta`` with
        ``vertices``, ``pareto_edges`` and
        ``critical_vertices`` {"f1"|"f2": {"min", "saddle", "max"}} (saddles
        with multiplicity). One half-line per critical vertex (a monkey saddle
        of multiplicity k still gives one half-line).

    References
    ----------
    .. [CEF19] Cerri, Ethier, Frosini (2019): extended Pareto grid.
    .. [EH04] Edelsbrunner, Harer (2004): PL Jacobi sets.
    .. [Ban67] Banchoff (1967): PL critical points.
    """
    F = np.asarray(values, dtype=float)
    T = np.asarray(T, dtype=np.int64)
    n = len(np.asarray(V))
    if F.shape != (n, 2):
        raise ValueError(f"values have shape {F.shape}, expected ({n}, 2)")
    step = progress or (lambda done, total: None)
    table = edges_and_faces(T)
    step(1, 5)
    crit1 = pl_critical_vertices(T, F[:, 0])
    step(2, 5)
    crit2 = pl_critical_vertices(T, F[:, 1])
    step(3, 5)
    mask = pareto_edges(T, F, table)
    step(4, 5)
    pe = table.edges[mask]
    r1 = vertex_ranks(F[:, 0])
    cut = np.zeros(n, dtype=bool)
    cut[crit1.vertices] = True
    cut[crit2.vertices] = True
    pieces = _pieces(pe, cut, r1)

    contours = [Contour(f"{label}:p{k}", "proper", F[verts]) for k, verts in enumerate(pieces)]
    for j, p in enumerate(crit1.vertices):
        contours.append(Contour(f"{label}:v{j}", "vertical", F[p]))
    for j, q in enumerate(crit2.vertices):
        contours.append(Contour(f"{label}:h{j}", "horizontal", F[q]))

    diffs = F[table.edges[:, 0]] - F[table.edges[:, 1]]
    tolerance = float(np.hypot(diffs[:, 0], diffs[:, 1]).max()) if len(diffs) else 0.0
    meta = {
        "vertices": int(n),
        "pareto_edges": int(mask.sum()),
        "critical_vertices": {"f1": crit1.counts(), "f2": crit2.counts()},
    }
    grid = Grid(tuple(contours), route="piecewise", tolerance=tolerance, meta=meta)
    span = float(np.ptp(F[:, 0]) + np.ptp(F[:, 1])) if n else 0.0
    grid = validate_grid(grid, tol=1e-12 * max(span, 1.0))
    step(5, 5)
    return grid
