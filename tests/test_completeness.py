"""Completeness of crossing detection: every sign change of a *signed* tie residual is found.

A tie |c_P| = k |c_Q| (k = 1 equal, k = 2 half) is the union of the two signed branches
c_P = +k c_Q and c_P = -k c_Q (c_P = s_P1 - s_P2, the difference of line parameters). Each
branch is smooth where its four contours are met, while |c_P| - k |c_Q| has a ridge where
c_P or c_Q changes sign (the line through a crossing of two contours), so a tie can split
into two curves closer than one lattice cell with no sign change of the absolute residual
on an edge (issue 16 item 2).

The brute force below is written in this file: its own closed-form line parameters (the line
r(a, b) is x = a s + b, y = (1 - a) s - b, math.md 2), every tie of the ``all`` pair mode
enumerated from contour pairs, and both signed residuals on every lattice edge where all four
contours are met at both ends. Each strict sign change (both ends farther than a margin from
zero) must be a crossing of that tie and that branch on that edge in the output of
:func:`specmap.special.detect.find_crossings`.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from gridgen import random_pair

from specmap.grids.model import Contour
from specmap.special.compute import default_tolerance
from specmap.special.detect import find_crossings, sample, split_branch
from specmap.special.lattice import Lattice
from specmap.special.pairs import pair_table
from specmap.strip import default_window


def own_parameters(c: Contour, A: np.ndarray, B: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(s, met) of r(a, b) on a contour at arrays of lines, independent of specmap's evaluation.

    Vertical {x = x0, y >= y0}: s = (x0 - b) / a, met iff (1 - a) s - b >= y0. Horizontal
    {y = y0, x >= x0}: s = (y0 + b) / (1 - a), met iff a s + b >= x0. Polyline (x grows, y falls):
    G(x, y) = (1 - a)(x - b) - a (y + b) vanishes on the line and does not decrease along the
    polyline; on the segment where G changes sign, the point p = p0 + t (p1 - p0) with
    t = G0 / (G0 - G1) is on the line and s = x + y (since x + y = s on r(a, b)).
    """
    pts = np.asarray(c.points, float).reshape(-1, 2)
    x0, y0 = pts[0]
    if c.kind == "vertical":
        s = (x0 - B) / A
        return s, (1 - A) * s - B >= y0
    if c.kind == "horizontal":
        s = (y0 + B) / (1 - A)
        return s, A * s + B >= x0
    s = np.full(A.shape, np.nan)
    for p, q in zip(pts[:-1], pts[1:], strict=True):
        g0 = (1 - A) * (p[0] - B) - A * (p[1] + B)
        g1 = (1 - A) * (q[0] - B) - A * (q[1] + B)
        hit = np.isnan(s) & (g0 <= 0) & (g1 >= 0) & (g1 > g0)
        t = np.where(hit, g0 / np.where(g1 > g0, g0 - g1, -1.0), 0.0)
        x = p[0] + t * (q[0] - p[0])
        y = p[1] + t * (q[1] - p[1])
        s = np.where(hit, x + y, s)
    if len(pts) == 1:  # a single point: met where G = 0 exactly (never on a lattice node)
        return s, np.zeros(A.shape, bool)
    return s, ~np.isnan(s)


def brute_force_changes(f, g, lattice: Lattice, margin: float):
    """Every (tie code, branch, edge) where a signed residual c_P -+ k c_Q changes sign.

    Returns the set of triples and the number of (tie, branch, edge) sign tests skipped as too
    close to zero at an end (|residual| <= margin, push units).
    """
    table = pair_table(f, g, "all")
    contours = table.contours
    A, B = lattice.mesh()
    S = np.empty((len(contours), *A.shape))
    MET = np.empty((len(contours), *A.shape), bool)
    for i, c in enumerate(contours):
        S[i], MET[i] = own_parameters(c, A, B)
    m = np.minimum(A, 1 - A)  # push units: min(a, 1 - a) s (math.md 3)
    # edges: horizontal (j, i)-(j, i+1) first, then vertical (j, i)-(j+1, i) (Lattice numbering)
    na, nb = lattice.n_a, lattice.n_b
    jh, ih = np.divmod(np.arange(nb * (na - 1)), na - 1)
    jv, iv = np.divmod(np.arange((nb - 1) * na), na)
    n0 = np.concatenate([jh * na + ih, jv * na + iv])
    n1 = np.concatenate([jh * na + ih + 1, (jv + 1) * na + iv])
    S = S.reshape(len(contours), -1)
    MET = MET.reshape(len(contours), -1)
    m = m.ravel()
    # all pairs of distinct contours, indexed as the table does (first < second, row-major)
    pairs = list(itertools.combinations(range(len(contours)), 2))
    index = {pq: k for k, pq in enumerate(pairs)}
    D = np.stack([(S[u] - S[v]) * m for u, v in pairs])  # signed c_P in push units, per node
    PM = np.stack([MET[u] & MET[v] for u, v in pairs])
    ties = [(0, p, q) for p, q in itertools.combinations(range(len(pairs)), 2)]
    ties += [(1, p, q) for p in range(len(pairs)) for q in range(len(pairs)) if p != q]
    n = len(pairs)
    assert n == table.n_pairs and all(
        index[(int(a), int(b))] == k for k, (a, b) in enumerate(zip(table.first, table.second, strict=True))
    )
    found = set()
    skipped = 0
    for cond, p, q in ties:
        k = 2.0 if cond else 1.0
        ok = PM[p][n0] & PM[p][n1] & PM[q][n0] & PM[q][n1]
        if not ok.any():
            continue
        code = (cond * n + p) * n + q
        for branch, sign in ((0, -1.0), (1, 1.0)):
            r = D[p] + sign * k * D[q]
            r0, r1 = r[n0], r[n1]
            close = ok & ((np.abs(r0) <= margin) | (np.abs(r1) <= margin))
            skipped += int(close.sum())
            change = ok & ~close & ((r0 > 0) != (r1 > 0))
            found.update((code, branch, int(e)) for e in np.nonzero(change)[0])
    return found, skipped


