"""The special-set atlas in tiles: bounded memory, parallel tiles, resumable runs.

The window's lattice (``n_a x n_b`` nodes) is split into ``na x nb`` blocks of cells, the
tile *cores*; neighbouring cores share their border nodes, so all tiles sample one global
lattice. Each tile is mapped by :func:`specmap.special.compute.special_set` on its core plus
a *halo* of one cell on every inner side (the detection keeps a crossing only when a cell
beside its edge sees the tie, and a patch's border sub-cells are those beside a patch
cell: both need the cells across the border), then clipped to its core
(:func:`tile_pieces`). :func:`specmap.special.merge.merge_items` joins the clipped pieces
exactly, and the components are recomputed over the whole window (:func:`tiled_special_set`).

Tiles run in ``jobs`` local processes (joblib) or on a Dask cluster (the driver of the
perturbation study, :mod:`specmap.perturb.execution`); each finished tile is written to
``folder/tile_<row>_<col>.json`` (atomic, fsynced, with ``"done": true``) as it arrives,
so an interrupted map resumes with the missing tiles only. The result does not depend on
the number of workers nor on the order in which tiles finish.

This module is an I/O edge for its tile folder only (:func:`write_tile`, finished tiles read back
by :func:`specmap.special.stream.read_tile`); :func:`tile_pieces` and :func:`plan_tiles` are pure.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching distance for 2D
   filtering functions", J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import hashlib
import json
import time
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import shapely

from specmap.gcpause import paused
from specmap.grids.model import Grid
from specmap.io import read_json, write_json
from specmap.settings import MapSettings
from specmap.special.atlas import Atlas
from specmap.special.lattice import Lattice
from specmap.special.merge import (
    CURVE,
    PATCH,
    POINT,
    TileItem,
    TileResult,
    as_pieces,
    clip_lines,
    merge_items,
)
from specmap.special.pairs import PairTable, pair_table
from specmap.strip import Window

FORMAT = "specmap-tile/1"


@dataclass(frozen=True)
class Tile:
    """One tile: its core and halo as node index ranges of the global lattice (inclusive).

    Attributes
    ----------
    row, col : int
        Position along b and along a.
    core : (i0, i1, j0, j1)
        Nodes i0..i1 along a and j0..j1 along b of the core.
    halo : (i0, i1, j0, j1)
        The core widened by one cell on each side that has a neighbour.
    last : (bool, bool)
        Whether the tile is the last along a and along b (its far border is the window's).
    """

    row: int
    col: int
    core: tuple[int, int, int, int]
    halo: tuple[int, int, int, int]
    last: tuple[bool, bool]

    @property
    def name(self) -> str:
        return f"tile_{self.row}_{self.col}"

    @property
    def cells(self) -> int:
        """Cells of the halo (what the tile computes)."""
        i0, i1, j0, j1 = self.halo
        return (i1 - i0) * (j1 - j0)


def _cuts(n_nodes: int, parts: int) -> list[int]:
    return [int(round(x)) for x in np.linspace(0, n_nodes - 1, parts + 1)]


def plan_tiles(n_a: int, n_b: int, tiles: tuple[int, int]) -> tuple[Tile, ...]:
    """Tiles of an ``n_a x n_b`` lattice split ``tiles = (na, nb)`` ways (cells as even as can be).

    Examples
    --------
    >>> [t.core for t in plan_tiles(5, 3, (2, 1))]
    [(0, 2, 0, 2), (2, 4, 0, 2)]
    >>> plan_tiles(5, 3, (2, 1))[0].halo
    (0, 3, 0, 2)
    """
    na, nb = int(tiles[0]), int(tiles[1])
    if na < 1 or nb < 1 or na > n_a - 1 or nb > n_b - 1:
        raise ValueError(f"tiles {na} x {nb} do not fit a lattice of {n_a - 1} x {n_b - 1} cells")
    ca, cb = _cuts(n_a, na), _cuts(n_b, nb)
    out = []
    for r in range(nb):
        for c in range(na):
            core = (ca[c], ca[c + 1], cb[r], cb[r + 1])
            halo = (
                max(core[0] - 1, 0),
                min(core[1] + 1, n_a - 1),
                max(core[2] - 1, 0),
                min(core[3] + 1, n_b - 1),
            )
            out.append(Tile(r, c, core, halo, (c == na - 1, r == nb - 1)))
    return tuple(out)


def tile_costs(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    lattice: tuple[int, int],
    plan: tuple[Tile, ...],
    settings: MapSettings,
    *,
    nodes: int = 4,
) -> list[int]:
    """Relative work of each tile of ``plan``: its crossings on a coarse ``nodes x nodes`` lattice (pure).

    The tie curves a tile maps cross the edges of any lattice over its halo in proportion to
    their length, and the work of a tile is mostly its crossings, so the count on a coarse
    lattice ranks the tiles (on the N = 40 pair of ``tests/benchmarks/bench_tiles.py`` the four
    2 x 2 tiles take 0.057-0.069 s per thousand coarse crossings). Costs about ``nodes / n`` of a
    map on ``n`` nodes a side. Used to start the largest tiles first when they run in parallel.
    """
    from specmap.special.compute import default_tolerance
    from specmap.special.detect import find_crossings, sample

    table = pair_table(grid_f, grid_g, settings.pairs)
    tol = default_tolerance(grid_f, grid_g) if settings.tol is None else float(settings.tol)
    lat = Lattice.of(window, *lattice)
    out = []
    for t in plan:
        i0, i1, j0, j1 = t.halo
        coarse = Lattice(
            np.linspace(lat.av[i0], lat.av[i1], nodes), np.linspace(lat.bv[j0], lat.bv[j1], nodes)
        )
        codes, _, _ = find_crossings(table, sample(table, coarse), tol=tol, snap=1e-3 * tol)
        out.append(int(len(codes)))
    return out


def tile_atlas_items(
    grid_f: Grid,
    grid_g: Grid,
    frame: Lattice,
    halo: tuple[int, int, int, int],
    settings: MapSettings,
    *,
    sub: int = 8,
    seed: int = 0,
) -> tuple[PairTable, list[tuple[int, str, Any]], dict[str, Any]]:
    """Tie pieces (code, kind, geometry) of the cells ``halo`` of the lattice ``frame`` (pure).

    The steps of :func:`specmap.special.compute.special_set` (sampling, detection, refinement,
    tracing, patches, the reading) on the nodes ``frame.av[i0..i1]``, ``frame.bv[j0..j1]``
    themselves (not a new lattice of the sub-window, whose nodes would differ in the last
    bits), with every tolerance scaled by ``frame`` (:func:`specmap.special.trace.refine`):
    what a tile finds in a cell is what the whole window finds there. No components.
    """
    from specmap.special.compute import default_tolerance
    from specmap.special.detect import find_crossings, sample
    from specmap.special.patches import patch_cells, patch_polygons
    from specmap.special.reading import points_reading
    from specmap.special.reference import naive_crossings
    from specmap.special.trace import refine, trace

    table = pair_table(grid_f, grid_g, settings.pairs)
    tol = default_tolerance(grid_f, grid_g) if settings.tol is None else float(settings.tol)
    snap = 1e-3 * tol
    i0, i1, j0, j1 = halo
    lat = Lattice(np.asarray(frame.av[i0 : i1 + 1]), np.asarray(frame.bv[j0 : j1 + 1]))
    samples = sample(table, lat)
    if settings.method == "sweep":
        codes, edges, stats = find_crossings(table, samples, tol=tol, snap=snap)
    else:
        codes, edges, stats = naive_crossings(table, samples, tol=tol, snap=snap)
    points = refine(table, samples, codes, edges, snap=snap, frame=frame)
    traced = trace(table, samples, codes, edges, points, snap=snap, tol=tol, frame=frame)
    pcodes, pcells, pstats = patch_cells(table, samples, tol, seed=seed)
    polys = patch_polygons(table, samples, pcodes, pcells, tol, sub=sub)
    items: list[tuple[int, str, Any]] = []
    for tt in traced:
        if tt.lines:
            items.append((tt.code, CURVE, shapely.MultiLineString(list(tt.lines))))
        if tt.points:
            items.append((tt.code, POINT, shapely.MultiPoint(np.array(tt.points))))
    for code, poly in sorted(polys.items()):
        if not poly.is_empty:
            items.append((code, PATCH, poly))
    removed = {"curves": 0, "points": 0, "patches": 0}
    if settings.reading == "points":
        items, removed = points_reading(table, items)
    stats = {**stats, **pstats, **{f"coincident_{k}_removed": v for k, v in removed.items()}}
    return table, items, stats


@paused
def tile_pieces(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    resolution: tuple[int, int],
    tile: Tile,
    settings: MapSettings,
    *,
    sub: int = 8,
    seed: int = 0,
) -> TileResult:
    """Map one tile (core + halo, :func:`tile_atlas_items`) and clip its pieces to the core (pure).

    The reading is applied in the tile: it is local (:mod:`specmap.special.reading`).
    Clipping: curve segments by their midpoint (:func:`specmap.special.merge.clip_lines`,
    half-open core), points by the half-open core (closed on the window's far borders),
    patches by intersection with the core box.
    """
    t0 = time.perf_counter()
    lat = Lattice.of(window, *resolution)
    av, bv = lat.av, lat.bv
    table, found, tstats = tile_atlas_items(grid_f, grid_g, lat, tile.halo, settings, sub=sub, seed=seed)
    c0, c1, d0, d1 = tile.core
    # the core's inner borders; its sides on the window's border are open (boundary points of
    # curves may lie a little outside the window, as in the one-piece atlas)
    inf = float("inf")
    box = (
        float(av[c0]) if c0 > 0 else -inf,
        float(bv[d0]) if d0 > 0 else -inf,
        float(av[c1]) if c1 < lat.n_a - 1 else inf,
        float(bv[d1]) if d1 < lat.n_b - 1 else inf,
    )
    big = 10.0 * window.diameter
    core_box = shapely.box(
        max(box[0], window.a[0] - big),
        max(box[1], window.b[0] - big),
        min(box[2], window.a[1] + big),
        min(box[3], window.b[1] + big),
    )
    items: list[TileItem] = []
    curve_k = [k for k, it in enumerate(found) if it[1] == CURVE]
    clipped_curves = clip_pieces([found[k][2] for k in curve_k], box)
    kept = [(k, got) for k, got in zip(curve_k, clipped_curves, strict=True) if got is not None]
    labels = _line_labels([got[0] for _, got in kept], tile, lat, window)
    for (k, got), lab in zip(kept, labels, strict=True):
        items.append(TileItem(int(found[k][0]), CURVE, got[0], got[1], lab))
    for code, kind, g in found:
        if kind == POINT:
            xy = shapely.get_coordinates(g)
            ok_a = (xy[:, 0] >= box[0]) & (xy[:, 0] < box[2])
            ok_b = (xy[:, 1] >= box[1]) & (xy[:, 1] < box[3])
            if (ok_a & ok_b).any():
                items.append(TileItem(int(code), POINT, shapely.MultiPoint(xy[ok_a & ok_b])))
        elif kind != CURVE:
            clipped = shapely.intersection(g, core_box)
            polys = [p for p in shapely.get_parts(clipped) if p.geom_type == "Polygon" and p.area > 0]
            if polys:
                items.append(TileItem(int(code), kind, shapely.union_all(polys)))
    stats = {k: v for k, v in tstats.items() if isinstance(v, (int, float)) and not isinstance(v, bool)}
    stats["tile_seconds"] = round(time.perf_counter() - t0, 4)
    stats["halo_cells"] = tile.cells
    return TileResult(tile.name, tuple(items), stats)


def _line_labels(geoms: list[Any], tile: Tile, frame: Lattice, window: Window) -> list[tuple[int, ...]]:
    """Component labels of the lines of the clipped curve pieces ``geoms`` (per piece, per line).

    :func:`specmap.special.components.lattice_links` on the tile's cells (chords interleaving
    in a cell, shared vertices to ``1e-9`` of the whole window's diameter), labels = the
    representative line of each line's group.
    """
    from specmap.special.components import lattice_links

    if not geoms:
        return []
    parts, pidx = shapely.get_parts(np.array(geoms, dtype=object), return_index=True)
    i0, i1, j0, j1 = tile.halo
    lat = Lattice(np.asarray(frame.av[i0 : i1 + 1]), np.asarray(frame.bv[j0 : j1 + 1]))
    _, rep = lattice_links(list(parts), 1e-9 * max(window.diameter, 1e-300), lat)
    bounds = np.searchsorted(pidx, np.arange(len(geoms) + 1))
    return [tuple(rep[bounds[k] : bounds[k + 1]].tolist()) for k in range(len(geoms))]


def clip_pieces(
    geoms: list[Any], box: tuple[float, float, float, float]
) -> list[tuple[Any, tuple[tuple[bool, bool], ...]] | None]:
    """Curve pieces (MultiLineStrings) clipped to ``box``: (geometry, cuts per line) or None when empty.

    A piece whose vertices all lie in the closed box is kept as it is (the usual case, tested
    for all pieces at once); the others go through :func:`specmap.special.merge.clip_lines`.
    """
    if not geoms:
        return []
    xy, idx = shapely.get_coordinates(np.array(geoms, dtype=object), return_index=True)
    out_v = (xy[:, 0] < box[0]) | (xy[:, 0] > box[2]) | (xy[:, 1] < box[1]) | (xy[:, 1] > box[3])
    whole = np.bincount(idx, weights=out_v, minlength=len(geoms)) == 0
    n_lines = shapely.get_num_geometries(np.array(geoms, dtype=object))
    out: list[tuple[Any, tuple[tuple[bool, bool], ...]] | None] = [
        (g, ((False, False),) * int(n)) if w else None
        for g, w, n in zip(geoms, whole.tolist(), n_lines.tolist(), strict=True)
    ]
    cut = np.nonzero(~whole)[0]
    runs, cuts, owner = clip_lines([geoms[k] for k in cut.tolist()], box)
    if runs.size:
        order = np.argsort(owner, kind="stable")
        u, first = np.unique(owner[order], return_index=True)
        bounds = np.append(first, order.size)
        for j, k in enumerate(u.tolist()):
            sel = order[bounds[j] : bounds[j + 1]]
            out[int(cut[k])] = (shapely.multilinestrings(runs[sel]), tuple(cuts[i] for i in sel.tolist()))
    return out


def fingerprint(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    resolution: tuple[int, int],
    tiles: tuple[int, int],
    settings: MapSettings,
) -> str:
    """SHA-256 of everything a tile's content depends on (grids, window, lattice, tiles, settings)."""
    blob = json.dumps(
        {
            "f": grid_f.to_json(),
            "g": grid_g.to_json(),
            "window": window.to_json(),
            "resolution": list(resolution),
            "tiles": list(tiles),
            "pairs": settings.pairs,
            "method": settings.method,
            "tol": settings.tol,
        },
        sort_keys=True,
        default=float,
    )
    return hashlib.sha256(blob.encode()).hexdigest()[:16]


def write_tile(folder: Path, fp: str, result: TileResult) -> Path:
    """Write one finished tile (atomic and fsynced; ``"done": true`` marks it complete)."""
    folder.mkdir(parents=True, exist_ok=True)
    path = write_json(
        folder / f"{result.name}.json",
        {"format": FORMAT, "fingerprint": fp, "done": True, "result": result.to_json()},
    )
    # the statistics alone, written after the tile: a streamed rerun reads these instead of parsing
    # every finished tile whole (at 80 contours, 4.9 GB of tile files and about 510 s)
    write_json(
        folder / f"stats_{result.name}.json",
        {"format": FORMAT, "fingerprint": fp, "bytes": path.stat().st_size, "stats": result.stats},
    )
    return path


def _done_stats(folder: Path, fp: str, names: set[str]) -> dict[str, dict[str, Any]]:
    """Statistics of the finished tiles of ``folder`` among ``names`` from their ``stats_*.json``
    files, where the tile file is there with the recorded size (a missing, stale or torn sidecar
    leaves its tile to :func:`_iter_done`)."""
    out: dict[str, dict[str, Any]] = {}
    if not folder.is_dir():
        return out
    for name in sorted(names):
        side, tile = folder / f"stats_{name}.json", folder / f"{name}.json"
        try:
            d = read_json(side)
            ok = (
                isinstance(d, dict)
                and d.get("format") == FORMAT
                and d.get("fingerprint") == fp
                and isinstance(d.get("stats"), dict)
                and tile.stat().st_size == d.get("bytes")
            )
        except (OSError, ValueError, TypeError):
            ok = False
        if ok:
            out[name] = d["stats"]
    return out


@paused
def tiled_special_set(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    *,
    tiles: tuple[int, int],
    settings: MapSettings | None = None,
    resolution: int | tuple[int, int] | None = None,
    jobs: int = 1,
    cluster: str | None = None,
    folder: str | Path | None = None,
    progress: Callable[[int, int], None] | None = None,
    sub: int = 8,
    seed: int = 0,
) -> Atlas:
    """The special set of (Γ(f), Γ(g)) in ``window``, computed in ``tiles = (na, nb)`` tiles.

    The same atlas as :func:`specmap.special.compute.special_set` on the whole window (same
    pieces per tie, curve lengths, patch areas and components, to rounding): see the module
    text and :mod:`specmap.special.merge`.

    Parameters
    ----------
    grid_f, grid_g : Grid
    window : Window
    tiles : (na, nb)
        Tiles along a and along b.
    settings : MapSettings, optional
        ``pairs``, ``method``, ``tol``, ``reading`` (and ``resolution`` unless given); default
        ``MapSettings()``.
    resolution : int or (n_a, n_b), optional
        Lattice nodes of the whole window; default ``settings.resolution``.
    jobs : int
        Local worker processes (joblib); ignored with ``cluster``.
    cluster : str, optional
        Address of a Dask scheduler (``tcp://host:port``).
    folder : path, optional
        Tile folder: finished tiles are written there and reused by a rerun (same
        fingerprint of grids, window, lattice, tiles and settings).
    progress : callable (done, total), optional
        Called with tiles done / total.
    sub, seed : int
        As in :func:`~specmap.special.compute.special_set`.

    Returns
    -------
    Atlas
        ``stats`` sums the tiles' counters (cells of the halos counted in each tile that
        computes them) and adds ``tiles`` (grid, count, reused, seconds per tile).
    """
    from specmap.special.components import components_with
    from specmap.special.compute import with_reasons

    t_start = time.perf_counter()
    run = _map_tiles(
        grid_f, grid_g, window, tiles, settings, resolution, folder, jobs, cluster, progress, sub, seed, True
    )
    settings, (n_a, n_b), tol, plan, done = run.settings, run.lattice, run.tol, run.plan, run.done
    tile_stats, reused = run.tile_stats, run.reused
    t_merge = time.perf_counter()
    table = pair_table(grid_f, grid_g, settings.pairs)
    items, line_labels = merge_items(
        (r for r in (done.pop(t.name) for t in plan) if r is not None), window.diameter
    )
    pieces = as_pieces(table, items)
    # line/line contacts from the tiles' labels (united across borders); patches and points as usual
    order = np.concatenate(
        [line_labels[c] for c, k, _ in items if k == CURVE] or [np.zeros(0, np.int64)]
    ).astype(np.int64)
    del line_labels

    def links(lines: list, eps: float) -> tuple[np.ndarray, np.ndarray]:
        if len(lines) != order.size:
            raise AssertionError("tile labels do not match the merged lines")
        u, first = np.unique(order, return_index=True)
        return np.arange(order.size), first[np.searchsorted(u, order)]

    comps = with_reasons(components_with(tuple(pieces), window, links), pieces, table, tol)
    stats = {
        **_summed_stats(table, tile_stats),
        "tie_curves": int(
            shapely.get_num_geometries(np.array([g for _, k, g in items if k == CURVE], dtype=object)).sum()
        ),
        "ties_with_curves": sum(1 for _, k, _ in items if k == CURVE),
        "ties_with_patches": sum(1 for _, k, _ in items if k == "patch"),
        "pieces": len(pieces),
        "reading": settings.reading,
        "snap": 1e-3 * tol,
        "tiles": _tiles_stats(tiles, plan, reused, tile_stats, t_merge),
        "seconds": round(time.perf_counter() - t_start, 4),
    }
    return Atlas(window, tol, settings.pairs, settings.method, (n_a, n_b), tuple(pieces), comps, stats)


@dataclass(frozen=True)
class _TileRun:
    """The tiles of one map, mapped or read back (:func:`_map_tiles`)."""

    settings: MapSettings
    lattice: tuple[int, int]
    tol: float
    plan: tuple[Tile, ...]
    fp: str
    done: dict[str, TileResult | None]
    tile_stats: list[dict[str, Any]]
    reused: int


def _map_tiles(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    tiles: tuple[int, int],
    settings: MapSettings | None,
    resolution: int | tuple[int, int] | None,
    folder: str | Path | None,
    jobs: int,
    cluster: str | None,
    progress: Callable[[int, int], None] | None,
    sub: int,
    seed: int,
    keep: bool,
) -> _TileRun:
    """Settings, plan and fingerprint of a tiled map, and its tiles by :func:`run_tiles` (held in
    memory with ``keep``, else on disk in ``folder``): what both merges start from."""
    settings, lattice, tol = _settings(grid_f, grid_g, settings, resolution)
    plan = plan_tiles(lattice[0], lattice[1], tiles)
    fp = fingerprint(grid_f, grid_g, window, lattice, tiles, settings)
    store = Path(folder) if folder is not None else None
    done, by_name, reused = run_tiles(
        grid_f,
        grid_g,
        window,
        lattice,
        plan,
        settings,
        fp,
        store,
        jobs=jobs,
        cluster=cluster,
        progress=progress,
        sub=sub,
        seed=seed,
        keep=keep,
    )
    return _TileRun(settings, lattice, tol, plan, fp, done, [by_name[t.name] for t in plan], reused)


def _settings(
    grid_f: Grid, grid_g: Grid, settings: MapSettings | None, resolution: int | tuple[int, int] | None
) -> tuple[MapSettings, tuple[int, int], float]:
    """The map settings with the tolerance resolved, the lattice (n_a, n_b) and the tolerance."""
    from specmap.special.compute import default_tolerance

    settings = MapSettings() if settings is None else settings
    res = settings.resolution if resolution is None else resolution
    n_a, n_b = (res, res) if isinstance(res, int) else (int(res[0]), int(res[1]))
    tol = default_tolerance(grid_f, grid_g) if settings.tol is None else float(settings.tol)
    settings = MapSettings(
        pairs=settings.pairs, resolution=n_a, method=settings.method, tol=tol, reading=settings.reading
    )
    return settings, (n_a, n_b), tol


def run_tiles(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    lattice: tuple[int, int],
    plan: tuple[Tile, ...],
    settings: MapSettings,
    fp: str,
    store: Path | None,
    *,
    jobs: int = 1,
    cluster: str | None = None,
    progress: Callable[[int, int], None] | None = None,
    sub: int = 8,
    seed: int = 0,
    keep: bool = True,
) -> tuple[dict[str, TileResult | None], dict[str, dict[str, Any]], int]:
    """Map the tiles of ``plan`` not yet finished in ``store``; (results, statistics, tiles reused).

    Results and statistics are keyed by tile name.

    Each result is written to ``store`` as it arrives. With ``keep=False`` (``store``
    required) results are dropped once written and the dict holds ``None``: the streamed
    merge reads them back one at a time (:mod:`specmap.special.stream`), and only the
    tiles' statistics (``stats``) stay in memory.
    """
    if not keep and store is None:
        raise ValueError("a tile folder is needed when tiles are not kept in memory")
    done: dict[str, TileResult | None] = {}
    stats: dict[str, dict[str, Any]] = {}
    if store is not None:
        names = {t.name for t in plan}
        if not keep:  # the streamed merge reads the tiles later: their statistics suffice here
            stats.update(_done_stats(store, fp, names))
            done.update(dict.fromkeys(stats))
        for name, res in _iter_done(store, fp, names - set(stats)):
            done[name] = res if keep else None
            stats[name] = res.stats
    reused = sum(1 for t in plan if t.name in done)
    todo = [t for t in plan if t.name not in done]
    if len(todo) > 1 and (jobs > 1 or cluster):  # largest first: the last tile to start is a small one
        cost = tile_costs(grid_f, grid_g, window, lattice, tuple(todo), settings)
        todo = [todo[k] for k in sorted(range(len(todo)), key=lambda k: -cost[k])]
    if progress is not None:
        progress(len(plan) - len(todo), len(plan))
    if todo:
        from joblib import delayed

        from specmap.floatwarn import Counted, unwrap
        from specmap.perturb.execution import _results as results_of

        tasks = [  # Counted: the workers' float warnings join the CLI's one line (specmap.floatwarn)
            delayed(Counted(tile_pieces))(grid_f, grid_g, window, lattice, t, settings, sub=sub, seed=seed)
            for t in todo
        ]
        runner: Iterable[Any] = (
            results_of(tasks, max(1, int(jobs)), cluster) if (jobs > 1 or cluster) else map(_call, tasks)
        )
        for result in map(unwrap, runner):
            if store is not None:
                write_tile(store, fp, result)
            done[result.name] = result if keep else None
            stats[result.name] = result.stats
            del result
            if progress is not None:
                progress(sum(1 for t in plan if t.name in done), len(plan))
    return done, stats, reused


def _iter_done(folder: Path, fp: str, names: set[str]) -> Iterable[tuple[str, TileResult]]:
    """The finished tiles of ``folder`` (fingerprint ``fp``) among ``names``, read one at a time."""
    from specmap.special.stream import read_tile

    if not folder.is_dir():
        return
    for path in sorted(folder.glob("tile_*.json")):
        if path.stem not in names:
            continue
        try:
            yield path.stem, read_tile(folder, path.stem, fp)
        except (OSError, KeyError, TypeError, ValueError, shapely.errors.GEOSException):
            continue


def _summed_stats(table: PairTable, tile_stats: list[dict[str, Any]]) -> dict[str, Any]:
    """The tiles' counters summed (cells of the halos counted in each tile that computes them)."""
    summed: dict[str, Any] = {}
    for st in tile_stats:
        for k, v in st.items():
            if k not in ("contours", "pairs_total", "snap", "seconds", "tile_seconds", "halo_cells"):
                summed[k] = summed.get(k, 0) + v
    return {"contours": len(table.contours), "pairs_total": table.n_pairs, **summed}


def _tiles_stats(
    tiles: tuple[int, int],
    plan: tuple[Tile, ...],
    reused: int,
    tile_stats: list[dict[str, Any]],
    t_merge: float,
) -> dict[str, Any]:
    return {
        "grid": [int(tiles[0]), int(tiles[1])],
        "count": len(plan),
        "reused": reused,
        "halo_cells": 1,
        "seconds_per_tile": [float(st.get("tile_seconds", 0.0)) for st in tile_stats],
        "merge_s": round(time.perf_counter() - t_merge, 4),
    }


def streamed_tiled_map(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    *,
    tiles: tuple[int, int],
    folder: str | Path,
    geojson: str | Path | None = None,
    head: dict[str, Any] | None = None,
    settings: MapSettings | None = None,
    resolution: int | tuple[int, int] | None = None,
    jobs: int = 1,
    cluster: str | None = None,
    progress: Callable[[int, int], None] | None = None,
    sub: int = 8,
    seed: int = 0,
) -> Atlas:
    """:func:`tiled_special_set` for maps larger than memory: tiles on disk, merged by summaries.

    Each finished tile is written to ``folder`` and dropped; the merge reads the tile files
    one at a time (:func:`specmap.special.stream.streamed_components`), and when ``geojson``
    is given writes the features there, streamed (``head``: more members of the
    FeatureCollection). The peak memory is that of the largest tile (or ``jobs`` of them)
    plus the summaries (about 100 bytes per clipped curve line).

    Returns
    -------
    Atlas
        No pieces (``pieces == ()``) and components without geometry; the same components,
        counts and statistics as :func:`tiled_special_set`; ``stats["streamed"]`` is True.
    """
    from specmap.io import write_json_streamed
    from specmap.special.stream import iter_features, read_tile, streamed_components

    t_start = time.perf_counter()
    run = _map_tiles(
        grid_f, grid_g, window, tiles, settings, resolution, folder, jobs, cluster, progress, sub, seed, False
    )
    settings, (n_a, n_b), tol, plan, fp = run.settings, run.lattice, run.tol, run.plan, run.fp
    tile_stats, reused, store = run.tile_stats, run.reused, Path(folder)
    t_merge = time.perf_counter()
    table = pair_table(grid_f, grid_g, settings.pairs)
    names = [t.name for t in plan]

    def load(name: str) -> TileResult:
        return read_tile(store, name, fp)

    got = streamed_components(names, load, table, window, tol)
    stats = {
        **_summed_stats(table, tile_stats),
        **{k: v for k, v in got.stats.items() if k != "clipped_lines"},
        "reading": settings.reading,
        "snap": 1e-3 * tol,
        "streamed": True,
        "clipped_lines": got.stats["clipped_lines"],
    }
    atlas = Atlas(window, tol, settings.pairs, settings.method, (n_a, n_b), (), got.components, stats)
    if geojson is not None:
        write_json_streamed(
            geojson,
            {**atlas.geojson_head(), **(head or {})},
            "features",
            iter_features(names, load, table, got),
            compact=True,
        )
    stats["tiles"] = _tiles_stats(tiles, plan, reused, tile_stats, t_merge)
    stats["seconds"] = round(time.perf_counter() - t_start, 4)
    return atlas


def _call(task: tuple) -> Any:
    """Run one joblib ``delayed`` task in this process."""
    fn, args, kwargs = task
    return fn(*args, **kwargs)
