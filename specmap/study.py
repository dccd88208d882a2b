"""Study files (TOML) -> a validated :class:`Study`.

A study names two filtered shapes f and g and the settings of each stage.
Every mistake raises :class:`~specmap.errors.StudyError` naming the file, the
field and the fix. Study files are data: expressions are compiled by
:mod:`specmap.expr` (an AST whitelist), never evaluated as code.

Format (all tables but ``[study]``, ``[f]``, ``[g]`` optional)::

    [study]
    name = "demo"            # results go to results/<name>/
    seed = 7

    [constants]              # names usable in expressions
    k = 0.3

    [f]                      # exactly one of: surface, mesh, grid
    surface = "ellipsoid"    # or "torus"
    radii = [2.0, 1.0, 1.0]  # torus: [R, r] with R > r > 0, axis z
    map = ["x", "y + k*z"]
    resolution = 3000        # mesh vertices for slices and the PL checks
    insist = false           # true: go on with a constant or dependent pair (caveat in every result)

    [g]
    mesh = "g.ply"           # .ply .off .obj, closed triangulated surface
    fields = ["f1", "f2"]    # or map = [...]

    [window]
    a = [0.02, 0.98]
    b = [-3.0, 3.0]

    [map]      pairs = "all" | "roles", resolution = <nodes per side>, method = "sweep" | "naive",
               max_contours = <budget per grid for a mesh's simplify = "auto">,
               reading = "points" | "contours", memory = "6GB" (atlas budget; default half of RAM),
               tiles = [na, nb] | "auto", costs = [lo, hi] (map only the ties whose tied cost lies
               in [lo, hi], value units; default: the whole special set)
    [distance] method = "both" | "dense" | "reduced", degrees = [0, 1, 2], dense_resolution = <nodes>,
               special_max_lines = <lines of the reduced search's special-set pass>,
               certify = "max" | "each", slope_max_lines = <lines of the slope-one search per degree>,
               strip_budget = <whole-strip search lines per dense node, 0 off>,
               mesh_check = [2, 4] (mesh-to-surface term: D_k again at 2x and 4x the surfaces'
               resolution; default [] = off)
    [perturb]  model = "function" | "grid", size = <sup norm>, runs = <count>, seed = <int>,
               sizes = [1e-3, 1e-2], distance = false

Every default is that of :mod:`specmap.settings` (``MapSettings``, ``DistanceSettings``,
``PerturbSettings``, ``GridSettings``); the ``[map]`` and ``[distance]`` tables *are*
``MapSettings`` and ``DistanceSettings`` values.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from specmap.errors import StudyError
from specmap.settings import (
    CERTIFY,
    DISTANCE_METHODS,
    MAP_METHODS,
    MODELS,
    PAIRS,
    READINGS,
    ROUTES,
    DistanceSettings,
    GridSettings,
    MapSettings,
    PerturbSettings,
)
from specmap.strip import Window

SURFACES = {"ellipsoid": 3, "torus": 2}
MESH_SUFFIXES = (".ply", ".off", ".obj")
TABLES = {"study", "constants", "f", "g", "window", "map", "distance", "perturb"}
# Integer settings that a command-line flag can also set: one range for the file and the flag.
RADII_RANGE = (1e-12, 1e12)
"""Accepted radii of a surface: the grid-file coordinate range (``specmap.grids.model.COORD_LIMIT``);
radii of 1e300 overflowed in the normality test, 1e-300 underflowed to a non-finite grid."""
LIMITS: dict[str, tuple[int, int]] = {"map.resolution": (5, 4001), "perturb.runs": (1, 100_000)}
SURFACE_RESOLUTION = (100, 2_000_000)
"""Accepted ``resolution`` (mesh vertices) of a surface; a ``mesh_check`` factor must keep it inside."""
MESH_CHECK_FACTORS = (2, 64)
"""Accepted factors of ``[distance] mesh_check`` (and ``--mesh-check``)."""


def mesh_check_factors(
    value: Any, shapes: tuple[ShapeSpec, ShapeSpec], *, file: str, field: str, form: str
) -> tuple[int, ...]:
    """The factors of ``[distance] mesh_check`` or ``--mesh-check``, sorted, duplicates dropped.

    ``value`` is a list of whole numbers in :data:`MESH_CHECK_FACTORS`; an empty list is off. The
    largest factor times the resolution of each surface must stay within
    :data:`SURFACE_RESOLUTION` (a mesh or grid file has no resolution: that is not checked here,
    see :func:`specmap.meshterm.not_remeshable`).

    Parameters
    ----------
    shapes : (ShapeSpec, ShapeSpec)
        f and g.
    file, field : str
        Where the value was given (the study file, and ``distance.mesh_check`` or the flag).
    form : str
        How to write a good value there, for the fix (``mesh_check = [2, 4]`` or ``--mesh-check 2,4``).

    Raises
    ------
    StudyError
        One line naming ``file``, ``field`` and the fix.

    Examples
    --------
    >>> s = ShapeSpec("f", "surface", resolution=1000)
    >>> mesh_check_factors([4, 2, 4], (s, s), file="s.toml", field="distance.mesh_check", form="[2, 4]")
    (2, 4)
    """
    lo, hi = MESH_CHECK_FACTORS
    if not isinstance(value, list) or not all(isinstance(x, int) and not isinstance(x, bool) for x in value):
        raise StudyError(
            f"{value!r} is not a list of whole factors",
            file=file,
            field=field,
            fix=f"give whole factors > 1 like {form} (an empty list is off)",
        )
    bad = [x for x in value if not lo <= x <= hi]
    if bad:
        raise StudyError(
            f"factor {bad[0]} is out of range",
            file=file,
            field=field,
            fix=f"give whole factors in [{lo}, {hi}] like {form}",
        )
    factors = tuple(sorted(set(value)))
    for spec in shapes:
        if factors and spec.source == "surface" and factors[-1] * spec.resolution > SURFACE_RESOLUTION[1]:
            raise StudyError(
                f"factor {factors[-1]} times {spec.label}.resolution {spec.resolution} is "
                f"{factors[-1] * spec.resolution} vertices, above the limit {SURFACE_RESOLUTION[1]}",
                file=file,
                field=field,
                fix=f"give smaller factors, or lower {spec.label}.resolution",
            )
    return factors


def check_flag(study_path: str, field: str, flag: str, value: int | None) -> int | None:
    """Check a command-line override against the same range as the study-file field.

    Raises
    ------
    StudyError
        Naming the study file, the flag and the field, when ``value`` is out of range.
    """
    if value is None:
        return None
    lo, hi = LIMITS[field]
    if not lo <= value <= hi:
        raise StudyError(
            f"{flag} {value} is out of range",
            file=study_path,
            field=f"{flag} ({field})",
            fix=f"give an integer in [{lo}, {hi}]",
        )
    return value


SHAPE_KEYS = {
    "surface",
    "radii",
    "map",
    "resolution",
    "mesh",
    "fields",
    "grid",
    "simplify",
    "route",
    "insist",
}


@dataclass(frozen=True)
class ShapeSpec:
    """One shape as the study file gives it (paths resolved, nothing loaded yet)."""

    label: str
    source: str  # "surface" | "mesh" | "grid"
    path: Path | None = None
    surface: str | None = None
    radii: tuple[float, ...] | None = None
    map: tuple[str, str] | None = None
    fields: tuple[str, str] | None = None
    resolution: int = 3000
    simplify: float | str = 0.0  # mesh: delta >= 0 (value units, 0 = off) or "auto" (see specmap.simplify)
    route: str = GridSettings.route
    insist: bool = False  # go on with a non-normal pair (constant or dependent), caveat in every result

    @property
    def grid_settings(self) -> GridSettings:
        """How this shape's grid is computed: its route, and its resolution for the smooth route."""
        return GridSettings(
            route=self.route, resolution=self.resolution if self.source == "surface" else None
        )

    def describe(self) -> str:
        """One human line, e.g. ``ellipsoid radii (2, 1, 1), map (x, y)``."""
        if self.source == "grid":
            return f"grid file {self.path.name if self.path else '?'}"
        values = f"map ({', '.join(self.map)})" if self.map else f"fields ({', '.join(self.fields or ())})"
        if self.source == "surface":
            radii = ", ".join(f"{r:g}" for r in self.radii or ())
            return f"{self.surface} radii ({radii}), {values}"
        return f"mesh {self.path.name if self.path else '?'}, {values}"

    def to_json(self) -> dict[str, Any]:
        return {
            "source": self.source,
            "path": str(self.path) if self.path else None,
            "surface": self.surface,
            "radii": list(self.radii) if self.radii else None,
            "map": list(self.map) if self.map else None,
            "fields": list(self.fields) if self.fields else None,
            "resolution": self.resolution,
            "simplify": self.simplify,
            "description": self.describe(),
        }


