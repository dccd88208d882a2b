"""Sharper per-cell bounds of h_k for the whole-strip branch and bound (issue 13 item 2).

A cell is C = [t0, t1] x [b0, b1] of one explicit form (:mod:`specmap.distance.branch`): in the
form ``"below"`` F*(t, b)(v) = max(x - b, t (y + b)) with (x, y) = (f1, f2)(v); the form
``"above"`` is the same with (x, y) = (f2, f1) and b replaced by beta = -b (math.md section 2).

Derivation [D]. Let q be a corner of C (h_k(q) evaluated, F*(q) known at every vertex) and p any
line of a sub-rectangle S of C. For every common shift kappa (a constant added to both maps, so a
non-decreasing 1-Lipschitz map of the diagrams, d_B(D + kappa, D' + kappa) = d_B(D, D')), stability
of lower-star persistence on each mesh and the triangle inequality give [CDFFL13]

    h_k(p) <= h_k(q) + sum over the maps of max_v |F*(p)(v) - kappa(p) - F*(q)(v)|.

Take kappa(p) = -c (beta_p - beta_q) with a constant c in [0, 1] (c = 0: no shift; c = 1: the shift
that cancels the part x - beta moving at unit rate). Then, per vertex,

    F*(p) - kappa(p) = max(A_c(beta), B_c(t, beta)) - c beta_q,
    A_c = x - (1 - c) beta,          B_c = t (y + beta) + c beta,

A_c linear in beta (1 - c >= 0: largest at the smallest beta of S, smallest at the largest) and B_c
bilinear in (t, beta), so extreme at the four corners of S. Hence, exactly,

    sup_S max(A_c, B_c) = max(sup_S A_c, max over the corners of S of B_c),

and max(inf_S A_c, min over the corners of B_c) <= inf_S max(A_c, B_c) (a max is at least each of
its arguments). With s_c = sup - c beta_q - F*(q) and i_c = F*(q) - inf + c beta_q per vertex, the
move from q over S is at most max_v max(s_c, i_c): a rigorous upper bound of the sup over S (exact
for c = 1, where A_c is constant, and at a vertex where one branch rules S). For the slope of the
two branches in beta (-(1 - c) and t + c) the best constant is c* = (1 - t)/2, rate (1 + t)/2
instead of 1: the bound uses c in {0, c*(t mid of C), 1} and keeps the smallest.

The cell is cut into m x m sub-rectangles S (m = :data:`SUB`); each S is bounded from all four
corners of C and all shifts (the smallest), and the cell's bound is the largest over the S:

    sup_C h_k <= max_S min_{q, c} [ h_k(q) + M_f(S, q, c) + M_g(S, q, c) ].

*Top degree.* On two closed connected surfaces h_2(p) = |M_f(p) - M_g(p)| (or 0), M = max_v F*(p)(v)
(:func:`closed_connected`). A common shift cancels in M_f - M_g, so over S,
|M_f - M_g| <= max(UM_f - LM_g, UM_g - LM_f) with UM = max_v sup_S (F* - kappa) (exact) and
LM = max_v inf_S (F* - kappa) <= inf_S max_v (F* - kappa): only the top vertices count, not the whole
mesh, and no corner is needed.

No new line is evaluated. The quarters (m = 2) from their own corner are the bound used before;
sub-rectangles near a corner take that corner's h, the middle ones the smallest, so a cell whose
corners differ in h is bounded by less than its worst corner plus half its move. Checked against
brute force on a small mesh (``tests/test_certify.py::test_cell_bound_brute_force``).

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, Math. Methods Appl. Sci. 36 (2013):
   stability of h_k under sup-norm changes of the filtration.
"""

from __future__ import annotations

import numpy as np

from specmap.distance.ends import Cell, _Corners, _corners

SUB = 2
"""Sub-rectangles per side of a cell (m): 2 gives the quarters."""
SUB_FINE = 4
"""Sub-rectangles per side tried on a cell that :data:`SUB` leaves above its goal."""


