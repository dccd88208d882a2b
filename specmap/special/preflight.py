"""Size preflight of the special-set atlas: refuse in one line what cannot fit in memory.

The atlas compares every pair of contour pairs along the lattice edges, so its work and
memory grow like P^2 with P = N (N - 1) / 2 pairs of the N contours of both grids (N^4).
The model below was measured once on random generic grid pairs (tests/gridgen.py, seed 3,
window a in [0.05, 0.95], b in [-1, 1], pairs "all", 2 cores):

============  ==========  ===========  ==========  ===============
N contours    lattice     crossings    peak RSS    bytes/crossing
============  ==========  ===========  ==========  ===============
20            41 x 41     0.48 M       185 MB      385
40            41 x 41     9.5 M        2.1 GB      221
40            81 x 81     16.0 M       3.7 GB      231
============  ==========  ===========  ==========  ===============

so crossings ~ 16 P^2 (n / 41)^0.75 for an n x n lattice and about 250 bytes per crossing.
Real grids have clustered contours and may cross more or less; the estimate is meant to
tell "fits" from "off by orders of magnitude", which is why the refusal waits for twice
the budget.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from specmap.errors import SpecmapInputError

CROSSINGS_PER_PAIR2 = 16.0  # measured, see the module docstring
RESOLUTION_EXPONENT = 0.75
BYTES_PER_CROSSING = 250.0
BASE_BYTES = 150e6  # interpreter, numpy, shapely and the grids


class AtlasTooLargeError(SpecmapInputError):
    """The special-set atlas would need far more memory than the machine has."""


@dataclass(frozen=True)
class AtlasEstimate:
    """Estimated size of a special-set atlas.

    Attributes
    ----------
    contours : int
        N, contours of both grids.
    pairs : int
        P = N (N - 1) / 2.
    crossings : float
        Expected order swaps of pair differences on lattice edges.
    bytes : float
        Expected peak memory (bytes).
    """

    contours: int
    pairs: int
    crossings: float
    bytes: float


def memory_budget() -> float:
    """Half of the machine's physical memory (bytes), from ``os.sysconf``; 4 GB when unknown."""
    try:
        return 0.5 * os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return 4e9


def estimate_atlas(n_f: int, n_g: int, resolution: int | tuple[int, int]) -> AtlasEstimate:
    """Expected crossings and peak memory of the atlas of grids with ``n_f`` and ``n_g`` contours.

    Examples
    --------
    >>> e = estimate_atlas(20, 20, 41)
    >>> e.pairs, round(e.crossings / 1e6, 1)
    (780, 9.7)
    """
    n = int(n_f) + int(n_g)
    p = n * (n - 1) // 2
    n_a, n_b = (resolution, resolution) if isinstance(resolution, int) else resolution
    side = (float(n_a) * float(n_b)) ** 0.5
    crossings = CROSSINGS_PER_PAIR2 * float(p) ** 2 * (side / 41.0) ** RESOLUTION_EXPONENT
    return AtlasEstimate(n, p, crossings, BASE_BYTES + BYTES_PER_CROSSING * crossings)


def _size(b: float) -> str:
    for unit, scale in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6)):
        if b >= scale:
            return f"{b / scale:.3g} {unit}"
    return f"{b:.0f} B"


def check_atlas_size(
    n_f: int,
    n_g: int,
    resolution: int | tuple[int, int],
    *,
    budget: float | None = None,
    file: str | None = None,
) -> AtlasEstimate:
    """The estimate, or a one-line refusal when it exceeds twice the memory budget.

    Raises
    ------
    AtlasTooLargeError
        With the estimate and the remedies (simplify, --pairs roles, a coarser --resolution).
    """
    est = estimate_atlas(n_f, n_g, resolution)
    budget = memory_budget() if budget is None else float(budget)
    if est.bytes > 2 * budget:
        raise AtlasTooLargeError(
            f"the special-set map of {n_f} + {n_g} contours ({est.pairs} pairs, about "
            f"{est.crossings:.2g} crossings) needs about {_size(est.bytes)} of memory, over the budget "
            f"{_size(budget)} (half of this machine's memory)",
            file=file,
            field="map",
            fix='set simplify = "auto" (or a delta) on the mesh shapes, use --pairs roles, a coarser '
            "--resolution, or specmap distance --method dense, which needs no map",
        )
    return est
