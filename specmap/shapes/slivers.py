"""Zero-area (collinear) triangles of a closed mesh: found by a stated rule, removed by edge flips.

A triangle with three distinct vertices p, q, r is *zero-area* (collinear) when

    |(q - p) x (r - p)| <= COLLINEAR_RTOL * L**2,

L its longest edge, computed on the mesh scaled to unit size (so the rule does not depend on the
length unit and never overflows). ``|(q - p) x (r - p)| / L**2`` is at most the sine of the
triangle's largest angle over its smallest edge ratio, so the rule says: the three points lie on one
line to within rounding (a midpoint computed in floating point is caught, a thin but real triangle
is not).

Such a triangle has an image of zero area in space but not, in general, in the value plane: the PL
map (math.md section 7) interpolates the vertex values over it, and the PL Pareto-edge test of its
edges meets ties that a real surface does not have. On a closed mesh it is almost always a
*T-junction* sealed by a sliver: the middle vertex m lies on the longest edge uv, and the triangle
s = (u, v, w) on the other side of uv does not have m as a vertex.

Rule (refinement at the T-junction). The sliver (u, v, m) and its neighbour s across uv are
replaced by the two triangles (u, m, w) and (m, v, w) into which m splits s (the edge uv is flipped
to mw). The two new triangles tile s exactly, so the polyhedral surface -- the point set -- is
unchanged; only the triangulation is refined, and the PL map is the one that interpolates the same
vertex values on the refined triangulation. A flip is made only when it keeps a closed 2-manifold
without new zero-area triangles: mw is not already an edge and w is not on the line uv. Flips are
made in passes of slivers with disjoint vertices (each pass on a fresh edge table) until none is
left or a pass flips nothing; a sliver no flip removes is an error for the caller.

References
----------
.. [She02] Shewchuk, "What is a good linear finite element? Interpolation, conditioning,
   anisotropy, and quality measures", manuscript, UC Berkeley (2002): zero-area and near-zero-area
   triangles and the interpolation error of the PL interpolant over them.
"""

from __future__ import annotations

import numpy as np

from specmap.meshtable import edges_and_faces

COLLINEAR_RTOL = 1e-12
"""Relative size of the cross product below which a triangle counts as zero-area (see module doc)."""

MAX_PASSES = 20
"""Flip passes before giving up on the slivers that are left."""


def zero_area_mask(V: np.ndarray, T: np.ndarray, rtol: float = COLLINEAR_RTOL) -> np.ndarray:
    """Which triangles are zero-area (three collinear vertices), by the rule of the module.

    Parameters
    ----------
    V : ndarray (n, 3)
        Vertex positions (finite).
    T : ndarray (m, 3) of int
    rtol : float
        The threshold of ``|cross| / L**2``.

    Returns
    -------
    ndarray (m,) of bool

    Examples
    --------
    >>> V = np.array([[0.0, 0, 0], [1, 0, 0], [0.5, 0, 0], [0.5, 1e-3, 0]])
    >>> zero_area_mask(V, np.array([[0, 1, 2], [0, 1, 3]])).tolist()
    [True, False]
    """
    V = np.asarray(V, dtype=float)
    T = np.asarray(T, dtype=np.int64).reshape(-1, 3)
    if len(T) == 0:
        return np.zeros(0, dtype=bool)
    shift = V.mean(axis=0) if len(V) else np.zeros(3)
    scale = float(np.abs(V - shift).max()) if len(V) else 0.0
    U = (V - shift) / scale if scale > 0 and np.isfinite(scale) else V - shift
    a, b, c = U[T[:, 0]], U[T[:, 1]], U[T[:, 2]]
    cross = np.linalg.norm(np.cross(b - a, c - a), axis=1)
    longest = np.max(np.stack([((b - a) ** 2).sum(1), ((c - b) ** 2).sum(1), ((a - c) ** 2).sum(1)]), axis=0)
    return cross <= rtol * longest


