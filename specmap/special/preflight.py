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

:func:`plan_atlas` turns the estimate into a plan under a memory budget (``[map] memory``,
``--memory``; default half of the machine's memory): one piece when it fits, else the
fewest tiles (:mod:`specmap.special.tiles`) whose per-tile estimate fits, each tile's
crossings taken as its share of the lattice cells (its halo included) and ``jobs`` tiles
held at once; a refusal when even tiles of ``MIN_TILE_CELLS`` cells a side do not fit.
The merged output (pieces, components from the tiles' line labels) is held whole:
``MERGED_BYTES_PER_CROSSING`` (measured, about 160 bytes per crossing against 250 in one
piece), so tiles held in memory lower the peak to about two thirds of one piece, not
further. Below that the plan *streams*: the tiles stay on disk and are merged one at a time
from summaries (:mod:`specmap.special.stream`, ``STREAMED_BYTES_PER_CROSSING``), and the
peak is that of ``jobs`` tiles; tiles given explicitly still run (parallel, resumable),
streamed when held whole they would not fit.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from typing import Any

from specmap.errors import InputValueError, SpecmapInputError

CROSSINGS_PER_PAIR2 = 16.0  # measured, see the module docstring
RESOLUTION_EXPONENT = 0.75
BYTES_PER_CROSSING = 250.0
BASE_BYTES = 150e6  # interpreter, numpy, shapely and the grids
# The merged output is held whole: measured (tests/benchmarks/results_tiles.md, 40 contours at
# 81 x 81, 16.0 M crossings) the tiled map peaks at 2.51 GB (2 x 2) and 2.95 GB (3 x 3), one piece
# at 4.02 GB; the 3 x 3 peak less a tile's share is about 160 bytes per crossing.
MERGED_BYTES_PER_CROSSING = 160.0
# Streamed merge: about 100 bytes per clipped curve line kept as a summary; 80 random contours at
# 121 x 121 (tests/benchmarks/results_tiles_n80.md) have 3.2 clipped lines per 100 crossings
STREAMED_BYTES_PER_CROSSING = 4.0
MIN_TILE_CELLS = 4  # smallest tile side (cells) the plan goes down to
# Rough work per estimated crossing on one core, for the plan's time estimate: 40 random contours at
# 41 x 41 (tests/benchmarks/results_tiles.md, quiet 2-core machine) took 41.4 s in one piece, 48.2 s
# in 2 x 2 tiles held in memory and 176.0 s streamed, for 10.66 M crossings of the one-piece map
SECONDS_PER_CROSSING = {"one piece": 3.9e-6, "tiles": 4.5e-6, "streamed": 16.5e-6}
UNITS = {
    "": 1.0,
    "B": 1.0,
    "KB": 1e3,
    "MB": 1e6,
    "GB": 1e9,
    "TB": 1e12,
    "K": 1e3,
    "M": 1e6,
    "G": 1e9,
    "T": 1e12,
}


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


def size_text(b: float) -> str:
    """A byte count in words: ``"1.2 GB"``, ``"350 MB"``, ``"12 B"`` (three significant digits).

    >>> size_text(1.234e9), size_text(3.5e8)
    ('1.23 GB', '350 MB')
    """
    for unit, scale in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6)):
        if b >= scale:
            return f"{b / scale:.3g} {unit}"
    return f"{b:.0f} B"


_size = size_text


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
            fix=map_remedies(n_f, n_g, resolution, budget=budget),
        )
    return est


