"""The settings of each stage, defined once: small frozen values with their defaults.

Every default a stage uses lives here and only here; the study loader
(:mod:`specmap.study`) builds these values from a study file, the pipeline
(:mod:`specmap.pipeline`) passes them explicitly, and the computations read them.
This module is a leaf: it imports nothing from specmap but the two leaves
:mod:`specmap.errors` and :mod:`specmap.io` (for plain JSON).

- :class:`GridSettings`: how :func:`specmap.grids.pareto_grid` computes a grid (route, resolution);
- :class:`MapSettings`: the special-set atlas (:func:`specmap.special.special_set`);
- :class:`DistanceSettings`: the matching distance and its searches
  (:func:`specmap.distance.matching_distance`);
- :class:`PerturbSettings`: everything that decides a perturbation run set.

Invalid values raise :class:`~specmap.errors.InputValueError` in core words (the
value, what it should be); the study loader and the pipeline add the file and field.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

from specmap.errors import InputValueError
from specmap.io import to_plain

ROUTES = ("auto", "smooth", "exact", "piecewise")
PAIRS = ("all", "roles")
MAP_METHODS = ("sweep", "naive")
READINGS = ("points", "contours")
DISTANCE_METHODS = ("both", "dense", "reduced")
CERTIFY = ("max", "each")
MODELS = ("function", "grid")


def _choice(subject: str, value: Any, options: tuple[str, ...]) -> None:
    if value not in options:
        raise InputValueError(
            f"{subject} {value!r} is not one of {', '.join(repr(o) for o in options)}",
            subject=subject,
            fix=f"use one of: {', '.join(repr(o) for o in options)}",
        )


@dataclass(frozen=True)
class GridSettings:
    """How the extended Pareto grid of one shape is computed.

    Attributes
    ----------
    route : {"auto", "smooth", "exact", "piecewise"}
        ``"auto"``: the closed form for a linear map on an ellipsoid, else Jacobi-set tracing on
        a surface, the PL route on a mesh.
    resolution : int or None
        Smooth route: the mesh resolution the tracing starts from; None for the route's own default.
    """

    route: str = "auto"
    resolution: int | None = None

    def __post_init__(self) -> None:
        _choice("route", self.route, ROUTES)


def check_costs(costs: Any) -> tuple[float, float]:
    """A band of tied costs ``(lo, hi)``: two finite numbers with lo < hi and hi > 0 (lo may be <= 0).

    Raises
    ------
    InputValueError
        Otherwise (subject ``"costs"``).

    Examples
    --------
    >>> check_costs([0.9, 1.3])
    (0.9, 1.3)
    >>> try:
    ...     check_costs((1.3, 0.9))
    ... except InputValueError as exc:
    ...     print(exc.problem)
    costs [1.3, 0.9] is not a band lo < hi with hi > 0
    """
    try:
        lo, hi = (float(x) for x in costs)
        ok = not any(isinstance(x, bool) for x in costs)
    except (TypeError, ValueError):
        lo = hi = math.nan
        ok = False
    if not (ok and math.isfinite(lo) and math.isfinite(hi) and lo < hi and hi > 0):
        shown = list(costs) if isinstance(costs, (list, tuple)) else costs
        raise InputValueError(
            f"costs {shown!r} is not a band lo < hi with hi > 0",
            subject="costs",
            fix="give two finite numbers lo < hi in value units, hi > 0, like costs = [0.9, 1.3]",
        )
    return (lo, hi)


@dataclass(frozen=True)
class MapSettings:
    """Settings of the special-set atlas.

    Attributes
    ----------
    pairs : {"all", "roles"}
        Which ties to map: every tie, or only those the f/g roles allow (math.md section 5).
    resolution : int
        Lattice nodes per side of the window.
    method : {"sweep", "naive"}
        Output-sensitive detection, or the naive reference.
    tol : float or None
        Tie tolerance (value units); None for the scale-aware default of the atlas.
    max_contours : int
        Contour budget per grid when a mesh's values are simplified with ``"auto"``.
    reading : {"points", "contours"}
        Which ties count: pairs of meeting points ([EFQT23], default) or pairs of contours
        (:mod:`specmap.special.reading`).
    memory : float or None
        Memory budget of the atlas in bytes; None for half of the machine's memory
        (:func:`specmap.special.preflight.plan_atlas`). Decides the plan, not the result.
    tiles : (int, int) or None
        Tiles along a and b (:mod:`specmap.special.tiles`); None to let the budget decide.
        Tiles change the plan, not the atlas (merged exactly; see the module for its limits).
    costs : (float, float) or None
        A band [lo, hi] of tied costs (value units; math.md section 5: the cost both tied pairs
        carry, a cross pair's |c|, a same-grid pair's |c| / 2): the map then holds only the ties
        whose tied cost lies in the band, curves give or take one lattice cell at the band's ends,
        patches of the kept pairs whole (:mod:`specmap.special.banded`). None (default): the whole
        special set. A banded map is a partial map: the reduced search never reads it as its atlas.
    """

    pairs: str = "all"
    resolution: int = 121
    method: str = "sweep"
    tol: float | None = None
    max_contours: int = 60
    reading: str = "points"
    memory: float | None = None
    tiles: tuple[int, int] | None = None
    costs: tuple[float, float] | None = None

    def __post_init__(self) -> None:
        _choice("pairs", self.pairs, PAIRS)
        _choice("method", self.method, MAP_METHODS)
        _choice("reading", self.reading, READINGS)
        if self.memory is not None and not (math.isfinite(self.memory) and self.memory > 0):
            raise InputValueError(
                f"memory {self.memory!r} is not a positive size",
                subject="memory",
                fix='give a size like "6GB"',
            )
        if self.tiles is not None:
            t = tuple(int(x) for x in self.tiles)
            if len(t) != 2 or min(t) < 1:
                raise InputValueError(
                    f"tiles {self.tiles!r} is not two counts >= 1",
                    subject="tiles",
                    fix='give tiles = [na, nb] like [2, 2], or "auto"',
                )
            object.__setattr__(self, "tiles", (t[0], t[1]))
        if self.costs is not None:
            object.__setattr__(self, "costs", check_costs(self.costs))


@dataclass(frozen=True)
class DistanceSettings:
    """Settings of the matching distance: which computations, and the limits of its searches.

    Attributes
    ----------
    method : {"both", "dense", "reduced"}
        The reduced search, the dense sweep (the audit) or both.
    degrees : tuple of int
        Homology degrees.
    dense_resolution : int
        Nodes per side of the dense sweep.
    tolerance : float or None
        Value units; None for 1e-3 times the largest value range of f and g.
    slope_samples : int
        Initial equally spaced lines of the slope-one search on a = 1/2.
    slope_max_lines : int
        Lines after which the slope-one search stops uncertified.
    spacing : float
        Candidate sampling step along special curves, as a fraction of the window.
    roles : bool
        Use the f/g roles of contours to skip ties of no two costs (math.md section 5).
    certify : {"max", "each"}
        Certify the max over degrees, or each degree.
    polish : bool
        Refine the best special candidate along its curve.
    batch : int or None
        Lines per evaluation round of the slope-one search and candidates per round of the
        special-set search. The default is a fixed 4, not derived from the number of jobs, so
        ``--jobs 1`` and ``--jobs 2`` evaluate the same lines and write the same search metadata
        (with one job, 3-6% more lines than a batch of 1 on the pebbles study and an ellipsoid pair);
        None: 1 for one job, else 2 per job.
    local_bound : bool
        Use the stability bound between evaluated lines (each map on its own mesh: any meshes).
    bound_grid : int
        Lines per side of the coarse grid of lines evaluated before the reduced search maps its
        ties: with the lines already evaluated they bound h at every node of the map's lattice
        (:mod:`specmap.distance.node_bounds`), and ties are looked for only where their cost can be
        a value of h; 0 turns the node bounds off.
    polish_iters : int
        Golden-section steps of the polish.
    special_max_lines : int
        Lines the special-set pass of the reduced search may evaluate. When it stops with
        candidates left, the reduced bound of D becomes the largest tied cost not refuted (an
        interval, not a value; the degree is then not certified by the reduced search).
    position_lines : int
        Lines of the position audit (0 to skip).
    strip_budget : float
        Line budget of the whole-strip certified branch and bound (:mod:`specmap.distance.branch`), per
        node of the dense grid (``strip_budget * dense_resolution**2`` lines, about 3x the dense sweep's
        time at 2.5); it runs only for degrees the other stages leave uncertified; 0 turns it off.
    mesh_check : tuple of int
        Factors m > 1 of the mesh-to-surface term (issue 13 item 1): after the study's own distance,
        the pipeline (:meth:`specmap.pipeline.StudyRun.mesh_term`) recomputes D_k with both surfaces
        meshed at m times their resolution and records how D_k moves; empty (the default) is off.
        :func:`~specmap.distance.matching_distance` itself does not read it.
    """

    method: str = "both"
    degrees: tuple[int, ...] = (0, 1, 2)
    dense_resolution: int = 41
    tolerance: float | None = None
    slope_samples: int = 17
    slope_max_lines: int = 200
    spacing: float = 1 / 200
    roles: bool = True
    certify: str = "max"
    polish: bool = True
    batch: int | None = 4
    local_bound: bool = True
    bound_grid: int = 9
    polish_iters: int = 6
    special_max_lines: int = 3000
    position_lines: int = 20
    strip_budget: float = 2.5
    mesh_check: tuple[int, ...] = ()

    def __post_init__(self) -> None:
        _choice("method", self.method, DISTANCE_METHODS)
        _choice("certify", self.certify, CERTIFY)
        object.__setattr__(self, "degrees", tuple(int(d) for d in self.degrees))
        factors = tuple(sorted({int(m) for m in self.mesh_check}))
        if any(m < 2 for m in factors):
            raise InputValueError(
                f"mesh_check {list(self.mesh_check)!r} holds a factor below 2",
                subject="mesh_check",
                fix="give whole factors > 1 like [2, 4], or [] for off",
            )
        object.__setattr__(self, "mesh_check", factors)


_MAP = MapSettings()
_DISTANCE = DistanceSettings()


@dataclass(frozen=True)
class PerturbSettings:
    """Everything that decides the outcome of a run set (besides the base pair).

    The fields are flat (their JSON is the run set's fingerprint); :attr:`map_settings` and
    :attr:`distance_settings` give the settings each run passes on.

    Attributes
    ----------
    model : {"function", "grid"}
    size : float
        Sup norm of the function change, or largest contour move.
    runs : int
        Number of runs wanted (not part of the fingerprint: a run set can be extended).
    seed : int
    pairs, resolution, method, tol, reading, costs
        The :class:`MapSettings` of every run (``costs``: every run maps the same band of tied
        costs, and a run's distance uses the focused source, never the banded map).
    distance : bool
        Recompute the matching distance in every run ("function" model only).
    distance_method : {"reduced", "dense"}
    degrees : tuple of int
    dense_resolution : int
        The :class:`DistanceSettings` of every run (method, degrees, dense resolution).
    """

    model: str = "function"
    size: float = 1e-3
    runs: int = 20
    seed: int = 1
    pairs: str = _MAP.pairs
    resolution: int = _MAP.resolution
    method: str = _MAP.method
    tol: float | None = _MAP.tol
    reading: str = _MAP.reading
    costs: tuple[float, float] | None = _MAP.costs
    distance: bool = False
    distance_method: str = "reduced"
    degrees: tuple[int, ...] = _DISTANCE.degrees
    dense_resolution: int = _DISTANCE.dense_resolution

    def __post_init__(self) -> None:
        _choice("model", self.model, MODELS)
        if not (self.size >= 0 and math.isfinite(self.size)):
            raise InputValueError(
                f"size {self.size!r} is not a finite number >= 0", subject="size", fix="give a size like 1e-3"
            )
        if self.runs < 0:
            raise InputValueError(
                f"runs {self.runs!r} is negative", subject="runs", fix="give a number of runs >= 0, like 20"
            )
        object.__setattr__(self, "degrees", tuple(int(d) for d in self.degrees))
        if self.costs is not None:
            object.__setattr__(self, "costs", check_costs(self.costs))

    @classmethod
    def of(
        cls,
        *,
        model: str,
        size: float,
        runs: int,
        seed: int,
        distance: bool,
        map: MapSettings,
        dist: DistanceSettings,
    ) -> PerturbSettings:
        """A run set's settings from its own values and the study's map and distance settings.

        A run recomputes the distance with the dense sweep when the study asks for ``"dense"``,
        else with the reduced search.
        """
        return cls(
            model=model,
            size=float(size),
            runs=int(runs),
            seed=int(seed),
            pairs=map.pairs,
            resolution=int(map.resolution),
            method=map.method,
            tol=map.tol,
            reading=map.reading,
            costs=map.costs,
            distance=bool(distance),
            distance_method="dense" if dist.method == "dense" else "reduced",
            degrees=tuple(dist.degrees),
            dense_resolution=int(dist.dense_resolution),
        )

    @property
    def map_settings(self) -> MapSettings:
        """The atlas settings of every run."""
        return MapSettings(
            pairs=self.pairs,
            resolution=self.resolution,
            method=self.method,
            tol=self.tol,
            reading=self.reading,
            costs=self.costs,
        )

    @property
    def distance_settings(self) -> DistanceSettings:
        """The distance settings of every run (and of the base distance)."""
        return DistanceSettings(
            method=self.distance_method,
            degrees=self.degrees,
            dense_resolution=self.dense_resolution,
            strip_budget=0.0,  # runs compare values; the whole-strip certificate would multiply their time
        )

    def to_json(self) -> dict[str, Any]:
        """Plain JSON of the fields (tuples as lists): the run set's ``settings``.

        ``costs`` enters only when set, so run sets made before the setting keep their fingerprint.
        """
        js = to_plain(asdict(self))
        if js.get("costs") is None:
            js.pop("costs", None)
        return js
