"""Where tie curves cross the sample lattice: the output-sensitive sweep.

A tie |c_P| = k |c_Q| (k = 1 ``equal``, 2 ``half``) is the union of its two signed
branches c_P = +k c_Q (branch 0) and c_P = -k c_Q (branch 1), c_P = s̄_first - s̄_second
in push units. Each branch is smooth where its four contours are met, whereas
|c_P| - k |c_Q| has a ridge where c_P or c_Q changes sign (lines through a crossing
of two contours): there a tie splits into two curves that can lie within one
lattice cell, with no sign change of the absolute residual on an edge (issue 16).
So at every node the signed differences +c_P and -c_P and their doubles +-2 c_Q are
*items*; a branch curve crosses a lattice edge where the order of +c_P and +k c_Q
(branch 0) or of +c_P and -k c_Q (branch 1) differs between the edge's ends. The
mirrored item pairs (-c_P against -+k c_Q) are skipped, so each (tie, branch, edge)
is reported once. A crossing is identified by its *key* ``branch * 2 n² + code``
(:func:`split_branch`); :func:`crossing_slots` orders the four contours so that the
signed residual of the key's branch is (s̄_0 - s̄_1) - k (s̄_2 - s̄_3), which refinement
and tracing use (:mod:`specmap.special.trace`).

``sweep`` (default) treats every item on an edge as the interval between its
two end values, sorts the interval starts of the edge and finds each
interval's overlapping partners with one ``searchsorted``; only overlapping
items can swap, and only actual swaps are kept. The work grows with the number
of overlaps, not with the number of quadruples. The reference method
``naive`` (every allowed tie on every edge, the same crossings) lives in
:mod:`specmap.special.reference`.

Pairs appear and disappear where the line stops meeting a contour: an item
takes part on an edge only if its pair is met at a corner of a cell beside the
edge, and a crossing is kept only if the tie is met (all four contours at one
corner) in a cell beside the edge. Signs are taken with a snap ``R >= -snap``
so that exact zeros at nodes (curves through nodes) count once.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

import weakref
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from specmap.special.compiled.sweep import sweep_rows, tie_cells_met
from specmap.special.evaluate import sample_contours
from specmap.special.lattice import Lattice
from specmap.special.pairs import PairTable, doubled_pairs, equal_allowed, half_allowed, kernel_flags
from specmap.strip import push_scale

METHODS = ("sweep", "naive")
"""Crossing detection methods: :func:`find_crossings` and the reference
:func:`specmap.special.reference.naive_crossings`."""


@dataclass(frozen=True, eq=False)
class Samples:
    """Contour parameters at the lattice nodes.

    Attributes
    ----------
    lattice : Lattice
    s : ndarray (C, n_b, n_a)
        Extended line parameters.
    met : ndarray of bool (C, n_b, n_a)
    pair_met : ndarray of bool (n_pairs, n_b, n_a)
    cell_pair : ndarray of bool (n_pairs, n_b - 1, n_a - 1)
        Pair met at some corner of the cell.
    """

    lattice: Lattice
    s: np.ndarray
    met: np.ndarray
    pair_met: np.ndarray
    cell_pair: np.ndarray

    def pair_values(self, table: PairTable, j: int) -> np.ndarray:
        """|c_P| in push units on node row j: shape (n_pairs, n_a)."""
        return np.abs(self.signed_pair_values(table, j))

    def signed_pair_values(self, table: PairTable, j: int) -> np.ndarray:
        """c_P = s̄_first - s̄_second in push units on node row j: shape (n_pairs, n_a)."""
        m = push_scale(self.lattice.av)
        return (self.s[table.first, j] - self.s[table.second, j]) * m


def sample(table: PairTable, lattice: Lattice) -> Samples:
    """Evaluate every contour at every node (:func:`sample_contours`) and the pair masks."""
    A, B = lattice.mesh()
    s, met = sample_contours(table.contours, A, B)
    pm = met[table.first] & met[table.second]
    cp = pm[:, :-1, :-1] | pm[:, :-1, 1:] | pm[:, 1:, :-1] | pm[:, 1:, 1:]
    return Samples(lattice, s, met, pm, cp)


@dataclass(frozen=True)
class Items:
    """The values compared on edges: plain pair differences, then doubled ones."""

    pair: np.ndarray
    factor: np.ndarray
    doubled_index: np.ndarray  # item index of 2|c_Q| for pair Q, -1 if none

    @staticmethod
    def of(table: PairTable) -> Items:
        n = table.n_pairs
        dbl = np.nonzero(doubled_pairs(table))[0]
        pair = np.concatenate([np.arange(n), dbl])
        factor = np.concatenate([np.ones(n), np.full(dbl.size, 2.0)])
        di = np.full(n, -1, dtype=np.int64)
        di[dbl] = n + np.arange(dbl.size)
        return Items(pair, factor, di)


def _overlaps(lo: np.ndarray, hi: np.ndarray, present: np.ndarray, slack: float):
    """All (edge, u, v) with intervals [lo, hi] of items u, v overlapping on the same edge.

    Vectorised over edges: keys ``edge + 0.5 * value / scale`` are sorted once and
    each interval's partners are a contiguous run found by ``searchsorted``.
    """
    E, M = lo.shape
    if not present.any():
        z = np.zeros(0, dtype=np.int64)
        return z, z, z
    scale = float(np.max(hi[present])) or 1.0
    eidx = np.arange(E, dtype=float)[:, None]
    klo = np.where(present, eidx + 0.5 * lo / scale, eidx + 0.9).ravel()
    khi = np.where(present, eidx + 0.5 * hi / scale + 0.5 * slack / scale + 1e-12, -1.0).ravel()
    order = np.argsort(klo, kind="stable")
    sk = klo[order]
    q = np.searchsorted(sk, khi[order], side="right")
    pos = np.arange(sk.size)
    cnt = np.maximum(q - pos - 1, 0)
    cnt[~present.ravel()[order]] = 0
    total = int(cnt.sum())
    src = np.repeat(pos, cnt)
    offs = np.arange(total) - np.repeat(np.cumsum(cnt) - cnt, cnt)
    dst = src + 1 + offs
    fu = order[src]
    fv = order[dst]
    e, u = np.divmod(fu, M)
    _, v = np.divmod(fv, M)
    return e, u, v


def _as_ties(table: PairTable, items: Items, u: np.ndarray, v: np.ndarray):
    """Item pairs -> (keep mask, cond, P, Q, big item, small item)."""
    fu = items.factor[u]
    fv = items.factor[v]
    pu = items.pair[u]
    pv = items.pair[v]
    eq = (fu == 1) & (fv == 1)
    hf = fu != fv
    big_i = np.where(eq, np.where(pu < pv, u, v), np.where(fu == 1, u, v))
    small_i = np.where(eq, np.where(pu < pv, v, u), np.where(fu == 1, v, u))
    P = items.pair[big_i]
    Q = items.pair[small_i]
    keep = np.zeros(u.shape, dtype=bool)
    keep[eq] = equal_allowed(table, P[eq], Q[eq])
    keep[hf] = half_allowed(table, P[hf], Q[hf])
    cond = np.where(hf, 1, 0)
    return keep, cond, P, Q, big_i, small_i


def sorted_unique(x: np.ndarray) -> np.ndarray:
    """``np.unique`` of a 1-d int array by one sort (faster than numpy's hash-based unique here)."""
    x = np.sort(x)
    if x.size < 2:
        return x
    return x[np.concatenate([[True], x[1:] != x[:-1]])]


def find_crossings(
    table: PairTable,
    samples: Samples,
    *,
    tol: float,
    snap: float,
    progress: Callable[[int, int], None] | None = None,
    progress_offset: int = 0,
    progress_total: int | None = None,
    band: tuple[float, float] | None = None,
    roles: bool = True,
    node_upper: tuple[np.ndarray, float, float] | None = None,
) -> tuple[np.ndarray, np.ndarray, dict]:
    """Crossing keys and edge ids of all lattice edges a tie branch crosses (compiled sweep).

    Parameters
    ----------
    table : PairTable
    samples : Samples
    tol : float
        Edges where the residual is within ``tol`` at both ends are not crossings
        (they lie in a patch).
    snap : float
        Sign convention: a residual counts as non-negative when ``R >= -snap``.
    progress : callable (done, total), optional
    band : (float, float), optional
        Look for ties only on the edges where their cost can lie in (band[0], band[1]]
        (value units; :mod:`specmap.special.focus`), the costs read with the f/g ``roles``.
    node_upper : (ndarray (n_b, n_a), float, float), optional
        Upper bounds of h at the nodes and what h can add along an a-edge and a b-edge
        (:class:`specmap.distance.node_bounds.NodeBounds`): the band's top on each edge.

    Returns
    -------
    codes, edges : ndarray of int64
        Crossing keys (tie code and branch, :func:`split_branch`) and edge ids, sorted by
        (key, edge), unique.
    stats : dict
        ``candidate_item_pairs`` (overlaps examined), ``swaps``, ``crossings``.
    """
    lat = samples.lattice
    nb = lat.n_b
    total = progress_total or nb
    codes_out: list[np.ndarray] = []
    edges_out: list[np.ndarray] = []
    n_cand = 0
    n_swap = 0
    m_col = push_scale(lat.av)
    flags = kernel_flags(table)
    from specmap.special.focus import cost_factors

    c_lo, c_hi = cost_factors(table, roles)
    b_lo, b_hi = (-np.inf, np.inf) if band is None else (float(band[0]), float(band[1]))
    if node_upper is None:
        node_hi, edge_a, edge_b = np.full((lat.n_b, lat.n_a), np.inf), 0.0, 0.0
    else:
        node_hi, edge_a, edge_b = (
            np.ascontiguousarray(node_upper[0], float),
            float(node_upper[1]),
            float(node_upper[2]),
        )
    step = max(1, nb // 40)
    for j0 in range(0, nb, step):
        j1 = min(nb, j0 + step)
        code, ee, cand = sweep_rows(
            samples.s,
            samples.met,
            samples.cell_pair,
            table.first,
            table.second,
            *flags,
            m_col,
            j0,
            j1,
            snap,
            tol,
            band is not None,
            b_lo,
            b_hi,
            c_lo,
            c_hi,
            node_hi,
            edge_a,
            edge_b,
        )
        n_cand += int(cand)
        n_swap += code.size
        codes_out.append(code)
        edges_out.append(ee)
        if progress is not None:
            progress(progress_offset + j1, total)
    return unique_crossings(lat, codes_out, edges_out, n_cand, n_swap)


def unique_crossings(
    lat: Lattice, codes_out: list[np.ndarray], edges_out: list[np.ndarray], n_cand: int, n_swap: int
) -> tuple[np.ndarray, np.ndarray, dict]:
    """Concatenated crossings sorted by (code, edge) without repeats, and the detection stats."""
    codes = np.concatenate(codes_out) if codes_out else np.zeros(0, np.int64)
    eids = np.concatenate(edges_out) if edges_out else np.zeros(0, np.int64)
    key = sorted_unique(codes * lat.n_edges + eids)
    codes, eids = np.divmod(key, lat.n_edges)
    stats = {"candidate_item_pairs": int(n_cand), "swaps": int(n_swap), "crossings": int(codes.size)}
    return codes, eids, stats


def split_branch(table: PairTable, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Crossing keys -> (tie codes, branches).

    A crossing key is ``branch * 2 n² + code`` (n pairs; ``code`` the tie code of
    :mod:`specmap.special.pairs`); branch 0 is the zero of c_P - k c_Q, branch 1 that of
    c_P + k c_Q (c_P = s_first - s_second of pair P).
    """
    n2 = 2 * table.n_pairs * table.n_pairs
    branch, code = np.divmod(np.asarray(codes, np.int64), n2)
    return code, branch


_SLOTS_CACHE: list = [None, None, None]


def crossing_slots(table: PairTable, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Contour slots (K, 4) and factors (K,) of crossing keys, ordered for the signed branch.

    Branch 1 (c_P + k c_Q = 0) is branch 0 of the tie with Q's two contours swapped, so the
    signed residual ``(s_0 - s_1) - k (s_2 - s_3)`` of the returned slots vanishes on the
    crossing's branch (:func:`specmap.special.compiled.contours.signed_residual`). The result for
    the last large ``codes`` array is kept (the atlas asks for it at several stages); read-only.
    """
    c = _SLOTS_CACHE
    if c[0] is not None and c[0]() is codes and c[1]() is table:
        return c[2]
    plain, branch = split_branch(table, codes)
    slots, factor = table.tie_contours(plain)
    slots = slots.copy()
    b1 = branch == 1
    slots[b1] = slots[b1][:, [0, 1, 3, 2]]
    out = np.ascontiguousarray(slots), np.ascontiguousarray(factor)
    if isinstance(codes, np.ndarray) and codes.size >= 100_000:
        c[0], c[1], c[2] = weakref.ref(codes), weakref.ref(table), out
    return out


def relevant_cells(table: PairTable, samples: Samples, codes: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """For each crossing: which of the two cells beside the edge see the tie met.

    A cell sees a tie when all four contours are met at one of its corners.
    Returns a bool array (K, 2) aligned with :meth:`Lattice.edge_cells`.
    """
    lat = samples.lattice
    slots, _ = crossing_slots(table, codes)
    return tie_cells_met(samples.met, slots, np.asarray(edges, np.int64), lat.n_a, lat.n_b)
