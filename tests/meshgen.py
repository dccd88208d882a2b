"""Small closed test meshes built from scratch (no dependence on specmap.shapes.surfaces).

- :func:`sphere_points` / :func:`ellipsoid_mesh`: vertices of a subdivided
  icosahedron pushed to the unit sphere, triangulated by their convex hull
  (so the polyhedron is convex: a linear function has one PL minimum and one
  PL maximum), then scaled to an ellipsoid (scaling keeps convexity).
- :func:`torus_mesh`: the (u, v) grid of a torus of revolution about the z
  axis, each quad split into two triangles.
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import ConvexHull


def sphere_points(level: int) -> np.ndarray:
    """Vertices of the icosahedron with every face split into level**2 triangles, on the unit sphere."""
    t = (1 + 5**0.5) / 2
    ico = np.array(
        [
            [-1, t, 0],
            [1, t, 0],
            [-1, -t, 0],
            [1, -t, 0],
            [0, -1, t],
            [0, 1, t],
            [0, -1, -t],
            [0, 1, -t],
            [t, 0, -1],
            [t, 0, 1],
            [-t, 0, -1],
            [-t, 0, 1],
        ],
        float,
    )
    faces = ConvexHull(ico).simplices
    pts = [ico]
    k = max(int(level), 1)
    for a, b, c in faces:
        for i in range(k + 1):
            for j in range(k + 1 - i):
                w = np.array([i, j, k - i - j]) / k
                if (w > 0).sum() >= 2:
                    pts.append((w[0] * ico[a] + w[1] * ico[b] + w[2] * ico[c])[None])
    P = np.concatenate(pts)
    P /= np.linalg.norm(P, axis=1, keepdims=True)
    # merge duplicates created on shared edges
    _, idx = np.unique(np.round(P, 9), axis=0, return_index=True)
    return P[np.sort(idx)]


def ellipsoid_mesh(radii, level: int, seed: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Convex triangle mesh of the ellipsoid sum (x_i / radii_i)**2 = 1.

    With ``seed``, the sphere points are first rotated randomly (so that no
    vertex sits exactly at an axis point).
    """
    P = sphere_points(level)
    if seed is not None:
        q, _ = np.linalg.qr(np.random.default_rng(seed).normal(size=(3, 3)))
        P = P @ q.T
    T = ConvexHull(P).simplices.astype(np.int64)
    return P * np.asarray(radii, float), T


def torus_mesh(R: float, r: float, n_u: int, n_v: int, offset: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Torus of revolution about z: centre circle radius R, tube radius r.

    u (around z) takes n_u values starting at ``offset``; v (around the tube) n_v values.
    """
    u = offset + 2 * np.pi * np.arange(n_u) / n_u
    v = 2 * np.pi * np.arange(n_v) / n_v
    U, W = np.meshgrid(u, v, indexing="ij")
    rho = R + r * np.cos(W)
    V = np.stack([rho * np.cos(U), rho * np.sin(U), r * np.sin(W)], axis=-1).reshape(-1, 3)
    i, j = np.meshgrid(np.arange(n_u), np.arange(n_v), indexing="ij")
    a = i * n_v + j
    b = ((i + 1) % n_u) * n_v + j
    c = ((i + 1) % n_u) * n_v + (j + 1) % n_v
    d = i * n_v + (j + 1) % n_v
    T = np.concatenate([np.stack([a, b, c], -1).reshape(-1, 3), np.stack([a, c, d], -1).reshape(-1, 3)])
    return V, T.astype(np.int64)


def tetra_pair_sharing(kind: str) -> tuple[np.ndarray, np.ndarray]:
    """Two tetrahedra glued along an edge (``kind="edge"``) or at a vertex (``"vertex"``)."""
    V1 = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], float)
    T1 = np.array([[0, 2, 1], [0, 1, 3], [0, 3, 2], [1, 2, 3]])
    if kind == "edge":  # second tetra on vertices 0, 1 (shared) and two new ones
        V2 = np.array([[0, 0, -1], [0, -1, 0]], float)
        T2 = np.array([[0, 1, 4], [0, 5, 1], [0, 4, 5], [1, 5, 4]])
    else:  # second tetra on vertex 0 (shared) and three new ones
        V2 = np.array([[-1, 0, 0], [0, -1, 0], [0, 0, -1]], float)
        T2 = np.array([[0, 4, 5], [0, 5, 6], [0, 6, 4], [4, 6, 5]])
    return np.concatenate([V1, V2]), np.concatenate([T1, T2]).astype(np.int64)
