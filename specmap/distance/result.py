"""Typed results of the distance stages and their JSON shaping.

Stages hand each other these dataclasses: :class:`DenseSweep` (dense sweep),
:class:`SlopeOneSearch` (branch and bound on a = 1/2), :class:`Candidates`
(special-set candidates), :class:`ReducedSearch` (the reduced search) and the
final :class:`DistanceResult`, whose :meth:`DistanceResult.to_json` is what
``distance.json`` holds.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from specmap.strip import Window

if TYPE_CHECKING:
    from specmap.distance.reduced import ReducedSettings

Point = tuple[float, float]


def point_json(at: Point) -> list[float]:
    """(a, b) as a JSON list of two floats."""
    return [float(at[0]), float(at[1])]


@dataclass
class Best:
    """Running maximum of h: value, line, where it was found (mutable while a search runs)."""

    value: float = -math.inf
    at: Point = (math.nan, math.nan)
    where: str = ""
    component: str | None = None
    tag: tuple[int, int] | None = None  # (piece index, candidate index) of the best special sample

    def offer(self, value: float, at: Point, where: str) -> bool:
        """Keep (value, at) if it beats the current value; True when it did."""
        if value > self.value:
            self.value, self.at, self.where = float(value), (float(at[0]), float(at[1])), where
            return True
        return False


@dataclass(frozen=True)
class DenseSweep:
    """h_k on a node grid of the window, maxima refined (:func:`specmap.distance.dense.dense_sweep`).

    Attributes
    ----------
    grid : ndarray (n_deg, n_b, n_a)
    a, b : ndarray
        Node axes.
    best, node_best : list of (value, (a, b))
        Per degree index: after refinement, and the best node.
    error_bound : float
        Sampling error of the node grid (:func:`specmap.distance.bounds.cell_error_bound`),
        the largest over degrees.
    lines : int
    seconds : float
    resolution : int
        Nodes per side as requested.
    error_bounds : list of float
        The same per degree index: D_k <= node max of h_k + error_bounds[j], rigorously.
    """

    grid: np.ndarray
    a: np.ndarray
    b: np.ndarray
    best: list[tuple[float, Point]]
    node_best: list[tuple[float, Point]]
    error_bound: float
    lines: int
    seconds: float
    resolution: int
    error_bounds: list[float] = field(default_factory=list)

    def upper(self, j: int) -> float:
        """Rigorous upper bound of D_k over the window for degree index j (``inf`` when unknown)."""
        if j >= len(self.error_bounds):
            return math.inf
        return float(self.node_best[j][0] + self.error_bounds[j])


@dataclass(frozen=True)
class SlopeOneSearch:
    """Branch and bound on a = 1/2 (:func:`specmap.distance.slope_one.slope_one_search`).

    ``best``, ``at`` (b), ``bound`` and ``certified_groups`` hold one value per group of
    degrees; ``bound`` is an upper bound of max_b of the group's h over the window;
    ``certified`` is True when every group is.
    """

    best: list[float]
    bound: list[float]
    certified: bool
    lines: int
    rounds: int
    at: list[float] = field(default_factory=list)
    certified_groups: list[bool] = field(default_factory=list)
    max_lines: int = 0

    def to_json(self) -> dict[str, Any]:
        return {
            "best": self.best,
            "bound": self.bound,
            "certified": self.certified,
            "lines": self.lines,
            "rounds": self.rounds,
            "at": self.at,
            "certified_by_group": self.certified_groups,
            "max_lines": self.max_lines,
        }


@dataclass(frozen=True)
class Candidates:
    """The finite candidate set of the reduced search (:func:`specmap.distance.candidates.special_candidates`).

    Attributes
    ----------
    a, b, lo, hi : ndarray
        Lines and the cost bracket of their tie there (value units).
    piece : ndarray of int
        Index into ``atlas.pieces``.
    origin : ndarray of int
        Index into :data:`specmap.distance.candidates.ORIGINS`.
    paths : sequence of ndarray
        Normalised path coordinates, for the polish (:class:`specmap.distance.paths.FlatPaths`).
    paths_of : mapping
        Piece index -> indices into ``paths``.
    pruned : dict
        Ties dropped (``roles``, ``unknown_contour``, ``not_met``, ``outside_window``) and
        ``crossing_pairs_below_floor``.
    crossings : int
    below_floor : int
        Candidates dropped under the floor.
    live : list of int
        Pieces with candidates.
    seconds : float
    """

    a: np.ndarray
    b: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    piece: np.ndarray
    origin: np.ndarray
    paths: Sequence[np.ndarray]
    paths_of: Mapping[int, list[int]]
    pruned: dict[str, int]
    crossings: int
    below_floor: int
    live: list[int]
    seconds: float


@dataclass(frozen=True)
class ReducedSearch:
    """Result of :func:`specmap.distance.reduced.reduced_search`.

    Attributes
    ----------
    slope, special : list of Best
        Per degree index: the best line on a = 1/2 and on the special set.
    lines : int
    seconds, candidate_seconds : float
    pruned : dict
        Tie and candidate counters (see :func:`specmap.distance.reduced.reduced_search`).
    stop : dict or None
        The candidate that stopped the descending pass.
    slope_search : SlopeOneSearch or None
        None when the window leaves out a = 1/2.
    settings : ReducedSettings
    groups : list of list of int
        Degree indices bounded together by the special-set pass (one per degree with
        ``certify="each"``).
    focus : dict or None
        Pairs kept by a focused atlas (:meth:`specmap.special.focus.Focus.to_json`); None
        when the search read a whole map.
    left : dict or None
        Set when the special-set pass stopped at its line budget (``special_max_lines``) with
        candidates left: ``budget``, ``candidates`` (not examined), ``top`` (the largest tied cost
        among them, value units: the pass bounds D of its open ``groups`` by it, not by its best).
    """

    slope: list[Best]
    special: list[Best]
    lines: int
    seconds: float
    pruned: dict[str, Any]
    stop: dict[str, Any] | None
    candidate_seconds: float
    slope_search: SlopeOneSearch | None
    settings: ReducedSettings
    groups: list[list[int]] = field(default_factory=list)
    focus: dict[str, Any] | None = None
    left: dict[str, Any] | None = None

    @property
    def certify(self) -> str:
        return self.settings.certify


def landscape_json(dense: DenseSweep, degrees: Sequence[int]) -> dict[str, Any]:
    """``{"a", "b", "h" (n_b x n_a, max over degrees), "by_degree"}`` of a dense sweep."""
    H = dense.grid
    with np.errstate(invalid="ignore"):
        return {
            "a": dense.a.tolist(),
            "b": dense.b.tolist(),
            "h": H.max(axis=0).tolist(),
            "by_degree": {str(k): H[j].tolist() for j, k in enumerate(degrees)},
        }


def dense_json(dense: DenseSweep, degrees: Sequence[int]) -> dict[str, Any]:
    """The ``dense`` block of ``distance.json``."""
    jbest = int(np.argmax([v for v, _ in dense.best]))
    return {
        "value": dense.best[jbest][0],
        "at": point_json(dense.best[jbest][1]),
        "degree": degrees[jbest],
        "lines": dense.lines,
        "seconds": dense.seconds,
        "error_bound": dense.error_bound,
        "resolution": int(dense.resolution),
        "error_bounds": {
            str(k): dense.error_bounds[j] for j, k in enumerate(degrees) if j < len(dense.error_bounds)
        },
        "node_value": max(v for v, _ in dense.node_best),
        "by_degree": {
            str(k): {"value": dense.best[j][0], "at": point_json(dense.best[j][1])}
            for j, k in enumerate(degrees)
        },
    }


def reduced_json(
    red: ReducedSearch, degrees: Sequence[int], top: dict[str, Any], kmax: int
) -> dict[str, Any]:
    """The ``reduced`` block of ``distance.json``; ``top`` is the by-degree entry of degree ``kmax``."""
    s = red.settings
    return {
        "value": top["value"],
        "at": point_json(top["at"]),
        "lines": red.lines,
        "seconds": red.seconds,
        "pruned": red.pruned,
        "stop": red.stop,
        "candidate_seconds": red.candidate_seconds,
        "slope_one": {
            str(k): {"value": red.slope[j].value, "at": point_json(red.slope[j].at)}
            for j, k in enumerate(degrees)
        },
        "special": {
            str(k): {
                "value": red.special[j].value,
                "at": point_json(red.special[j].at),
                "component": red.special[j].component,
            }
            for j, k in enumerate(degrees)
        },
        "slope_search": None if red.slope_search is None else red.slope_search.to_json(),
        "settings": {
            "slope_samples": s.slope_samples,
            "spacing": s.spacing,
            "roles": s.roles,
            "certify": s.certify,
        },
        "special_groups": [[degrees[j] for j in g] for g in red.groups],
        "focus": red.focus,
        "left": red.left,
        "degree": kmax,
    }


@dataclass(frozen=True)
class DistanceResult:
    """The matching distance of a pair, where it is reached, and how it was checked.

    Attributes
    ----------
    value : float
        max over degrees of D_k (the reduced value when available, else the dense one).
    at : (a, b)
    reached_on : str
        ``"slope-one"``, ``"special"`` (see ``component``), ``"both"`` or ``"dense"``.
    component : str or None
        Atlas component id when reached on the special set.
    by_degree : dict
        ``{k: {"value", "at", "reached_on", "component", "certified"}}``.
    dense, reduced : dict or None
        The JSON blocks of :func:`dense_json` and :func:`reduced_json`.
    audit : dict
    tolerance : float
    infinite : list
        ``{"degree", "at"}`` of lines whose diagrams have different numbers of points at infinity.
    landscape : dict or None
        ``{"a", "b", "h" (n_b x n_a, max over degrees), "by_degree"}`` from the dense sweep.
    window : Window
    """

    value: float
    at: Point
    reached_on: str
    component: str | None
    by_degree: dict[int, dict[str, Any]]
    dense: dict[str, Any] | None
    reduced: dict[str, Any] | None
    audit: dict[str, Any]
    tolerance: float
    infinite: list[dict[str, Any]]
    landscape: dict[str, Any] | None
    window: Window
    meta: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        from specmap.io import to_plain

        return to_plain(
            {
                "value": self.value,
                "at": point_json(self.at),
                "reached_on": self.reached_on,
                "component": self.component,
                "by_degree": {str(k): {**v, "at": point_json(v["at"])} for k, v in self.by_degree.items()},
                "dense": self.dense,
                "reduced": self.reduced,
                "audit": self.audit,
                "tolerance": self.tolerance,
                "infinite": self.infinite,
                "landscape": self.landscape,
                "window": self.window.to_json(),
                "meta": self.meta,
            }
        )
