"""Patches: open regions where a tie holds identically (within tolerance).

1. At every node, near-ties are found output-sensitively: the items |c_P| and
   2|c_Q| of the node are sorted and each item's partners within ``tol`` are
   one ``searchsorted`` away.
2. A cell is a candidate for a tie when the near-tie holds at its four
   corners; it becomes a patch cell when the tie is also met, holds within
   ``tol`` and has a tied value above ``tol`` at the cell centre and at three
   random interior points (seeded), all evaluated exactly.
3. Boundary refinement: every cell beside a patch cell of the same tie is
   split into ``sub`` x ``sub`` sub-cells; a sub-cell joins the patch when the
   tie holds at its four corners. Patch polygons are the union of cells and
   sub-cells, so areas are exact up to about (perimeter x cell size / sub).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import numpy as np
import shapely

from specmap.special.detect import Items, Samples, _as_ties, _overlaps
from specmap.special.evaluate import SlotEvaluator, residual_from_slots
from specmap.special.pairs import PairTable


def _holds(table: PairTable, codes: np.ndarray, a: np.ndarray, b: np.ndarray, tol: float) -> np.ndarray:
    slots, factor = table.tie_contours(codes)
    s, met = SlotEvaluator(table.contours, slots)(a, b)
    r, val = residual_from_slots(s, factor, a)
    return met.all(axis=1) & (np.abs(r) <= tol) & (val > tol)


def node_near_ties(table: PairTable, samples: Samples, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """(node id, tie code) of every tie that holds within ``tol`` at a node (all four met)."""
    lat = samples.lattice
    items = Items.of(table)
    n = table.n_pairs
    nodes_out, codes_out = [], []
    for j in range(lat.n_b):
        d = samples.pair_values(table, j)
        vals = np.concatenate([d, 2.0 * d[items.pair[n:]]]).T  # (n_a, M)
        pres = samples.pair_met[:, j].T[:, items.pair]
        e, u, v = _overlaps(vals, vals, pres, tol)
        keep, cond, P, Q, big_i, small_i = _as_ties(table, items, u, v)
        e, cond, P, Q, big_i, small_i = (x[keep] for x in (e, cond, P, Q, big_i, small_i))
        ok = (np.abs(vals[e, big_i] - vals[e, small_i]) <= tol) & (
            vals[e, small_i] / items.factor[small_i] > tol
        )
        nodes_out.append(j * lat.n_a + e[ok])
        codes_out.append(table.encode(cond[ok], P[ok], Q[ok]))
    return np.concatenate(nodes_out), np.concatenate(codes_out)


def patch_cells(
    table: PairTable, samples: Samples, tol: float, *, seed: int = 0
) -> tuple[np.ndarray, np.ndarray, dict]:
    """Tie codes and cell ids of patch cells (sorted by code, cell)."""
    lat = samples.lattice
    nodes, codes = node_near_ties(table, samples, tol)
    stats = {"node_near_ties": int(nodes.size)}
    if nodes.size == 0:
        z = np.zeros(0, np.int64)
        return z, z, {**stats, "patch_cells": 0}
    j, i = np.divmod(nodes, lat.n_a)
    nc = lat.n_cells
    keys = []
    for dj in (-1, 0):
        for di in (-1, 0):
            cj, ci = j + dj, i + di
            ok = (cj >= 0) & (cj < lat.n_b - 1) & (ci >= 0) & (ci < lat.n_a - 1)
            keys.append(codes[ok] * nc + cj[ok] * (lat.n_a - 1) + ci[ok])
    uk, cnt = np.unique(np.concatenate(keys), return_counts=True)
    cand = uk[cnt == 4]
    ccode, cell = np.divmod(cand, nc)
    stats["candidate_patch_cells"] = int(cand.size)
    if cand.size == 0:
        return ccode, cell, {**stats, "patch_cells": 0}
    a0, b0, a1, b1 = lat.cell_box(cell)
    rng = np.random.default_rng(seed)
    fr = np.vstack([[0.5, 0.5], rng.uniform(0.1, 0.9, size=(3, 2))])
    good = np.ones(cand.size, dtype=bool)
    for fa, fb in fr:
        good &= _holds(table, ccode, a0 + fa * (a1 - a0), b0 + fb * (b1 - b0), tol)
    stats["patch_cells"] = int(good.sum())
    return ccode[good], cell[good], stats


def _row_boxes(lat, cells: np.ndarray) -> list:
    """Boxes of cells, consecutive cells of a row merged."""
    if cells.size == 0:
        return []
    cells = np.sort(cells)
    row = cells // (lat.n_a - 1)
    brk = np.nonzero((np.diff(cells) != 1) | (np.diff(row) != 0))[0]
    starts = np.concatenate([[0], brk + 1])
    ends = np.concatenate([brk, [cells.size - 1]])
    a0, b0, _, _ = lat.cell_box(cells[starts])
    _, _, a1, b1 = lat.cell_box(cells[ends])
    return list(shapely.box(a0, b0, a1, b1))


def patch_polygons(
    table: PairTable, samples: Samples, codes: np.ndarray, cells: np.ndarray, tol: float, *, sub: int = 8
) -> dict[int, shapely.Geometry]:
    """Polygon (shapely) of every tie with patch cells, boundary refined by sub-cells."""
    lat = samples.lattice
    out: dict[int, object] = {}
    if codes.size == 0:
        return out
    na1, nb1 = lat.n_a - 1, lat.n_b - 1
    # ring of neighbouring cells per tie
    cj, ci = np.divmod(cells, na1)
    ring = []
    for dj in (-1, 0, 1):
        for di in (-1, 0, 1):
            if dj == di == 0:
                continue
            nj, ni = cj + dj, ci + di
            ok = (nj >= 0) & (nj < nb1) & (ni >= 0) & (ni < na1)
            ring.append(codes[ok] * lat.n_cells + nj[ok] * na1 + ni[ok])
    inside = codes * lat.n_cells + cells
    ring_keys = np.setdiff1d(np.unique(np.concatenate(ring)), inside)
    rcode, rcell = np.divmod(ring_keys, lat.n_cells)
    sub_boxes: dict[int, list] = {}
    if rcode.size:
        t = np.linspace(0.0, 1.0, sub + 1)
        a0, b0, a1, b1 = lat.cell_box(rcell)
        ga = a0[:, None, None] + t[None, None, :] * (a1 - a0)[:, None, None]
        gb = b0[:, None, None] + t[None, :, None] * (b1 - b0)[:, None, None]
        ga, gb = np.broadcast_arrays(ga, gb)  # (R, sub+1 (b), sub+1 (a))
        rep = np.repeat(rcode, (sub + 1) ** 2)
        h = _holds(table, rep, ga.ravel(), gb.ravel(), tol).reshape(ga.shape)
        full = h[:, :-1, :-1] & h[:, :-1, 1:] & h[:, 1:, :-1] & h[:, 1:, 1:]
        # runs of full sub-cells along a (one box per run, not per sub-cell)
        pad = np.zeros((full.shape[0], full.shape[1], full.shape[2] + 2), dtype=np.int8)
        pad[:, :, 1:-1] = full
        step = np.diff(pad, axis=2)
        r, sj, s0 = np.nonzero(step == 1)
        _, _, s1 = np.nonzero(step == -1)  # same (r, sj) order: runs alternate start/end
        boxes = shapely.box(ga[r, sj, s0], gb[r, sj, s0], ga[r, sj, s1], gb[r, sj + 1, s0])
        for code, bx in zip(rcode[r].tolist(), boxes, strict=True):
            sub_boxes.setdefault(code, []).append(bx)
    order = np.argsort(codes, kind="stable")
    codes_s, cells_s = codes[order], cells[order]
    uc, st = np.unique(codes_s, return_index=True)
    bounds = np.append(st, codes_s.size)
    # ties often share their patch cells and boundary sub-cells (symmetric maps): each distinct
    # region is built once
    by_cells: dict[bytes, object] = {}
    by_region: dict[bytes, object] = {}
    for k, code in enumerate(uc.tolist()):
        cells_k = cells_s[bounds[k] : bounds[k + 1]]
        key = np.sort(cells_k).tobytes()
        extra = sub_boxes.get(code, [])
        rkey = key + (shapely.get_coordinates(extra).tobytes() if extra else b"")
        if rkey not in by_region:
            if key not in by_cells:
                by_cells[key] = shapely.union_all(_row_boxes(lat, cells_k))
            by_region[rkey] = shapely.union_all([by_cells[key], *extra]) if extra else by_cells[key]
        out[code] = by_region[rkey]
    return out
