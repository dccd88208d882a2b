"""The pairs of contours whose cost can lie in a band of values: the special set the distance needs.

The reduced search (:func:`specmap.distance.reduced.reduced_search`) looks for D_k
at ties whose tied cost t lies between a value already reached (the floor, from the
slope-one line) and an upper bound U of D; a tie with t <= floor or t > U cannot be
where the maximum is read. At a tie of two costs (math.md section 5, role-aware
refinement) both pairs carry the same cost, t = cost(P) = cost(Q), with
cost(P) = |c_P| for a cross pair (a matching cost) and |c_P| / 2 for a same-grid pair
(a diagonal cost) [EFQT23]. So a tie can matter only when *both* its pairs have a
cost in the band somewhere in the window, and a pair whose cost never enters the
band takes no part: the atlas of the distance is the atlas of the pairs that do
(:func:`focus_pairs`), and its size follows the number of relevant pairs, not the
N^4 of all quadruples.

The cost range of a pair is read on the atlas's own lattice: min and max of the
sampled cost over the nodes where both contours are met, widened by the largest
step between two neighbouring met nodes (a margin for the cost between nodes, the
same rule the candidate list uses for a tie's cost along its curve). Ties the atlas
itself would see need all four contours met at a node, so pairs met at no node are
dropped as the full atlas drops their ties.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching
   distance for 2D filtering functions", J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Any

import numpy as np

from specmap.grids.model import Grid
from specmap.settings import MapSettings
from specmap.special.atlas import Atlas
from specmap.special.evaluate import sample_contours
from specmap.special.lattice import Lattice
from specmap.special.pairs import PairTable, grid_of
from specmap.strip import Window, push_scale


@dataclass(frozen=True)
class PairCosts:
    """Range of each pair's cost over a lattice, in value units.

    Attributes
    ----------
    lo, hi : ndarray (n_pairs,)
        Lowest and highest cost over the met nodes, widened by ``margin``; NaN for a
        pair met at no node.
    margin : ndarray (n_pairs,)
        Largest cost step between two neighbouring met nodes.
    """

    lo: np.ndarray
    hi: np.ndarray
    margin: np.ndarray


@dataclass(frozen=True)
class Focus:
    """Which pairs of a :class:`~specmap.special.pairs.PairTable` can carry a tie with cost in a band.

    Attributes
    ----------
    band : (float, float)
        (floor, upper) in value units: ties with cost <= floor or > upper are not needed.
    kept : ndarray of int
        Indices of the kept pairs in the full table.
    pairs_total, unmet, below, above : int
        Pairs of the full table; dropped because met at no node, because their cost stays
        <= floor, because it stays > upper.
    roles : bool
        Costs read with the f/g roles (cross |c|, same-grid |c| / 2); else both [|c| / 2, |c|].
    seconds : float
    """

    band: tuple[float, float]
    kept: np.ndarray
    pairs_total: int
    unmet: int
    below: int
    above: int
    roles: bool
    seconds: float

    def to_json(self) -> dict[str, Any]:
        lo, hi = self.band
        return {
            "band": [lo if math.isfinite(lo) else None, hi if math.isfinite(hi) else None],
            "pairs_total": self.pairs_total,
            "pairs_kept": int(self.kept.size),
            "pairs_unmet": self.unmet,
            "pairs_below_floor": self.below,
            "pairs_above_bound": self.above,
            "roles": self.roles,
            "seconds": round(self.seconds, 4),
        }


def cost_factors(table: PairTable, roles: bool) -> tuple[np.ndarray, np.ndarray]:
    """(low, high) factor from |c_P| to the pair's cost: cross 1, same-grid 1/2; without roles 1/2 and 1."""
    known = all(grid_of(c.id) in ("f", "g") for c in table.contours)
    if roles and known:
        f = np.where(table.cross, 1.0, 0.5)
        return f, f
    return np.full(table.n_pairs, 0.5), np.ones(table.n_pairs)


