"""Tests for specmap.slices: normalised functions, slice diagrams, bottleneck distance.

Sources named beside each check:
- "checks.md closed form": slice diagrams derived by hand for the ellipsoid and the torus;
- "exact oracle (checks.md), derived in the test": diagrams of linear maps on ellipsoids from
  the geometry of the image ellipse, written out here with numpy;
- "stability [CDFFL13]": d_B <= sup-norm distance; a PL interpolation of a function with
  Lipschitz constant L differs from it by at most L * (longest edge), so meshed diagrams lie
  within that bottleneck distance of the smooth ones;
- "persim": an independent bottleneck implementation (reference library);
- "homology": (b0, b1, b2) = (1, 0, 1) sphere, (1, 2, 1) torus give the points at infinity.
"""

from __future__ import annotations

import math

import numpy as np
import persim
import pytest

from specmap.errors import StudyError
from specmap.grids.model import Contour, Grid
from specmap.meshtable import mesh_edges
from specmap.shapes.model import MeshRequiredError, Shape
from specmap.shapes.surfaces import Ellipsoid, Torus
from specmap.slices import (
    SliceEngine,
    bottleneck,
    normalised_values,
    slice_diagrams,
    split_infinite,
)

SQ2 = math.sqrt(2.0)
SQ5 = math.sqrt(5.0)


def longest_edge(V: np.ndarray, T: np.ndarray) -> float:
    e = mesh_edges(T)
    return float(np.linalg.norm(V[e[:, 0]] - V[e[:, 1]], axis=1).max())


def significant(d: np.ndarray, tol: float) -> np.ndarray:
    """Points farther than 2 tol from the diagonal, sorted by birth."""
    d = d[(d[:, 1] - d[:, 0]) > 2 * tol]
    return d[np.argsort(d[:, 0])]


def assert_diagram(got: np.ndarray, expected: list[tuple[float, float]], tol: float) -> None:
    """Same points at infinity (births within tol); finite parts within tol in persim's bottleneck."""
    exp = np.array(expected, dtype=float).reshape(-1, 2)
    gf, gi = split_infinite(got)
    ef, ei = split_infinite(exp)
    assert len(gi) == len(ei), (got, expected)
    assert np.allclose(gi, ei, atol=tol), (gi, ei)
    assert persim.bottleneck(gf, ef) <= tol, (gf, ef)


# -- normalised values ----------------------------------------------------------------------


def test_normalised_values_sublevel_sets_are_quadrants():
    # [CDFFL13]: {F* <= min(a,1-a) s} = {p : f(p) <= s (a, 1-a) + (b, -b)} componentwise.
    rng = np.random.default_rng(1)
    vals = rng.normal(size=(400, 2))
    for a, b in [(0.2, 0.3), (0.5, -0.4), (0.8, 0.1), (0.37, 1.2)]:
        F = normalised_values(vals, a, b)
        m = min(a, 1 - a)
        for s in np.linspace(-3, 3, 13):
            quad = (vals[:, 0] <= a * s + b) & (vals[:, 1] <= (1 - a) * s - b)
            assert np.array_equal(F <= m * s + 1e-12, quad)


def test_normalised_values_limit_lines():
    # math.md section 3: a -> 0 gives max(f1 - b, 0), a -> 1 gives max(0, f2 + b).
    rng = np.random.default_rng(2)
    vals = rng.normal(size=(50, 2))
    b = 0.3
    assert np.allclose(normalised_values(vals, 0.0, b), np.maximum(vals[:, 0] - b, 0))
    assert np.allclose(normalised_values(vals, 1.0, b), np.maximum(0, vals[:, 1] + b))
    # continuity with the general formula near the ends (the formula written out here)
    for a in (1e-7, 1 - 1e-7):
        direct = min(a, 1 - a) * np.maximum((vals[:, 0] - b) / a, (vals[:, 1] + b) / (1 - a))
        assert np.allclose(normalised_values(vals, a, b), direct, atol=1e-9)
    with pytest.raises(ValueError):
        normalised_values(vals, 1.5, 0.0)


# -- closed-form slice diagrams (checks.md) --------------------------------------------------