def flip_slivers(V: np.ndarray, T: np.ndarray) -> tuple[np.ndarray, int, np.ndarray]:
    """Remove the zero-area triangles of a closed mesh by the edge flips of the module's rule.

    Parameters
    ----------
    V : ndarray (n, 3)
    T : ndarray (m, 3) of int
        A closed 2-manifold (every edge on two triangles), no repeated vertex in a triangle.

    Returns
    -------
    T : ndarray (m, 3) of int
        The refined triangles (as many as before: two in, two out per flip; each new triangle keeps
        the orientation of the neighbour it splits).
    flipped : int
        Number of zero-area triangles removed.
    left : ndarray of int
        Indices (in the returned ``T``) of zero-area triangles no flip removed (empty on success).

    Examples
    --------
    A tetrahedron whose edge 0-1 carries a fifth vertex 4 on one side only (a T-junction sealed by
    the sliver (0, 1, 4)) becomes the tetrahedron with that edge split on both sides:

    >>> V = np.array([[0.0, 0, 0], [2, 0, 0], [0, 2, 0], [0, 0, 2], [1, 0, 0]])
    >>> T = np.array([[0, 2, 1], [0, 4, 3], [4, 1, 3], [1, 2, 3], [0, 3, 2], [0, 1, 4]])
    >>> T2, flipped, left = flip_slivers(V, T)
    >>> flipped, left.tolist(), bool(zero_area_mask(V, T2).any())
    (1, [], False)
    """
    T = np.array(T, dtype=np.int64).reshape(-1, 3)
    flipped = 0
    for _ in range(MAX_PASSES):
        bad = np.nonzero(zero_area_mask(V, T))[0]
        if bad.size == 0:
            break
        done = _one_pass(np.asarray(V, dtype=float), T, bad)
        flipped += done
        if done == 0:
            break
    return T, flipped, np.nonzero(zero_area_mask(V, T))[0]


def _one_pass(V: np.ndarray, T: np.ndarray, bad: np.ndarray) -> int:
    """Flip, in place, the slivers of ``bad`` whose flips touch disjoint vertices; how many were flipped."""
    table = edges_and_faces(T)
    n = int(T.max()) + 1
    keys = table.edges[:, 0] * n + table.edges[:, 1]  # sorted, since edges are sorted lexicographically
    is_bad = np.zeros(len(T), dtype=bool)
    is_bad[bad] = True
    used = np.zeros(n, dtype=bool)
    done = 0
    for t in bad.tolist():
        tri = T[t]
        p = V[tri]
        lengths = [float(((p[(k + 1) % 3] - p[k]) ** 2).sum()) for k in range(3)]
        k = int(np.argmax(lengths))  # the long edge (tri[k], tri[k+1]); the middle vertex is tri[k+2]
        e = int(table.triangle_edges[t, k])
        if table.counts[e] != 2:
            continue
        s = int(table.faces[e, 0] if table.faces[e, 1] == t else table.faces[e, 1])
        m = int(tri[(k + 2) % 3])
        w = int(table.opposite[e, 0] if table.faces[e, 0] == s else table.opposite[e, 1])
        quad = [int(tri[k]), int(tri[(k + 1) % 3]), m, w]
        if is_bad[s] or used[quad].any() or m == w:
            continue
        lo, hi = min(m, w), max(m, w)
        at = int(np.searchsorted(keys, lo * n + hi))
        if at < len(keys) and keys[at] == lo * n + hi:
            continue  # mw is an edge already: the flip would make it non-manifold
        # s = (u, v, w) in its own cyclic order; m splits its edge uv
        su = T[s].tolist()
        j = su.index(w)
        u, v = su[(j + 1) % 3], su[(j + 2) % 3]
        new = np.array([[u, m, w], [m, v, w]], dtype=np.int64)
        if zero_area_mask(V, new).any():
            continue
        T[t], T[s] = new
        used[quad] = True
        done += 1
    return done