MapSpec = MapSettings
"""The ``[map]`` table: :class:`~specmap.settings.MapSettings` (old name kept for imports)."""
DistanceSpec = DistanceSettings
"""The ``[distance]`` table: :class:`~specmap.settings.DistanceSettings` (old name kept for imports)."""
_MAP, _DISTANCE, _PERTURB = MapSettings(), DistanceSettings(), PerturbSettings()


@dataclass(frozen=True)
class PerturbSpec:
    """The ``[perturb]`` table; :meth:`Study.perturb_settings` joins it with ``[map]`` and ``[distance]``."""

    model: str = _PERTURB.model
    size: float = _PERTURB.size
    runs: int = _PERTURB.runs
    seed: int = _PERTURB.seed
    sizes: tuple[float, ...] | None = None
    distance: bool = _PERTURB.distance


@dataclass(frozen=True)
class Study:
    """A validated study. Paths are absolute; shapes are not loaded yet."""

    name: str
    seed: int
    path: Path
    f: ShapeSpec
    g: ShapeSpec
    constants: dict[str, float] = field(default_factory=dict)
    window: Window | None = None
    map: MapSettings = _MAP
    distance: DistanceSettings = _DISTANCE
    perturb: PerturbSpec | None = None

    @property
    def grid_only(self) -> bool:
        return self.f.source == "grid" or self.g.source == "grid"

    def perturb_settings(self, *, runs: int | None = None) -> PerturbSettings:
        """The :class:`~specmap.settings.PerturbSettings` of ``[perturb]``, ``[map]`` and ``[distance]``.

        Parameters
        ----------
        runs : int, optional
            Overrides ``perturb.runs`` (the ``--runs`` flag, checked by :func:`check_flag`).

        Raises
        ------
        StudyError
            The study has no ``[perturb]`` table.
        """
        p = self.perturb
        if p is None:
            raise StudyError(
                "no [perturb] table",
                file=str(self.path),
                field="[perturb]",
                fix="add [perturb] with size = ..., runs = ...",
            )
        return PerturbSettings.of(
            model=p.model,
            size=p.size,
            runs=p.runs if runs is None else runs,
            seed=p.seed,
            distance=p.distance,
            map=self.map,
            dist=self.distance,
        )