def test_ellipsoid_closed_form_half_zero():
    # checks.md closed form: x^2/4 + y^2 + z^2 = 1, f = (x, y), (a, b) = (1/2, 0):
    # H0 = {(-2/sqrt5, inf)}, H1 = {(2/sqrt5, 1)}, H2 = {(2, inf)}.
    # At a = 1/2, F* = max(x, y) is 1-Lipschitz: meshed diagrams are within the longest edge.
    V, T = Ellipsoid((2.0, 1.0, 1.0)).mesh(6000)
    tol = longest_edge(V, T)
    assert tol < 0.15
    d = SliceEngine(T, V[:, :2]).diagrams(0.5, 0.0)
    assert_diagram(d[0], [(-2 / SQ5, math.inf)], tol)
    assert_diagram(d[1], [(2 / SQ5, 1.0)], tol)
    assert_diagram(d[2], [(2.0, math.inf)], tol)


def test_torus_closed_form_half_zero():
    # checks.md closed form: torus R = 2, r = 1, f = (x, y), (1/2, 0):
    # H0 = {(-3/sqrt2, inf), (1/sqrt2, 1)}, H1 = {(-1/sqrt2, inf), (1, inf), (3/sqrt2, 3)},
    # H2 = {(3, inf)}; tolerance: longest edge (F* = max(x, y) is 1-Lipschitz).
    V, T = Torus((2.0, 1.0)).mesh(8000)
    tol = longest_edge(V, T)
    assert tol < 0.2
    d = SliceEngine(T, V[:, :2]).diagrams(0.5, 0.0)
    assert_diagram(d[0], [(-3 / SQ2, math.inf), (1 / SQ2, 1.0)], tol)
    assert_diagram(d[1], [(-1 / SQ2, math.inf), (1.0, math.inf), (3 / SQ2, 3.0)], tol)
    assert_diagram(d[2], [(3.0, math.inf)], tol)


@pytest.mark.slow
def test_closed_forms_fine_meshes():
    # checks.md: coordinates to about 1e-2 at ~20k vertices.
    V, T = Ellipsoid((2.0, 1.0, 1.0)).mesh(20000)
    d = SliceEngine(T, V[:, :2]).diagrams(0.5, 0.0)
    assert_diagram(d[1], [(2 / SQ5, 1.0)], 1e-2)
    V, T = Torus((2.0, 1.0)).mesh(20000)
    d = SliceEngine(T, V[:, :2]).diagrams(0.5, 0.0)
    assert_diagram(d[0], [(-3 / SQ2, math.inf), (1 / SQ2, 1.0)], 1e-2)
    assert_diagram(d[1], [(-1 / SQ2, math.inf), (1.0, math.inf), (3 / SQ2, 3.0)], 1e-2)


# -- exact oracle for linear maps on ellipsoids (checks.md), derived here --------------------