def misses(seed: int, n_contours: int, res: int) -> tuple[int, int, int]:
    f, g = random_pair(seed, n_contours)
    lat = Lattice.of(default_window(f.bbox(), g.bbox()), res, res)
    tol = default_tolerance(f, g)
    truth, skipped = brute_force_changes(f, g, lat, margin=1e3 * tol)
    table = pair_table(f, g, "all")
    codes, edges, _ = find_crossings(table, sample(table, lat), tol=tol, snap=1e-3 * tol)
    plain, branch = split_branch(table, codes)
    got = set(zip(plain.tolist(), branch.tolist(), edges.tolist(), strict=True))
    return len(truth - got), len(truth), skipped


# seeds and sizes chosen once (not tuned to pass): random generic pairs of 8 and 10 contours
@pytest.mark.parametrize("res", [41, 101])
@pytest.mark.parametrize("seed,n_contours", [(1, 8), (2, 10), (3, 10)])
def test_every_signed_sign_change_is_a_crossing(seed, n_contours, res):
    # brute force of this file (signed residuals per branch on every fully met edge) against the sweep
    missed, total, skipped = misses(seed, n_contours, res)
    assert total > 500  # the pair has many tie crossings at this lattice
    assert skipped < 0.01 * total
    assert missed == 0, f"{missed} of {total} signed tie crossings missed"


def test_straight_tie_lies_on_its_branch():
    # closed form derived here: P = two vertical half-lines x = 0, x = d and Q = two horizontal
    # half-lines y = 0, y = e (d, e > 0). On r(a, b), s = (x0 - b) / a and s = (y0 + b) / (1 - a),
    # so c_P = -d / a and c_Q = -e / (1 - a): the equal tie |c_P| = |c_Q| is the line
    # a = d / (d + e), on the branch c_P = +c_Q only (c_P = -c_Q has no solution, both are < 0).
    from specmap.grids.model import Grid

    d, e = 0.3, 0.37
    f = Grid((Contour("f:v0", "vertical", [0.0, -5.0]), Contour("f:v1", "vertical", [d, -5.0])), route="file")
    g = Grid(
        (Contour("g:h0", "horizontal", [-5.0, 0.0]), Contour("g:h1", "horizontal", [-5.0, e])), route="file"
    )
    lat = Lattice.of(default_window(f.bbox(), g.bbox()), 23, 19)
    tol = default_tolerance(f, g)
    truth, _ = brute_force_changes(f, g, lat, margin=1e3 * tol)
    table = pair_table(f, g, "all")
    codes, edges, _ = find_crossings(table, sample(table, lat), tol=tol, snap=1e-3 * tol)
    plain, branch = split_branch(table, codes)
    got = set(zip(plain.tolist(), branch.tolist(), edges.tolist(), strict=True))
    pairs = list(zip(table.first.tolist(), table.second.tolist(), strict=True))
    code = int(
        table.encode(np.array([0]), np.array([pairs.index((0, 1))]), np.array([pairs.index((2, 3))]))[0]
    )
    mine = {(b, edge) for c, b, edge in got if c == code}
    # one horizontal edge per lattice row, each containing a = d / (d + e)
    a_star = d / (d + e)
    start, _ = lat.edge_nodes(np.array(sorted(edge for _, edge in mine)))
    a_left, _ = lat.node_ab(start)
    exact = {(b, edge) for c, b, edge in truth if c == code}  # rows where all four are met
    assert {b for b, _ in mine} == {0}
    assert len(exact) >= 5 and exact <= mine
    assert len({edge for _, edge in mine}) == len(mine) <= lat.n_b  # at most one edge per row
    assert np.all((a_left < a_star) & (a_left + (lat.av[1] - lat.av[0]) > a_star))
    assert truth <= got
