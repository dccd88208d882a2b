"""The dense sweep: h_k on a node grid of the window, the best node refined, with a sampling-error bound."""

from __future__ import annotations

import math
import time
from collections.abc import Sequence

import numpy as np

from specmap.distance.bounds import cell_error_bound
from specmap.distance.evaluator import LineEvaluator
from specmap.distance.refine import pattern_search
from specmap.distance.result import DenseSweep
from specmap.settings import DistanceSettings
from specmap.strip import Window


def dense_sweep(
    ev: LineEvaluator,
    window: Window,
    *,
    resolution: int = DistanceSettings.dense_resolution,
    refine: bool = True,
    bounds: tuple[Sequence[float], Sequence[float]] | None = None,
) -> DenseSweep:
    """h_k on a ``resolution`` x ``resolution`` node grid, maxima refined by pattern search.

    The sampling-error bound (:func:`~specmap.distance.bounds.cell_error_bound`, per
    degree in ``error_bounds``, the largest in ``error_bound``): D_k <= max over nodes of h_k + error_bound,
    rigorously for the meshed maps, by stability [CDFFL13] and the Lipschitz
    constants of :func:`~specmap.distance.bounds.lipschitz_constants` taken cell by cell.

    Parameters
    ----------
    ev : LineEvaluator
    window : Window
    resolution : int
        Nodes per side.
    refine : bool
        Refine each degree's best node by a compass search.
    bounds : (bounds_f, bounds_g), optional
        Value bounds (min f1, min f2, max f1, max f2) for the error bound (``inf`` without).

    Returns
    -------
    DenseSweep
    """
    t0 = time.perf_counter()
    n0 = ev.lines
    n = max(2, int(resolution))
    A, B = window.mesh(n, n)
    ev.plan(A.size)
    H = ev(A, B)
    av, bv = A[0], B[:, 0]
    ha, hb = (window.a[1] - window.a[0]) / (n - 1), (window.b[1] - window.b[0]) / (n - 1)
    best = []
    node_best = []
    for j in range(len(ev.degrees)):
        Hj = np.where(np.isnan(H[j]), -math.inf, H[j])
        r, c = np.unravel_index(int(np.argmax(Hj)), Hj.shape)
        start = (float(av[c]), float(bv[r]))
        val = float(Hj[r, c])
        node_best.append((val, start))
        if refine and math.isfinite(val):
            ev.plan(60)
            val, start = pattern_search(ev, j, start, (ha / 2, hb / 2), window)
        best.append((val, start))
    errs = [math.inf] * len(ev.degrees)
    if bounds is not None:
        errs = [cell_error_bound(H[j], av, bv, *bounds) for j in range(len(ev.degrees))]
    err = max(errs, default=math.inf)
    return DenseSweep(
        grid=H,
        a=av,
        b=bv,
        best=best,
        node_best=node_best,
        error_bound=err,
        lines=ev.lines - n0,
        seconds=time.perf_counter() - t0,
        resolution=int(resolution),
        error_bounds=errs,
    )