def pair_costs(table: PairTable, lattice: Lattice) -> PairCosts:
    """Range of |c_P| (push units times min(a, 1 - a), value units) of every pair over the lattice nodes.

    One compiled pass per pair (:func:`specmap.special.compiled.ranges.pair_ranges`); memory is
    the contours' samples (C x n_b x n_a) and three numbers per pair.
    """
    _, lo, hi, margin = _ranges(table, lattice)
    return PairCosts(lo - margin, hi + margin, margin)


def _ranges(table: PairTable, lattice: Lattice) -> tuple[tuple, np.ndarray, np.ndarray, np.ndarray]:
    """The node samples (s, met, m) and the raw (min, max, largest step) of |c_P| of every pair."""
    from specmap.special.compiled.ranges import pair_ranges

    A, B = lattice.mesh()
    s, met = sample_contours(table.contours, A, B)
    m = np.ascontiguousarray(push_scale(lattice.av), dtype=float)
    nodes = (np.ascontiguousarray(s, dtype=float), np.ascontiguousarray(met), m)
    lo, hi, margin = pair_ranges(*nodes, table.first, table.second)
    return nodes, lo, hi, margin


def focus_pairs(
    table: PairTable,
    window: Window,
    resolution: int | tuple[int, int],
    band: tuple[float, float],
    *,
    roles: bool = True,
    node_upper: tuple[np.ndarray, float, float] | None = None,
) -> Focus:
    """The pairs of ``table`` whose cost can lie in ``band`` = (floor, upper] somewhere in ``window``.

    A pair is kept when it is met at some lattice node, its highest cost (plus margin,
    :func:`pair_costs`) is > floor and its lowest cost (minus margin) is <= upper; costs
    are read with the role factors (cross pair |c|, same-grid pair |c| / 2) when ``roles``
    and every contour id names its grid, else over [|c| / 2, |c|]. With ``node_upper``
    (upper bounds of h at the nodes and what h can add along an a- and a b-edge,
    :class:`specmap.distance.node_bounds.NodeBounds`), the pair must moreover have a met node
    where its cost can be at most that node's bound plus the larger edge term: a tied cost
    above h there is no value of h.

    Examples
    --------
    Vertical half-lines at x = 0, 1 (f) and 0.1, 1.5 (g): for a <= 1/2 the push coordinate
    of x = x0 is x0 - b, so a pair's |c| is its x-distance (closed form). Costs: cross pairs
    0.1, 1.5, 0.9, 0.5; same-grid pairs 1 / 2 and 1.4 / 2. The band (0.2, 1] drops the cross
    pairs of cost 0.1 and 1.5.

    >>> from specmap.grids.model import Contour, Grid
    >>> from specmap.special.pairs import pair_table
    >>> f = Grid((Contour("f:v0", "vertical", [0.0, -50]), Contour("f:v1", "vertical", [1.0, -50])))
    >>> g = Grid((Contour("g:v0", "vertical", [0.1, -50]), Contour("g:v1", "vertical", [1.5, -50])))
    >>> t = pair_table(f, g, "roles")
    >>> fo = focus_pairs(t, Window((0.1, 0.5), (-1, 1)), 11, (0.2, 1.0))
    >>> sorted(t.pair_ids(int(p)) for p in fo.kept)
    [('f:v0', 'f:v1'), ('f:v1', 'g:v0'), ('f:v1', 'g:v1'), ('g:v0', 'g:v1')]
    >>> fo.below, fo.above
    (1, 1)
    """
    from specmap.special.compiled.ranges import pairs_in_band

    t0 = time.perf_counter()
    n_a, n_b = (resolution, resolution) if isinstance(resolution, int) else tuple(resolution)
    lattice = Lattice.of(window, int(n_a), int(n_b))
    (s, met, m), lo, hi, margin = _ranges(table, lattice)
    low_f, high_f = cost_factors(table, roles)
    floor, upper = float(band[0]), float(band[1])
    unmet = np.isnan(hi)
    with np.errstate(invalid="ignore"):
        below = ~unmet & ~((hi + margin) * high_f > floor)
        above = ~unmet & ~below & ((lo - margin) * low_f > upper)
    ok = ~(unmet | below | above)
    if node_upper is not None and ok.any():
        nodes, edge_a, edge_b = node_upper
        cap = np.ascontiguousarray(np.minimum(upper, np.asarray(nodes, float) + max(edge_a, edge_b)))
        idx = np.nonzero(ok)[0]
        inside = pairs_in_band(
            s, met, m, table.first[idx], table.second[idx], low_f[idx], high_f[idx], margin[idx], floor, cap
        )
        above[idx[~inside]] = True
        ok[idx[~inside]] = False
    kept = np.nonzero(ok)[0].astype(np.int64)
    return Focus(
        (floor, upper),
        kept,
        table.n_pairs,
        int(unmet.sum()),
        int(below.sum()),
        int(above.sum()),
        bool(roles),
        time.perf_counter() - t0,
    )