class _Reader:
    """Typed access to TOML tables with precise errors."""

    def __init__(self, file: str) -> None:
        self.file = file

    def fail(self, field_: str, problem: str, fix: str) -> StudyError:
        return StudyError(problem, file=self.file, field=field_, fix=fix)

    def table(self, data: dict, name: str, required: bool, allowed: set[str]) -> dict:
        t = data.get(name)
        if t is None:
            if required:
                raise self.fail(f"[{name}]", "missing table", f"add a [{name}] table")
            return {}
        if not isinstance(t, dict):
            raise self.fail(name, "is not a table", f"write it as [{name}] with keys below it")
        for key in t:
            if key not in allowed:
                raise self.fail(f"{name}.{key}", "unknown key", f"use one of: {', '.join(sorted(allowed))}")
        return t

    def number(
        self, t: dict, name: str, key: str, default: float | None = None, *, positive: bool = False
    ) -> float:
        v = t.get(key, default)
        where = f"{name}.{key}"
        if v is None:
            raise self.fail(where, "missing", f"set {key} = <number>")
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise self.fail(where, f"{v!r} is not a finite number", f"set {key} = <number>")
        if positive and v <= 0:
            raise self.fail(where, f"{v!r} is not positive", f"set {key} to a number > 0")
        return float(v)

    def limited(self, t: dict, name: str, key: str, default: int) -> int:
        """An integer in its range of :data:`LIMITS` (the same range a CLI flag is checked against)."""
        lo, hi = LIMITS[f"{name}.{key}"]
        return self.integer(t, name, key, default, lo=lo, hi=hi)

    def integer(
        self, t: dict, name: str, key: str, default: int, *, lo: int = 0, hi: int | None = None
    ) -> int:
        v = t.get(key, default)
        where = f"{name}.{key}"
        if isinstance(v, bool) or not isinstance(v, int):
            raise self.fail(where, f"{v!r} is not a whole number", f"set {key} = <integer>")
        if v < lo or (hi is not None and v > hi):
            rng = f">= {lo}" if hi is None else f"in [{lo}, {hi}]"
            raise self.fail(where, f"{v} is out of range", f"set {key} to an integer {rng}")
        return v

    def choice(self, t: dict, name: str, key: str, default: str, options: tuple[str, ...]) -> str:
        v = t.get(key, default)
        if v not in options:
            raise self.fail(
                f"{name}.{key}", f"unknown value {v!r}", f"use one of: {', '.join(repr(o) for o in options)}"
            )
        return v

    def numbers(self, t: dict, name: str, key: str, count: int | None = None) -> tuple[float, ...]:
        v = t.get(key)
        where = f"{name}.{key}"
        if not isinstance(v, list) or not all(
            isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for x in v
        ):
            raise self.fail(
                where,
                f"{v!r} is not a list of finite numbers",
                f"write {key} = [n1, n2{', ...' if count is None or count > 2 else ''}]",
            )
        if count is not None and len(v) != count:
            raise self.fail(where, f"has {len(v)} numbers, expected {count}", f"give exactly {count} numbers")
        return tuple(float(x) for x in v)

    def strings(self, t: dict, name: str, key: str, count: int) -> tuple[str, ...]:
        v = t.get(key)
        if not isinstance(v, list) or len(v) != count or not all(isinstance(x, str) for x in v):
            raise self.fail(
                f"{name}.{key}", f"{v!r} is not a list of {count} strings", f'write {key} = ["...", "..."]'
            )
        return tuple(v)