def _form_parts(form: str, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """(x, y, s) of a map in a form: F* = max(x - beta, t (y + beta)) with beta = s b."""
    if form == "below":
        return v[:, 0], v[:, 1], 1.0
    return v[:, 1], v[:, 0], -1.0


def shifts(cell: Cell) -> tuple[float, ...]:
    """The shift constants c of the bound: 0, 1 and c* = (1 - t_mid) / 2 (module text)."""
    return (0.0, 1.0, 0.5 * (1.0 - 0.5 * (cell[1] + cell[2])))


def sub_parts(c: _Corners, cell: Cell, m: int = SUB) -> tuple[np.ndarray, np.ndarray]:
    """The moves of :func:`sub_moves` and, per sub-rectangle, the top-degree bound (module text).

    Returns
    -------
    moves : ndarray (m, m, 4, shifts)
        Entry [i, j, q, s] bounds sup over the sub-rectangle (t-index i, b-index j) of
        sum over maps of max_v |F*(p)(v) - kappa_s(p) - F*(q)(v)|, q in the order of
        :func:`~specmap.distance.ends._corners` and kappa_s from :func:`shifts`.
    top : ndarray (m, m)
        sup over the sub-rectangle of |max_v F*_f(p) - max_v F*_g(p)|, bounded by
        min over shifts of max(UM_f - LM_g, UM_g - LM_f), UM = max_v sup (F* - kappa),
        LM = max_v inf (F* - kappa) (a common shift cancels in the difference).
    """
    form, t0, t1, b0, b1 = cell
    corners = _corners(cell)
    tv = np.linspace(t0, t1, m + 1)
    bv = np.linspace(b0, b1, m + 1)
    cs = shifts(cell)
    out = np.zeros((m, m, 4, len(cs)))
    UM = np.zeros((2, len(cs), m, m))
    LM = np.zeros((2, len(cs), m, m))
    for idx, v in enumerate((c.vf, c.vg)):
        x, y, s = _form_parts(form, v)
        beta = s * bv  # (m + 1,)
        blo = np.minimum(beta[:-1], beta[1:])
        bhi = np.maximum(beta[:-1], beta[1:])
        fq = np.stack([c.star[q][idx] for q in corners])  # (4, n)
        bq = s * np.array([q[2] for q in corners])  # (4,)
        lin = tv[:, None, None] * (y[None, None, :] + beta[None, :, None])  # (m + 1, m + 1, n)
        for k, cc in enumerate(cs):
            L = lin + cc * beta[None, :, None]
            quad = (L[:-1, :-1], L[1:, :-1], L[:-1, 1:], L[1:, 1:])
            up = np.maximum(np.maximum.reduce(quad), x[None, None, :] - (1.0 - cc) * blo[None, :, None])
            lo = np.maximum(np.minimum.reduce(quad), x[None, None, :] - (1.0 - cc) * bhi[None, :, None])
            UM[idx, k], LM[idx, k] = up.max(axis=2, initial=-np.inf), lo.max(axis=2, initial=-np.inf)
            ref = fq + cc * bq[:, None]  # (4, n)
            hi_part = (up[:, :, None, :] - ref[None, None]).max(axis=3)
            lo_part = (ref[None, None] - lo[:, :, None, :]).max(axis=3)
            out[:, :, :, k] += np.maximum(np.maximum(hi_part, lo_part), 0.0)
    top = np.maximum(np.maximum(UM[0] - LM[1], UM[1] - LM[0]), 0.0).min(axis=0)  # (m, m)
    return out, top


def sub_moves(c: _Corners, cell: Cell, m: int = SUB) -> np.ndarray:
    """Upper bounds of the moves, summed over the two maps: shape (m, m, 4 corners, shifts).

    Entry [i, j, q, s] bounds sup over the sub-rectangle (t-index i, b-index j) of
    sum over maps of max_v |F*(p)(v) - kappa_s(p) - F*(q)(v)| (module text), q in the order of
    :func:`~specmap.distance.ends._corners` and kappa_s from :func:`shifts`.
    """
    return sub_parts(c, cell, m)[0]


def sub_bound(c: _Corners, cell: Cell, m: int = SUB, top: int | None = None) -> np.ndarray:
    """Per degree: max over the m x m sub-rectangles of min over corners and shifts of h(q) + move.

    A rigorous upper bound of sup h_k over the cell (module text); no new line. ``top`` is the
    degree index of the top degree of two closed connected surfaces (degree 2), whose h is
    |max F*_f - max F*_g| or 0 (:func:`closed_connected`); its bound is also capped, sub-rectangle
    by sub-rectangle, by the interval bound of :func:`sub_parts`.
    """
    H = np.stack([c.h[q] for q in _corners(cell)])  # (4, n_deg)
    parts, tops = sub_parts(c, cell, m)
    moves = parts.min(axis=3)  # (m, m, 4)
    ub = (H[None, None, :, :] + moves[..., None]).min(axis=2)  # (m, m, n_deg)
    if top is not None:
        ub[:, :, top] = np.minimum(ub[:, :, top], tops)
    return ub.reshape(-1, H.shape[1]).max(axis=0)


def closed_connected(triangles: np.ndarray | None, n_vertices: int) -> bool:
    """Every edge in exactly two triangles, every vertex used, one connected component.

    On such a mesh (a closed connected surface) a proper subcomplex carries no 2-cycle and the whole
    complex one (orientable, over the field of the slices) or none, so Dgm_2 of a lower-star
    filtration F is {(max F, inf)} or empty, and h_2(p) = |max F*_f(p) - max F*_g(p)| or 0 for every
    line p [standard simplicial homology of a 2-complex: no 3-simplices, so no 2-class dies].
    """
    if triangles is None or len(triangles) == 0:
        return False
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    T = np.asarray(triangles, dtype=np.int64)
    e = np.sort(np.concatenate([T[:, [0, 1]], T[:, [1, 2]], T[:, [0, 2]]]), axis=1)
    uniq, counts = np.unique(e, axis=0, return_counts=True)
    if not np.all(counts == 2) or len(np.unique(T)) != n_vertices:
        return False
    graph = coo_matrix((np.ones(len(uniq)), (uniq[:, 0], uniq[:, 1])), shape=(n_vertices, n_vertices))
    return connected_components(graph, directed=False)[0] == 1


def split_moves(c: _Corners, cell: Cell) -> tuple[float, float]:
    """(move in t, move in b) of a cell from its corner differences (a heuristic: where to split).

    The smallest over the two edges of max_v |F*(t1, .) - F*(t0, .)| and of
    min over shifts of max_v |F*(., b1) - F*(., b0) - kappa|, summed over the maps.
    """
    form, t0, t1, b0, b1 = cell
    tm = bm = 0.0
    for idx in (0, 1):
        s = 1.0 if form == "below" else -1.0
        d_t = min(
            float(np.abs(c.star[(form, t1, b)][idx] - c.star[(form, t0, b)][idx]).max(initial=0.0))
            for b in (b0, b1)
        )
        d_b = min(
            float(
                np.abs(c.star[(form, t, b1)][idx] - c.star[(form, t, b0)][idx] + cc * s * (b1 - b0)).max(
                    initial=0.0
                )
            )
            for t in (t0, t1)
            for cc in shifts(cell)
        )
        tm, bm = tm + d_t, bm + d_b
    return tm, bm
