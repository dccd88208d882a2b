"""From edge crossings to tie curves: bisection, marching squares, chaining, domain clipping.

1. Each crossing is refined on its edge (ITP root bracketing, compiled) with
   exact evaluation of the (continuous, extended) residual until the bracket
   is below ``1e-12`` of the window diameter.
2. Per tie, every cell that sees the tie met joins the crossings on its edges
   (two: one segment; four: a saddle, decided by the exact residual at the
   cell centre).
3. Segments are chained into polylines; each polyline is cut where the tie
   stops being met (some contour is missed). The cut point is found by
   bisection along the chord and then moved along the domain boundary -- a
   straight line b = (1-a) x_e - a y_e through the contour end (x_e, y_e) --
   onto the zero of the residual.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from specmap.special.compiled.contours import (
    FlatContours,
    edge_endpoints,
    in_chunks,
    met_bisect,
    refine_edges,
    slot_params,
    slot_residuals,
)
from specmap.special.compiled.curves import chain_walk, march_cells, neighbours
from specmap.special.detect import Samples, crossing_slots, relevant_cells, split_branch
from specmap.special.lattice import Lattice
from specmap.special.pairs import PairTable


@dataclass(frozen=True)
class TracedTie:
    """Curves and isolated points of one tie (coordinates in (a, b))."""

    code: int
    lines: tuple[np.ndarray, ...]
    points: tuple[np.ndarray, ...]


def _flat(table: PairTable) -> tuple:
    return FlatContours.of(table.contours).args


def _residual(table: PairTable, codes: np.ndarray, a: np.ndarray, b: np.ndarray):
    """(R, tied value, all four met) of crossing keys ``codes`` at lines (a[k], b[k]) (compiled loop).

    R is the signed residual of the key's branch (:func:`specmap.special.detect.crossing_slots`).
    """
    slots, factor = crossing_slots(table, codes)
    a = np.ascontiguousarray(np.broadcast_to(np.asarray(a, float), slots.shape[:1]))
    b = np.ascontiguousarray(np.broadcast_to(np.asarray(b, float), slots.shape[:1]))
    return slot_residuals(*_flat(table), slots, factor, a, b, True)


def refine(
    table: PairTable,
    samples: Samples,
    codes: np.ndarray,
    edges: np.ndarray,
    *,
    snap: float,
    rel: float = 1e-12,
    frame: Lattice | None = None,
) -> np.ndarray:
    """Zero of every crossing on its edge, to ``rel`` of the window diameter; points (K, 2) in (a, b).

    ITP root finding on the edge (:func:`specmap.special.compiled.contours.refine_edges`)
    with exact re-evaluation of the signed residual of the crossing's branch; the side convention is
    ``R >= -snap`` as in detection. Work is split over two threads. The stopping width
    is set by ``frame`` (the whole window's lattice; default the samples' own): its diameter
    and its longest edge, so a tile of the window refines every crossing exactly as the
    whole window does.
    """
    lat = samples.lattice
    if codes.size == 0:
        return np.zeros((0, 2))
    a0, b0, a1, b1 = edge_endpoints(
        np.asarray(edges, np.int64), np.asarray(lat.av, float), np.asarray(lat.bv, float)
    )
    slots, factor = crossing_slots(table, codes)
    diam, _, h = _scales(lat if frame is None else frame)
    eps = 0.5 * rel * diam / h
    flat = _flat(table)
    return in_chunks(
        lambda sl: refine_edges(
            *flat, slots[sl], factor[sl], a0[sl], b0[sl], a1[sl], b1[sl], snap, eps, True
        ),
        codes.size,
    )


def _scales(lat: Lattice) -> tuple[float, float, float]:
    """(window diameter, first cell's diagonal, longest edge) of a lattice: the tolerances' scale."""
    diam = float(np.hypot(lat.av[-1] - lat.av[0], lat.bv[-1] - lat.bv[0]))
    cell_diag = float(np.hypot(lat.av[1] - lat.av[0], lat.bv[1] - lat.bv[0]))
    h = max(float(np.max(np.diff(lat.av))), float(np.max(np.diff(lat.bv))), 1e-300)
    return diam, cell_diag, h


def segments(
    table: PairTable, samples: Samples, codes: np.ndarray, edges: np.ndarray, *, snap: float
) -> np.ndarray:
    """Marching squares per tie: pairs (u, v) of crossing indices joined inside a cell.

    Compiled (:func:`specmap.special.compiled.curves.march_cells`); ``codes`` and
    ``edges`` sorted by (code, edge) as :func:`find_crossings` returns them.
    """
    lat = samples.lattice
    if codes.size == 0:
        return np.zeros((0, 2), dtype=np.int64)
    rel = relevant_cells(table, samples, codes, edges)
    slots, factor = crossing_slots(table, codes)
    codes = np.asarray(codes, np.int64)
    edges = np.asarray(edges, np.int64)
    av, bv = np.asarray(lat.av, float), np.asarray(lat.bv, float)
    flat = _flat(table)
    # two threads over halves that split at a change of tie (ties are independent)
    cut = int(np.searchsorted(codes, codes[codes.size // 2], side="left")) if codes.size > 100_000 else 0
    parts = [slice(0, cut), slice(cut, codes.size)] if cut > 0 else [slice(0, codes.size)]

    def run(sl: slice) -> np.ndarray:
        return (
            march_cells(
                codes[sl], edges[sl], rel[sl], lat.n_a, lat.n_b, av, bv, *flat, slots[sl], factor[sl], snap
            )
            + sl.start
        )

    with ThreadPoolExecutor(len(parts)) as pool:
        return np.concatenate(list(pool.map(run, parts)))


def chain(n: int, segs: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Chain segments (vertex degree <= 2) into paths: (flat vertices, path lengths, closed flags).

    The walk itself is compiled (:func:`specmap.special.compiled.curves.chain_walk`).
    """
    return chain_walk(*neighbours(n, np.ascontiguousarray(np.asarray(segs, dtype=np.int64).reshape(-1, 2))))


def _boundary_points(table, codes, pin, pout, diam, snap, cell_diag):
    """Where polylines leave the tie's domain: chord bisection, then onto R = 0 along the boundary."""
    slots, factor = crossing_slots(table, codes)
    flat = _flat(table)
    # bisection to 1e-13 of the window diameter (chords are at most a cell diagonal long)
    n_iter = int(np.ceil(np.log2(max(cell_diag, 1e-300) / (1e-13 * diam)))) + 1
    lo, hi = met_bisect(
        *flat, slots, np.ascontiguousarray(pin, float), np.ascontiguousarray(pout, float), n_iter
    )
    # which contour is lost, and through which end: the boundary is the pencil through that end
    _, met_out = slot_params(*flat, slots, np.ascontiguousarray(hi[:, 0]), np.ascontiguousarray(hi[:, 1]))
    lost = np.argmax(~met_out, axis=1)
    first = np.array([c.points[0] for c in table.contours], dtype=float)
    last = np.array([c.points[-1] for c in table.contours], dtype=float)
    proper = np.array([c.kind == "proper" for c in table.contours])
    cid = slots[np.arange(codes.size), lost]
    a, b = hi[:, 0], hi[:, 1]
    x0, y0 = first[cid, 0], first[cid, 1]
    g0 = (1 - a) * (x0 - b) - a * (y0 + b)
    ends = np.where((proper[cid] & (g0 <= 0))[:, None], last[cid], first[cid])
    d = np.stack([np.ones(codes.size), -(ends[:, 0] + ends[:, 1])], axis=1)
    d /= np.hypot(d[:, 0], d[:, 1])[:, None]
    t = np.linspace(-cell_diag, cell_diag, 9)
    nt = t.size
    pts = lo[:, None, :] + t[None, :, None] * d[:, None, :]  # (K, 9, 2)
    pts[..., 0] = np.clip(pts[..., 0], 1e-12, 1 - 1e-12)
    r, _, _ = _residual(table, np.repeat(codes, nt), pts[..., 0].ravel(), pts[..., 1].ravel())
    sg = (r >= -snap).reshape(-1, nt)
    change = sg[:, :-1] != sg[:, 1:]
    has = change.any(axis=1)
    # the sign change nearest to the chord's boundary point
    dist = np.where(change, np.abs(0.5 * (t[:-1] + t[1:]))[None, :], np.inf)
    i = np.argmin(dist, axis=1)
    rows = np.arange(codes.size)
    p = pts[rows, i]
    q = pts[rows, i + 1]
    # zero of the residual between the two samples (ITP, same side convention as the crossings)
    eps = 0.5e-12 * diam / max(float(t[1] - t[0]), 1e-300)
    z = refine_edges(
        *flat,
        slots,
        factor,
        np.ascontiguousarray(p[:, 0]),
        np.ascontiguousarray(p[:, 1]),
        np.ascontiguousarray(q[:, 0]),
        np.ascontiguousarray(q[:, 1]),
        snap,
        eps,
        True,
    )
    return np.where(has[:, None], z, lo)


def trace(
    table: PairTable,
    samples: Samples,
    codes: np.ndarray,
    edges: np.ndarray,
    points: np.ndarray,
    *,
    snap: float,
    tol: float,
    frame: Lattice | None = None,
) -> list[TracedTie]:
    """Curves and points of every tie from its refined crossings.

    Parameters
    ----------
    codes, edges : ndarray
        Crossings, sorted by (code, edge) (as from :func:`find_crossings`).
    points : ndarray (K, 2)
        Refined crossing points (:func:`refine`).
    snap, tol : float
    frame : Lattice, optional
        The whole window's lattice when ``samples`` cover a tile of it (see :func:`refine`).

    Returns
    -------
    list of TracedTie
        Vertices of each line are refined crossings, plus end points where the
        tie's domain ends (on the domain boundary, residual refined to zero
        within a cell of the crossing when such a zero exists).
    """
    if codes.size == 0:
        return []
    diam, cell_diag, _ = _scales(samples.lattice if frame is None else frame)
    segs = segments(table, samples, codes, edges, snap=snap)
    flat, plen, pclosed = chain(codes.size, segs)
    _, val, inside = _residual(table, codes, points[:, 0], points[:, 1])
    inside &= val > tol
    # cut each path into runs of vertices inside the domain (all paths at once)
    pstart = np.cumsum(plen) - plen
    ins = inside[flat]
    n_out = np.bincount(np.repeat(np.arange(plen.size), plen), weights=~ins, minlength=plen.size)
    # a closed path is rotated to start at its first vertex outside (if any) and closed again
    first_out = np.zeros(plen.size, dtype=np.int64)
    out_pos = np.nonzero(~ins)[0]
    if out_pos.size:
        out_pid = np.searchsorted(pstart, out_pos, side="right") - 1
        u, fi = np.unique(out_pid, return_index=True)
        first_out[u] = out_pos[fi] - pstart[u]
    rot = np.where(pclosed & (n_out > 0), first_out, 0)
    nlen = plen + pclosed
    npid = np.repeat(np.arange(plen.size), nlen)
    j = np.arange(int(nlen.sum())) - np.repeat(np.cumsum(nlen) - nlen, nlen)
    seq = flat[pstart[npid] + (rot[npid] + j) % plen[npid]]
    sin = inside[seq]
    head = j == 0
    tail = j == nlen[npid] - 1
    prev_in = np.concatenate([[False], sin[:-1]]) & ~head
    next_in = np.concatenate([sin[1:], [False]]) & ~tail
    rs = np.nonzero(sin & ~prev_in)[0]
    re_ = np.nonzero(sin & ~next_in)[0]
    before = np.where(head[rs], -1, seq[np.maximum(rs - 1, 0)])
    after = np.where(tail[re_], -1, seq[np.minimum(re_ + 1, seq.size - 1)])
    rcode = codes[seq[rs]]
    n_runs = rs.size
    # boundary end points, batched (per run: the end before, then the end after)
    e_run = np.stack([np.arange(n_runs), np.arange(n_runs)], axis=1).ravel()
    e_side = np.tile([0, 1], n_runs)
    e_in = np.stack([seq[rs], seq[re_]], axis=1).ravel()
    e_out = np.stack([before, after], axis=1).ravel()
    has = e_out >= 0
    e_run, e_side, e_in, e_out = e_run[has], e_side[has], e_in[has], e_out[has]
    bp = np.zeros((0, 2))
    if e_in.size:
        bp = _boundary_points(
            table, codes[seq[rs]][e_run], points[e_in], points[e_out], diam, snap, cell_diag
        )
    # every line: [boundary point before] + run vertices + [boundary point after]
    nvert = re_ - rs + 1 + (before >= 0) + (after >= 0)
    lstart = np.cumsum(nvert) - nvert
    coords = np.empty((int(nvert.sum()), 2))
    lid = np.repeat(np.arange(n_runs), re_ - rs + 1)
    k = np.arange(lid.size) - np.repeat(np.cumsum(re_ - rs + 1) - (re_ - rs + 1), re_ - rs + 1)
    coords[lstart[lid] + (before[lid] >= 0) + k] = points[seq[rs[lid] + k]]
    coords[np.where(e_side == 0, lstart[e_run], lstart[e_run] + nvert[e_run] - 1)] = bp
    if n_runs:
        ext = np.maximum(
            np.maximum.reduceat(coords, lstart, axis=0) - np.minimum.reduceat(coords, lstart, axis=0), 0.0
        ).max(axis=1)
    else:
        ext = np.zeros(0)
    is_pt = (nvert <= 1) | (ext <= 1e-12 * diam)
    keep = np.ones(coords.shape[0], dtype=bool)
    keep[1:] = np.any(np.abs(np.diff(coords, axis=0)) > 1e-15 * diam, axis=1)
    keep[lstart] = True
    rcode_l = split_branch(table, rcode)[0].tolist()  # both branches' lines under their tie
    pieces = np.split(coords, lstart[1:]) if n_runs else []
    keeps = np.split(keep, lstart[1:]) if n_runs else []
    by_code: dict[int, tuple[list, list]] = {}
    for r in range(n_runs):
        lines, pts = by_code.setdefault(rcode_l[r], ([], []))
        if is_pt[r]:
            pts.append(pieces[r][0])
        else:
            lines.append(pieces[r][keeps[r]])
    return [TracedTie(c, tuple(ls), tuple(ps)) for c, (ls, ps) in sorted(by_code.items())]