def _shape(r: _Reader, data: dict, label: str, base: Path) -> ShapeSpec:
    t = r.table(data, label, True, SHAPE_KEYS)
    given = [k for k in ("surface", "mesh", "grid") if k in t]
    if len(given) != 1:
        problem = "gives none of" if not given else f"gives {', '.join(given)}; exactly one of"
        raise r.fail(
            f"[{label}]",
            f"{problem} surface, mesh, grid",
            "give exactly one of surface = ..., mesh = ..., grid = ...",
        )
    source = given[0]
    allowed = {
        "surface": {"surface", "radii", "map", "resolution", "route", "insist"},
        "mesh": {"mesh", "map", "fields", "simplify", "insist"},
        "grid": {"grid"},
    }[source]
    for key in t:
        if key not in allowed:
            raise r.fail(
                f"{label}.{key}",
                f"does not apply to a {source} shape",
                f"remove it; a {source} shape takes {', '.join(sorted(allowed))}",
            )
    if source == "grid":
        path = _path(r, t, label, "grid", base, (".json",))
        return ShapeSpec(label, "grid", path=path)
    insist = t.get("insist", False)
    if not isinstance(insist, bool):
        raise r.fail(f"{label}.insist", f"{insist!r} is not true/false", "set insist = true or false")
    fmap = fields = None
    if "map" in t and "fields" in t:
        raise r.fail(f"{label}.map", "both map and fields given", "give one of map = [...] or fields = [...]")
    if "map" in t:
        fmap = r.strings(t, label, "map", 2)
    elif source == "mesh" and "fields" in t:
        fields = r.strings(t, label, "fields", 2)
    else:
        fix = 'add map = ["expr1", "expr2"]' + (' or fields = ["name1", "name2"]' if source == "mesh" else "")
        raise r.fail(f"{label}.map", "missing the two filtering functions", fix)
    if source == "surface":
        kind = t["surface"]
        if kind not in SURFACES:
            raise r.fail(
                f"{label}.surface",
                f"unknown surface {kind!r}",
                f"use one of: {', '.join(repr(s) for s in SURFACES)}",
            )
        radii = r.numbers(t, label, "radii", SURFACES[kind])
        if any(x <= 0 for x in radii):
            raise r.fail(f"{label}.radii", f"radii {list(radii)} must be positive", "give radii > 0")
        lo, hi = RADII_RANGE
        if any(not lo <= x <= hi for x in radii):
            raise r.fail(
                f"{label}.radii",
                f"radii {[float(x) for x in radii]} are outside the supported range {lo:g} .. {hi:g}",
                "rescale the surface (other length units) so that every radius is in that range",
            )
        if kind == "torus" and radii[0] <= radii[1]:
            raise r.fail(
                f"{label}.radii",
                f"torus needs R > r, got R={radii[0]:g}, r={radii[1]:g}",
                "give radii = [R, r] with R > r > 0",
            )
        res = r.integer(t, label, "resolution", 3000, lo=SURFACE_RESOLUTION[0], hi=SURFACE_RESOLUTION[1])
        route = r.choice(t, label, "route", GridSettings.route, ROUTES)
        return ShapeSpec(
            label, "surface", surface=kind, radii=radii, map=fmap, resolution=res, route=route, insist=insist
        )
    path = _path(r, t, label, "mesh", base, MESH_SUFFIXES)
    simplify: float | str = "auto"
    fix = 'set simplify = <number >= 0> (value units, 0 = off) or "auto"'
    if t.get("simplify") != "auto":
        if isinstance(t.get("simplify"), str):
            raise r.fail(f"{label}.simplify", f"unknown value {t['simplify']!r}", fix)
        simplify = r.number(t, label, "simplify", 0.0)
        if simplify < 0:
            raise r.fail(f"{label}.simplify", f"{simplify:g} is negative", fix)
    return ShapeSpec(label, "mesh", path=path, map=fmap, fields=fields, simplify=simplify, insist=insist)