def ellipsoid_linear_oracle(radii, L, a, b):
    """Slice diagrams of f = L p on the ellipsoid with these radii, from the image ellipse.

    The image of the surface is the filled ellipse E = {q : q^T S^-1 q <= 1}, S = M M^T,
    M = L diag(radii). With l1 = (q1 - b)/a, l2 = (q2 + b)/(1 - a) (line parameters):
    - H0: (scale * min_E max(l1, l2), inf). The min of a max of two linear forms on a convex
      set is at the min of one of them (if it dominates there) or on {l1 = l2}, which is the
      line itself: its first entry into E.
    - H2: (scale * max(max l1, max l2), inf): the line has passed max f1 and max f2.
    - H1: the line leaves D = E + open negative quadrant at s_exit = max_E min(l1, l2); when
      neither extreme point (max f1 or max f2) realises it, the exit is through the
      first-quadrant Pareto arc and H1 = {(scale s_exit, scale min(max l1, max l2))}.
    """
    M = np.asarray(L, float) @ np.diag(radii)
    S = M @ M.T
    Si = np.linalg.inv(S)
    scale = min(a, 1 - a)
    c1 = np.array([1 / a, 0.0])  # l1 = c1.q - b/a
    c2 = np.array([0.0, 1 / (1 - a)])  # l2 = c2.q + b/(1-a)
    k1, k2 = -b / a, b / (1 - a)

    def extreme(c, sign):  # argmax (sign=+1) / argmin (-1) of c.q on E: q = sign S c / sqrt(c S c)
        return sign * S @ c / math.sqrt(c @ S @ c)

    def l1(q):
        return c1 @ q + k1

    def l2(q):
        return c2 @ q + k2

    # line P(s) = s (a, 1-a) + (b, -b) against the ellipse: quadratic in s
    d = np.array([a, 1 - a])
    p0 = np.array([b, -b])
    qa, qb, qc = d @ Si @ d, 2 * d @ Si @ p0, p0 @ Si @ p0 - 1
    disc = qb * qb - 4 * qa * qc
    roots = (
        sorted(((-qb - math.sqrt(disc)) / (2 * qa), (-qb + math.sqrt(disc)) / (2 * qa)))
        if disc >= 0
        else None
    )
    # H0
    q = extreme(c1, -1)
    if l1(q) >= l2(q):
        s_in = l1(q)
    else:
        q = extreme(c2, -1)
        s_in = l2(q) if l2(q) >= l1(q) else roots[0]
    # H2 and H1
    m1, m2 = l1(extreme(c1, 1)), l2(extreme(c2, 1))
    out = {0: [(scale * s_in, math.inf)], 1: [], 2: [(scale * max(m1, m2), math.inf)]}
    q1, q2 = extreme(c1, 1), extreme(c2, 1)
    through_arc = not (l1(q1) <= l2(q1)) and not (l2(q2) <= l1(q2))
    if through_arc:
        out[1] = [(scale * roots[1], scale * min(m1, m2))]
    return out


LINEAR_CASES = [
    ((2.0, 1.0, 1.0), [[1, 0, 0], [0, 1, 0]]),
    ((1.5, 1.0, 0.7), [[1.0, 0.3, -0.2], [0.2, 1.0, 0.5]]),
]
LINES = [(0.5, 0.0), (0.3, 0.2), (0.7, -0.3), (0.5, 0.6), (0.2, -0.5), (0.85, 0.4), (0.6, 1.4)]


def test_oracle_reproduces_checks_md_ellipsoid():
    # The oracle derived above agrees with the checks.md closed form at (1/2, 0).
    o = ellipsoid_linear_oracle((2.0, 1.0, 1.0), [[1, 0, 0], [0, 1, 0]], 0.5, 0.0)
    assert np.allclose(o[0], [(-2 / SQ5, math.inf)])
    assert np.allclose(o[1], [(2 / SQ5, 1.0)])
    assert np.allclose(o[2], [(2.0, math.inf)])


@pytest.mark.parametrize("radii,L", LINEAR_CASES)
def test_linear_maps_on_ellipsoids_match_oracle(radii, L):
    # exact oracle (checks.md), derived in the test; stability [CDFFL13] with the PL
    # interpolation error: F* is Lipschitz with constant max(|u|, |v|) (rows of L) in space,
    # so every meshed diagram is within max(|u|, |v|) * longest edge of the exact one.
    V, T = Ellipsoid(radii).mesh(5000)
    L = np.asarray(L, float)
    vals = V @ L.T
    tol = max(np.linalg.norm(L, axis=1)) * longest_edge(V, T)
    eng = SliceEngine(T, vals)
    for a, b in LINES:
        got = eng.diagrams(a, b)
        exp = ellipsoid_linear_oracle(radii, L, a, b)
        for k in (0, 1, 2):
            assert_diagram(got[k], exp[k], tol)


@pytest.mark.slow
def test_linear_oracle_convergence_in_degree_one():
    # Measured, not assumed: the degree-1 error against the exact oracle shrinks with the mesh,
    # and stays within the stability bound (longest edge) at every resolution.
    radii, L = LINEAR_CASES[1]
    L = np.asarray(L, float)
    errs = []
    for res in (1000, 4000, 16000):
        V, T = Ellipsoid(radii).mesh(res)
        eng = SliceEngine(T, V @ L.T)
        tol = max(np.linalg.norm(L, axis=1)) * longest_edge(V, T)
        e = max(
            persim.bottleneck(
                split_infinite(eng.diagrams(a, b)[1])[0],
                np.array(ellipsoid_linear_oracle(radii, L, a, b)[1]).reshape(-1, 2),
            )
            for a, b in LINES
        )
        assert e <= tol
        errs.append(e)
    assert errs[-1] < errs[0]


