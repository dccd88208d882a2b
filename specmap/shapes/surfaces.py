"""Smooth closed surfaces in R^3 given implicitly: :class:`Ellipsoid` and :class:`Torus`.

Each surface is the zero set of a polynomial ``G`` with a non-vanishing gradient on it, and
provides exact derivatives of ``G`` (used by the smooth grid route for Lagrange conditions), a
Newton projection onto the surface, a parametrisation and a closed, outward-oriented
triangulation whose vertices lie on the surface.

- Ellipsoid with radii (r1, r2, r3):  G = x^2/r1^2 + y^2/r2^2 + z^2/r3^2 - 1,  chi = 2.
- Torus about the z axis with radii (R, r), R > r > 0 (centre circle R, tube r):
  G = (x^2 + y^2 + z^2 + R^2 - r^2)^2 - 4 R^2 (x^2 + y^2),  chi = 0.

The quartic form of the torus is smooth everywhere (no square root on the axis) and has the
same zero set as (sqrt(x^2 + y^2) - R)^2 + z^2 - r^2.

References
----------
.. [Mil63] Milnor, "Morse Theory" (1963): Euler characteristic 2 (sphere) and 0 (torus).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = ["Ellipsoid", "Torus", "make_surface", "PROJECT_TOL"]

PROJECT_TOL = 1e-12
"""Default accuracy of :meth:`project`, as a distance relative to the surface size."""

_GOLDEN = (1.0 + math.sqrt(5.0)) / 2.0


def _as_points(P: np.ndarray) -> np.ndarray:
    pts = np.asarray(P, dtype=float)
    if pts.ndim != 2 or pts.shape[1] != 3:
        raise ValueError(f"points must have shape (n, 3), got {pts.shape}")
    return pts


def _newton_project(surface: Ellipsoid | Torus, P: np.ndarray, tol: float, max_iter: int) -> np.ndarray:
    """Newton steps p <- p - G(p) grad G / |grad G|^2 until the step is below ``tol``."""
    p = _as_points(P).copy()
    active = np.ones(len(p), dtype=bool)
    for _ in range(max_iter):
        if not active.any():
            break
        q = p[active]
        g = surface.implicit(q)
        n = surface.gradient(q)
        nn = np.einsum("ij,ij->i", n, n)
        step = (g / np.where(nn > 0, nn, 1.0))[:, None] * n
        q = q - step
        p[active] = q
        size = np.linalg.norm(step, axis=1)
        idx = np.nonzero(active)[0]
        active[idx[size <= tol]] = False
    return p


def _rotation(alpha: float, beta: float, gamma: float) -> np.ndarray:
    """Rotation matrix R_z(alpha) R_y(beta) R_x(gamma)."""
    ca, sa = math.cos(alpha), math.sin(alpha)
    cb, sb = math.cos(beta), math.sin(beta)
    cg, sg = math.cos(gamma), math.sin(gamma)
    rz = np.array([[ca, -sa, 0.0], [sa, ca, 0.0], [0.0, 0.0, 1.0]])
    ry = np.array([[cb, 0.0, sb], [0.0, 1.0, 0.0], [-sb, 0.0, cb]])
    rx = np.array([[1.0, 0.0, 0.0], [0.0, cg, -sg], [0.0, sg, cg]])
    return rz @ ry @ rx


# A fixed generic rotation: keeps mesh vertices off coordinate planes so that maps such as
# (x, y) do not vanish exactly at vertices (degenerate level sets in marching triangles).
_TILT = _rotation(0.3141, 0.2718, 0.1618)


def _icosahedron() -> tuple[np.ndarray, np.ndarray]:
    """Unit icosahedron with outward-oriented faces."""
    t = _GOLDEN
    V = np.array(
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
        dtype=float,
    )
    V /= np.linalg.norm(V, axis=1)[:, None]
    F = np.array(
        [
            [0, 11, 5],
            [0, 5, 1],
            [0, 1, 7],
            [0, 7, 10],
            [0, 10, 11],
            [1, 5, 9],
            [5, 11, 4],
            [11, 10, 2],
            [10, 7, 6],
            [7, 1, 8],
            [3, 9, 4],
            [3, 4, 2],
            [3, 2, 6],
            [3, 6, 8],
            [3, 8, 9],
            [4, 9, 5],
            [2, 4, 11],
            [6, 2, 10],
            [8, 6, 7],
            [9, 8, 1],
        ],
        dtype=int,
    )
    return V, F


def geodesic_sphere(frequency: int) -> tuple[np.ndarray, np.ndarray]:
    """Unit sphere from an icosahedron with every face split into ``frequency**2`` triangles.

    Vertex count 10 k^2 + 2 for frequency k; faces outward oriented; vertices on the sphere.
    """
    k = max(int(frequency), 1)
    V0, F0 = _icosahedron()
    index: dict[tuple[tuple[int, int], ...], int] = {}
    coords: list[np.ndarray] = []

    def vid(face: np.ndarray, i: int, j: int) -> int:
        # barycentric weights (k - i - j, i, j) on face corners (a, b, c); the key names the
        # point by its non-zero (corner, weight) pairs so shared edges reuse vertices.
        w = ((int(face[0]), k - i - j), (int(face[1]), i), (int(face[2]), j))
        key = tuple(sorted((c, m) for c, m in w if m > 0))
        got = index.get(key)
        if got is None:
            p = sum(m * V0[c] for c, m in key) / k
            got = len(coords)
            index[key] = got
            coords.append(p / np.linalg.norm(p))
        return got

    tris: list[tuple[int, int, int]] = []
    for face in F0:
        for i in range(k):
            for j in range(k - i):
                a, b, c = vid(face, i, j), vid(face, i + 1, j), vid(face, i, j + 1)
                tris.append((a, b, c))
                if i + j < k - 1:
                    tris.append((b, vid(face, i + 1, j + 1), c))
    return np.array(coords), np.array(tris, dtype=int)


@dataclass(frozen=True)
class Ellipsoid:
    """The ellipsoid x^2/r1^2 + y^2/r2^2 + z^2/r3^2 = 1.

    Attributes
    ----------
    radii : tuple of float
        Semi-axes (r1, r2, r3) along x, y, z (length units), all positive.

    Examples
    --------
    >>> E = Ellipsoid((2.0, 1.0, 1.0))
    >>> float(E.implicit(np.array([[2.0, 0.0, 0.0]]))[0])
    0.0
    """

    radii: tuple[float, ...]

    def __post_init__(self) -> None:
        r = tuple(float(x) for x in self.radii)
        if len(r) != 3 or not all(math.isfinite(x) and x > 0 for x in r):
            raise ValueError(f"an ellipsoid needs three positive finite radii, got {self.radii!r}")
        object.__setattr__(self, "radii", r)

    @property
    def kind(self) -> str:
        return "ellipsoid"

    @property
    def euler_characteristic(self) -> int:
        """2 (a sphere) [Mil63]."""
        return 2

    @property
    def size(self) -> float:
        """Largest radius (length scale for tolerances)."""
        return max(self.radii)

    @property
    def parameter_box(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """(u range, v range): longitude u in [0, 2 pi], latitude v in [-pi/2, pi/2]."""
        return ((0.0, 2.0 * math.pi), (-math.pi / 2.0, math.pi / 2.0))

    def implicit(self, P: np.ndarray) -> np.ndarray:
        """G(p) = sum p_i^2 / r_i^2 - 1, shape (n,)."""
        p = _as_points(P)
        return (p**2 / np.square(self.radii)).sum(axis=1) - 1.0

    def gradient(self, P: np.ndarray) -> np.ndarray:
        """Exact gradient 2 p_i / r_i^2, shape (n, 3)."""
        return 2.0 * _as_points(P) / np.square(self.radii)

    def hessian(self, P: np.ndarray) -> np.ndarray:
        """Exact Hessian diag(2 / r_i^2), shape (n, 3, 3)."""
        p = _as_points(P)
        return np.broadcast_to(np.diag(2.0 / np.square(self.radii)), (len(p), 3, 3)).copy()

    def project(self, P: np.ndarray, tol: float = PROJECT_TOL, max_iter: int = 100) -> np.ndarray:
        """Project points onto the surface by Newton steps along the gradient.

        Parameters
        ----------
        P : ndarray (n, 3)
            Points near the surface (not at the centre).
        tol : float
            Stop when the Newton step is below ``tol * size`` (length units).
        """
        return _newton_project(self, P, tol * self.size, max_iter)

    def parametrize(self, u: np.ndarray, v: np.ndarray) -> np.ndarray:
        """Point (r1 cos v cos u, r2 cos v sin u, r3 sin v), shape (..., 3)."""
        u, v = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(v, dtype=float))
        r1, r2, r3 = self.radii
        return np.stack([r1 * np.cos(v) * np.cos(u), r2 * np.cos(v) * np.sin(u), r3 * np.sin(v)], axis=-1)

    def mesh(self, resolution: int) -> tuple[np.ndarray, np.ndarray]:
        """Closed outward-oriented triangulation with about ``resolution`` vertices.

        A subdivided icosahedron (near-uniform triangles; fixed generic rotation), scaled
        onto the ellipsoid: unit vectors w map to (r1 w1, r2 w2, r3 w3), exactly on it.
        """
        k = max(1, round(math.sqrt(max(resolution - 2, 10) / 10.0)))
        W, T = geodesic_sphere(k)
        W = W @ _TILT.T
        W /= np.linalg.norm(W, axis=1)[:, None]
        return W * np.asarray(self.radii), T


@dataclass(frozen=True)
class Torus:
    """The torus of revolution about the z axis: (sqrt(x^2+y^2) - R)^2 + z^2 = r^2.

    Attributes
    ----------
    radii : tuple of float
        (R, r): centre-circle radius R and tube radius r, R > r > 0 (length units).

    Examples
    --------
    >>> T = Torus((2.0, 1.0))
    >>> float(T.implicit(np.array([[3.0, 0.0, 0.0]]))[0])
    0.0
    """

    radii: tuple[float, ...]

    def __post_init__(self) -> None:
        r = tuple(float(x) for x in self.radii)
        if len(r) != 2 or not all(math.isfinite(x) for x in r) or not (r[0] > r[1] > 0):
            raise ValueError(f"a torus needs radii (R, r) with R > r > 0, got {self.radii!r}")
        object.__setattr__(self, "radii", r)

    @property
    def kind(self) -> str:
        return "torus"

    @property
    def euler_characteristic(self) -> int:
        """0 [Mil63]."""
        return 0

    @property
    def size(self) -> float:
        """Outer radius R + r (length scale for tolerances)."""
        return self.radii[0] + self.radii[1]

    @property
    def parameter_box(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """(u range, v range): both angles in [0, 2 pi]."""
        return ((0.0, 2.0 * math.pi), (0.0, 2.0 * math.pi))

    def implicit(self, P: np.ndarray) -> np.ndarray:
        """G(p) = (|p|^2 + R^2 - r^2)^2 - 4 R^2 (x^2 + y^2), shape (n,)."""
        p = _as_points(P)
        R, r = self.radii
        s = (p**2).sum(axis=1) + R * R - r * r
        return s * s - 4.0 * R * R * (p[:, 0] ** 2 + p[:, 1] ** 2)

    def gradient(self, P: np.ndarray) -> np.ndarray:
        """Exact gradient 4 s p - 8 R^2 (x, y, 0), s = |p|^2 + R^2 - r^2; shape (n, 3)."""
        p = _as_points(P)
        R, r = self.radii
        s = (p**2).sum(axis=1) + R * R - r * r
        g = 4.0 * s[:, None] * p
        g[:, :2] -= 8.0 * R * R * p[:, :2]
        return g

    def hessian(self, P: np.ndarray) -> np.ndarray:
        """Exact Hessian 8 p p^T + 4 s I - 8 R^2 diag(1, 1, 0); shape (n, 3, 3)."""
        p = _as_points(P)
        R, r = self.radii
        s = (p**2).sum(axis=1) + R * R - r * r
        H = 8.0 * p[:, :, None] * p[:, None, :] + 4.0 * s[:, None, None] * np.eye(3)
        H[:, 0, 0] -= 8.0 * R * R
        H[:, 1, 1] -= 8.0 * R * R
        return H

    def project(self, P: np.ndarray, tol: float = PROJECT_TOL, max_iter: int = 100) -> np.ndarray:
        """Project points onto the surface by Newton steps along the gradient.

        Parameters
        ----------
        P : ndarray (n, 3)
            Points near the surface (not on the z axis or the centre circle).
        tol : float
            Stop when the Newton step is below ``tol * size`` (length units).
        """
        return _newton_project(self, P, tol * self.size, max_iter)

    def parametrize(self, u: np.ndarray, v: np.ndarray) -> np.ndarray:
        """Point ((R + r cos v) cos u, (R + r cos v) sin u, r sin v), shape (..., 3)."""
        u, v = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(v, dtype=float))
        R, r = self.radii
        w = R + r * np.cos(v)
        return np.stack([w * np.cos(u), w * np.sin(u), r * np.sin(v)], axis=-1)

    def mesh(self, resolution: int) -> tuple[np.ndarray, np.ndarray]:
        """Regular (u, v) grid with wraparound, about ``resolution`` vertices, outward oriented.

        The number of steps around the centre circle and around the tube are in the ratio
        of the mean circumferences (R : r), so triangles are near isotropic; v is offset by
        half a step so that no vertex lies on the plane z = 0.
        """
        R, r = self.radii
        n = max(int(resolution), 16)
        nv = max(4, round(math.sqrt(n * r / R)))
        nu = max(4, round(n / nv))
        u = 2.0 * math.pi * np.arange(nu) / nu
        v = 2.0 * math.pi * (np.arange(nv) + 0.5) / nv
        U, Vv = np.meshgrid(u, v, indexing="ij")
        V = self.parametrize(U, Vv).reshape(-1, 3)
        i, j = np.meshgrid(np.arange(nu), np.arange(nv), indexing="ij")
        a = i * nv + j
        b = ((i + 1) % nu) * nv + j
        c = ((i + 1) % nu) * nv + (j + 1) % nv
        d = i * nv + (j + 1) % nv
        # P_u x P_v points outward, so (a, b, c) (u first, then v) is outward oriented.
        T = np.concatenate([np.stack([a, b, c], -1).reshape(-1, 3), np.stack([a, c, d], -1).reshape(-1, 3)])
        return V, T


def make_surface(kind: str, radii: Sequence[float]) -> Ellipsoid | Torus:
    """Build a surface by name.

    Parameters
    ----------
    kind : {"ellipsoid", "torus"}
    radii : sequence of float
        Three positive radii (ellipsoid) or (R, r) with R > r > 0 (torus).

    Raises
    ------
    ValueError
        Unknown kind or bad radii.

    Examples
    --------
    >>> make_surface("torus", (2, 1)).euler_characteristic
    0
    """
    if kind == "ellipsoid":
        return Ellipsoid(tuple(radii))
    if kind == "torus":
        return Torus(tuple(radii))
    raise ValueError(f"unknown surface kind {kind!r}; use 'ellipsoid' or 'torus'")