def _path(r: _Reader, t: dict, label: str, key: str, base: Path, suffixes: tuple[str, ...]) -> Path:
    v = t[key]
    if not isinstance(v, str) or not v:
        raise r.fail(f"{label}.{key}", f"{v!r} is not a file name", f'write {key} = "path"')
    p = Path(v)
    p = p if p.is_absolute() else (base / p)
    if p.suffix.lower() not in suffixes:
        raise r.fail(
            f"{label}.{key}",
            f"unsupported file type {p.suffix or '(none)'!r}",
            f"give a {' / '.join(suffixes)} file",
        )
    if p.is_dir():
        raise r.fail(
            f"{label}.{key}",
            f"{p} is a folder, not a {key} file",
            f"give the path of the {key} file itself",
        )
    if not p.is_file():
        raise r.fail(
            f"{label}.{key}",
            f"file not found: {p}",
            "check the path; relative paths resolve against the study file's folder",
        )
    return p.resolve()


def parse_study(data: dict[str, Any], path: Path) -> Study:
    """Validate a parsed TOML document (see module docstring for the format)."""
    r = _Reader(str(path))
    for key in data:
        if key not in TABLES:
            raise r.fail(f"[{key}]", "unknown table", f"use tables: {', '.join(sorted(TABLES))}")
    st = r.table(data, "study", True, {"name", "seed"})
    name = st.get("name")
    if not isinstance(name, str) or not name or any(c in name for c in "/\\") or name.startswith("."):
        raise r.fail(
            "study.name", f"{name!r} is not a usable name", 'set name = "my-study" (letters, digits, - and _)'
        )
    if not name.isprintable():  # newlines, tabs, control and other non-printing characters (str.isprintable)
        raise r.fail(
            "study.name",
            f"{name!r} holds a newline, tab or other non-printing character",
            'set name = "my-study" on one line (letters, digits, - and _)',
        )
    seed = r.integer(st, "study", "seed", 0)
    consts_t = data.get("constants", {})
    if not isinstance(consts_t, dict):
        raise r.fail("constants", "is not a table", "write [constants] with name = number lines")
    constants = {k: r.number(consts_t, "constants", k) for k in consts_t}
    base = path.parent
    f = _shape(r, data, "f", base)
    g = _shape(r, data, "g", base)
    window = None
    if "window" in data:
        wt = r.table(data, "window", False, {"a", "b"})
        a = r.numbers(wt, "window", "a", 2) if "a" in wt else (0.02, 0.98)
        if not (0 < a[0] < a[1] < 1):
            raise r.fail(
                "window.a", f"{list(a)} is not inside ]0, 1[", "give a = [lo, hi] with 0 < lo < hi < 1"
            )
        if "b" not in wt:
            raise r.fail("window.b", "missing", "give b = [lo, hi], or drop [window] for the default")
        b = r.numbers(wt, "window", "b", 2)
        if not b[0] < b[1]:
            raise r.fail("window.b", f"{list(b)} is empty", "give b = [lo, hi] with lo < hi")
        window = Window(a, b)
    mt = r.table(
        data,
        "map",
        False,
        {"pairs", "resolution", "method", "max_contours", "reading", "memory", "tiles", "costs"},
    )
    mspec = MapSpec(
        pairs=r.choice(mt, "map", "pairs", _MAP.pairs, PAIRS),
        resolution=r.limited(mt, "map", "resolution", _MAP.resolution),
        method=r.choice(mt, "map", "method", _MAP.method, MAP_METHODS),
        max_contours=r.integer(mt, "map", "max_contours", _MAP.max_contours, lo=1),
        reading=r.choice(mt, "map", "reading", _MAP.reading, READINGS),
        memory=_memory(r, mt),
        tiles=_tiles(r, mt),
        costs=_costs(r, mt),
    )
    dt = r.table(
        data,
        "distance",
        False,
        {
            "method",
            "degrees",
            "dense_resolution",
            "special_max_lines",
            "certify",
            "slope_max_lines",
            "strip_budget",
            "mesh_check",
        },
    )
    degrees = _DISTANCE.degrees
    if "degrees" in dt:
        dv = dt["degrees"]
        if (
            not isinstance(dv, list)
            or not dv
            or not all(x in (0, 1, 2) and not isinstance(x, bool) for x in dv)
        ):
            raise r.fail(
                "distance.degrees", f"{dv!r} is not a list of degrees", "give degrees among [0, 1, 2]"
            )
        degrees = tuple(sorted(set(dv)))
    dspec = DistanceSpec(
        method=r.choice(dt, "distance", "method", _DISTANCE.method, DISTANCE_METHODS),
        degrees=degrees,
        dense_resolution=r.integer(
            dt, "distance", "dense_resolution", _DISTANCE.dense_resolution, lo=3, hi=1001
        ),
        special_max_lines=r.integer(dt, "distance", "special_max_lines", _DISTANCE.special_max_lines, lo=1),
        certify=r.choice(dt, "distance", "certify", _DISTANCE.certify, CERTIFY),
        slope_max_lines=r.integer(dt, "distance", "slope_max_lines", _DISTANCE.slope_max_lines, lo=1),
        strip_budget=_strip_budget(r, dt),
        mesh_check=mesh_check_factors(
            dt.get("mesh_check", list(_DISTANCE.mesh_check)),
            (f, g),
            file=str(path),
            field="distance.mesh_check",
            form="mesh_check = [2, 4]",
        ),
    )
    pspec = None
    if "perturb" in data:
        pt = r.table(data, "perturb", False, {"model", "size", "runs", "seed", "sizes", "distance"})
        default_model = "grid" if (f.source == "grid" or g.source == "grid") else "function"
        model = r.choice(pt, "perturb", "model", default_model, MODELS)
        if model == "function" and (f.source == "grid" or g.source == "grid"):
            raise r.fail(
                "perturb.model",
                "'function' needs surfaces or meshes, this study has a grid file",
                'use model = "grid"',
            )
        sizes = None
        if "sizes" in pt:
            sizes = r.numbers(pt, "perturb", "sizes")
            if not sizes or any(s <= 0 for s in sizes):
                raise r.fail("perturb.sizes", "needs positive sizes", "give sizes = [1e-3, 1e-2, ...]")
        dist = pt.get("distance", _PERTURB.distance)
        if not isinstance(dist, bool):
            raise r.fail("perturb.distance", f"{dist!r} is not true/false", "set distance = true or false")
        pspec = PerturbSpec(
            model=model,
            size=r.number(pt, "perturb", "size", _PERTURB.size, positive=True),
            runs=r.limited(pt, "perturb", "runs", _PERTURB.runs),
            seed=r.integer(pt, "perturb", "seed", seed),
            sizes=sizes,
            distance=dist,
        )
    return Study(name, seed, path, f, g, constants, window, mspec, dspec, pspec)


