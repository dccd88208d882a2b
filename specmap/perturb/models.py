"""Perturbation models: random smooth functions on shapes, random moves of grid contours.

Two models are offered.

``"function"``
    f' = f + size * (h1, h2), where h1 and h2 are independent random smooth functions of the
    ambient coordinates (a polynomial of degree <= 3 plus a few Fourier modes), each scaled so
    that its largest absolute value over the shape's vertices (and, for smooth surfaces, over
    extra sample points) is exactly 1. Hence ||f' - f||_inf = size on those points.
``"grid"``
    For studies given by their grids only: half-line starts move by random vectors of norm
    <= size, proper contours by a smooth random displacement made monotone again, never moving
    any point by more than size (Euclidean norm).

All functions take an explicit :class:`numpy.random.Generator` and are otherwise pure.

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in multidimensional
   persistent homology are stable functions", Math. Methods Appl. Sci. 36 (2013).
   Stability D_k(f, g) <= ||f - g||_inf, the reason the size is measured in the sup norm.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from specmap.grids.model import Contour, Grid
from specmap.shapes.model import Shape

__all__ = [
    "RandomField",
    "PerturbedMap",
    "random_field",
    "perturb_shape",
    "perturb_grid",
    "sample_points",
]

POLY_DEGREE = 3
N_MODES = 3
MODE_FREQUENCY = 2.0

_EXPONENTS = np.array(
    [
        (i, j, k)
        for d in range(POLY_DEGREE + 1)
        for i in range(d + 1)
        for j in range(d + 1 - i)
        for k in [d - i - j]
    ],
    dtype=int,
)


@dataclass(frozen=True, eq=False)
class RandomField:
    """A smooth function h: R^3 -> R, h(P) = scale * (poly(q) + sum_j amp_j sin(k_j . q + phase_j)).

    ``q = (P - center) / radius`` are coordinates normalised to the shape's bounding ball, so the
    field varies on the scale of the shape whatever its size.

    Attributes
    ----------
    center : ndarray (3,)
    radius : float
    coefficients : ndarray (20,)
        Coefficients of the monomials q^e, e in :data:`_EXPONENTS` (total degree <= 3).
    wavevectors : ndarray (m, 3)
    phases, amplitudes : ndarray (m,)
    scale : float
        Overall factor (set by :meth:`normalised`).
    """

    center: np.ndarray
    radius: float
    coefficients: np.ndarray
    wavevectors: np.ndarray
    phases: np.ndarray
    amplitudes: np.ndarray
    scale: float = 1.0

    def _q(self, P: np.ndarray) -> np.ndarray:
        P = np.asarray(P, dtype=float).reshape(-1, 3)
        return (P - self.center) / self.radius

    def values(self, P: np.ndarray) -> np.ndarray:
        """h at points P of shape (n, 3): array (n,)."""
        q = self._q(P)
        powers = np.prod(q[:, None, :] ** _EXPONENTS[None, :, :], axis=2)  # (n, 20)
        poly = powers @ self.coefficients
        waves = np.sin(q @ self.wavevectors.T + self.phases) @ self.amplitudes
        return self.scale * (poly + waves)

    def gradient(self, P: np.ndarray) -> np.ndarray:
        """Exact gradient of h with respect to P: array (n, 3)."""
        q = self._q(P)
        n = len(q)
        grad = np.zeros((n, 3))
        for axis in range(3):
            e = _EXPONENTS.copy()
            factor = e[:, axis].astype(float)
            e[:, axis] = np.maximum(e[:, axis] - 1, 0)
            powers = np.prod(q[:, None, :] ** e[None, :, :], axis=2)
            grad[:, axis] = powers @ (factor * self.coefficients)
        cos = np.cos(q @ self.wavevectors.T + self.phases) * self.amplitudes  # (n, m)
        grad += cos @ self.wavevectors
        return self.scale * grad / self.radius

    def sup(self, P: np.ndarray) -> float:
        """max |h| over the points P."""
        return float(np.max(np.abs(self.values(P))))

    def normalised(self, P: np.ndarray) -> RandomField:
        """The same field rescaled so that max |h| over P is exactly 1."""
        s = self.sup(P)
        if not s > 0.0:
            raise ValueError("the random field vanishes on every sample point")
        return dataclasses.replace(self, scale=self.scale / s)


def random_field(
    rng: np.random.Generator,
    center: np.ndarray,
    radius: float,
    *,
    n_modes: int = N_MODES,
    frequency: float = MODE_FREQUENCY,
) -> RandomField:
    """Draw a random smooth field: Gaussian polynomial coefficients plus ``n_modes`` sine waves.

    Coefficients of degree-d monomials have standard deviation 1 / (d + 1); wavevectors are
    Gaussian with standard deviation ``frequency`` (in normalised coordinates), phases uniform,
    amplitudes Gaussian with standard deviation 1 / 2. The result is not normalised.

    Parameters
    ----------
    rng : numpy.random.Generator
    center : array_like (3,)
    radius : float
        Positive length scale (half the bounding-box diagonal is the usual choice).
    n_modes : int
    frequency : float

    Returns
    -------
    RandomField
    """
    degree = _EXPONENTS.sum(axis=1)
    coefficients = rng.normal(size=len(_EXPONENTS)) / (degree + 1.0)
    wavevectors = rng.normal(scale=frequency, size=(n_modes, 3))
    phases = rng.uniform(0.0, 2.0 * math.pi, size=n_modes)
    amplitudes = rng.normal(scale=0.5, size=n_modes)
    return RandomField(
        np.asarray(center, dtype=float).reshape(3),
        float(radius) if radius > 0 else 1.0,
        coefficients,
        wavevectors,
        phases,
        amplitudes,
    )


@dataclass(frozen=True, eq=False)
class PerturbedMap:
    """The map P -> base(P) + size * (h1(P), h2(P)), with its exact Jacobian.

    Duck-types the map interface of the smooth grid route: ``values(P) -> (n, 2)`` and
    ``jacobian(P) -> (n, 2, 3)``.
    """

    base: Any
    fields: tuple[RandomField, RandomField]
    size: float

    def values(self, P: np.ndarray) -> np.ndarray:
        P = np.asarray(P, dtype=float).reshape(-1, 3)
        extra = np.stack([h.values(P) for h in self.fields], axis=1)
        return np.asarray(self.base.values(P), dtype=float) + self.size * extra

    def jacobian(self, P: np.ndarray) -> np.ndarray:
        P = np.asarray(P, dtype=float).reshape(-1, 3)
        extra = np.stack([h.gradient(P) for h in self.fields], axis=1)  # (n, 2, 3)
        return np.asarray(self.base.jacobian(P), dtype=float) + self.size * extra

    def is_linear(self) -> bool:
        """A perturbed map is treated as non-linear (no closed-form route)."""
        return False


def sample_points(shape: Shape) -> np.ndarray:
    """Points where the sup norm of a field on ``shape`` is measured.

    Vertices; for smooth surfaces also edge midpoints and triangle centroids, projected onto
    the surface with ``shape.surface.project`` when the surface offers it (otherwise left as
    chordal points, within the mesh size of the surface). Returns an (n, 3) array.
    """
    V = np.asarray(shape.vertices, dtype=float)
    if shape.source != "surface" or shape.triangles is None:
        return V
    T = np.asarray(shape.triangles, dtype=int)
    extra = [V[T].mean(axis=1)]
    for i, j in ((0, 1), (1, 2), (2, 0)):
        extra.append(0.5 * (V[T[:, i]] + V[T[:, j]]))
    E = np.concatenate(extra)
    project = getattr(shape.surface, "project", None)
    if callable(project):
        E = np.asarray(project(E), dtype=float).reshape(-1, 3)
    return np.concatenate([V, E])


def perturb_shape(shape: Shape, size: float, rng: np.random.Generator) -> tuple[Shape, float]:
    """Add size * (h1, h2) to the values of a mesh or surface shape ("function" model).

    Parameters
    ----------
    shape : Shape
        ``source`` ``"mesh"`` or ``"surface"`` with vertices and values.
    size : float
        Target sup norm of the change, >= 0.
    rng : numpy.random.Generator
        Draws h1 then h2.

    Returns
    -------
    shape : Shape
        Same mesh with new vertex values; a surface also gets ``fmap`` = :class:`PerturbedMap`
        (when the original has an ``fmap``) so its smooth grid can be recomputed.
    applied : float
        max over vertices of max(|f1' - f1|, |f2' - f2|): equals ``size`` up to rounding.

    Raises
    ------
    ValueError
        For a shape without vertices and values (grid-only shapes use :func:`perturb_grid`).
    """
    if shape.vertices is None or shape.values is None:
        raise ValueError(f"shape {shape.label!r} has no mesh values; use the 'grid' model")
    V = np.asarray(shape.vertices, dtype=float)
    lo, hi = V.min(axis=0), V.max(axis=0)
    center, radius = 0.5 * (lo + hi), 0.5 * float(np.linalg.norm(hi - lo))
    samples = sample_points(shape)
    fields = tuple(random_field(rng, center, radius).normalised(samples) for _ in range(2))
    delta = size * np.stack([h.values(V) for h in fields], axis=1)
    applied = float(np.max(np.abs(delta))) if len(delta) else 0.0
    meta = {"perturbation": {"model": "function", "size": float(size), "applied": applied}}
    new = shape.with_values(np.asarray(shape.values, dtype=float) + delta, **meta)
    if shape.source == "surface" and shape.fmap is not None:
        # A perturbed map is not linear: the closed-form route no longer applies (the run asks for
        # its grid with specmap.perturb.run.perturbed_grid_settings).
        new = dataclasses.replace(new, fmap=PerturbedMap(shape.fmap, fields, float(size)))
    return new, applied


def _smooth_profile(rng: np.random.Generator, t: np.ndarray, n_terms: int = 3) -> np.ndarray:
    """A random smooth function of t in [0, 1] with max |.| = 1 (constant plus sines)."""
    k = np.arange(1, n_terms + 1)
    amp = rng.normal(size=n_terms) / k
    phase = rng.uniform(0.0, 2.0 * math.pi, size=n_terms)
    prof = rng.normal() + np.sin(math.pi * np.outer(t, k) + phase) @ amp
    m = float(np.max(np.abs(prof)))
    return prof / m if m > 0 else prof


def _move_proper(points: np.ndarray, size: float, rng: np.random.Generator) -> np.ndarray:
    n = len(points)
    if n == 1:
        return points + _disc_vector(rng, size)
    seg = np.linalg.norm(np.diff(points, axis=0), axis=1)
    total = float(seg.sum())
    t = np.concatenate([[0.0], np.cumsum(seg)]) / total if total > 0 else np.linspace(0, 1, n)
    # Each coordinate moves by at most delta, so each point by at most sqrt(2) * delta = size.
    delta = size / math.sqrt(2.0) * rng.uniform(0.5, 1.0)
    x = points[:, 0] + delta * _smooth_profile(rng, t)
    y = points[:, 1] + delta * _smooth_profile(rng, t)
    # Monotone again: cumulative max of x and min of y; for a non-decreasing x this moves no
    # coordinate by more than delta, and clipping to the non-decreasing band keeps monotonicity.
    x = np.clip(np.maximum.accumulate(x), points[:, 0] - delta, points[:, 0] + delta)
    y = np.clip(np.minimum.accumulate(y), points[:, 1] - delta, points[:, 1] + delta)
    return np.stack([x, y], axis=1)


def _disc_vector(rng: np.random.Generator, size: float) -> np.ndarray:
    """A vector uniform in the closed disc of radius ``size``."""
    angle = rng.uniform(0.0, 2.0 * math.pi)
    r = size * math.sqrt(rng.uniform())
    return np.array([r * math.cos(angle), r * math.sin(angle)])


def perturb_grid(grid: Grid, size: float, rng: np.random.Generator) -> tuple[Grid, float]:
    """Move the contours of a grid by at most ``size`` ("grid" model).

    Half-line starts move by vectors uniform in the disc of radius ``size``. A proper contour
    gets a smooth random displacement (one random profile along its arc length per
    coordinate, amplitude <= size / sqrt(2)), then x is replaced by its running maximum and y by
    its running minimum so that the polyline is non-increasing again.

    Parameters
    ----------
    grid : Grid
        Should satisfy :func:`specmap.grids.model.validate_grid`.
    size : float
        Largest Euclidean move of any point, >= 0.
    rng : numpy.random.Generator

    Returns
    -------
    grid : Grid
        Same ids and kinds, ``route="perturbed"``; ``meta["perturbation"]`` records the model.
    moved : float
        The largest Euclidean move of any point (<= size).
    """
    out: list[Contour] = []
    moved = 0.0
    for c in grid.contours:
        if c.kind == "proper" and len(c.points) > 1:
            pts = _move_proper(np.asarray(c.points, dtype=float), size, rng)
        else:
            pts = c.points + _disc_vector(rng, size)
        moved = max(moved, float(np.max(np.linalg.norm(pts - c.points, axis=1))))
        out.append(Contour(c.id, c.kind, pts))
    meta = {**grid.meta, "perturbation": {"model": "grid", "size": float(size), "moved": moved}}
    return Grid(tuple(out), "perturbed", grid.tolerance, meta), moved
