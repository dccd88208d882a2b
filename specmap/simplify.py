"""Persistence-sensitive simplification of PL functions on closed triangulated surfaces.

Given vertex values f of a PL function on a closed surface (any genus, any
number of components) and a threshold delta >= 0, :func:`simplify_function`
returns f' with ||f - f'||_inf <= delta whose persistence diagram has no
finite pair of persistence below delta, keeping every essential class
[EMP06]_, [AGHLM09]_. It works in two passes over vertices, each a union-find
sweep of the lower-star filtration (the 0-dimensional persistence of the
sublevel sets, elder rule):

1. **minima**: call a minimum *significant* when its 0-dimensional pair has
   persistence >= delta (or it is essential). Then
   f'(v) = min{t >= f(v) : the component of v in {f <= t} holds a significant
   minimum}: every basin of an insignificant minimum is filled up to the
   saddle where it joins a significant component. Following the chain of
   merges, f'(v) - f(v) < delta;
2. **maxima**: the same on -f', which removes the saddle-maximum pairs (on a
   closed surface the finite 1-dimensional pairs of f are the finite
   0-dimensional pairs of -f [CEH09]_). On a surface the two passes do not
   undo each other [AGHLM09]_.

Flat regions (the symbolic rule). The input is first made injective: ties
are broken by (value, vertex index) and spread upward by less than the gap to
the next distinct value. A filled basin B, attached at its saddle w, is laid
just above f(w) in the order of the discrete harmonic function on B that is
0 at w and 1 at every other neighbour of B (uniform weights); by the
maximum principle no vertex of B is then a new extremum, so the only
critical points left in the filled region are the saddles its topology
forces. The values are f(w) + eta k / (|B| + 1), k = 1 .. |B| in that order,
with eta below both the gap to the next value above f(w) and the slack to
delta; f' is injective on vertices, and the offsets are part of the measured
change ``sup_change``. If float ties in the harmonic order leave a short
pair, the two passes are repeated (``rounds``), never beyond the delta budget
of any vertex; ``short_pairs_left`` reports what (if anything) remained.

Aligned layout. For a map (f1, f2) an edge is a PL Pareto edge only if f1 and
f2 order its ends oppositely, so a filled region of f1 laid out in the order of
f2 adds no Pareto edge inside it. With a companion function (``align``, used
by :func:`simplify_pair`), each region B is laid out by the companion filled on
B with the region's saddle as its only minimum (so still no new minimum), and
the sub-regions this fills by the harmonic rule. New maxima it may create have
persistence below eta and go in the maxima pass; if a short pair were left
after the rounds, the harmonic layout is used instead (``layout``).

Critical points are counted as PL critical vertices from the lower link
[Ban67]_ (saddles with multiplicity), by
:func:`specmap.grids.piecewise.pl_critical_vertices`.

References
----------
.. [EMP06] Edelsbrunner, Morozov, Pascucci, "Persistence-sensitive
   simplification of functions on 2-manifolds", Proc. 22nd ACM Symposium on
   Computational Geometry (2006).
.. [AGHLM09] Attali, Glisse, Hornus, Lazarus, Morozov, "Persistence-sensitive
   simplification of functions on surfaces in linear time", TopoInVis (2009).
.. [CEH09] Cohen-Steiner, Edelsbrunner, Harer, "Extending persistence using
   Poincaré and Lefschetz duality", Found. Comput. Math. 9 (2009).
.. [Ban67] Banchoff, "Critical points and curvature for embedded polyhedra",
   J. Differential Geom. 1 (1967).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numba
import numpy as np
from scipy.sparse import coo_matrix, csr_matrix
from scipy.sparse.linalg import spsolve

MAX_ROUNDS = 4


# --------------------------------------------------------------------------- compiled sweeps


@numba.njit(cache=True, nogil=True)
def _find(parent: np.ndarray, x: int) -> int:
    root = x
    while parent[root] != root:
        root = parent[root]
    while parent[x] != root:  # path compression
        nxt = parent[x]
        parent[x] = root
        x = nxt
    return root


@numba.njit(cache=True, nogil=True)
def _zero_pairs(
    order: np.ndarray, rank: np.ndarray, indptr: np.ndarray, indices: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """0-dimensional lower-star persistence by union-find (elder rule).

    Returns (birth vertices, death vertices) of the finite pairs and the essential minima.
    """
    n = len(order)
    parent = np.arange(n)
    oldest = np.arange(n)  # oldest minimum (vertex) of each root
    births = np.empty(n, dtype=np.int64)
    deaths = np.empty(n, dtype=np.int64)
    npairs = 0
    is_min = np.zeros(n, dtype=np.bool_)
    for v in order:
        rv = rank[v]
        root = -1
        for p in range(indptr[v], indptr[v + 1]):
            u = indices[p]
            if rank[u] > rv:
                continue
            ru = _find(parent, u)
            if root == -1:
                root = ru
            elif ru != root:
                # the younger of the two components dies at v
                if rank[oldest[ru]] < rank[oldest[root]]:
                    ru, root = root, ru
                births[npairs] = oldest[ru]
                deaths[npairs] = v
                npairs += 1
                parent[ru] = root
        if root == -1:
            is_min[v] = True
        else:
            parent[v] = root
    alive = np.zeros(n, dtype=np.bool_)
    for i in range(n):
        if is_min[i]:
            alive[i] = True
    for k in range(npairs):
        alive[births[k]] = False
    return births[:npairs].copy(), deaths[:npairs].copy(), np.nonzero(alive)[0]


@numba.njit(cache=True, nogil=True)
def _settle(
    order: np.ndarray, rank: np.ndarray, indptr: np.ndarray, indices: np.ndarray, significant: np.ndarray
) -> np.ndarray:
    """For each vertex v the vertex w at which v's component first holds a significant minimum.

    ``settle[v] == v`` for vertices that keep their value; otherwise v lies in a basin of
    insignificant minima filled up to the value of w.
    """
    n = len(order)
    parent = np.arange(n)
    flag = np.zeros(n, dtype=np.bool_)
    head = np.full(n, -1, dtype=np.int64)  # pending members of an unflagged root (linked list)
    tail = np.full(n, -1, dtype=np.int64)
    nxt = np.full(n, -1, dtype=np.int64)
    settle = np.arange(n)
    roots = np.empty(64, dtype=np.int64)
    for v in order:
        rv = rank[v]
        nr = 0
        for p in range(indptr[v], indptr[v + 1]):
            u = indices[p]
            if rank[u] > rv:
                continue
            ru = _find(parent, u)
            seen = False
            for k in range(nr):
                if roots[k] == ru:
                    seen = True
                    break
            if not seen:
                if nr == len(roots):
                    bigger = np.empty(2 * nr, dtype=np.int64)
                    bigger[:nr] = roots
                    roots = bigger
                roots[nr] = ru
                nr += 1
        flagged = significant[v] if nr == 0 else False
        for k in range(nr):
            if flag[roots[k]]:
                flagged = True
        if flagged:
            for k in range(nr):
                r = roots[k]
                if not flag[r]:
                    m = head[r]
                    while m != -1:
                        settle[m] = v
                        m = nxt[m]
                    head[r] = -1
                    tail[r] = -1
                parent[r] = v
            flag[v] = True
        else:
            head[v] = v
            tail[v] = v
            for k in range(nr):
                r = roots[k]
                if head[r] != -1:
                    nxt[tail[v]] = head[r]
                    tail[v] = tail[r]
                    head[r] = -1
                    tail[r] = -1
                parent[r] = v
    return settle


# --------------------------------------------------------------------------- helpers


def adjacency(tri: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """CSR (indptr, indices) of the vertex graph of a triangle mesh (each edge once per end)."""
    T = np.asarray(tri, dtype=np.int64)
    e = np.concatenate([T[:, [0, 1]], T[:, [1, 2]], T[:, [2, 0]]])
    e = np.concatenate([e, e[:, ::-1]])
    A = csr_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(n, n))
    A.sum_duplicates()
    A.sort_indices()
    return A.indptr.astype(np.int64), A.indices.astype(np.int64)


def _ranks(f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    order = np.lexsort((np.arange(len(f)), f)).astype(np.int64)
    rank = np.empty(len(f), dtype=np.int64)
    rank[order] = np.arange(len(f))
    return order, rank


def make_injective(values: np.ndarray, limit: float = np.inf) -> np.ndarray:
    """Spread exact ties upward in (value, vertex index) order.

    Each tied value moves up by less than a third of the gap to the next distinct value and
    less than ``limit``, so the order by (value, index) is kept; a tie-free input is returned
    unchanged (a copy).
    """
    f = np.array(values, dtype=float)
    order, _ = _ranks(f)
    s = f[order]
    d = np.diff(s)
    if len(s) < 2 or (d > 0).all():
        return f
    distinct = np.unique(s)
    gaps = np.diff(distinct)
    base = float(gaps.min()) if len(gaps) else max(abs(float(s[0])), 1.0)
    start = np.r_[True, d > 0]
    group = np.cumsum(start) - 1
    first = np.nonzero(start)[0]
    pos = np.arange(len(s)) - first[group]
    size = np.bincount(group)[group]
    s = s + min(base / 3.0, limit) * pos / size
    out = np.empty_like(f)
    out[order] = s
    return out


def _harmonic_key(
    members: np.ndarray, settle: np.ndarray, indptr: np.ndarray, indices: np.ndarray
) -> np.ndarray:
    """Discrete harmonic function on every filled region: 0 at its saddle, 1 on its other neighbours."""
    n = len(settle)
    local = np.full(n, -1, dtype=np.int64)
    local[members] = np.arange(len(members))
    deg = np.diff(indptr)
    rows = np.repeat(members, deg[members])
    counts = deg[members]
    offsets = np.repeat(indptr[members] - np.r_[0, np.cumsum(counts)[:-1]], counts)
    cols = indices[offsets + np.arange(int(counts.sum()))]
    same = (local[cols] >= 0) & (settle[cols] == settle[rows])
    at_saddle = cols == settle[rows]
    rhs = np.bincount(local[rows], weights=(~same & ~at_saddle).astype(float), minlength=len(members))
    m = len(members)
    A = coo_matrix(
        (
            np.r_[deg[members].astype(float), -np.ones(int(same.sum()))],
            (np.r_[np.arange(m), local[rows[same]]], np.r_[np.arange(m), local[cols[same]]]),
        ),
        shape=(m, m),
    ).tocsc()
    return np.atleast_1d(spsolve(A, rhs))


def _aligned_key(
    members: np.ndarray, settle: np.ndarray, aux: np.ndarray, indptr: np.ndarray, indices: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Order of every filled region that follows ``aux`` and still has no minimum.

    In each region B with saddle w, ``aux`` restricted to B is itself filled with w as the only
    significant minimum (a sweep on the graph of B and w, w first), and the sub-regions this
    fills are laid out by the harmonic rule from their own saddle. Returns (level, harmonic)
    per member, compared in this order.
    """
    n = len(settle)
    is_mem = settle != np.arange(n)
    rows = np.repeat(np.arange(n), np.diff(indptr))
    cols = indices
    same = is_mem[rows] & is_mem[cols] & (settle[rows] == settle[cols])
    to_saddle = (is_mem[rows] & (cols == settle[rows])) | (is_mem[cols] & (rows == settle[cols]))
    keep = same | to_saddle
    A = csr_matrix((np.ones(int(keep.sum())), (rows[keep], cols[keep])), shape=(n, n))
    A.sum_duplicates()
    A.sort_indices()
    ip2, ix2 = A.indptr.astype(np.int64), A.indices.astype(np.int64)
    a = np.full(n, np.inf)
    a[members] = aux[members]
    saddles = np.unique(settle[members])
    a[saddles] = -np.inf
    order, rank = _ranks(a)
    significant = np.zeros(n, dtype=bool)
    significant[saddles] = True
    s2 = _settle(order, rank, ip2, ix2, significant)
    sub = members[s2[members] != members]
    level = a.copy()
    level[sub] = a[s2[sub]]
    h = np.zeros(n)
    if len(sub):
        h[sub] = 1.0 + _harmonic_key(sub, s2, indptr, indices)
    return level[members], h[members]