def _strip_budget(r: _Reader, dt: dict) -> float:
    """``[distance] strip_budget``: whole-strip search lines per dense node, a finite number >= 0."""
    v = r.number(dt, "distance", "strip_budget", _DISTANCE.strip_budget)
    if v < 0:
        raise r.fail(
            "distance.strip_budget", f"{v!r} is negative", "set strip_budget to a number >= 0 (0: off)"
        )
    return v


def _memory(r: _Reader, mt: dict) -> float | None:
    """``[map] memory``: a size like ``"6GB"`` (bytes), or None for the default budget."""
    if "memory" not in mt:
        return None
    from specmap.errors import InputValueError
    from specmap.special.preflight import parse_memory

    try:
        return parse_memory(mt["memory"])
    except InputValueError as exc:
        raise r.fail("map.memory", exc.problem, 'give a size like memory = "6GB"') from None


def _tiles(r: _Reader, mt: dict) -> tuple[int, int] | None:
    """``[map] tiles``: ``[na, nb]`` counts >= 1, or ``"auto"`` (None: the memory budget decides)."""
    t = mt.get("tiles", "auto")
    if t == "auto":
        return None
    ok = (
        isinstance(t, list) and len(t) == 2 and all(isinstance(x, int) and not isinstance(x, bool) for x in t)
    )
    if not ok or min(t) < 1:
        raise r.fail(
            "map.tiles", f"{t!r} is not two counts >= 1", 'give tiles = [2, 2] (along a, b) or "auto"'
        )
    return (int(t[0]), int(t[1]))


