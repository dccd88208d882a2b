"""The special-set atlas of two grids in a window: :func:`special_set`.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching
   distance for 2D filtering functions", J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Callable

import numpy as np
import shapely

from specmap.gcpause import paused
from specmap.grids.model import Grid
from specmap.settings import MapSettings
from specmap.special.atlas import Atlas, Component, TiePiece
from specmap.special.components import components
from specmap.special.detect import METHODS, find_crossings, sample
from specmap.special.lattice import Lattice
from specmap.special.pairs import pair_table
from specmap.special.patches import patch_cells, patch_polygons
from specmap.special.reading import READINGS, points_reading
from specmap.special.reasons import contour_scale, patch_reasons
from specmap.special.reference import naive_crossings
from specmap.special.trace import refine, trace
from specmap.strip import Window


def default_tolerance(grid_f: Grid, grid_g: Grid) -> float:
    """1e-9 times the diagonal of the bounding box of both grids (1e-9 if it is a point)."""
    f = grid_f.bbox()
    g = grid_g.bbox()
    diag = math.hypot(max(f[2], g[2]) - min(f[0], g[0]), max(f[3], g[3]) - min(f[1], g[1]))
    return 1e-9 * (diag if diag > 0 else 1.0)


def with_reasons(
    comps: tuple[Component, ...], pieces: list[TiePiece], table, tol: float
) -> tuple[Component, ...]:
    """Patch components with the reasons of the ties whose patches they hold."""
    patches = [p for p in pieces if p.kind == "patch"]
    if not patches:
        return comps
    by_id = {c.id: c for c in table.contours}
    scale = contour_scale(table.contours, tol)
    out = []
    for c in comps:
        if c.kind != "patch" or c.geometry is None:
            out.append(c)
            continue
        held = [p for p in patches if c.geometry.intersects(p.geometry.representative_point())]
        reasons = patch_reasons([p.tie for p in held], by_id, tol, [p.geometry for p in held], scale=scale)
        out.append(dataclasses.replace(c, reasons=tuple(reasons)))
    return tuple(out)


@paused
def special_set(
    grid_f: Grid,
    grid_g: Grid,
    window: Window,
    *,
    pairs: str = "all",
    resolution: int | tuple[int, int] = MapSettings.resolution,
    method: str = "sweep",
    tol: float | None = None,
    progress: Callable[[int, int], None] | None = None,
    sub: int = 8,
    seed: int = 0,
    reading: str = "points",
    keep: np.ndarray | None = None,
    band: tuple[float, float] | None = None,
    band_roles: bool = True,
    with_components: bool = True,
    node_upper: tuple[np.ndarray, float, float] | None = None,
) -> Atlas:
    """The special set of (Γ(f), Γ(g)) in a window of the strip, as an :class:`Atlas`.

    (a, b) is special when two different pairs of contours met by r(a, b) tie:
    |s_α - s_β| = |s_γ - s_δ| > 0 (equal) or = 2 |s_γ - s_δ| > 0 (half), s the
    line parameter (math.md section 5).

    Parameters
    ----------
    grid_f, grid_g : Grid
        Contour ids should be unique across the grids ("f:"/"g:" prefixes);
        colliding ids are re-prefixed.
    window : Window
    pairs : {"all", "roles"}
        ``roles`` keeps only ties that can change an optimal matching cost:
        equal ties of two cross or two same-grid pairs, half ties of a cross
        pair against a doubled same-grid pair.
    resolution : int or (n_a, n_b)
        Sample lattice nodes.
    method : {"sweep", "naive"}
        ``sweep``: output-sensitive detection of order swaps; ``naive``: every
        tie on every edge (reference, same result, :mod:`specmap.special.reference`).
    tol : float, optional
        Residual tolerance in push units; default :func:`default_tolerance`.
    progress : callable (done, total), optional
    sub : int
        Patch boundary refinement (sub-cells per cell side).
    seed : int
        Seed of the random interior checks of patch cells.
    reading : {"points", "contours"}
        ``points`` ([EFQT23], default): pairs of meeting *points* must differ, so the lines
        through a crossing or junction of two contours (where a per-contour tie holds
        trivially) are not special; ``contours``: every per-contour tie counts
        (:mod:`specmap.special.reading`).
    keep : ndarray of int, optional
        Only the ties of these pairs (indices into the pair table of ``grid_f``, ``grid_g``
        and ``pairs``, e.g. :func:`specmap.special.focus.focus_pairs`); the detection of a tie
        reads its two pairs, but the pieces are not always those of the full atlas (a test
        on random grids found ties of kept pairs traced in a subset atlas and not in the whole
        one; not yet explained).
    band : (float, float), optional
        Trace ties only where their cost can lie in (band[0], band[1]] (value units, costs
        read with the f/g roles unless ``band_roles`` is False; sweep method only): curves
        are then the parts of the full atlas's curves inside the band, give or take one
        lattice cell (:mod:`specmap.special.focus`). Patches are not banded.
    with_components : bool
        Compute the components (the reduced search on a focused atlas does not need them).
    node_upper : (ndarray (n_b, n_a), float, float), optional
        With ``band``: upper bounds of h on this lattice (see
        :func:`specmap.special.detect.find_crossings`), the band's top per edge.

    Returns
    -------
    Atlas
        Curves are exact to ~1e-12 of the window diameter at crossing vertices
        (chords in between); patch areas to about perimeter x cell / ``sub``.

    References
    ----------
    .. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).

    Examples
    --------
    >>> from specmap.grids.model import Contour, Grid
    >>> f = Grid((Contour("f:v0", "vertical", [0, -20]), Contour("f:v1", "vertical", [1, -20])))
    >>> g = Grid((Contour("g:h0", "horizontal", [-20, 0]), Contour("g:h1", "horizontal", [-20, 1])))
    >>> atlas = special_set(f, g, Window((0.1, 0.9), (-1, 1)), resolution=41)
    >>> atlas.counts()["patch"]
    0
    """
    t_start = time.perf_counter()
    n_a, n_b = (resolution, resolution) if isinstance(resolution, int) else tuple(resolution)
    table = pair_table(grid_f, grid_g, pairs)
    pairs_all = table.n_pairs
    if keep is not None:
        table = table.subset(keep)
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, not {method!r}")
    if reading not in READINGS:
        raise ValueError(f"reading must be one of {READINGS}, not {reading!r}")
    tol = default_tolerance(grid_f, grid_g) if tol is None else float(tol)
    snap = 1e-3 * tol
    lat = Lattice.of(window, int(n_a), int(n_b))
    total = 2 * lat.n_b + 2
    timings = {}
    t = time.perf_counter()
    samples = sample(table, lat)
    timings["sample_s"] = time.perf_counter() - t
    t = time.perf_counter()
    if method == "sweep":
        codes, edges, dstats = find_crossings(
            table,
            samples,
            tol=tol,
            snap=snap,
            progress=progress,
            progress_total=total,
            band=band,
            roles=band_roles,
            node_upper=node_upper,
        )
    else:
        codes, edges, dstats = naive_crossings(
            table, samples, tol=tol, snap=snap, progress=progress, progress_total=total
        )
    timings["detect_s"] = time.perf_counter() - t
    t = time.perf_counter()
    points = refine(table, samples, codes, edges, snap=snap)
    traced = trace(table, samples, codes, edges, points, snap=snap, tol=tol)
    timings["trace_s"] = time.perf_counter() - t
    if progress is not None:
        progress(lat.n_b + 1, total)
    t = time.perf_counter()
    pcodes, pcells, pstats = patch_cells(table, samples, tol, seed=seed)
    polys = patch_polygons(table, samples, pcodes, pcells, tol, sub=sub)
    timings["patch_s"] = time.perf_counter() - t
    if progress is not None:
        progress(2 * lat.n_b + 1, total)
    items: list[tuple[int, str, object]] = []
    for tt in traced:
        if tt.lines:
            items.append((tt.code, "curve", shapely.MultiLineString(list(tt.lines))))
        if tt.points:
            items.append((tt.code, "point", shapely.MultiPoint(np.array(tt.points))))
    for code, poly in sorted(polys.items()):
        if not poly.is_empty:
            items.append((code, "patch", poly))
    removed = {"curves": 0, "points": 0, "patches": 0}
    if reading == "points":
        items, removed = points_reading(table, items)
    ties = table.ties(np.array([c for c, _, _ in items], dtype=np.int64)) if items else []
    pieces = [TiePiece(tie, kind, geom) for tie, (_, kind, geom) in zip(ties, items, strict=True)]
    t = time.perf_counter()
    comps = (
        with_reasons(components(tuple(pieces), window, lat), pieces, table, tol) if with_components else ()
    )
    timings["components_s"] = time.perf_counter() - t
    if progress is not None:
        progress(total, total)
    stats = {
        "contours": len(table.contours),
        "pairs_total": pairs_all,
        **({"pairs_kept": table.n_pairs} if keep is not None else {}),
        **dstats,
        **pstats,
        # counted after the reading's removals (what the atlas holds)
        "tie_curves": sum(len(shapely.get_parts(g)) for _, k, g in items if k == "curve"),
        "ties_with_curves": sum(1 for _, k, _ in items if k == "curve"),
        "ties_with_patches": sum(1 for _, k, _ in items if k == "patch"),
        "pieces": len(pieces),
        "reading": reading,
        **{f"coincident_{k}_removed": v for k, v in removed.items()},
        "snap": snap,
        **{k: round(v, 4) for k, v in timings.items()},
        "seconds": round(time.perf_counter() - t_start, 4),
    }
    return Atlas(window, tol, pairs, method, (lat.n_a, lat.n_b), tuple(pieces), comps, stats)
