"""The stages of a study, run in order and written to a result folder.

    study -> shapes -> grids -> special set -> matching distance -> perturbation -> report

:class:`StudyRun` computes each stage lazily (at most once per process) and
writes its result files atomically into ``out`` (default ``results/<name>/``).
This is the I/O edge: the computations it calls are pure functions.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import shlex
import sys
import time
from collections.abc import Callable
from functools import cached_property
from pathlib import Path
from typing import Any

from specmap import __version__
from specmap.errors import CoreInputError, SpecmapInputError
from specmap.fingerprint import distance_part, inputs_part, map_part, stamp, window_part
from specmap.grids.model import Grid, read_grid
from specmap.io import check_out_dir, read_json, write_json, write_json_streamed
from specmap.progress import Progress
from specmap.settings import DistanceSettings, MapSettings
from specmap.shapes.model import Shape
from specmap.strip import Window, window_for
from specmap.study import ShapeSpec, Study

LONG_PLAN_SECONDS = 60.0
"""A one-piece map whose rough time (:attr:`specmap.special.preflight.AtlasPlan.seconds`) is above
this prints its plan line first (tiled and streamed plans always do)."""


def default_out(study: Study) -> Path:
    return Path("results") / study.name


#: a mesh file at least this large (bytes) is read with progress lines (reading and its checks take
#: about a minute for 2 M triangles on a busy 2-core machine)
LARGE_MESH_BYTES = 8_000_000
#: a mesh with at least this many triangles builds its PL grid with progress lines
LARGE_GRID_TRIANGLES = 200_000


def load_input(
    spec: ShapeSpec, study: Study, progress: Callable[[int, int], None] | None = None
) -> tuple[Shape | Grid, dict[str, Any] | None]:
    """What a study gives for f or g, and the record of its simplification (None when not simplified).

    The first item is a :class:`Shape` (surface or mesh) or the :class:`Grid` of a grid file
    (contour ids prefixed with the spec's label, ``"f"`` or ``"g"``). A mesh with ``simplify = δ``
    or ``"auto"`` gets its values replaced by the simplified pair of
    :func:`specmap.simplify.simplify_values` (counting the contours of the PL grid, budget
    ``[map] max_contours``); grids, map, distance and perturbations then all use that pair.
    """
    if spec.source == "grid":
        return read_grid(spec.path, prefix=spec.label), None
    from specmap.shapes.build import build_shape  # local: meshio, scipy and the expression compiler
    from specmap.shapes.normality import out_of_range

    shape = build_shape(
        spec, study, **({"progress": progress} if progress else {})
    )  # with insist = true a non-normal pair is built, its reason in meta
    if shape.meta.get("not_normal"):
        print(
            f"specmap: note: {spec.label}: {shape.meta['not_normal']}: not a normal pair; going on because "
            f"[{spec.label}] insist = true (every result file and the report carry the caveat)",
            file=sys.stderr,
        )
    too_big = out_of_range(shape.vertices, shape.values)
    if too_big is not None:  # products of such numbers overflow: refuse rather than print inf/nan warnings
        from specmap.errors import StudyError

        on_mesh = too_big.startswith("coordinates") and spec.source == "mesh"
        raise StudyError(
            too_big,
            file=str(spec.path if on_mesh else study.path),
            field=f"{spec.label}.{'mesh' if on_mesh else 'map' if spec.map else 'fields'}",
            fix="rescale the " + ("mesh (other length units)" if on_mesh else "map or fields") + " towards 1",
        )
    if spec.source != "mesh" or not spec.simplify:
        return shape, None
    import numpy as np

    from specmap.grids.piecewise import piecewise_grid
    from specmap.simplify import simplify_values

    V, T = shape.vertices, shape.triangles

    def contours(f1: np.ndarray, f2: np.ndarray) -> int:
        return len(piecewise_grid(V, T, np.column_stack([f1, f2]), label=spec.label))

    values, record = simplify_values(T, shape.values, spec.simplify, contours, budget=study.map.max_contours)
    if record["met"] is False:
        print(
            f"specmap: note: {spec.label}: simplify=auto: {record['contours_after']} contours left, budget "
            f"{record['budget']} not met within a change of {record.get('cap') or 0:.3g} (5% of the value range; "
            f"best found: sup change {max(record['sup_change']):.3g}); the simplified pair is used; give "
            "simplify = <larger delta>, raise [map] max_contours, or use a coarser mesh",
            file=sys.stderr,
        )
    return shape.with_values(values), record


def with_simplified_bounds(js: dict[str, Any], rec_f: dict | None, rec_g: dict | None) -> dict[str, Any]:
    """Add ``simplified_bounds`` per degree to a ``distance.json`` of a simplified pair.

    With s_f, s_g the measured sup-norm changes of f and g (the larger over their two
    components), the stability theorem [CDFFL13]_ gives |D(f, g) - D(f', g')| <= s_f + s_g for
    the matching distance in each degree. So the distance of the original pair lies in
    ``[lower - (s_f + s_g), upper + (s_f + s_g)]``, where [lower, upper] is the certified
    interval of the simplified pair (``bounds`` of the degree) if there is one, else [D', D'];
    the lower end is clipped at 0 (a distance). Unchanged when neither side was simplified.

    References
    ----------
    .. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in multidimensional
       persistent homology are stable functions", Math. Methods Appl. Sci. 36 (2013).
    """
    if rec_f is None and rec_g is None:
        return js
    s_f, s_g = (max(rec["sup_change"]) if rec else 0.0 for rec in (rec_f, rec_g))
    margin = float(s_f + s_g)
    for entry in (js.get("by_degree") or {}).values():
        bounds = entry.get("bounds")
        lower, upper = (
            bounds
            if isinstance(bounds, (list, tuple)) and len(bounds) == 2
            else (entry.get("value"), entry.get("value"))
        )
        if isinstance(lower, (int, float)) and isinstance(upper, (int, float)):
            entry["simplified_bounds"] = [max(0.0, float(lower) - margin), float(upper) + margin]
        else:  # no finite value in this degree
            entry["simplified_bounds"] = None
    js["simplification"] = {
        "sup_change_f": float(s_f),
        "sup_change_g": float(s_g),
        "margin": margin,
        "note": "values are those of the simplified pair; simplified_bounds hold the "
        "distance of the original pair (stability theorem [CDFFL13])",
    }
    return js


class StudyRun:
    """Lazy, write-as-you-go execution of one study.

    Parameters
    ----------
    study : Study
    out : path, optional
        Result folder; default ``results/<study name>``.
    show_progress : bool
        Draw progress bars on standard error.
    """

    def __init__(self, study: Study, out: str | Path | None = None, *, show_progress: bool = True) -> None:
        self.study = study
        self.out = Path(out) if out is not None else default_out(study)
        self.show_progress = show_progress

    @property
    def caveats(self) -> list[str]:
        """Sentences every result file carries: a non-normal pair the study insisted on."""
        out = []
        for spec, (x, _) in zip((self.study.f, self.study.g), self._loaded, strict=True):
            why = x.meta.get("not_normal") if isinstance(x, Shape) else None
            if why:
                out.append(
                    f"{spec.label} is not a normal pair ({why}); computed only because the study sets "
                    f"[{spec.label}] insist = true: its grids, special set and distances are outside "
                    "the theory (math.md section 4) and may be artefacts"
                )
        return out

    @cached_property
    def inputs_fingerprint(self) -> str:
        """The ``inputs`` part of every result's fingerprint (:mod:`specmap.fingerprint`)."""
        return inputs_part(self.study)

    def stamp(
        self,
        *,
        window: bool = True,
        map_settings: MapSettings | None = None,
        distance_settings: DistanceSettings | None = None,
        perturb: str | None = None,
    ) -> dict[str, Any]:
        """``format_version``, ``fingerprint``, ``fingerprint_parts`` (and ``caveats``) of a result file."""
        parts = {"inputs": self.inputs_fingerprint}
        if window:
            parts["window"] = window_part(self.window)
        if map_settings is not None:
            parts["map"] = map_part(map_settings)
        if distance_settings is not None:
            parts["distance"] = distance_part(distance_settings)
        if perturb is not None:
            parts["perturb"] = perturb
        return stamp(parts, self.caveats)

    def check_out(self) -> None:
        """Check, before any work, that the result folder can be made and written.

        Raises
        ------
        ResultsError
            ``--out`` is an existing file, lies under a file, or is not writable.
        """
        check_out_dir(self.out)

    def progress(self, label: str) -> Progress:
        return Progress(label, enabled=self.show_progress)

    # -- stages -----------------------------------------------------------
    @cached_property
    def _loaded(self) -> tuple[tuple[Shape | Grid, dict | None], tuple[Shape | Grid, dict | None]]:
        f, g = self.study.f, self.study.g
        return (
            load_input(f, self.study, self._input_progress(f)),
            load_input(g, self.study, self._input_progress(g)),
        )

    def _input_progress(self, spec: ShapeSpec) -> Progress | None:
        """Progress lines for reading a large mesh file (:data:`LARGE_MESH_BYTES`), else None."""
        if not self.show_progress or spec.source != "mesh" or spec.path is None:
            return None
        try:
            size = Path(spec.path).stat().st_size
        except OSError:  # reading it gives the one-line error
            return None
        return self.progress(f"mesh {spec.label}") if size >= LARGE_MESH_BYTES else None

    @property
    def inputs(self) -> tuple[Shape | Grid, Shape | Grid]:
        """f and g as the study gives them, simplified where it asks (see :func:`load_input`)."""
        return self._loaded[0][0], self._loaded[1][0]

    @property
    def simplification(self) -> tuple[dict | None, dict | None]:
        """The simplification records of f and g (None for a side not simplified)."""
        return self._loaded[0][1], self._loaded[1][1]

    @cached_property
    def shapes(self) -> tuple[Shape | None, Shape | None]:
        """The shapes of f and g; None for a side given as a grid file."""
        sf, sg = (x if isinstance(x, Shape) else None for x in self.inputs)
        return sf, sg

    @cached_property
    def grids(self) -> tuple[Grid, Grid]:
        from specmap.grids import pareto_grid

        out = []
        for spec, (x, rec) in zip((self.study.f, self.study.g), self._loaded, strict=True):
            if isinstance(x, Grid):
                out.append(x)
                continue
            try:
                big = (
                    self.show_progress
                    and x.triangles is not None
                    and len(x.triangles) >= LARGE_GRID_TRIANGLES
                )
                progress = self.progress(f"grid {spec.label}") if big else None
                out.append(pareto_grid(x, spec.grid_settings, simplification=rec, progress=progress))
            except SpecmapInputError as exc:  # core words; the study file and its key are known here
                raise self.located(exc, spec.label) from None
        return out[0], out[1]

    def located(self, exc: SpecmapInputError, table: str) -> SpecmapInputError:
        """``exc`` with the study file and, for a core error, the key of ``table`` that gave its subject."""
        subject = getattr(exc, "subject", None) if isinstance(exc, CoreInputError) else None
        return exc.located(file=str(self.study.path), field=f"{table}.{subject}" if subject else None)

    def map_settings(
        self,
        *,
        pairs: str | None = None,
        resolution: int | None = None,
        method: str | None = None,
        memory: float | None = None,
        tiles: tuple[int, int] | str | None = None,
        costs: tuple[float, float] | None = None,
    ) -> MapSettings:
        """The study's ``[map]`` settings with the command line's overrides (``tiles="auto"``: the budget decides)."""
        given = {
            "pairs": pairs,
            "resolution": resolution,
            "method": method,
            "memory": memory,
            "tiles": tiles,
            "costs": costs,
        }
        chosen = {k: v for k, v in given.items() if v is not None}
        if chosen.get("tiles") == "auto":
            chosen["tiles"] = None
        return dataclasses.replace(self.study.map, **chosen)

    def distance_settings(
        self,
        *,
        method: str | None = None,
        degrees: tuple[int, ...] | None = None,
        mesh_check: tuple[int, ...] | None = None,
    ) -> DistanceSettings:
        """The study's ``[distance]`` settings with the command line's overrides."""
        given = {"method": method, "degrees": degrees, "mesh_check": mesh_check}
        return dataclasses.replace(self.study.distance, **{k: v for k, v in given.items() if v is not None})

    @cached_property
    def window(self) -> Window:
        if self.study.window is not None:
            return self.study.window
        return window_for(self.shapes, self.grids)

    #: workers of a tiled map: local processes, or a Dask scheduler address (``specmap map --jobs/--cluster``)
    map_jobs: int = 1
    map_cluster: str | None = None
    #: atlases this run computed (the reduced search that reads a stored map adds none)
    maps_made: int = 0

    def reads_stored_map(self, settings: DistanceSettings) -> bool:
        """Whether the distance of ``settings`` reads the map written in ``out`` (loaded here, once).

        False for the dense method (no map), when the study's map is banded (``[map] costs``: a
        partial map is never the reduced search's atlas, :meth:`distance_atlas`) and when no stored
        map fits (:meth:`stored_atlas`): then the reduced search maps again (``cli.remap_note`` says why).
        """
        ms = self.map_settings()
        return settings.method in ("both", "reduced") and ms.costs is None and self._read_stored(ms)

    def _read_stored(self, ms: MapSettings) -> bool:
        """Put the stored map of ``ms`` in the atlas cache if it fits; True when the cache holds it."""
        cache = self.__dict__.setdefault("_atlases", {})
        done = self.__dict__.setdefault("_stored_read", {})
        if ms not in done:
            stored = self.stored_atlas(ms) if ms not in cache else None
            done[ms] = stored is not None
            if stored is not None:
                if self.show_progress:
                    print(
                        f"specmap: reading the special set of {self.out / 'special.json'} (same inputs, "
                        "window and map settings)",
                        file=sys.stderr,
                    )
                cache[ms] = stored
        return done[ms]

    def stored_atlas(self, ms: MapSettings):
        """The atlas ``specmap map`` wrote in ``out``, when its stamp is this study's for ``ms``; else None.

        ``special.json``, ``special.geojson`` and ``special_pieces.json`` (the pieces of every
        tie, which the reduced search walks) must all exist and carry the fingerprint of the
        inputs, the window and the map settings ``ms`` (memory and tiles excluded: they do not
        change the map); a missing, torn or stale file gives None (the caller maps again).
        """
        from shapely.errors import GEOSException

        from specmap.special.atlas import atlas_from_files

        paths = [self.out / n for n in ("special.json", "special.geojson", "special_pieces.json")]
        if not all(p.is_file() for p in paths):
            return None
        want = self.stamp(map_settings=ms)
        try:
            docs = [read_json(p) for p in paths]
        except (OSError, ValueError):
            return None
        keys = ("format_version", "fingerprint", "fingerprint_parts")
        if any(not isinstance(d, dict) or any(d.get(k) != want[k] for k in keys) for d in docs):
            return None
        try:
            return atlas_from_files(*docs)
        except (KeyError, TypeError, ValueError, GEOSException):
            return None

    def atlas(
        self,
        *,
        pairs: str | None = None,
        resolution: int | None = None,
        method: str | None = None,
        memory: float | None = None,
        tiles: tuple[int, int] | str | None = None,
        costs: tuple[float, float] | None = None,
        reuse: bool = False,
    ):
        """The special-set atlas of the study's map settings (overrides given), computed once per settings.

        The plan (:func:`specmap.special.preflight.plan_atlas`) decides one piece or tiles
        (:func:`specmap.special.tiles.tiled_special_set`, tile folder ``out/tiles``); it is kept
        in ``stats["plan"]``. ``reuse``: read the map written in ``out`` when it was made from
        the same inputs, window and map settings (:meth:`stored_atlas`) instead of mapping again.
        With ``costs`` (or ``[map] costs``) the map holds only the ties whose tied cost lies in the
        band (:meth:`banded_atlas`).
        """
        ms = self.map_settings(
            pairs=pairs, resolution=resolution, method=method, memory=memory, tiles=tiles, costs=costs
        )
        cache = self.__dict__.setdefault("_atlases", {})
        if ms.costs is not None:
            if ms not in cache:
                self.maps_made += 1
                cache[ms] = self.banded_atlas(ms)
            return cache[ms]
        if ms not in cache and reuse:
            self._read_stored(ms)
        if ms not in cache:
            self.maps_made += 1
            from specmap.special import special_set
            from specmap.special.preflight import plan_atlas
            from specmap.special.tiles import tiled_special_set

            gf, gg = self.grids
            # one piece when it fits the budget, else tiles; a one-line refusal, never a MemoryError
            plan = plan_atlas(
                len(gf),
                len(gg),
                ms.resolution,
                budget=ms.memory,
                tiles=ms.tiles,
                jobs=self.map_jobs,
                file=str(self.study.path),
                pairs=ms.pairs,
                simplified=self.simplification,
                max_contours=ms.max_contours,
                band=self.suggested_band(),
            )
            if self.show_progress and (plan.tiled or plan.seconds > LONG_PLAN_SECONDS):  # before a long wait
                print(f"specmap: {plan.line()}", file=sys.stderr)
            if plan.streamed:  # tiles on disk, merged one at a time, the GeoJSON written as it goes
                from specmap.special.tiles import streamed_tiled_map

                self.out.mkdir(parents=True, exist_ok=True)
                atlas = streamed_tiled_map(
                    gf,
                    gg,
                    self.window,
                    tiles=plan.tiles,
                    folder=self.out / "tiles",
                    geojson=self.out / "special.geojson",
                    head=self.stamp(map_settings=ms),
                    settings=ms,
                    jobs=self.map_jobs,
                    cluster=self.map_cluster,
                    progress=self.progress("map tiles"),
                )
            elif plan.tiled:
                atlas = tiled_special_set(
                    gf,
                    gg,
                    self.window,
                    tiles=plan.tiles,
                    settings=ms,
                    jobs=self.map_jobs,
                    cluster=self.map_cluster,
                    folder=self.out / "tiles",
                    progress=self.progress("map tiles"),
                )
            else:
                atlas = special_set(
                    gf,
                    gg,
                    self.window,
                    pairs=ms.pairs,
                    resolution=ms.resolution,
                    method=ms.method,
                    tol=ms.tol,
                    reading=ms.reading,
                    progress=self.progress("map"),
                )
            cache[ms] = dataclasses.replace(atlas, stats={**atlas.stats, "plan": plan.to_json()})
        return cache[ms]

    def suggested_band(self) -> tuple[float, float] | None:
        """A band of tied costs around the distance already in ``out``: [0.9 D, the largest upper bound].

        Read from ``out/distance.json`` when it holds a finite positive value D (the max over degrees)
        and its stamp's inputs and window are this study's; the upper end is the largest finite upper
        end of the degrees' ``bounds`` (else 1.1 D). None otherwise. Only the map's refusal uses it.
        """
        import math

        path = self.out / "distance.json"
        if not path.is_file():
            return None
        try:
            js = read_json(path)
            parts = js.get("fingerprint_parts") or {}
            head = self.stamp()["fingerprint_parts"]
            if any(parts.get(k) != head[k] for k in ("inputs", "window")):
                return None
            value = float(js["value"])
            uppers = [
                float(v["bounds"][1])
                for v in (js.get("by_degree") or {}).values()
                if isinstance(v, dict) and isinstance(v.get("bounds"), list) and len(v["bounds"]) == 2
            ]
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None
        if not (math.isfinite(value) and value > 0):
            return None
        top = max((u for u in uppers if math.isfinite(u)), default=1.1 * value)
        return (0.9 * value, max(top, 1.01 * value))

    def banded_atlas(self, ms: MapSettings):
        """The map of ``ms`` restricted to its band of tied costs (:mod:`specmap.special.banded`), one piece.

        The banded map is estimated first (pairs kept, crossings on a probe lattice, bytes) and
        refused in one line with its remedies when it exceeds the memory budget (``[map] memory`` /
        ``--memory``, else twice half of this machine's memory, the rule of the whole map's plan).

        Raises
        ------
        StudyError
            ``method = "naive"``: the naive reference has no band.
        AtlasTooLargeError
            The banded map's estimate is over the budget.
        """
        from specmap.errors import StudyError
        from specmap.special.banded import banded_fits, banded_remedies, banded_special_set, estimate_banded
        from specmap.special.preflight import AtlasTooLargeError, memory_budget, size_text

        assert ms.costs is not None
        lo, hi = ms.costs
        if ms.method != "sweep":
            raise StudyError(
                f"a band of tied costs needs the sweep detection, not {ms.method!r}",
                file=str(self.study.path),
                field="map.costs",
                fix='use method = "sweep" (--method sweep), or drop costs for the naive reference map',
            )
        gf, gg = self.grids
        est = estimate_banded(gf, gg, self.window, ms)
        given = ms.memory is not None
        budget = float(ms.memory) if given else memory_budget()
        focus = est.focus
        what = (
            f"tied costs in [{lo:.4g}, {hi:.4g}] keep {focus.kept.size} of {focus.pairs_total} contour "
            f"pairs; their map has about {est.crossings:.2g} crossings, {size_text(est.bytes)}"
        )
        if not banded_fits(est, budget, given):
            whose = "the --memory budget" if given else "half of this machine's memory"
            raise AtlasTooLargeError(
                f"{what}, over the budget {size_text(budget)} ({whose})",
                file=str(self.study.path),
                field="map.costs",
                fix=banded_remedies(
                    est, ms, budget=budget, given_budget=given, simplified=self.simplification
                ),
            )
        if self.show_progress:
            extra = "; tiles are not used for a band (one piece)" if ms.tiles not in (None, (1, 1)) else ""
            print(f"specmap: banded map: {what}, budget {size_text(budget)}{extra}", file=sys.stderr)
        atlas = banded_special_set(
            gf, gg, self.window, ms, estimate=est, progress=self.progress("banded map")
        )
        plan = {
            "banded": True,
            "tiles": [1, 1],
            "crossings_estimate": float(est.crossings),
            "bytes_estimate": float(est.bytes),
            "budget": budget,
            "reason": "a band of tied costs, in one piece",
        }
        return dataclasses.replace(atlas, stats={**atlas.stats, "plan": plan})

    def distance(self, settings: DistanceSettings, *, jobs: int = 1):
        """The :class:`~specmap.distance.DistanceResult` of ``settings`` (with the study's atlas), once per process.

        Keyed by the settings and ``jobs`` (the results do not depend on ``jobs`` unless
        ``settings.batch`` is None, when the batch size follows it).
        """
        key = (settings, int(jobs))
        cache = self.__dict__.setdefault("_distances", {})
        if key not in cache:
            from specmap.distance import matching_distance

            sf, sg = self.shapes
            start = time.perf_counter()
            atlas = self.distance_atlas(settings) if settings.method in ("both", "reduced") else None
            try:
                cache[key] = matching_distance(
                    sf,
                    sg,
                    settings=settings,
                    window=self.window,
                    atlas=atlas,
                    grids=self.grids,
                    jobs=jobs,
                    progress=self.progress("distance"),
                )
            except CoreInputError as exc:  # core words ("method", no mesh, ...); the file is known here
                raise self.located(exc, "distance") from None
            self.__dict__.setdefault("_distance_seconds", {})[key] = time.perf_counter() - start
        return cache[key]

    def distance_seconds(self, settings: DistanceSettings, *, jobs: int = 1) -> float | None:
        """Wall seconds of :meth:`distance` for these settings (map included when made for it); None if not run."""
        return self.__dict__.get("_distance_seconds", {}).get((settings, int(jobs)))

    def mesh_term(
        self, settings: DistanceSettings, *, jobs: int = 1, store: bool = True
    ) -> tuple[dict[str, Any] | None, str | None]:
        """The mesh-to-surface term of ``settings.mesh_check`` (:mod:`specmap.meshterm`): (block, why not).

        Factor 1 is the study's own distance (:meth:`distance`, computed once); for each factor
        m of ``settings.mesh_check`` the study is run again with both surfaces at m times their
        resolution, on this run's window and with the same settings (grids and map recomputed
        for that mesh; its tiles, if any, under ``out/mesh_term/x<m>/``). Each finished factor is
        written to ``out/mesh_term/x<m>.json`` with the stamp of its run, so a rerun of the same
        study reads it back instead of computing it again (``store=False``: neither read nor
        written, e.g. for a benchmark). Returns ``(None, sentence)`` when the term is off or a
        side cannot be re-meshed (a mesh or grid file), else ``(block, None)`` without its
        sentence (:meth:`write_distance` adds it).
        """
        from specmap import meshterm

        if not settings.mesh_check:
            return None, (
                "not measured: [distance] mesh_check is off (set mesh_check = [2, 4], or "
                "--mesh-check 2,4, to run D_k again at 2x and 4x the mesh resolution)"
            )
        why = meshterm.not_remeshable(self.study)
        if why is not None:
            return None, why[1]
        base = self.distance(settings, jobs=jobs)
        sf, sg = self.shapes
        assert sf is not None and sg is not None  # surfaces (not_remeshable)
        rows = [
            meshterm.MeshRow.of(
                1,
                base.to_json(),
                (len(sf.values), len(sg.values)),
                self.distance_seconds(settings, jobs=jobs),
            )
        ]
        sub_settings = dataclasses.replace(settings, mesh_check=())
        progress = self.progress("mesh term")
        factors = settings.mesh_check
        for i, m in enumerate(factors):
            sub = StudyRun(
                meshterm.remeshed(self.study, m, self.window),
                self.out / "mesh_term" / f"x{m}",
                show_progress=self.show_progress,
            )
            sub.map_jobs, sub.map_cluster = self.map_jobs, self.map_cluster
            reduced = sub_settings.method in ("both", "reduced")
            head = sub.stamp(
                map_settings=sub.map_settings() if reduced else None, distance_settings=sub_settings
            )
            path = self.out / "mesh_term" / f"x{m}.json"
            row = self._stored_mesh_row(path, head) if store else None
            if self.show_progress:
                what = "read back from " + str(path) if row is not None else "computing"
                print(
                    f"specmap: mesh term: {m}x the mesh resolution (f {sub.study.f.resolution}, g "
                    f"{sub.study.g.resolution} vertices asked; factor {i + 1} of {len(factors)}): {what}",
                    file=sys.stderr,
                )
            if row is None:
                res = sub.distance(sub_settings, jobs=jobs)
                tf, tg = sub.shapes
                assert tf is not None and tg is not None
                row = meshterm.MeshRow.of(
                    m,
                    res.to_json(),
                    (len(tf.values), len(tg.values)),
                    sub.distance_seconds(sub_settings, jobs=jobs),
                )
                if store:
                    path.parent.mkdir(parents=True, exist_ok=True)
                    write_json(path, {**row.to_json(), **head})
            rows.append(row)
            progress(i + 1, len(factors))
        words = (
            f"method {settings.method}, certify {settings.certify!r}, the study's window and [map] settings "
            "at every factor"
        )
        return meshterm.mesh_term_block(rows, settings=words), None

    @staticmethod
    def _stored_mesh_row(path: Path, head: dict[str, Any]) -> Any:
        """The :class:`~specmap.meshterm.MeshRow` written at ``path`` when its stamp is ``head``'s; else None."""
        from specmap.meshterm import MeshRow

        if not path.is_file():
            return None
        try:
            js = read_json(path)
            keys = ("format_version", "fingerprint", "fingerprint_parts")
            if not isinstance(js, dict) or any(js.get(k) != head[k] for k in keys):
                return None
            return MeshRow.from_json(js)
        except (OSError, ValueError, KeyError, TypeError, IndexError):
            return None  # torn or stale: computed again

    def distance_atlas(self, settings: DistanceSettings):
        """The study's atlas; when the whole map does not fit its memory budget, the focused source.

        The reduced search needs only the ties whose cost can lie between the slope-one
        value and an upper bound of D (:func:`specmap.distance.focused.focused_source`); it is
        mapped when the search knows that band, and refused in one line when even it is too big.
        A study whose map is banded (``[map] costs``) also gives the focused source: a map of a
        band the user chose is no atlas of the search (its ties outside the band are missing).
        """
        from specmap.special.preflight import AtlasTooLargeError

        if "_focused" in self.__dict__:  # the plan refused the whole map already
            return self.__dict__["_focused"]
        ms = self.map_settings()
        if ms.costs is None:
            try:
                whole = self.atlas(reuse=True)
                if not whole.stats.get("streamed"):
                    return whole
            except AtlasTooLargeError:
                pass
        # the whole map is refused, streamed (its pieces never in memory) or banded: the focused source
        from specmap.distance.focused import focused_source

        if self.show_progress:
            why = (
                f"the study's map is restricted to tied costs in [{ms.costs[0]:.4g}, {ms.costs[1]:.4g}]"
                if ms.costs is not None
                else "the whole special-set map does not fit the memory budget"
            )
            print(
                f"specmap: {why}; the reduced search maps only the ties whose cost can be D (focused special set)",
                file=sys.stderr,
            )
        gf, gg = self.grids
        self.__dict__["_focused"] = focused_source(
            gf,
            gg,
            self.window,
            roles=settings.roles,
            pairs=ms.pairs,
            resolution=ms.resolution,
            method=ms.method,
            tol=ms.tol,
            reading=ms.reading,
            budget=ms.memory,
            progress=self.progress("focused map"),
        )
        return self.__dict__["_focused"]

    # -- writers ----------------------------------------------------------
    def record(self, command: str | None = None) -> None:
        """Write or update ``study.json`` (what ran, when, on what)."""
        path = self.out / "study.json"
        old = read_json(path) if path.is_file() else {}
        commands = list(old.get("commands", []))
        line = command or " ".join(shlex.quote(a) for a in ["specmap", *sys.argv[1:]])
        commands.append({"command": line, "date": _dt.datetime.now().isoformat(timespec="seconds")})
        s = self.study
        write_json(
            path,
            {
                "name": s.name,
                "study_file": str(s.path),
                "seed": s.seed,
                "f": s.f.to_json(),
                "g": s.g.to_json(),
                "constants": s.constants,
                "window": self.window.to_json(),
                "simplification": {"f": self.simplification[0], "g": self.simplification[1]},
                "specmap_version": __version__,
                "commands": commands[-50:],
                **self.stamp(),
            },
        )

    def write_grids(self) -> dict[str, Any]:
        from specmap.report.figures import grids_figure, save_png

        gf, gg = self.grids
        head = self.stamp(window=False)  # a grid does not depend on the window
        jf, jg = {**gf.to_json(), **head}, {**gg.to_json(), **head}
        write_json(self.out / "grid_f.json", jf)
        write_json(self.out / "grid_g.json", jg)
        save_png(grids_figure(jf, jg), self.out / "figures" / "grids.png")
        return {"f": len(gf), "g": len(gg)}

    def write_map(self, **kw: Any) -> dict[str, Any]:
        from specmap.report.figures import save_png, special_figure
        from specmap.special.atlas import PIECES_FORMAT, iter_piece_records
        from specmap.special.banded import costs_entry

        atlas = self.atlas(**kw)
        head = self.stamp(map_settings=self.map_settings(**kw))
        js = {**atlas.to_json(), "costs": costs_entry(atlas), **head}
        if atlas.stats.get("streamed"):
            # written while merging (special.geojson, feature by feature); no pieces file: the
            # distance maps its focused source instead (distance_atlas)
            (self.out / "special_pieces.json").unlink(missing_ok=True)
            write_json(self.out / "special.json", js)
            save_png(special_figure(js, None), self.out / "figures" / "special.png")
            return js
        if js["costs"] is not None:
            # a partial map (a band of tied costs): no pieces file, no distance reads it as its atlas
            (self.out / "special_pieces.json").unlink(missing_ok=True)
        else:
            # the pieces of every tie (what the reduced search walks), so that distance reads the map back
            write_json_streamed(
                self.out / "special_pieces.json",
                {"format": PIECES_FORMAT, "pieces": None, **head},
                "pieces",
                iter_piece_records(atlas),
            )
        write_json(self.out / "special.json", js)
        # streamed feature by feature: the GeoJSON text is never held whole in memory (issue 14 item 3);
        # the stamp is a foreign member of the FeatureCollection (RFC 7946 section 6.1)
        write_json_streamed(
            self.out / "special.geojson",
            {**atlas.geojson_head(), **head},
            "features",
            atlas.iter_features_streamed(),
            plain=True,
            compact=True,
        )
        save_png(special_figure(js, atlas.shape_features()), self.out / "figures" / "special.png")
        return js

    def write_distance(
        self,
        *,
        method: str | None = None,
        degrees: tuple[int, ...] | None = None,
        mesh_check: tuple[int, ...] | None = None,
        jobs: int = 1,
    ) -> dict[str, Any]:
        """Write ``distance.json`` (and the distance map figure); with ``mesh_check``, its ``mesh_term``.

        The study's own distance is written first; when the mesh term runs, the file says so
        (``mesh_term_why_not``) until the re-meshed runs are done and it is rewritten with the block.
        """
        from specmap.report.figures import distance_map_figure, save_png
        from specmap.report.summary import mesh_term_sentence

        settings = self.distance_settings(method=method, degrees=degrees, mesh_check=mesh_check)
        atlas = self.distance_atlas(settings) if settings.method in ("both", "reduced") else None
        result = self.distance(settings, jobs=jobs)
        js = with_simplified_bounds(result.to_json(), *self.simplification)
        # the reduced search reads the study's map (whole or focused), so its settings are a part
        map_used = self.map_settings() if settings.method in ("both", "reduced") else None
        js.update(self.stamp(map_settings=map_used, distance_settings=settings))
        from specmap.meshterm import not_remeshable

        if settings.mesh_check and not_remeshable(self.study) is None:
            js.update(
                mesh_term=None,
                mesh_term_why_not="not finished: the re-meshed runs of [distance] mesh_check are running "
                "or were stopped (a rerun reads back the finished factors)",
            )
            write_json(self.out / "distance.json", js)  # the study's own answer first
        block, why = self.mesh_term(settings, jobs=jobs)  # off, or not re-meshable: (None, why)
        if block is not None:
            block["sentence"] = mesh_term_sentence({"mesh_term": block, "tolerance": js.get("tolerance")})
        js.update(mesh_term=block, mesh_term_why_not=why)
        write_json(self.out / "distance.json", js)
        geo = atlas.to_geojson() if atlas is not None and not callable(atlas) else None
        if js.get("landscape"):
            save_png(distance_map_figure(js, geo), self.out / "figures" / "distance_map.png")
        return js

    def write_perturb(self, *, runs: int | None = None, jobs: int = 1, cluster: str | None = None) -> dict:
        from specmap.io import read_jsonl
        from specmap.perturb import make_base, perturbation_study
        from specmap.report.figures import perturb_figure, save_png

        settings = self.study.perturb_settings(runs=runs)
        shapes: tuple | None = self.shapes
        if any(s is None or not s.has_mesh for s in self.shapes):
            shapes = None if settings.model == "grid" else self.shapes
        distance = None
        if settings.distance and settings.model == "function" and shapes is not None:
            # the base distance of the runs' own settings, with one job as in every run
            distance = self.distance(settings.distance_settings, jobs=1)
        try:
            base = make_base(
                self.grids,
                self.window,
                shapes=shapes,
                atlas=self.atlas(),
                distance=distance,
                settings=settings,
                grid_settings=(self.study.f.grid_settings, self.study.g.grid_settings),
            )
            summary = perturbation_study(
                base,
                settings,
                self.out / "perturb",
                sizes=self.study.perturb.sizes,
                jobs=jobs,
                cluster=cluster,
                progress=self.progress("perturb"),
            )
        except CoreInputError as exc:  # core words ("model", ...); the study file and its key are known here
            raise self.located(exc, "perturb") from None
        from specmap.perturb.store import write_summary

        # the stamp's parts; "fingerprint" keeps its meaning in summary.json: the run set's (= part perturb)
        head = self.stamp(map_settings=settings.map_settings, perturb=str(summary.get("fingerprint")))
        head.pop("fingerprint")
        summary = {**summary, **head}
        write_summary(self.out / "perturb", summary)
        rows = list(read_jsonl(self.out / "perturb" / "runs.jsonl"))
        save_png(perturb_figure(summary, rows), self.out / "figures" / "perturb.png")
        return summary