def _one_pass(
    f: np.ndarray,
    delta: float,
    hi: np.ndarray,
    indptr: np.ndarray,
    indices: np.ndarray,
    aux: np.ndarray | None = None,
) -> tuple[np.ndarray, int]:
    """Fill the basins of the minima of persistence < delta, raising no vertex above ``hi``.

    Filled regions are laid out by the harmonic rule, or following ``aux`` when given
    (:func:`_aligned_key`). Returns the new values and the number of basins filled.
    """
    order, rank = _ranks(f)
    births, deaths, _ = _zero_pairs(order, rank, indptr, indices)
    pers = f[deaths] - f[births]
    short = pers < delta
    if not short.any():
        return f, 0
    significant = np.ones(len(f), dtype=bool)
    significant[births[short]] = False
    settle = _settle(order, rank, indptr, indices, significant)
    members = np.nonzero(settle != np.arange(len(f)))[0]
    level = f[settle[members]]
    if aux is None:
        key, second = _harmonic_key(members, settle, indptr, indices), np.zeros(len(members))
    else:
        key, second = _aligned_key(members, settle, aux, indptr, indices)
    # order inside each filled region: by (saddle, key, second key, vertex index)
    o = np.lexsort((members, second, key, settle[members]))
    mem, lev, sad = members[o], level[o], settle[members][o]
    start = np.r_[True, sad[1:] != sad[:-1]]
    group = np.cumsum(start) - 1
    first = np.nonzero(start)[0]
    k = np.arange(len(mem)) - first[group] + 1
    size = np.bincount(group)
    # eta per region: below the gap to the next kept value above the level, and the budget slack
    kept = np.sort(f[settle == np.arange(len(f))])
    above = np.searchsorted(kept, lev[first], side="right")
    gap = np.where(above < len(kept), kept[np.minimum(above, len(kept) - 1)] - lev[first], np.inf)
    slack = np.minimum.reduceat(hi[mem] - lev, first)
    ok = slack > 0
    eta = 0.5 * np.minimum(gap, slack)
    eta = np.where(np.isfinite(eta), eta, 1.0)
    g = f.copy()
    fill = ok[group]
    g[mem[fill]] = lev[fill] + eta[group[fill]] * k[fill] / (size[group[fill]] + 1)
    return g, int(ok.sum())