# -- homology of the surfaces ---------------------------------------------------------------


@pytest.mark.parametrize(
    "surface,betti", [(Ellipsoid((2.0, 1.0, 1.0)), (1, 0, 1)), (Torus((2.0, 1.0)), (1, 2, 1))]
)
def test_points_at_infinity_are_betti_numbers(surface, betti):
    # homology: sphere (1, 0, 1), torus (1, 2, 1), on every line, including the limit lines.
    V, T = surface.mesh(1500)
    rng = np.random.default_rng(3)
    vals = V[:, :2] + 0.3 * np.sin(3 * V[:, 1:3]) + 0.05 * rng.normal(size=(len(V), 2))
    eng = SliceEngine(T, vals)
    for a, b in [
        (0.0, 0.3),
        (1.0, -0.2),
        *zip(rng.uniform(0.05, 0.95, 8), rng.uniform(-2, 2, 8), strict=True),
    ]:
        d = eng.diagrams(a, b)
        assert tuple(int(np.isinf(d[k][:, 1]).sum()) for k in (0, 1, 2)) == betti
        for k in (0, 1, 2):  # zero-length pairs dropped
            assert np.all(d[k][:, 1] > d[k][:, 0])


def test_refiltering_matches_fresh_tree():
    # An engine reused over many lines gives what a tree built from scratch for that line gives
    # (independent construction: every simplex inserted with the max of its vertex values).
    import gudhi

    V, T = Ellipsoid((1.5, 1.0, 0.8)).mesh(800)
    vals = np.c_[V[:, 0] + 0.4 * V[:, 2] ** 2, V[:, 1] - 0.3 * V[:, 0] * V[:, 2]]
    eng = SliceEngine(T, vals)
    E = mesh_edges(T)
    for a, b in [(0.3, 0.1), (0.5, -0.2), (0.7, 0.4), (0.3, 0.1)]:
        x = min(a, 1 - a) * np.maximum((vals[:, 0] - b) / a, (vals[:, 1] + b) / (1 - a))
        st = gudhi.SimplexTree()
        for i, xi in enumerate(x):
            st.insert([i], xi)
        for u, v in E:
            st.insert([int(u), int(v)], max(x[u], x[v]))
        for t in T:
            st.insert([int(i) for i in t], float(x[t].max()))
        st.persistence(homology_coeff_field=2, persistence_dim_max=True)
        got = eng.diagrams(a, b)
        for k in (0, 1, 2):
            ref = np.asarray(st.persistence_intervals_in_dimension(k)).reshape(-1, 2)
            ref = ref[ref[:, 1] > ref[:, 0]]
            key = np.lexsort
            assert np.allclose(got[k][key(got[k].T[::-1])], ref[key(ref.T[::-1])])


def test_grid_only_input_has_no_slices():
    # A grid read from a file is a Grid, not a Shape: no mesh, so no slice diagrams (one-line error).
    grid = Grid((Contour("f:v0", "vertical", [[0.0, 0.0]]),))
    with pytest.raises(StudyError, match="no mesh"):
        slice_diagrams(grid, 0.5, 0.0)
    with pytest.raises(MeshRequiredError, match="f has no mesh, so no slice diagrams"):
        slice_diagrams(Shape("f", "mesh"), 0.5, 0.0)


# -- bottleneck ------------------------------------------------------------------------------


def random_diagram(rng, n):
    u = rng.uniform(-1, 1, n)
    return np.c_[u, u + rng.exponential(0.5, n)]


def brute_force_bottleneck(d1, d2):
    """Min over all matchings (diagonal copies added) of the max cost [DFL10], by enumeration."""
    import itertools

    n, m = len(d1), len(d2)
    best = math.inf
    for perm in itertools.permutations(range(n + m)):
        c = 0.0
        for i, j in enumerate(perm):  # i < n: a point of d1, else a diagonal copy; j likewise for d2
            if i < n and j < m:
                c = max(c, float(np.abs(d1[i] - d2[j]).max()))
            elif i < n:
                c = max(c, (d1[i, 1] - d1[i, 0]) / 2)
            elif j < m:
                c = max(c, (d2[j, 1] - d2[j, 0]) / 2)
        best = min(best, c)
    return best


