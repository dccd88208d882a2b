"""The special-set map restricted to a band of tied costs: ``[map] costs = [lo, hi]``.

At a tie of two costs both pairs carry the same cost t (math.md section 5, role-aware
refinement): a cross pair's cost is |c| (a matching cost), a same-grid pair's |c| / 2 (a
diagonal cost) [EFQT23]. The banded map holds the ties whose tied cost lies in [lo, hi]: the
pairs whose cost can enter the band somewhere in the window
(:func:`specmap.special.focus.focus_pairs`), their ties traced only on the lattice edges where
both costs can lie in the band (:func:`specmap.special.compute.special_set` with ``keep`` and
``band``). So a curve is cut where its tied cost leaves the band, give or take one lattice cell
(the per-edge test widens each cost by its own change along the edge); patches of the kept pairs
are kept whole (a patch has no single cost to cut it by). Under ``pairs = "all"`` an equal tie of
a cross and a same-grid pair ties no costs (|c| against |c| / 2); it is kept where both can lie in
the band. The components are those of the banded pieces, classified and measured as usual.

Its size is estimated before it is built (:func:`specmap.special.focus.estimate_focused`: the
kept pairs' crossings counted on a coarse probe lattice), and a band that cannot fit the memory
budget is refused in one line with its remedies, never a MemoryError.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching
   distance for 2D filtering functions", J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from specmap.grids.model import Grid
from specmap.settings import MapSettings
from specmap.special.atlas import Atlas
from specmap.special.focus import FocusEstimate, estimate_focused
from specmap.strip import Window


def estimate_banded(grid_f: Grid, grid_g: Grid, window: Window, settings: MapSettings) -> FocusEstimate:
    """The kept pairs of ``settings.costs`` and the expected crossings and bytes of their banded map."""
    if settings.costs is None:
        raise ValueError("estimate_banded needs settings.costs")
    return estimate_focused(
        grid_f,
        grid_g,
        window,
        settings.costs,
        roles=True,
        pairs=settings.pairs,
        resolution=settings.resolution,
        tol=settings.tol,
    )


def banded_fits(estimate: FocusEstimate, budget: float, given_budget: bool) -> bool:
    """Whether the banded map fits: within the budget given, or twice the default (a coarse estimate)."""
    return estimate.bytes <= (budget if given_budget else 2.0 * budget)


def banded_remedies(
    estimate: FocusEstimate,
    settings: MapSettings,
    *,
    budget: float,
    given_budget: bool,
    simplified: tuple[dict | None, dict | None] = (None, None),
) -> str:
    """The remedies of a refused banded map: a narrower band, simplify, ``--pairs roles``, a coarser lattice.

    The coarser ``--resolution`` is the largest from 11 up whose crossings, scaled by the
    resolution law of :func:`specmap.special.focus.probe_crossings` ((side ratio)^0.75), fit.

    Examples
    --------
    >>> from specmap.special.focus import Focus
    >>> import numpy as np
    >>> fo = Focus((0.9, 1.3), np.arange(10), 100, 0, 50, 40, True, 0.0)
    >>> est = FocusEstimate(fo, 1e7, 1000, 150e6 + 400 * 1e7)  # 4.15 GB at 61 x 61
    >>> ms = MapSettings(resolution=61, costs=(0.9, 1.3))
    >>> print(banded_remedies(est, ms, budget=2e9, given_budget=True))  # (21 / 61)^0.75 x 4 GB = 1.8 GB
    a narrower band than costs = [0.9, 1.3] (it keeps 10 of 100 contour pairs), set simplify = "auto" (or a delta) on the mesh shapes, --pairs roles, --resolution 21, or --method dense for the distance, which needs no map
    """
    from specmap.special.focus import BYTES_PER_CROSSING
    from specmap.special.preflight import BASE_BYTES

    assert settings.costs is not None
    lo, hi = settings.costs
    focus = estimate.focus
    out = [
        f"a narrower band than costs = [{lo:.4g}, {hi:.4g}] (it keeps {focus.kept.size} of "
        f"{focus.pairs_total} contour pairs)"
    ]
    if simplified[0] is None and simplified[1] is None:
        out.append('set simplify = "auto" (or a delta) on the mesh shapes')
    if settings.pairs != "roles":
        out.append("--pairs roles")
    cap = budget if given_budget else 2.0 * budget
    side = int(settings.resolution)
    coarser = next(
        (
            r
            for r in range(side - 1, 10, -1)
            if BASE_BYTES + BYTES_PER_CROSSING * estimate.crossings * (r / side) ** 0.75 <= cap
        ),
        None,
    )
    if coarser is not None:
        out.append(f"--resolution {coarser}")
    out.append("or --method dense for the distance, which needs no map")
    return ", ".join(out)


def banded_special_set(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    settings: MapSettings,
    *,
    estimate: FocusEstimate | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> Atlas:
    """The special-set atlas of ``grid_f``, ``grid_g`` restricted to the tied costs ``settings.costs``.

    One piece (no tiles), with components. ``stats["focus"]`` holds the band, the pairs kept of
    the total and the size estimate (:meth:`FocusEstimate.to_json`); ``stats["costs"]`` the band.
    The caller checks the estimate against its budget first (:func:`banded_fits`).

    Examples
    --------
    Vertical half-lines at x = 0, 1 (f) and 0.1, 1.5 (g): for a <= 1/2 a pair's |c| is its
    x-distance (closed form), so every cost is constant and a band either holds a tie or not.
    Cross pairs cost 0.1, 1.5, 0.9, 0.5; same-grid pairs 0.5 and 0.7. The band [0.45, 0.6]
    keeps the two pairs of cost 0.5, (f:v0, f:v1) and (f:v1, g:v1), whose half tie (|c| = 1 =
    2 x 0.5) holds wherever they are met: a patch.

    >>> from specmap.grids.model import Contour, Grid
    >>> f = Grid((Contour("f:v0", "vertical", [0.0, -50]), Contour("f:v1", "vertical", [1.0, -50])))
    >>> g = Grid((Contour("g:v0", "vertical", [0.1, -50]), Contour("g:v1", "vertical", [1.5, -50])))
    >>> ms = MapSettings(pairs="roles", resolution=11, costs=(0.45, 0.6))
    >>> atlas = banded_special_set(f, g, Window((0.1, 0.45), (-1, 1)), ms)
    >>> atlas.stats["focus"]["pairs_kept"], atlas.counts()["patch"]
    (2, 1)
    """
    from specmap.special.compute import special_set

    if settings.costs is None:
        raise ValueError("banded_special_set needs settings.costs")
    est = estimate if estimate is not None else estimate_banded(grid_f, grid_g, window, settings)
    atlas = special_set(
        grid_f,
        grid_g,
        window,
        pairs=settings.pairs,
        resolution=settings.resolution,
        method=settings.method,
        tol=settings.tol,
        reading=settings.reading,
        keep=est.focus.kept,
        band=settings.costs,
        band_roles=True,
        with_components=True,
        progress=progress,
    )
    atlas.stats["focus"] = est.to_json()
    atlas.stats["costs"] = list(settings.costs)
    return atlas


def costs_entry(atlas: Atlas) -> dict[str, Any] | None:
    """The top-level ``costs`` entry of ``special.json``: the band and the pairs kept (None: whole map)."""
    band = atlas.stats.get("costs")
    if band is None:
        return None
    focus = atlas.stats.get("focus") or {}
    lo, hi = float(band[0]), float(band[1])
    return {
        "band": [lo, hi],
        "pairs_kept": focus.get("pairs_kept"),
        "pairs_total": focus.get("pairs_total"),
        "note": f"partial map: only the ties whose tied cost lies in [{lo:.4g}, {hi:.4g}] (curves give or "
        "take one lattice cell at the band's ends, patches of the kept pairs whole); the reduced "
        "search does not read it as its atlas",
    }
