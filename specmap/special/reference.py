"""Reference (naive) methods of the special set: plain crossing detection and segment-test components.

They compute the same results as the production path by the most direct means
and serve as its check (tests) and as the CLI reference method
``--method naive``:

- :func:`naive_crossings` evaluates every tie the pair mode allows
  (:func:`specmap.special.pairs.all_tie_codes`) on every lattice edge
  (vectorised numpy), where :func:`specmap.special.detect.find_crossings`
  sweeps only overlapping items;
- :func:`reference_components` links touching tie curves by binned, exact
  segment tests (:func:`segment_links`), where
  :func:`specmap.special.components.components` uses the lattice chords.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from specmap.special.atlas import Component, TiePiece
from specmap.special.components import components_with, segments
from specmap.special.detect import Items, Samples, relevant_cells, unique_crossings
from specmap.special.lattice import Lattice
from specmap.special.pairs import PairTable, all_tie_codes
from specmap.strip import Window


# ----------------------------------------------------------------------------------------------
# crossings
# ----------------------------------------------------------------------------------------------
def naive_crossings(
    table: PairTable,
    samples: Samples,
    *,
    tol: float,
    snap: float,
    progress: Callable[[int, int], None] | None = None,
    progress_offset: int = 0,
    progress_total: int | None = None,
) -> tuple[np.ndarray, np.ndarray, dict]:
    """:func:`specmap.special.detect.find_crossings` by evaluating every allowed tie on every edge.

    Both signed branches c_P -+ k c_Q of every tie are tested; same parameters and results
    (crossing keys, :func:`specmap.special.detect.split_branch`);
    ``stats["candidate_item_pairs"]`` counts every (tie, branch, edge) evaluated.
    """
    lat = samples.lattice
    items = Items.of(table)
    nb = lat.n_b
    total = progress_total or nb
    codes_out: list[np.ndarray] = []
    edges_out: list[np.ndarray] = []
    n_cand = 0
    n_swap = 0
    dv: dict[int, np.ndarray] = {}
    all_codes = all_tie_codes(table)
    acond, aP, aQ = table.decode(all_codes)
    abig = aP
    asmall = np.where(acond == 1, items.doubled_index[aQ], aQ)
    n2 = 2 * table.n_pairs * table.n_pairs
    for j in range(nb):
        for k in (j, j + 1):
            if k < nb and k not in dv:
                dv[k] = samples.signed_pair_values(table, k)
        dv.pop(j - 1, None)
        edges, V0, V1, pres = _row_edges(lat, samples, table, j, items, dv)
        code_l, ee_l = [], []
        step = max(1, 4_000_000 // max(len(edges), 1))
        for t0 in range(0, all_codes.size, step):
            sl = slice(t0, t0 + step)
            b_i, s_i = abig[sl], asmall[sl]
            n_cand += 2 * b_i.size * len(edges)
            ok = pres[:, b_i] & pres[:, s_i]
            for branch, sign in ((0, -1.0), (1, 1.0)):  # c_P - k c_Q, c_P + k c_Q
                f0 = V0[:, b_i] + sign * V0[:, s_i]
                f1 = V1[:, b_i] + sign * V1[:, s_i]
                sw = ok & ((f0 >= -snap) != (f1 >= -snap)) & (np.maximum(np.abs(f0), np.abs(f1)) > tol)
                ei, ti = np.nonzero(sw)
                code_l.append(all_codes[sl][ti] + branch * n2)
                ee_l.append(ei)
        code = np.concatenate(code_l)
        ee = np.concatenate(ee_l)
        n_swap += code.size
        codes_out.append(code)
        edges_out.append(edges[ee])
        if progress is not None:
            progress(progress_offset + j + 1, total)
    codes = np.concatenate(codes_out) if codes_out else np.zeros(0, np.int64)
    eids = np.concatenate(edges_out) if edges_out else np.zeros(0, np.int64)
    keep = relevant_cells(table, samples, codes, eids).any(axis=1)  # the sweep kernel tests these inline
    return unique_crossings(lat, [codes[keep]], [eids[keep]], n_cand, n_swap)


def _row_edges(
    lat: Lattice, samples: Samples, table: PairTable, j: int, items: Items, dv: dict[int, np.ndarray]
):
    """Edges handled for node row j, their signed end values (E, M) and item presence (E, M)."""
    na, nb = lat.n_a, lat.n_b
    cp = samples.cell_pair
    none = np.zeros((table.n_pairs, na - 1), dtype=bool)
    below = cp[:, j - 1] if j > 0 else none
    above = cp[:, j] if j < nb - 1 else none
    h_pres = (below | above).T
    vals = [np.concatenate([dv[j], 2.0 * dv[j][items.pair[table.n_pairs :]]])]
    v0 = [vals[0][:, :-1].T]
    v1 = [vals[0][:, 1:].T]
    pres = [h_pres]
    edges = [j * (na - 1) + np.arange(na - 1)]
    if j < nb - 1:
        up = np.concatenate([dv[j + 1], 2.0 * dv[j + 1][items.pair[table.n_pairs :]]])
        pad = np.zeros((table.n_pairs, na + 1), dtype=bool)
        pad[:, 1:-1] = cp[:, j]
        v_pres = (pad[:, :-1] | pad[:, 1:]).T
        v0.append(vals[0].T)
        v1.append(up.T)
        pres.append(v_pres)
        edges.append(lat.n_h + j * na + np.arange(na))
    V0 = np.concatenate(v0)
    V1 = np.concatenate(v1)
    P = np.concatenate(pres)[:, items.pair]
    return np.concatenate(edges), V0, V1, P


# ----------------------------------------------------------------------------------------------
# components
# ----------------------------------------------------------------------------------------------
def reference_components(pieces: tuple[TiePiece, ...], window: Window) -> tuple[Component, ...]:
    """:func:`specmap.special.components.components` with line contacts from :func:`segment_links`
    (no lattice needed)."""
    return components_with(pieces, window, segment_links)


def segment_links(lines: list, eps: float) -> tuple[np.ndarray, np.ndarray]:
    """Links (i, j) between lines whose union connects every set of touching lines.

    Lines sharing a vertex (to ``eps``) are linked first. Segments are binned in
    a hash grid whose cell is the largest segment extent, so two touching
    segments share a bin; only segments of a common bin that still belong to
    different components are tested (vectorised, bins in random chunks with the
    components updated after each chunk), which keeps the work near-linear.
    """
    if not lines:
        z = np.zeros(0, np.int64)
        return z, z
    p, q, owner = segments(lines)
    lo = np.minimum(p, q) - eps
    hi = np.maximum(p, q) + eps
    ext = np.max(hi - lo, axis=1)
    h = max(float(np.quantile(ext, 0.99)), eps, 1e-300)
    org = lo.min(axis=0)
    c0 = np.floor((lo - org) / h).astype(np.int64)
    c1 = np.floor((hi - org) / h).astype(np.int64)
    width = int(c1[:, 0].max()) + 2
    # every bin a segment's bounding box touches (long segments: several)
    nx_ = c1[:, 0] - c0[:, 0] + 1
    ny_ = c1[:, 1] - c0[:, 1] + 1
    tot = nx_ * ny_
    sid = np.repeat(np.arange(len(p)), tot)
    k = np.arange(int(tot.sum())) - np.repeat(np.cumsum(tot) - tot, tot)
    dy, dx = np.divmod(k, nx_[sid])
    segs = sid
    bins = (c0[sid, 1] + dy) * width + c0[sid, 0] + dx
    n_lines = len(lines)
    # round 1: lines sharing an end point or vertex (to eps) are linked without tests
    key = np.round(np.vstack([p, q]) / eps).astype(np.int64)
    _, vid = np.unique(key, axis=0, return_inverse=True)
    vid = vid.ravel()
    links_a = [np.concatenate([owner, owner])]
    links_b = [n_lines + vid]
    n_nodes = n_lines + int(vid.max()) + 1
    label = _labels(n_nodes, links_a, links_b)[:n_lines]
    # coincident segments (same rounded end points) are already linked: keep one per bin
    vp, vq = vid[: p.shape[0]], vid[p.shape[0] :]
    sk = np.minimum(vp, vq)[segs] * (int(vid.max()) + 1) + np.maximum(vp, vq)[segs]
    _, first = np.unique(np.stack([bins, sk], axis=1), axis=0, return_index=True)
    segs, bins = segs[first], bins[first]
    order = np.argsort(bins, kind="stable")
    segs, bins = segs[order], bins[order]
    _, start, count = np.unique(bins, return_index=True, return_counts=True)
    rng = np.random.default_rng(0)
    multi = np.nonzero(count > 1)[0]
    multi = multi[rng.permutation(multi.size)]
    work = count[multi].astype(np.int64) * (count[multi] - 1) // 2
    cuts = np.searchsorted(np.cumsum(work), np.arange(0, int(work.sum()) + 1, 1_000_000)[1:])
    for chunk in np.split(multi, np.unique(cuts + 1)):
        if chunk.size == 0:
            continue
        us, vs = [], []
        for cval in np.unique(count[chunk]):
            sel = start[chunk[count[chunk] == cval]]
            ia, ib = np.triu_indices(int(cval), k=1)
            for t0 in range(0, ia.size, 1_000_000):
                ja, jb = ia[t0 : t0 + 1_000_000], ib[t0 : t0 + 1_000_000]
                u = segs[(sel[:, None] + ja[None, :]).ravel()]
                v = segs[(sel[:, None] + jb[None, :]).ravel()]
                keep = label[owner[u]] != label[owner[v]]
                us.append(u[keep])
                vs.append(v[keep])
                if sum(x.size for x in us) > 1_000_000:
                    label = _test_links(p, q, owner, eps, us, vs, links_a, links_b, n_nodes, n_lines, label)
                    us, vs = [], []
        if us:
            label = _test_links(p, q, owner, eps, us, vs, links_a, links_b, n_nodes, n_lines, label)
    # links from every line to the first line of its component
    rep = np.full(int(label.max()) + 1, -1, dtype=np.int64)
    rep[label[::-1]] = np.arange(n_lines)[::-1]
    return np.arange(n_lines), rep[label]


def _test_links(p, q, owner, eps, us, vs, links_a, links_b, n_nodes, n_lines, label):
    u = np.concatenate(us)
    v = np.concatenate(vs)
    keep = label[owner[u]] != label[owner[v]]
    u, v = u[keep], v[keep]
    if u.size == 0:
        return label
    hit = _segments_close(p[u], q[u], p[v], q[v], eps)
    if not hit.any():
        return label
    links_a.append(owner[u[hit]])
    links_b.append(owner[v[hit]])
    return _labels(n_nodes, links_a, links_b)[:n_lines]


def _labels(n: int, a: list, b: list) -> np.ndarray:
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    ea = np.concatenate(a)
    eb = np.concatenate(b)
    g = coo_matrix((np.ones(ea.size), (ea, eb)), shape=(n, n))
    return connected_components(g, directed=False)[1]


def _point_segment_distance(x, p, q):
    d = q - p
    L = np.einsum("ij,ij->i", d, d)
    t = np.where(L > 0, np.einsum("ij,ij->i", x - p, d) / np.where(L > 0, L, 1.0), 0.0)
    t = np.clip(t, 0.0, 1.0)
    return np.hypot(*(x - p - t[:, None] * d).T)


def _segments_close(p1, q1, p2, q2, eps) -> np.ndarray:
    """Vectorised: segments p1q1 and p2q2 cross or come within eps."""

    def orient(a, b, c):
        return (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0])

    o1 = orient(p1, q1, p2)
    o2 = orient(p1, q1, q2)
    o3 = orient(p2, q2, p1)
    o4 = orient(p2, q2, q1)
    cross = (o1 * o2 < 0) & (o3 * o4 < 0)
    dist = np.minimum.reduce(
        [
            _point_segment_distance(p2, p1, q1),
            _point_segment_distance(q2, p1, q1),
            _point_segment_distance(p1, p2, q2),
            _point_segment_distance(q1, p2, q2),
        ]
    )
    return cross | (dist <= eps)