def test_bottleneck_matches_brute_force_on_small_diagrams():
    # definition [DFL10], enumerated; includes the case where gudhi's e=0 path was wrong.
    d1 = np.array(
        [
            [0.61409587, 1.0744429],
            [-0.78505682, -0.62334432],
            [-0.21562217, -0.16894409],
            [0.75286763, 1.11436176],
        ]
    )
    d2 = np.array([[0.24355613, 0.43363896], [-0.52499036, -0.07536559], [0.01178639, 0.21646258]])
    assert bottleneck(d1, d2) == pytest.approx(brute_force_bottleneck(d1, d2), abs=1e-9)
    rng = np.random.default_rng(8)
    for _ in range(15):
        d1, d2 = random_diagram(rng, rng.integers(0, 4)), random_diagram(rng, rng.integers(0, 4))
        assert bottleneck(d1, d2) == pytest.approx(brute_force_bottleneck(d1, d2), abs=1e-9)


@pytest.mark.parametrize("seed, lo, hi, reps", [(4, 0, 12, 200), (5, 20, 60, 30)])
def test_bottleneck_matches_persim_on_finite_diagrams(seed, lo, hi, reps):
    # persim: an independent bottleneck implementation; the larger sizes are beyond brute force.
    rng = np.random.default_rng(seed)
    for _ in range(reps):
        d1 = random_diagram(rng, rng.integers(lo, hi))
        d2 = random_diagram(rng, rng.integers(lo, hi))
        assert bottleneck(d1, d2) == pytest.approx(persim.bottleneck(d1, d2), abs=1e-9)


def test_bottleneck_points_at_infinity():
    # [DFL10] matching cost, worked by hand: infinite points pair with infinite points at |u - u'|,
    # in sorted order; unequal counts cannot be matched.
    inf = math.inf
    d1 = np.array([[0.0, inf], [2.0, inf], [0.0, 0.2]])
    d2 = np.array([[1.9, inf], [0.3, inf]])
    # sorted births (0, 2) vs (0.3, 1.9): max(0.3, 0.1) = 0.3; the finite point costs 0.1
    assert bottleneck(d1, d2) == pytest.approx(0.3)
    assert bottleneck(d1, d2[:1]) == inf
    assert bottleneck(np.zeros((0, 2)), np.zeros((0, 2))) == 0.0
    # finite part dominates: (0, 2) to the diagonal costs 1
    assert bottleneck(np.array([[0.0, 2.0], [0.0, inf]]), np.array([[0.1, inf]])) == pytest.approx(1.0)
    # symmetric
    assert bottleneck(d2, d1) == pytest.approx(0.3)


def test_slice_stability_on_same_mesh():
    # stability [CDFFL13]: d_B(F*_f, F*_g) <= ||F*_f - F*_g||_inf <= ||f - g||_inf.
    V, T = Ellipsoid((2.0, 1.0, 1.0)).mesh(1000)
    rng = np.random.default_rng(5)
    f = np.c_[V[:, 0], V[:, 1] + 0.3 * V[:, 2] ** 2]
    g = f + 0.05 * np.c_[np.sin(2 * V[:, 2] + 1), np.cos(3 * V[:, 0])] + 0.01 * rng.normal(size=f.shape)
    ef, eg = SliceEngine(T, f), SliceEngine(T, g)
    sup = np.abs(f - g).max()
    for a, b in zip(rng.uniform(0.05, 0.95, 10), rng.uniform(-2, 2, 10), strict=True):
        df, dg = ef.diagrams(a, b), eg.diagrams(a, b)
        Fs = np.abs(normalised_values(f, a, b) - normalised_values(g, a, b)).max()
        assert Fs <= sup + 1e-12
        for k in (0, 1, 2):
            assert bottleneck(df[k], dg[k]) <= Fs + 1e-9