PROBE_SIDE = 21
"""Nodes per side of the probe lattice that counts a focused atlas's crossings before it is built."""
BYTES_PER_CROSSING = 400.0
"""Peak bytes per crossing of a focused atlas (measured: 1.2 GB for 2.86 M crossings, 278 k tie
pieces, a 521 + 88-contour scan pair at 61 x 61; its curves are short, so more pieces per crossing
than the whole map's 250 of :mod:`.preflight`)."""


def probe_crossings(
    table: PairTable,
    window: Window,
    resolution: int | tuple[int, int],
    band: tuple[float, float],
    *,
    roles: bool,
    tol: float,
    node_upper: tuple[np.ndarray, float, float] | None,
) -> tuple[float, int]:
    """Expected crossings of the banded detection at ``resolution``, from a count on a coarse lattice.

    The pairs of ``table`` are detected on a :data:`PROBE_SIDE` lattice (node bounds read at the
    nearest node of the full lattice, edge terms scaled to the probe's spacing) and the count
    scaled by (side / probe side)^0.75, the resolution law of :mod:`.preflight` (a focused atlas
    grows slower: 1.96 M crossings at 21 x 21, 2.86 M at 61 x 61 on a scan pair). Returns
    (estimate, probe count).
    """
    from specmap.special.detect import find_crossings, sample

    n_a, n_b = (resolution, resolution) if isinstance(resolution, int) else tuple(resolution)
    pa, pb = min(PROBE_SIDE, int(n_a)), min(PROBE_SIDE, int(n_b))
    lat = Lattice.of(window, pa, pb)
    probe_nodes = None
    if node_upper is not None:
        nodes, edge_a, edge_b = node_upper
        ia = np.rint(np.linspace(0, nodes.shape[1] - 1, pa)).astype(int)
        ib = np.rint(np.linspace(0, nodes.shape[0] - 1, pb)).astype(int)
        scale_a = (nodes.shape[1] - 1) / max(1, pa - 1)
        scale_b = (nodes.shape[0] - 1) / max(1, pb - 1)
        probe_nodes = (np.ascontiguousarray(nodes[np.ix_(ib, ia)]), edge_a * scale_a, edge_b * scale_b)
    _, _, stats = find_crossings(
        table, sample(table, lat), tol=tol, snap=1e-3 * tol, band=band, roles=roles, node_upper=probe_nodes
    )
    count = int(stats["crossings"])
    side = (float(n_a) * float(n_b)) ** 0.5 / (float(pa) * float(pb)) ** 0.5
    return count * side**0.75, count


@dataclass(frozen=True)
class FocusEstimate:
    """The kept pairs of a band and the expected size of their banded atlas (before it is built).

    Attributes
    ----------
    focus : Focus
    crossings : float
        Expected crossings at the atlas's resolution (:func:`probe_crossings`).
    probe : int
        Crossings counted on the probe lattice.
    bytes : float
        Expected peak bytes, ``BASE_BYTES + BYTES_PER_CROSSING * crossings``.
    """

    focus: Focus
    crossings: float
    probe: int
    bytes: float

    def to_json(self) -> dict[str, Any]:
        """:meth:`Focus.to_json` with the probe count and the estimates (``stats["focus"]``)."""
        return {
            **self.focus.to_json(),
            "probe_crossings": self.probe,
            "estimated_crossings": round(self.crossings),
            "estimated_bytes": round(self.bytes),
        }


