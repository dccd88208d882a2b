"""Perturbation run sets: one pure function per run, a parallel and resumable driver.

Layout of a result folder (``DIR`` below is the study's result folder)::

    DIR/perturb/settings.json            settings and fingerprint of the current run set
    DIR/perturb/runs.jsonl               one line per finished run (this run set only)
    DIR/perturb/summary.json             summary of the run set (and of the sweep, if any)
    DIR/perturb/runs-<fp>.jsonl          earlier run sets with other settings, moved aside
    DIR/perturb/settings-<fp>.json
    DIR/perturb/sweep/size-<size>/...    the same files for every size of a sweep

Run sets and fingerprints. A run set is identified by a fingerprint: a hash of the model,
size, seed, window, special-set options (pairs, resolution, method, tol), distance options,
and of the two base grids. Every line of ``runs.jsonl`` carries it. When a study is rerun
with other settings, the current ``runs.jsonl`` and ``settings.json`` are moved aside to
``runs-<old fp>.jsonl`` / ``settings-<old fp>.json`` and a new run set starts; when the
settings return to an earlier fingerprint its file is moved back and resumed. Run sets are
never mixed.

Resuming. Only the parent process writes. Each finished run is appended as one line
(:func:`specmap.io.append_jsonl`: one ``write``, flushed, fsynced) as soon as it arrives.
A rerun skips run indices already present; a torn last line (a kill during the write) is
truncated away before appending. A kill loses at most the runs in flight. A lock file
(``.lock``, ``flock``) keeps two drivers off the same run set.

Seeds. Run ``i`` uses the seed ``SeedSequence(seed).spawn(i + 1)[i]`` (its first 32-bit word),
which depends on ``(seed, i)`` only: results are identical for any number of jobs or workers,
and the sizes of a sweep share their random directions (common random numbers).

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, Math. Methods Appl. Sci. 36 (2013):
   D_k(f, g) <= ||f - g||_inf, hence |D(f', g') - D(f, g)| <= ||f - f'|| + ||g - g'||.
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import json
import math
import os
import time
from collections.abc import Callable, Iterable, Iterator
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np
import shapely
from shapely.ops import unary_union

from specmap.errors import StudyError
from specmap.grids.model import Grid
from specmap.io import append_jsonl, read_json, read_jsonl, to_plain, write_json
from specmap.perturb.models import perturb_grid, perturb_shape
from specmap.perturb.summary import summarize_runs
from specmap.shapes.model import Shape
from specmap.strip import Window

__all__ = [
    "PerturbSettings",
    "PerturbBase",
    "make_base",
    "run_one",
    "run_seed",
    "run_study",
    "set_hausdorff",
    "fingerprint",
    "repair_tail",
    "load_runs",
]

HAUSDORFF_STEPS = 256
"""Special sets are sampled every window diameter / HAUSDORFF_STEPS for the Hausdorff distance."""

STABILITY_SLACK = 1e-9
"""Relative slack (times the value scale) allowed in the stability check, on top of reported
distance tolerances."""

TIME_FIELDS = ("time",)


@dataclass(frozen=True)
class PerturbSettings:
    """Everything that decides the outcome of a run set (besides the base pair).

    Attributes
    ----------
    model : {"function", "grid"}
    size : float
        Sup norm of the function change, or largest contour move.
    runs : int
        Number of runs wanted (not part of the fingerprint: a run set can be extended).
    seed : int
    pairs, resolution, method, tol
        Passed to :func:`specmap.special.special_set`.
    distance : bool
        Recompute the matching distance in every run ("function" model only).
    distance_method : str
    degrees : tuple of int
    dense_resolution : int
    """

    model: str = "function"
    size: float = 1e-3
    runs: int = 20
    seed: int = 1
    pairs: str = "all"
    resolution: int = 121
    method: str = "sweep"
    tol: float | None = None
    distance: bool = False
    distance_method: str = "reduced"
    degrees: tuple[int, ...] = (0, 1, 2)
    dense_resolution: int = 41

    def __post_init__(self) -> None:
        if self.model not in ("function", "grid"):
            raise StudyError(f"unknown perturbation model {self.model!r}", field="perturb.model",
                             fix="use 'function' or 'grid'")
        if not (self.size >= 0 and math.isfinite(self.size)):
            raise StudyError(f"size {self.size!r} is not a finite number >= 0", field="perturb.size",
                             fix="give size = 1e-3 (for example)")
        if self.runs < 0:
            raise StudyError("runs must be >= 0", field="perturb.runs", fix="give runs = 20 (for example)")
        object.__setattr__(self, "degrees", tuple(int(d) for d in self.degrees))

    def to_json(self) -> dict[str, Any]:
        return to_plain(asdict(self))


@dataclass(frozen=True, eq=False)
class PerturbBase:
    """The unperturbed pair and what runs are compared with.

    Attributes
    ----------
    grid_f, grid_g : Grid
    window : Window
    shape_f, shape_g : Shape or None
        Needed by the "function" model.
    total_area : float
        Patch area of the base special set.
    counts : dict
        Pieces of the base special set by kind.
    geometry : shapely geometry
        Union of the component geometries of the base special set, in (a, b).
    distance : dict or None
        ``{"value": float, "by_degree": {k: float}, "tolerance": float}`` of the base pair.
    """

    grid_f: Grid
    grid_g: Grid
    window: Window
    shape_f: Shape | None = None
    shape_g: Shape | None = None
    total_area: float = 0.0
    counts: Any = None
    geometry: Any = None
    distance: dict[str, Any] | None = None

    def summary(self) -> dict[str, Any]:
        return {"total_area": self.total_area, "counts": dict(self.counts or {}),
                "distance": None if self.distance is None else self.distance["value"]}


# --------------------------------------------------------------------------- pure pieces
def atlas_digest(atlas: Any) -> tuple[float, dict[str, int], Any]:
    """(total patch area, counts by kind, all component geometries in (a, b)) of an atlas.

    The geometry is a flat :class:`shapely.GeometryCollection` of the components' parts (no
    noding: only :func:`set_hausdorff` reads it).
    """
    js = atlas.to_json()
    counts = {k: int(js["counts"].get(k, 0)) for k in ("curve", "patch", "point")}
    geoms = [c.geometry for c in atlas.components if c.geometry is not None and not c.geometry.is_empty]
    return float(js["total_area"]), counts, shapely.GeometryCollection(_flat_parts(geoms))


def _flat_parts(geoms: Any) -> list:
    parts = list(shapely.get_parts(np.asarray(geoms, dtype=object))) if len(geoms) else []
    out = []
    while parts:
        nested = [p for p in parts if shapely.get_type_id(p) >= 4]  # Multi* and collections
        out.extend(p for p in parts if shapely.get_type_id(p) < 4 and not p.is_empty)
        parts = list(shapely.get_parts(np.asarray(nested, dtype=object))) if nested else []
    return out


def _sample_set(geom: Any, step: float) -> tuple[np.ndarray, Any]:
    """Points every <= ``step`` along curves and boundaries and on a lattice inside patches,
    thinned to one per cell of side step / 2; plus the union of the patches (or None)."""
    parts = _flat_parts([geom])
    polys = [p for p in parts if shapely.get_type_id(p) == 3]
    pts = [np.empty((0, 2))]
    if parts:
        pts.append(shapely.get_coordinates(shapely.segmentize(np.asarray(parts, dtype=object), step)))
    area = None
    if polys:
        area = unary_union(polys)
        shapely.prepare(area)
        x0, y0, x1, y1 = area.bounds
        X, Y = np.meshgrid(np.arange(x0, x1 + step, step), np.arange(y0, y1 + step, step))
        X, Y = X.ravel(), Y.ravel()
        inside = shapely.intersects_xy(area, X, Y)
        pts.append(np.stack([X[inside], Y[inside]], axis=1))
    P = np.concatenate(pts)
    keys = np.floor(P / (0.5 * step)).astype(np.int64)
    _, first = np.unique(keys, axis=0, return_index=True)
    return P[np.sort(first)], area


def _directed(P: np.ndarray, Q: np.ndarray, q_area: Any) -> float:
    from scipy.spatial import cKDTree

    d, _ = cKDTree(Q).query(P)
    if q_area is not None:
        d[shapely.intersects_xy(q_area, P[:, 0], P[:, 1])] = 0.0
    return float(d.max())


def set_hausdorff(first: Any, second: Any, window: Window) -> float:
    """Hausdorff distance between two special sets (shapely geometries in (a, b)).

    Both sets are sampled: points at most ``window.diameter / HAUSDORFF_STEPS`` apart along
    curves and patch boundaries plus a lattice of that spacing inside patches; a point inside
    the other set's patches is at distance 0. The result is the Hausdorff distance of the
    samples, within about one spacing of the exact value, in O(n log n) for n sample points
    (special sets can have 10^5 segments, too many for pairwise vertex methods).
    Convention: 0 when both sets are empty, the window diameter when exactly one is empty
    (the largest distance two sets in the window can have).
    """
    e1 = first is None or first.is_empty
    e2 = second is None or second.is_empty
    if e1 and e2:
        return 0.0
    if e1 or e2:
        return window.diameter
    step = window.diameter / HAUSDORFF_STEPS
    P, p_area = _sample_set(first, step)
    Q, q_area = _sample_set(second, step)
    return max(_directed(P, Q, q_area), _directed(Q, P, p_area))


def _distance_digest(result: Any) -> dict[str, Any]:
    """value, per-degree values, which degrees are certified, and the reported tolerance.

    A degree whose entry says ``"certified": false`` is only a lower bound (the reduced search
    certifies the max over degrees); the stability check skips such degrees.
    """
    js = result.to_json() if hasattr(result, "to_json") else dict(result)
    by, certified = {}, []
    for k, v in (js.get("by_degree") or {}).items():
        by[str(k)] = float(v["value"] if isinstance(v, dict) else v)
        if not isinstance(v, dict) or v.get("certified", True):
            certified.append(str(k))
    tol = js.get("tolerance", 0.0)
    tol = float(tol) if isinstance(tol, (int, float)) else 0.0
    return {"value": float(js["value"]), "by_degree": by, "certified": certified, "tolerance": tol}


def _special(grid_f: Grid, grid_g: Grid, window: Window, settings: PerturbSettings) -> Any:
    from specmap.special import special_set

    return special_set(grid_f, grid_g, window, pairs=settings.pairs, resolution=settings.resolution,
                       method=settings.method, tol=settings.tol)


def _distance(shape_f: Shape, shape_g: Shape, grids: tuple[Grid, Grid], atlas: Any, window: Window,
              settings: PerturbSettings) -> dict[str, Any]:
    from specmap.distance import matching_distance

    res = matching_distance(shape_f, shape_g, method=settings.distance_method, degrees=settings.degrees,
                            window=window, atlas=atlas, grids=grids, dense_resolution=settings.dense_resolution)
    return _distance_digest(res)


def _pareto(shape: Shape) -> Grid:
    from specmap.grids import pareto_grid

    return pareto_grid(shape)


def run_seed(seed: int, run_index: int) -> int:
    """The seed of run ``run_index``: first 32-bit word of ``SeedSequence(seed).spawn(...)[run_index]``."""
    child = np.random.SeedSequence(seed, spawn_key=(run_index,))
    return int(child.generate_state(1, dtype=np.uint32)[0])


def run_one(base: PerturbBase, run_index: int, seed: int, settings: PerturbSettings) -> dict[str, Any]:
    """Perturb the base pair once, recompute its special set (and distance), compare.

    Parameters
    ----------
    base : PerturbBase
    run_index : int
    seed : int
        Seeds :func:`numpy.random.default_rng`; f and g get independent child streams.
    settings : PerturbSettings

    Returns
    -------
    dict
        ``run``, ``seed``, ``size``, ``model``, ``applied`` ([f, g] sup norm of the change or
        largest contour move), ``total_area``, ``counts``, ``has_patch``, ``hausdorff`` (to the
        base special set, see :func:`set_hausdorff`), ``distance`` (``None`` unless
        ``settings.distance`` and the "function" model: value, base, change, bound, by_degree
        changes), ``stability_ok`` (``None`` without distance) and ``time`` (seconds).

    References
    ----------
    .. [CDFFL13] stability: |D(f', g') - D(f, g)| <= ||f - f'||_inf + ||g - g'||_inf.
    """
    t0 = time.perf_counter()
    ss_f, ss_g = np.random.SeedSequence(seed).spawn(2)
    rng_f, rng_g = np.random.default_rng(ss_f), np.random.default_rng(ss_g)
    shape_f = shape_g = None
    if settings.model == "grid":
        grid_f, moved_f = perturb_grid(base.grid_f, settings.size, rng_f)
        grid_g, moved_g = perturb_grid(base.grid_g, settings.size, rng_g)
    else:
        if base.shape_f is None or base.shape_g is None:
            raise StudyError("the 'function' model needs the shapes of f and g", field="perturb.model",
                             fix="use model = 'grid' for grid-only studies")
        shape_f, moved_f = perturb_shape(base.shape_f, settings.size, rng_f)
        shape_g, moved_g = perturb_shape(base.shape_g, settings.size, rng_g)
        grid_f, grid_g = _pareto(shape_f), _pareto(shape_g)
    atlas = _special(grid_f, grid_g, base.window, settings)
    area, counts, geometry = atlas_digest(atlas)
    record: dict[str, Any] = {
        "run": int(run_index),
        "seed": int(seed),
        "model": settings.model,
        "size": float(settings.size),
        "applied": [moved_f, moved_g],
        "total_area": area,
        "counts": counts,
        "has_patch": counts["patch"] > 0,
        "hausdorff": set_hausdorff(geometry, base.geometry, base.window),
        "distance": None,
        "stability_ok": None,
    }
    if settings.distance and settings.model == "function" and base.distance is not None:
        new = _distance(shape_f, shape_g, (grid_f, grid_g), atlas, base.window, settings)
        record["distance"], record["stability_ok"] = stability_check(base.distance, new, moved_f + moved_g)
    record["time"] = time.perf_counter() - t0
    return record


def stability_check(before: dict[str, Any], after: dict[str, Any], bound: float) -> tuple[dict, bool]:
    """Compare two distance digests against the stability bound [CDFFL13].

    The allowed change is ``bound`` plus both reported tolerances plus
    ``STABILITY_SLACK * max(1, |D|)`` for rounding; it is checked for the overall value and for
    every degree certified in both (uncertified degrees are lower bounds only).

    Returns
    -------
    (digest, ok) : (dict, bool)
    """
    slack = before["tolerance"] + after["tolerance"] + STABILITY_SLACK * max(1.0, abs(before["value"]))
    change = after["value"] - before["value"]
    by = {k: after["by_degree"][k] - v for k, v in before["by_degree"].items() if k in after["by_degree"]}
    both = set(before.get("certified", by)) & set(after.get("certified", by))
    ok = abs(change) <= bound + slack and all(abs(d) <= bound + slack for k, d in by.items() if k in both)
    digest = {"value": after["value"], "base": before["value"], "change": change, "bound": bound,
              "slack": slack, "by_degree_change": by, "certified_degrees": sorted(both)}
    return digest, bool(ok)


# --------------------------------------------------------------------------- base and fingerprint
def make_base(grids: tuple[Grid, Grid], window: Window, *, shapes: tuple[Shape, Shape] | None = None,
              atlas: Any = None, distance: Any = None, settings: PerturbSettings | None = None) -> PerturbBase:
    """Assemble the base pair, computing its special set (and distance) when not given.

    Parameters
    ----------
    grids : (Grid, Grid)
    window : Window
    shapes : (Shape, Shape), optional
    atlas : Atlas, optional
        Base special set; computed with ``settings`` when missing.
    distance : DistanceResult or dict, optional
        Base matching distance; computed when ``settings.distance`` asks for it and it is missing.
    settings : PerturbSettings, optional
    """
    settings = settings or PerturbSettings()
    if settings.model == "function" and (shapes is None or any(s is None or not s.has_mesh for s in shapes)):
        raise StudyError("the 'function' model needs f and g as surfaces or meshes", field="perturb.model",
                         fix="use model = 'grid' for studies given by grid files")
    gf, gg = grids
    if atlas is None:
        atlas = _special(gf, gg, window, settings)
    area, counts, geometry = atlas_digest(atlas)
    sf, sg = shapes if shapes is not None else (None, None)
    dist = None
    if settings.distance and settings.model == "function" and sf is not None:
        dist = _distance_digest(distance) if distance is not None else _distance(sf, sg, (gf, gg), atlas,
                                                                                 window, settings)
    return PerturbBase(gf, gg, window, sf, sg, area, counts, geometry, dist)


def _grid_hash(grid: Grid) -> str:
    text = json.dumps(to_plain(grid.to_json()["contours"]), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def fingerprint(base: PerturbBase, settings: PerturbSettings) -> str:
    """16 hex digits identifying a run set: settings (except ``runs``), window and both grids."""
    data = settings.to_json()
    data.pop("runs")
    if not (settings.distance and settings.model == "function"):
        for key in ("distance_method", "degrees", "dense_resolution"):
            data.pop(key)
    data["window"] = base.window.to_json()
    data["grids"] = [_grid_hash(base.grid_f), _grid_hash(base.grid_g)]
    text = json.dumps(data, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


# --------------------------------------------------------------------------- files
def repair_tail(path: Path) -> int:
    """Truncate a torn last line (bytes after the last newline); return the bytes removed."""
    if not path.exists():
        return 0
    size = path.stat().st_size
    if size == 0:
        return 0
    with path.open("rb+") as fh:
        fh.seek(-1, os.SEEK_END)
        if fh.read(1) == b"\n":
            return 0
        # Scan backwards for the last newline.
        pos, chunk = size, 4096
        keep = 0
        while pos > 0:
            start = max(0, pos - chunk)
            fh.seek(start)
            buf = fh.read(pos - start)
            i = buf.rfind(b"\n")
            if i >= 0:
                keep = start + i + 1
                break
            pos = start
        fh.truncate(keep)
        fh.flush()
        os.fsync(fh.fileno())
    return size - keep


def load_runs(path: Path, fp: str | None = None) -> dict[int, dict[str, Any]]:
    """Complete records of a runs file by run index (first wins), optionally of one fingerprint."""
    out: dict[int, dict[str, Any]] = {}
    for rec in read_jsonl(path):
        if not isinstance(rec, dict) or "run" not in rec:
            continue
        if fp is not None and rec.get("fingerprint") != fp:
            continue
        out.setdefault(int(rec["run"]), rec)
    return out


def _switch_run_set(folder: Path, fp: str, settings_json: dict[str, Any]) -> None:
    """Make ``runs.jsonl`` hold the run set ``fp``: move another set aside, bring ``fp`` back."""
    folder.mkdir(parents=True, exist_ok=True)
    runs, sett = folder / "runs.jsonl", folder / "settings.json"
    old_fp = None
    if sett.is_file():
        with contextlib.suppress(ValueError, OSError):
            old_fp = read_json(sett).get("fingerprint")
    if old_fp is None and runs.exists():
        first = next(iter(read_jsonl(runs)), None)
        old_fp = first.get("fingerprint") if first else None
    if old_fp != fp:
        if runs.exists():
            if old_fp is None:
                old_fp = "unknown-" + time.strftime("%Y%m%d%H%M%S")
            aside = folder / f"runs-{old_fp}.jsonl"
            if aside.exists():  # same old set moved aside before: merge, keeping each run once
                repair_tail(runs)
                have = load_runs(aside)
                for idx, rec in sorted(load_runs(runs).items()):
                    if idx not in have:
                        append_jsonl(aside, rec)
                runs.unlink()
            else:
                os.replace(runs, aside)
            if sett.is_file():
                os.replace(sett, folder / f"settings-{old_fp}.json")
        back = folder / f"runs-{fp}.jsonl"
        if back.exists():
            os.replace(back, runs)
            with contextlib.suppress(FileNotFoundError):
                (folder / f"settings-{fp}.json").unlink()
    write_json(sett, settings_json)


@contextlib.contextmanager
def _locked(folder: Path) -> Iterator[None]:
    folder.mkdir(parents=True, exist_ok=True)
    fd = os.open(folder / ".lock", os.O_RDWR | os.O_CREAT, 0o644)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise StudyError("another perturbation study is writing this folder", file=str(folder),
                             field="perturb", fix="wait for it to finish or use another --out folder") from None
        yield
    finally:
        os.close(fd)


# --------------------------------------------------------------------------- execution
def _results(tasks: list, jobs: int, cluster: str | None) -> Iterator[dict[str, Any]]:
    import joblib

    if cluster is None:
        yield from joblib.Parallel(n_jobs=jobs, return_as="generator_unordered")(tasks)
        return
    try:
        import distributed
    except ImportError:
        raise StudyError("a cluster needs dask.distributed, which is not installed", field="--cluster",
                         fix="pip install 'specmap[dask]' or run without --cluster") from None
    try:
        client = distributed.Client(cluster, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise StudyError(f"cannot reach the Dask scheduler {cluster!r} ({exc})", field="--cluster",
                         fix="start a scheduler (dask scheduler) or check the address tcp://host:port") from None
    try:
        with joblib.parallel_backend("dask"):
            yield from joblib.Parallel(n_jobs=-1, return_as="generator_unordered")(tasks)
    finally:
        client.close()


def run_study(base: PerturbBase, settings: PerturbSettings, folder: str | Path, *, jobs: int = 1,
              cluster: str | None = None, progress: Callable[[int, int], None] | None = None) -> dict[str, Any]:
    """Run (or resume) one run set and write its records and summary into ``folder``.

    Parameters
    ----------
    base : PerturbBase
        From :func:`make_base`; grid-only bases work with the "grid" model.
    settings : PerturbSettings
    folder : path
        Run-set folder, e.g. ``DIR/perturb``; gets ``runs.jsonl``, ``settings.json``,
        ``summary.json``.
    jobs : int
        joblib workers (processes); results do not depend on it.
    cluster : str, optional
        ``"tcp://host:port"`` of a Dask scheduler: run through joblib's dask backend instead.
    progress : callable(done, total), optional

    Returns
    -------
    dict
        The summary: ``runs``, ``size``, ``model``, ``base`` {``total_area``, ``counts``},
        ``runs_with_patch``, ``runs_with_patch_ci95`` (Wilson), ``total_area`` and ``hausdorff``
        {``mean``, ``max``}, ``distance`` (or None), ``stability_violations``, ``verdict``,
        ``sweep`` (None here), ``runs_per_minute``, ``fingerprint``, ``settings``.

    Raises
    ------
    StudyError
        Bad settings, a missing Dask, an unreachable scheduler, or a folder already in use.
    """
    folder = Path(folder)
    fp = fingerprint(base, settings)
    settings_json = {"fingerprint": fp, "settings": settings.to_json(), "window": base.window.to_json(),
                     "base": base.summary()}
    runs_path = folder / "runs.jsonl"
    with _locked(folder):
        _switch_run_set(folder, fp, settings_json)
        repair_tail(runs_path)
        done = load_runs(runs_path, fp)
        total = settings.runs
        todo = [i for i in range(total) if i not in done]
        if progress is not None:
            progress(min(len(done), total), total)
        t0 = time.perf_counter()
        new = 0
        if todo:
            from joblib import delayed

            tasks = [delayed(run_one)(base, i, run_seed(settings.seed, i), settings) for i in todo]
            for rec in _results(tasks, jobs, cluster):
                idx = int(rec["run"])
                if idx in done:
                    continue
                rec = {**rec, "fingerprint": fp}
                append_jsonl(runs_path, rec)
                done[idx] = json.loads(json.dumps(to_plain(rec)))
                new += 1
                if progress is not None:
                    progress(sum(1 for i in done if i < total), total)
        elapsed = time.perf_counter() - t0
        records = [done[i] for i in sorted(done) if i < total]
        if new:
            rate, basis = 60.0 * new / elapsed, f"wall clock of the last invocation ({new} runs, {jobs} jobs)"
        else:
            busy = sum(float(r.get("time", 0.0)) for r in records)
            rate = 60.0 * len(records) / busy if busy > 0 else None
            basis = "sum of recorded run times (one worker)"
        summary = summarize_runs(records, base=base.summary(), size=settings.size, model=settings.model,
                                 window_area=base.window.area, runs_per_minute=rate,
                                 runs_per_minute_basis=basis)
        summary["fingerprint"] = fp
        summary["settings"] = settings.to_json()
        summary["window"] = base.window.to_json()
        write_json(folder / "summary.json", summary)
    return summary


def records_without_time(records: Iterable[dict[str, Any]]) -> list[dict[str, Any]]:
    """Records sorted by run index with timing fields removed (for reproducibility checks)."""
    out = [{k: v for k, v in r.items() if k not in TIME_FIELDS} for r in records]
    return sorted(out, key=lambda r: int(r["run"]))