def parse_memory(text: str | float | int) -> float:
    """Bytes of a memory size: ``"6GB"``, ``"512MB"``, ``"4G"``, ``"2.5e9"`` or a number.

    Raises
    ------
    InputValueError
        Not a positive size (subject ``"memory"``).

    Examples
    --------
    >>> parse_memory("6GB"), parse_memory("512 MB"), parse_memory(2e9)
    (6000000000.0, 512000000.0, 2000000000.0)
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        value = float(text)
    else:
        m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([KMGT]?B?)\s*", str(text).upper())
        value = float(m.group(1)) * UNITS[m.group(2)] if m else float("nan")
    if not (math.isfinite(value) and value > 0):
        raise InputValueError(
            f"memory {text!r} is not a positive size",
            subject="memory",
            fix='give a size like "6GB" or "512MB"',
        )
    return value


@dataclass(frozen=True)
class AtlasPlan:
    """How the atlas is computed under a memory budget.

    Attributes
    ----------
    estimate : AtlasEstimate
        The whole atlas in one piece.
    budget : float
        Bytes.
    tiles : (na, nb)
        (1, 1) for one piece.
    tile_bytes : float
        Expected peak of the process(es): ``jobs`` tiles at once plus the merged output.
    jobs : int
    reason : str
        Why this plan (fits, tiled to fit, tiles as asked).
    """

    estimate: AtlasEstimate
    budget: float
    tiles: tuple[int, int]
    tile_bytes: float
    jobs: int
    reason: str
    streamed: bool = False

    @property
    def tiled(self) -> bool:
        return self.tiles != (1, 1)

    @property
    def seconds(self) -> float:
        """A rough time of the plan on one core (:data:`SECONDS_PER_CROSSING`; work spread over
        ``jobs`` processes or a cluster takes less, the merge does not)."""
        kind = "streamed" if self.streamed else ("tiles" if self.tiled else "one piece")
        return float(self.estimate.crossings) * SECONDS_PER_CROSSING[kind]

    def to_json(self) -> dict[str, Any]:
        return {
            "contours": self.estimate.contours,
            "pairs": self.estimate.pairs,
            "crossings_estimate": float(self.estimate.crossings),
            "bytes_estimate": float(self.estimate.bytes),
            "budget": float(self.budget),
            "tiles": list(self.tiles),
            "tile_bytes_estimate": float(self.tile_bytes),
            "jobs": int(self.jobs),
            "reason": self.reason,
            "streamed": bool(self.streamed),
            "seconds_estimate": self.seconds,
        }

    def line(self) -> str:
        """One line for the terminal."""
        shape = "one piece" if not self.tiled else f"{self.tiles[0]} x {self.tiles[1]} tiles"
        if self.streamed:
            shape += " streamed to disk"
        return (
            f"map plan: {shape} ({self.reason}); about {self.estimate.crossings:.2g} crossings, "
            f"{_size(self.estimate.bytes)} in one piece, {_size(self.tile_bytes)} as planned, "
            f"budget {_size(self.budget)}; roughly {_duration(self.seconds)} of work on one core"
        )


def _duration(seconds: float) -> str:
    """A rough duration in words: seconds, minutes or hours (two significant digits)."""
    if seconds < 90:
        return f"{seconds:.2g} s"
    if seconds < 5400:
        return f"{seconds / 60:.2g} min"
    return f"{seconds / 3600:.2g} h"


def _tiles_bytes(
    est: AtlasEstimate, n_a: int, n_b: int, tiles: tuple[int, int], jobs: int, streamed: bool = False
) -> float:
    """Expected peak with ``tiles``: ``jobs`` of the largest tile (halo included) and the merged
    output (held whole, or its summaries when ``streamed``)."""
    na, nb = tiles
    cells = (n_a - 1) * (n_b - 1)
    if na == nb == 1:
        return est.bytes
    side_a = -(-(n_a - 1) // na) + (2 if na > 1 else 0)
    side_b = -(-(n_b - 1) // nb) + (2 if nb > 1 else 0)
    share = min(1.0, side_a * side_b / cells)
    crossings = est.crossings
    per_tile = BYTES_PER_CROSSING * crossings * share
    return (
        BASE_BYTES * (1 + min(jobs, na * nb))
        + min(jobs, na * nb) * per_tile
        + (STREAMED_BYTES_PER_CROSSING if streamed else MERGED_BYTES_PER_CROSSING) * crossings
    )


def plan_atlas(
    n_f: int,
    n_g: int,
    resolution: int | tuple[int, int],
    *,
    budget: float | None = None,
    tiles: tuple[int, int] | None = None,
    jobs: int = 1,
    file: str | None = None,
    pairs: str = "all",
    simplified: tuple[dict | None, dict | None] = (None, None),
    max_contours: int | None = None,
    band: tuple[float, float] | None = None,
) -> AtlasPlan:
    """The plan of the atlas under ``budget`` (bytes; default :func:`memory_budget`).

    ``tiles`` given: used as asked (no refusal: the user chose). Else one piece when the
    estimate fits the budget, the fewest tiles (near-square, rows of cells first) whose
    estimate fits, one piece when no budget was given and the estimate is within twice the
    default (the estimate is coarse: the refusal of the one-piece preflight), or a one-line
    refusal. ``pairs``, ``simplified`` (the simplification records of f and g), ``max_contours``
    and ``band`` (a band of tied costs to suggest) only shape the refusal's remedies
    (:func:`map_remedies`).

    Raises
    ------
    AtlasTooLargeError
        Even tiles of :data:`MIN_TILE_CELLS` cells a side exceed the budget.

    Examples
    --------
    >>> plan_atlas(20, 20, 81, budget=8e9).tiles
    (1, 1)
    >>> plan_atlas(20, 20, 121, budget=8e9, tiles=(2, 2)).reason
    'tiles as asked'
    """
    est = estimate_atlas(n_f, n_g, resolution)
    n_a, n_b = (resolution, resolution) if isinstance(resolution, int) else resolution
    given_budget = budget is not None
    budget = memory_budget() if budget is None else float(budget)
    jobs = max(1, int(jobs))
    if tiles is not None:
        t = (int(tiles[0]), int(tiles[1]))
        reason = "one piece as asked" if t == (1, 1) else "tiles as asked"
        held = _tiles_bytes(est, n_a, n_b, t, jobs)
        if t == (1, 1) or held <= budget:
            return AtlasPlan(est, budget, t, held, jobs, reason)
        return AtlasPlan(est, budget, t, _tiles_bytes(est, n_a, n_b, t, jobs, True), jobs, reason, True)
    if est.bytes <= budget:
        return AtlasPlan(est, budget, (1, 1), est.bytes, jobs, "fits the budget")
    max_a = max(1, (n_a - 1) // MIN_TILE_CELLS)
    max_b = max(1, (n_b - 1) // MIN_TILE_CELLS)
    options = sorted(
        ((ta, tb) for ta in range(1, max_a + 1) for tb in range(1, max_b + 1) if (ta, tb) != (1, 1)),
        key=lambda t: (t[0] * t[1], abs(t[0] - t[1]), -t[1]),
    )
    for t in options:
        b = _tiles_bytes(est, n_a, n_b, t, jobs)
        if b <= budget:
            return AtlasPlan(est, budget, t, b, jobs, "tiled to fit the budget")
    for t in options:  # the merged output does not fit: tiles on disk, merged from summaries
        b = _tiles_bytes(est, n_a, n_b, t, jobs, True)
        if b <= budget:
            return AtlasPlan(est, budget, t, b, jobs, "tiled and streamed to fit the budget", True)
    if not given_budget and est.bytes <= 2 * budget:  # the coarse estimate's margin, as before tiles
        return AtlasPlan(est, budget, (1, 1), est.bytes, jobs, "within twice the default budget")
    smallest = _tiles_bytes(est, n_a, n_b, (max_a, max_b), jobs, True)
    whose = "the --memory budget" if given_budget else "half of this machine's memory"
    raise AtlasTooLargeError(
        f"the special-set map of {n_f} + {n_g} contours ({est.pairs} pairs, about {est.crossings:.2g} "
        f"crossings) needs about {_size(est.bytes)} of memory in one piece and {_size(smallest)} even in "
        f"{max_a} x {max_b} tiles, over the budget {_size(budget)} ({whose})",
        file=file,
        field="map",
        fix=map_remedies(
            n_f,
            n_g,
            resolution,
            budget=budget,
            given_budget=given_budget,
            jobs=jobs,
            pairs=pairs,
            simplified=simplified,
            max_contours=max_contours,
            band=band,
        ),
    )


def _least_bytes(n: int, resolution: int | tuple[int, int], jobs: int) -> tuple[AtlasEstimate, float]:
    """The estimate of ``n`` contours in all and the smallest expected peak of any plan (one piece or tiles)."""
    est = estimate_atlas(n, 0, resolution)
    n_a, n_b = (resolution, resolution) if isinstance(resolution, int) else resolution
    tiles = (max(1, (n_a - 1) // MIN_TILE_CELLS), max(1, (n_b - 1) // MIN_TILE_CELLS))
    return est, min(est.bytes, _tiles_bytes(est, n_a, n_b, tiles, jobs, True))


def _fits(n: int, resolution: int | tuple[int, int], budget: float, given_budget: bool, jobs: int) -> bool:
    """Whether :func:`plan_atlas` would accept ``n`` contours in all at ``resolution`` (its rules)."""
    est, least = _least_bytes(n, resolution, jobs)
    return least <= budget or (not given_budget and est.bytes <= 2 * budget)


def map_remedies(
    n_f: int,
    n_g: int,
    resolution: int | tuple[int, int],
    *,
    budget: float,
    given_budget: bool = False,
    jobs: int = 1,
    pairs: str = "all",
    simplified: tuple[dict | None, dict | None] = (None, None),
    max_contours: int | None = None,
    band: tuple[float, float] | None = None,
) -> str:
    """The remedies of a refused map, from what is already set: only those that change the outcome.

    ``simplified`` holds the simplification record of f and g (``setting`` "auto" or a delta,
    ``contours_after``, ``budget``, ``met``; None for a side not simplified). Without
    simplification the first remedy is ``simplify = "auto"``; with ``"auto"`` that met its
    budget it is a lower ``[map] max_contours`` with the per-grid count this estimate fits
    (the estimate depends on the total count only); with ``"auto"`` that stopped at its cap,
    lowering the budget changes nothing (the same pair comes out), so a coarser mesh is named.
    A coarser ``--resolution`` and a larger ``--memory`` are named only when some value fits:
    the largest resolution from 11 up, the smallest plan's peak when it is within the machine's
    memory (twice :func:`memory_budget`). ``--pairs roles`` only when not already set. A map of a
    band of tied costs (``[map] costs``, :mod:`specmap.special.banded`) is always offered; with
    ``band`` (e.g. around a distance already computed) that band is named. The distance methods
    that need no whole map close the list.

    Examples
    --------
    >>> auto = {"setting": "auto", "contours_after": 54, "budget": 60, "met": True}
    >>> fix = map_remedies(97, 54, 61, budget=12e9, pairs="roles", simplified=(auto, auto))
    >>> "max_contours" in fix and "--pairs roles" not in fix and 'set simplify = "auto"' not in fix
    True
    >>> "[map] costs = [lo, hi] (--costs lo,hi)" in fix
    True
    >>> "costs = [0.92, 1.1] (--costs 0.92,1.1" in map_remedies(97, 54, 61, budget=12e9, band=(0.92, 1.1))
    True
    """
    n = int(n_f) + int(n_g)
    counts = (int(n_f), int(n_g))
    out = []
    fit_n = next((k for k in range(n - 1, 1, -1) if _fits(k, resolution, budget, given_budget, jobs)), 0)
    if simplified[0] is None and simplified[1] is None:
        out.append('set simplify = "auto" (or a delta) on the mesh shapes')
    lowered = []  # sides whose count follows max_contours: "auto" that met its budget
    for label, rec, count in zip("fg", simplified, counts, strict=True):
        if rec is None:
            continue
        if rec.get("setting") != "auto":
            out.append(f"a larger simplify delta on {label}")
        elif rec.get("met") is False:
            out.append(
                f'{label}: simplify = "auto" stopped at {count} contours within its cap (budget '
                f"{rec.get('budget')} not met; a lower max_contours gives the same pair): a coarser or "
                f"smoother mesh of {label}"
            )
        else:
            lowered.append(label)
    if lowered:
        fixed = sum(c for lab, c in zip("fg", counts, strict=True) if lab not in lowered)
        room = (fit_n - fixed) // len(lowered)
        now = f" (now {max_contours})" if max_contours is not None else ""
        if room >= 2:
            where = "per grid" if len(lowered) == 2 else f"on {lowered[0]}"
            out.append(f"a lower [map] max_contours{now}: about {room} contours {where} fit this budget")
    if pairs != "roles":
        out.append("--pairs roles")
    n_a, n_b = (resolution, resolution) if isinstance(resolution, int) else resolution
    side = max(int(n_a), int(n_b))
    coarser = next((r for r in range(side - 1, 10, -1) if _fits(n, r, budget, given_budget, jobs)), None)
    if coarser is not None:
        out.append(f"--resolution {coarser}")
    _, least = _least_bytes(n, resolution, jobs)
    if least > budget and least <= 2 * memory_budget():
        out.append(f"--memory {_size(least * 1.05)} (tiles then fit)")
    if band is not None:
        lo, hi = (f"{x:.3g}" for x in band)
        out.append(
            f"map a band of tied costs around the distance already in this folder: [map] costs = [{lo}, "
            f"{hi}] (--costs {lo},{hi})"
        )
    else:
        out.append("map a band of tied costs: [map] costs = [lo, hi] (--costs lo,hi)")
    out.append(
        "or specmap distance: --method dense needs no map, --method reduced maps only the ties that can be D"
    )
    return ", ".join(out[:-1]) + (", " if len(out) > 1 else "") + out[-1]