def _costs(r: _Reader, mt: dict) -> tuple[float, float] | None:
    """``[map] costs``: a band ``[lo, hi]`` of tied costs (value units), or None for the whole map."""
    if "costs" not in mt:
        return None
    from specmap.errors import InputValueError
    from specmap.settings import check_costs

    fix = "give costs = [lo, hi] with lo < hi and hi > 0 (value units), like [0.9, 1.3], or drop it"
    v = mt["costs"]
    if not (isinstance(v, list) and len(v) == 2):
        raise r.fail("map.costs", f"{v!r} is not two numbers [lo, hi]", fix)
    try:
        return check_costs(r.numbers(mt, "map", "costs", 2))
    except InputValueError as exc:
        raise r.fail("map.costs", exc.problem, fix) from None
    except StudyError:
        raise r.fail("map.costs", f"{v!r} is not two finite numbers", fix) from None


def load_study(path: str | Path) -> Study:
    """Read and validate a study file.

    Raises
    ------
    StudyError
        Missing file, malformed TOML, unknown key or surface, bad radii, ...
    """
    p = Path(path)
    if not p.is_file():
        raise StudyError(
            "file not found",
            file=str(p),
            field="(file)",
            fix="give the path of a .toml study file (see studies/)",
        )
    try:
        data = tomllib.loads(p.read_text())
    except tomllib.TOMLDecodeError as exc:
        raise StudyError(
            f"malformed TOML ({exc})",
            file=str(p),
            field="(syntax)",
            fix="fix the TOML syntax at the position given",
        ) from None
    except UnicodeDecodeError:
        raise StudyError(
            "not a text file", file=str(p), field="(file)", fix="give a UTF-8 TOML study file"
        ) from None
    return parse_study(data, p.resolve())