def _short_pairs(f: np.ndarray, delta: float, indptr: np.ndarray, indices: np.ndarray) -> int:
    """Finite pairs (minimum-saddle of f and of -f) with persistence < delta."""
    total = 0
    for h in (f, -f):
        order, rank = _ranks(h)
        b, d, _ = _zero_pairs(order, rank, indptr, indices)
        total += int((h[d] - h[b] < delta).sum())
    return total


def persistence_values(tri: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Sorted persistences of the finite pairs of f (minimum-saddle pairs of f and of -f).

    On a closed surface these are all finite pairs of the lower-star filtration
    (the saddle-maximum pairs of f are the minimum-saddle pairs of -f [CEH09]_).
    """
    f = np.asarray(values, dtype=float)
    indptr, indices = adjacency(tri, len(f))
    out = []
    for h in (f, -f):
        order, rank = _ranks(h)
        b, d, _ = _zero_pairs(order, rank, indptr, indices)
        out.append(h[d] - h[b])
    return np.sort(np.concatenate(out))


# --------------------------------------------------------------------------- public API


def smooth_within(tri: np.ndarray, values: np.ndarray, tau: float, iterations: int = 300) -> np.ndarray:
    """Laplacian smoothing of vertex values kept inside the tube [f - tau, f + tau].

    Each sweep replaces every value by the mean of its neighbours (uniform weights) and clips
    it back into the tube, so ||f - f_s||_inf <= tau whatever the number of sweeps. Not a
    persistence method: it lowers the number of PL critical points and of PL Pareto edges of
    noisy data, and composes with :func:`simplify_function` (the sup-norm changes add up).

    Parameters
    ----------
    tri : ndarray (m, 3) of int
    values : ndarray (n,)
        Value units.
    tau : float
        Tube radius >= 0 (value units).
    iterations : int
        Jacobi sweeps.

    Returns
    -------
    ndarray (n,)
    """
    f = np.asarray(values, dtype=float)
    indptr, indices = adjacency(tri, len(f))
    deg = np.maximum(np.diff(indptr), 1).astype(float)
    A = csr_matrix((np.repeat(1.0 / deg, np.diff(indptr)), indices, indptr), shape=(len(f), len(f)))
    g = f.copy()
    for _ in range(int(iterations)):
        g = np.clip(A @ g, f - tau, f + tau)
    while True:  # f + tau can round above the tube: step such values back towards f
        bad = np.abs(g - f) > tau
        if not bad.any():
            return g
        g[bad] = np.nextafter(g[bad], f[bad])


@dataclass(frozen=True)
class Simplified:
    """One simplified function.

    Attributes
    ----------
    values : ndarray (n,)
        f' at the vertices, injective (value units).
    delta : float
        The threshold asked for (value units).
    sup_change : float
        Measured max |f - f'| over the vertices, tie-breaking offsets included (<= delta).
    critical_before, critical_after : dict
        PL critical vertices {"min", "saddle", "max"} of f and f' (saddles with multiplicity).
    rounds : int
        Passes of (minima, maxima) run.
    short_pairs_left : int
        Finite pairs of f' with persistence < delta (0 unless float precision prevented a fill).
    layout : str
        How filled regions were ordered: ``"harmonic"`` or ``"aligned"`` (with a companion).
    """

    values: np.ndarray
    delta: float
    sup_change: float
    critical_before: dict[str, int]
    critical_after: dict[str, int]
    rounds: int
    short_pairs_left: int
    layout: str = "harmonic"


@dataclass(frozen=True)
class SimplifiedPair:
    """Both components of a mesh map, simplified with one delta."""

    f1: Simplified
    f2: Simplified

    @property
    def values(self) -> np.ndarray:
        """(n, 2) array (f1', f2')."""
        return np.column_stack([self.f1.values, self.f2.values])

    @property
    def delta(self) -> float:
        return self.f1.delta

    @property
    def sup_change(self) -> tuple[float, float]:
        """Measured sup-norm change of each component (value units)."""
        return (self.f1.sup_change, self.f2.sup_change)


def simplify_function(
    tri: np.ndarray, values: np.ndarray, delta: float, *, align: np.ndarray | None = None
) -> Simplified:
    """Persistence-sensitive simplification of one PL function on a closed triangulated surface.

    Parameters
    ----------
    tri : ndarray (m, 3) of int
        Triangles of a closed 2-manifold (any genus, any number of components).
    values : ndarray (n,)
        f at the vertices (value units).
    delta : float
        Threshold >= 0 (value units): pairs of persistence < delta are removed.
    align : ndarray (n,), optional
        A companion function (the other component of the map): filled regions are then laid
        out in its order as far as that creates no extremum, so that their edges are not PL
        Pareto edges of the pair (same order in both). If this leaves a short pair, the
        harmonic layout is used instead (``layout`` says which).

    Returns
    -------
    Simplified
        f' with ||f - f'||_inf <= delta, no finite pair of persistence < delta, the same
        essential classes (Betti numbers of the surface), injective on vertices.

    References
    ----------
    .. [EMP06] Edelsbrunner, Morozov, Pascucci (2006).
    .. [AGHLM09] Attali, Glisse, Hornus, Lazarus, Morozov (2009).

    Examples
    --------
    An octahedron (vertices +x, -x, +y, -y, +z, -z): minima at +x and -x, saddles at +y and
    -y, maxima at +z and -z. The pair (-x, +y) has persistence 0.5 and goes at delta = 0.6;
    the pair (-y, +z), persistence 1.5, stays:

    >>> T = np.array([[0, 2, 4], [2, 1, 4], [1, 3, 4], [3, 0, 4],
    ...               [2, 0, 5], [1, 2, 5], [3, 1, 5], [0, 3, 5]])
    >>> f = np.array([0.0, 0.5, 1.0, 1.5, 3.0, 4.0])
    >>> s = simplify_function(T, f, 0.6)
    >>> s.critical_before, s.critical_after
    ({'min': 2, 'saddle': 2, 'max': 2}, {'min': 1, 'saddle': 1, 'max': 2})
    >>> round(s.sup_change, 3)  # 0.5 to fill the basin, 0.025 of tie-breaking offset
    0.525
    """
    from specmap.grids.piecewise import pl_critical_vertices

    T = np.asarray(tri, dtype=np.int64)
    f = np.asarray(values, dtype=float)
    if f.ndim != 1:
        raise ValueError(f"values have shape {f.shape}, expected (n,)")
    if not (delta >= 0 and np.isfinite(delta)):
        raise ValueError(f"delta must be finite and >= 0, got {delta!r}")
    delta = float(delta)
    indptr, indices = adjacency(T, len(f))
    if delta == 0:  # nothing to remove; ties stay, ordered by (value, vertex index)
        crit = pl_critical_vertices(T, f).counts()
        return Simplified(f.copy(), 0.0, 0.0, crit, dict(crit), 0, 0)
    aux = None if align is None else np.asarray(align, dtype=float)
    if aux is not None and aux.shape != f.shape:
        raise ValueError(f"align has shape {aux.shape}, expected {f.shape}")
    g, rounds, left = _passes(f, delta, indptr, indices, aux)
    layout = "harmonic" if aux is None else "aligned"
    if left and aux is not None:
        g, rounds, left = _passes(f, delta, indptr, indices, None)
        layout = "harmonic"
    return Simplified(
        values=g,
        delta=delta,
        sup_change=float(np.abs(g - f).max()) if len(f) else 0.0,
        critical_before=pl_critical_vertices(T, f).counts(),
        critical_after=pl_critical_vertices(T, g).counts(),
        rounds=rounds,
        short_pairs_left=left,
        layout=layout,
    )


def _passes(
    f: np.ndarray, delta: float, indptr: np.ndarray, indices: np.ndarray, aux: np.ndarray | None
) -> tuple[np.ndarray, int, int]:
    """Rounds of (minima, maxima) passes until no short pair is left: (values, rounds, left)."""
    g = make_injective(f, 1e-6 * delta)
    rounds = 0
    for _ in range(MAX_ROUNDS):
        rounds += 1
        g, r1 = _one_pass(g, delta, f + delta, indptr, indices, aux)
        h, r2 = _one_pass(
            -g,
            delta,
            delta - f,
            indptr,
            indices,  # -g <= -(f - delta)
            None if aux is None else -aux,
        )
        g = -h
        if r1 + r2 == 0 or _short_pairs(g, delta, indptr, indices) == 0:
            break
    return g, rounds, _short_pairs(g, delta, indptr, indices)


def simplify_pair(
    tri: np.ndarray, f1: np.ndarray, f2: np.ndarray, delta: float, *, align: bool = True
) -> SimplifiedPair:
    """Simplify both components of a mesh map with the same delta (see :func:`simplify_function`).

    With ``align`` (default) the filled regions of f1 follow f2 and those of f2 follow the
    simplified f1, which keeps the filling from adding PL Pareto edges.
    """
    s1 = simplify_function(tri, f1, delta, align=f2 if align else None)
    s2 = simplify_function(tri, f2, delta, align=s1.values if align else None)
    return SimplifiedPair(s1, s2)


@dataclass(frozen=True)
class AutoDelta:
    """Result of :func:`auto_delta`.

    Attributes
    ----------
    delta : float
        The smallest candidate delta found that meets the budget (0 when the pair already does).
    pair : SimplifiedPair or None
        The simplified pair at ``delta`` (None when delta is 0).
    count_before, count_after : int
        ``count_fn`` on the input and on the result.
    budget : int
    met : bool
        False when even removing every finite pair leaves the count above the budget; then
        ``delta`` is the scanned candidate with the smallest count, or 0 when none lowers it.
    evaluations : int
        Calls of ``count_fn``.
    """

    delta: float
    pair: SimplifiedPair | None
    count_before: int
    count_after: int
    budget: int
    met: bool
    evaluations: int


def candidate_deltas(tri: np.ndarray, f1: np.ndarray, f2: np.ndarray) -> np.ndarray:
    """Thresholds just above each distinct persistence value of f1 and f2 (increasing).

    The set of pairs removed changes only when delta passes a persistence value, so these are
    the only deltas worth trying; each sits above its value by a small slack (1e-6 relative,
    at least 1e-9 of the value range, at most half the way to the next value) so that the filled
    basins can be laid out injectively in floating point.
    """
    p = np.concatenate([persistence_values(tri, f1), persistence_values(tri, f2)])
    p = p[np.isfinite(p) & (p > 0)]
    if not len(p):
        return p
    scale = max(float(np.ptp(f1)), float(np.ptp(f2)), 1e-300)
    floor = 1e-9 * scale
    p = np.unique(p)
    keep = np.r_[True, np.diff(p) > floor]  # values closer than the floor act as one
    p = p[keep]
    nxt = np.r_[p[1:], np.inf]
    return p + np.minimum(np.maximum(1e-6 * p, floor), 0.5 * (nxt - p))


def auto_delta(
    tri: np.ndarray,
    f1: np.ndarray,
    f2: np.ndarray,
    count_fn: Callable[[np.ndarray, np.ndarray], int],
    budget: int,
    *,
    scan: int = 12,
) -> AutoDelta:
    """Smallest delta whose simplified pair brings ``count_fn`` to at most ``budget``.

    Bisection over :func:`candidate_deltas`, taking the count as non-increasing in delta. When
    even the largest candidate misses the budget, ``scan`` candidates spread evenly over the list
    are counted and the one with the fewest is returned (filling basins can add Pareto pieces,
    so there the count is not monotone).

    Parameters
    ----------
    tri : ndarray (m, 3) of int
    f1, f2 : ndarray (n,)
        The two components at the vertices.
    count_fn : callable (f1', f2') -> int
        E.g. the number of contours of the extended Pareto grid of the pair.
    budget : int
    scan : int
        Candidates counted when the budget is out of reach.

    Returns
    -------
    AutoDelta
    """
    f1 = np.asarray(f1, dtype=float)
    f2 = np.asarray(f2, dtype=float)
    before = int(count_fn(f1, f2))
    calls = 1
    if before <= budget:
        return AutoDelta(0.0, None, before, before, int(budget), True, calls)
    cands = candidate_deltas(tri, f1, f2)
    if not len(cands):
        return AutoDelta(0.0, None, before, before, int(budget), False, calls)
    cache: dict[int, tuple[SimplifiedPair, int]] = {}

    def at(k: int) -> tuple[SimplifiedPair, int]:
        nonlocal calls
        if k not in cache:
            pair = simplify_pair(tri, f1, f2, float(cands[k]))
            calls += 1
            cache[k] = (pair, int(count_fn(pair.f1.values, pair.f2.values)))
        return cache[k]

    lo, hi = -1, len(cands) - 1
    top, top_count = at(hi)
    if top_count > budget:  # out of reach: the fewest over a spread of candidates (0 when none helps)
        for k in np.unique(np.linspace(0, hi, min(scan, hi + 1)).round().astype(int)):
            at(int(k))
        best = min(cache, key=lambda k: (cache[k][1], k))
        if cache[best][1] >= before:
            return AutoDelta(0.0, None, before, before, int(budget), False, calls)
        return AutoDelta(
            float(cands[best]), cache[best][0], before, cache[best][1], int(budget), False, calls
        )
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if at(mid)[1] <= budget:
            hi = mid
        else:
            lo = mid
    pair, count = at(hi)
    return AutoDelta(float(cands[hi]), pair, before, count, int(budget), True, calls)


def simplify_values(
    tri: np.ndarray,
    values: np.ndarray,
    setting: float | str,
    count_fn: Callable[[np.ndarray, np.ndarray], int],
    *,
    budget: int = 60,
    cap_fraction: float = 0.05,
) -> tuple[np.ndarray, dict]:
    """Simplify a mesh map as a study's ``simplify = delta | "auto"`` asks, with the record to keep.

    Parameters
    ----------
    tri : ndarray (m, 3) of int
    values : ndarray (n, 2)
        (f1, f2) at the vertices.
    setting : float or "auto"
        delta >= 0 (value units): persistence-sensitive simplification of each field
        (:func:`simplify_pair`); or ``"auto"``: the joint simplification of the pair
        (:func:`specmap.jacobi_smooth.auto_joint`: tube smoothing, fold straightening, persistence)
        with the smallest measured change that meets ``budget``, within ``cap_fraction`` of the
        larger value range.
    count_fn : callable (f1, f2) -> int
        The count to report (and for ``"auto"`` to bring under the budget), e.g. the number of
        contours of the pair's extended Pareto grid.
    budget : int
        For ``"auto"``.
    cap_fraction : float
        For ``"auto"``: the largest change tried, as a fraction of max(ptp f1, ptp f2).

    Returns
    -------
    values : ndarray (n, 2)
        The simplified pair (the input itself when nothing changes).
    meta : dict
        JSON-ready: ``delta``, ``sup_change`` [f1, f2] (measured), ``contours_before``,
        ``contours_after``, ``setting``, ``budget`` and ``met`` (``"auto"`` only, else None),
        ``critical_before`` / ``critical_after`` {"f1"|"f2": {"min", "saddle", "max"}},
        ``layout``, ``method`` (``"persistence"`` or ``"joint"``); for ``"auto"`` also ``tube``
        (tau of the chosen pair, None when unchanged), ``cap`` (value units) and ``tried``
        (candidates evaluated). For the joint method ``delta`` is its bound 4 tau.
    """
    F = np.asarray(values, dtype=float)
    if F.ndim != 2 or F.shape[1] != 2:
        raise ValueError(f"values have shape {F.shape}, expected (n, 2)")
    f1, f2 = F[:, 0], F[:, 1]
    extra: dict = {"method": "persistence"}
    if setting == "auto":
        from specmap.jacobi_smooth import auto_joint

        cap = float(cap_fraction) * max(float(np.ptp(f1)), float(np.ptp(f2)), 0.0) if len(F) else 0.0
        joint = auto_joint(tri, F, count_fn, int(budget), cap) if cap > 0 else None
        if joint is None:  # constant fields: nothing to simplify
            before = int(count_fn(f1, f2))
            joint_pair, after, met = None, before, before <= int(budget)
            tried = 0
        else:
            before, after, met, tried = joint.count_before, joint.count_after, joint.met, len(joint.tried)
            joint_pair = joint.pair
        used_budget = int(budget)
        extra = {
            "method": "joint",
            "tube": None if joint_pair is None else joint_pair.tau,
            "cap": cap,
            "tried": tried,
        }
        if joint_pair is not None:
            from specmap.grids.piecewise import pl_critical_vertices

            out = joint_pair.values
            meta = {
                "setting": "auto",
                "delta": float(joint_pair.bound),
                "sup_change": [float(x) for x in joint_pair.sup_change],
                "contours_before": int(before),
                "contours_after": int(after),
                "budget": used_budget,
                "met": bool(met),
                "critical_before": {
                    k: pl_critical_vertices(tri, F[:, i]).counts() for i, k in enumerate(("f1", "f2"))
                },
                "critical_after": {
                    k: pl_critical_vertices(tri, out[:, i]).counts() for i, k in enumerate(("f1", "f2"))
                },
                "layout": "aligned",
                **extra,
            }
            return out, meta
        pair, delta = None, 0.0
    elif isinstance(setting, (int, float)) and not isinstance(setting, bool):
        delta, met, used_budget = float(setting), None, None
        before = int(count_fn(f1, f2))
        pair = simplify_pair(tri, f1, f2, delta) if delta > 0 else None
        after = int(count_fn(pair.f1.values, pair.f2.values)) if pair is not None else before
    else:
        raise ValueError(f"setting must be a number >= 0 or 'auto', got {setting!r}")
    if pair is None:
        from specmap.grids.piecewise import pl_critical_vertices

        crit = {k: pl_critical_vertices(tri, F[:, i]).counts() for i, k in enumerate(("f1", "f2"))}
        out, sup, after_crit, layout = F, [0.0, 0.0], crit, None
    else:
        out, sup = pair.values, [pair.f1.sup_change, pair.f2.sup_change]
        crit = {"f1": pair.f1.critical_before, "f2": pair.f2.critical_before}
        after_crit = {"f1": pair.f1.critical_after, "f2": pair.f2.critical_after}
        layout = pair.f1.layout
    meta = {
        "setting": setting if setting == "auto" else float(setting),
        "delta": float(delta),
        "sup_change": [float(x) for x in sup],
        "contours_before": int(before),
        "contours_after": int(after),
        "budget": used_budget,
        "met": met,
        "critical_before": crit,
        "critical_after": after_crit,
        "layout": layout,
        **extra,
    }
    return out, meta
