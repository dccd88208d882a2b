"""Random generic grids for tests and benchmarks (seeded numpy RNG).

A grid mixes non-increasing polylines (proper contours) with vertical and
horizontal half-lines, all inside the unit box scaled by ``size``. Random
real coordinates make every coincidence (equal spacings, parallel pieces)
a probability-zero event, so the pair is generic.
"""

from __future__ import annotations

import numpy as np

from specmap.grids.model import Contour, Grid


def random_polyline(rng: np.random.Generator, size: float = 1.0, max_points: int = 5) -> np.ndarray:
    """A non-increasing polyline (x grows, y falls) with 2..max_points vertices."""
    n = int(rng.integers(2, max_points + 1))
    start = rng.uniform(0.0, 0.6 * size, 2) + np.array([0.0, 0.4 * size])
    steps = rng.uniform(0.02, 0.25 * size, (n - 1, 2)) * np.array([1.0, -1.0])
    return np.vstack([start, start + np.cumsum(steps, axis=0)])


def random_grid(
    seed: int, n: int, prefix: str = "f", *, size: float = 1.0, proper_fraction: float = 0.5
) -> Grid:
    """A random grid of ``n`` contours with ids ``"<prefix>:<kind letter><k>"``."""
    rng = np.random.default_rng(seed)
    out = []
    for k in range(n):
        r = rng.uniform()
        if r < proper_fraction:
            out.append(Contour(f"{prefix}:p{k}", "proper", random_polyline(rng, size)))
        elif r < proper_fraction + (1 - proper_fraction) / 2:
            out.append(Contour(f"{prefix}:v{k}", "vertical", rng.uniform(0.0, size, 2)))
        else:
            out.append(Contour(f"{prefix}:h{k}", "horizontal", rng.uniform(0.0, size, 2)))
    return Grid(tuple(out), route="file")


def random_pair(seed: int, n_total: int, size: float = 1.0) -> tuple[Grid, Grid]:
    """Two random grids with ``n_total`` contours together (f gets the extra one)."""
    nf = (n_total + 1) // 2
    return random_grid(seed, nf, "f", size=size), random_grid(seed + 10_000, n_total - nf, "g", size=size)