def estimate_focused(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    band: tuple[float, float],
    *,
    roles: bool = True,
    node_upper: tuple[np.ndarray, float, float] | None = None,
    pairs: str = "all",
    resolution: int | tuple[int, int] = MapSettings.resolution,
    tol: float | None = None,
) -> FocusEstimate:
    """The pairs whose cost can lie in ``band`` (:func:`focus_pairs`) and their atlas's expected size."""
    from specmap.special.compute import default_tolerance
    from specmap.special.pairs import pair_table
    from specmap.special.preflight import BASE_BYTES

    table = pair_table(grid_f, grid_g, pairs)
    focus = focus_pairs(table, window, resolution, band, roles=roles, node_upper=node_upper)
    tol = default_tolerance(grid_f, grid_g) if tol is None else float(tol)
    crossings, probe = probe_crossings(
        table.subset(focus.kept), window, resolution, band, roles=roles, tol=tol, node_upper=node_upper
    )
    return FocusEstimate(focus, crossings, probe, BASE_BYTES + BYTES_PER_CROSSING * crossings)


def focused_special_set(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    band: tuple[float, float],
    *,
    roles: bool = True,
    budget: float | None = None,
    node_upper: tuple[np.ndarray, float, float] | None = None,
    **atlas_kw: Any,
) -> Atlas:
    """The special-set atlas of the pairs whose cost can lie in ``band`` (:func:`focus_pairs`).

    ``atlas_kw`` are :func:`~specmap.special.compute.special_set` keywords (``pairs``,
    ``resolution``, ``method``, ``tol``, ``reading``, ``progress``); the atlas's
    ``stats["focus"]`` holds :meth:`FocusEstimate.to_json`. ``node_upper``: upper bounds of h at the
    nodes of the atlas's lattice (``resolution``) and the two edge terms, which lower the top
    of the band where h is known to be small (:func:`focus_pairs`,
    :func:`specmap.special.detect.find_crossings`).

    Raises
    ------
    AtlasTooLargeError
        When even the kept pairs' atlas is estimated over twice the memory budget
        (:func:`specmap.special.preflight.memory_budget` by default), with the remedies.
    """
    from specmap.special.compute import special_set
    from specmap.special.preflight import AtlasTooLargeError, memory_budget

    est = estimate_focused(
        grid_f,
        grid_g,
        window,
        band,
        roles=roles,
        node_upper=node_upper,
        pairs=atlas_kw.get("pairs", "all"),
        resolution=atlas_kw.get("resolution", MapSettings.resolution),
        tol=atlas_kw.get("tol"),
    )
    focus, crossings, need = est.focus, est.crossings, est.bytes
    budget = memory_budget() if budget is None else float(budget)
    if need > 2 * budget:
        raise AtlasTooLargeError(
            f"the reduced search keeps {focus.kept.size} of {focus.pairs_total} contour pairs (cost band "
            f"{band[0]:.4g} .. {band[1]:.4g}), whose about {crossings:.3g} tie crossings need about "
            f"{need / 1e9:.3g} GB, over the budget {budget / 1e9:.3g} GB",
            field="distance",
            fix='simplify the meshes (simplify = "auto" or a delta), use a coarser map resolution, '
            "or use the dense method, which needs no special set",
        )
    atlas = special_set(
        grid_f,
        grid_g,
        window,
        keep=focus.kept,
        band=band,
        band_roles=roles,
        with_components=False,
        node_upper=node_upper,
        **atlas_kw,
    )
    atlas.stats["focus"] = est.to_json()
    return atlas
