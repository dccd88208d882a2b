"""Seeded "noisy scans" for tests and benchmarks: a smooth surface whose answer is known, plus noise.

A scan is the convex triangulation of an ellipsoid (:func:`meshgen.ellipsoid_mesh`, outward
oriented here) whose vertex positions get seeded normal noise of a given amplitude (standard
deviation per coordinate, length units); the two filtering functions are coordinate functions
of the noisy positions. The smooth pair is the same triangulation without noise: linear
functions on a convex polyhedron have one PL minimum and one PL maximum each, and on the
ellipsoid the extended Pareto grid of a linear map is known in closed form, so every answer
on a noisy scan can be compared with the smooth one. By the stability theorem
[Cohen-Steiner, Edelsbrunner, Harer 2007] every finite pair of a noisy coordinate function has
persistence at most 2 ||noise||_inf (the smooth function has no finite pair).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from meshgen import ellipsoid_mesh


@dataclass(frozen=True)
class NoisyScan:
    """A noisy scan and its smooth original (same triangles, same vertex numbering).

    Attributes
    ----------
    vertices, smooth_vertices : ndarray (n, 3)
        Noisy and smooth positions (length units).
    triangles : ndarray (m, 3) of int
        Outward-oriented triangles of a closed sphere-like surface.
    values, smooth_values : ndarray (n, 2)
        The coordinate functions ``axes`` of the noisy and the smooth positions.
    radii : tuple of float
    amplitude : float
        Standard deviation of the noise per coordinate (length units).
    seed : int
    axes : tuple of int
    """

    vertices: np.ndarray
    smooth_vertices: np.ndarray
    triangles: np.ndarray
    values: np.ndarray
    smooth_values: np.ndarray
    radii: tuple[float, float, float]
    amplitude: float
    seed: int
    axes: tuple[int, int]

    @property
    def noise_sup(self) -> float:
        """||values - smooth_values||_inf over both functions (value units)."""
        return float(np.abs(self.values - self.smooth_values).max())


def _outward(V: np.ndarray, T: np.ndarray) -> np.ndarray:
    """Orient the faces of a convex polyhedron around the origin outward."""
    a, b, c = V[T[:, 0]], V[T[:, 1]], V[T[:, 2]]
    inward = (np.cross(b - a, c - a) * (a + b + c)).sum(axis=1) < 0
    T = T.copy()
    T[inward] = T[inward][:, [0, 2, 1]]
    return T


def noisy_scan(
    radii: tuple[float, float, float] = (2.0, 1.2, 1.0),
    level: int = 12,
    amplitude: float = 0.01,
    seed: int = 0,
    axes: tuple[int, int] = (0, 1),
) -> NoisyScan:
    """A seeded noisy scan of an ellipsoid with coordinate functions as (f1, f2).

    Parameters
    ----------
    radii : (float, float, float)
        Ellipsoid semi-axes (length units).
    level : int
        Icosahedron subdivision: 10 level**2 + 2 vertices.
    amplitude : float
        Standard deviation of the normal noise on each vertex coordinate (length units), >= 0.
    seed : int
        Seeds the rotation of the vertex set and the noise.
    axes : (int, int)
        Which coordinates are f1 and f2.
    """
    if amplitude < 0:
        raise ValueError(f"amplitude must be >= 0, got {amplitude}")
    V0, T = ellipsoid_mesh(radii, level, seed=seed)
    T = _outward(V0, T)
    rng = np.random.default_rng([seed, 1])
    V = V0 + amplitude * rng.normal(size=V0.shape)
    ax = list(axes)
    return NoisyScan(
        V,
        V0,
        T,
        V[:, ax].copy(),
        V0[:, ax].copy(),
        tuple(float(r) for r in radii),
        float(amplitude),
        int(seed),
        (int(axes[0]), int(axes[1])),
    )


def write_scan(path: str | Path, scan: NoisyScan) -> Path:
    """Write the noisy scan as a PLY file with vertex fields ``f1``, ``f2``."""
    from specmap.shapes.meshes import write_mesh

    p = Path(path)
    write_mesh(p, scan.vertices, scan.triangles, scan.values, names=("f1", "f2"))
    return p
