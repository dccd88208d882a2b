"""Special-set atlas: symmetries, non-generic patches, independent re-evaluation, sweep vs naive."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from gridgen import random_grid, random_pair

from specmap.grids.model import Contour, Grid
from specmap.special import special_set
from specmap.strip import Window, default_window

RES = 25


def own_parameter(c: Contour, a: float, b: float) -> float:
    """Line parameter of r(a, b) on a contour, written independently of specmap.strip.

    The line is x = a s + b, y = (1 - a) s - b (math.md 2). Vertical x = x0, y >= y0:
    s = (x0 - b)/a if the y there is >= y0. Horizontal y = y0, x >= x0: s = (y0 + b)/(1-a)
    if x there >= x0. Polyline: walk the segments, solve the 2x2 system per segment.
    """
    x0, y0 = c.points[0]
    if c.kind == "vertical":
        s = (x0 - b) / a
        return s if (1 - a) * s - b >= y0 - 1e-12 else np.nan
    if c.kind == "horizontal":
        s = (y0 + b) / (1 - a)
        return s if a * s + b >= x0 - 1e-12 else np.nan
    for p, q in zip(c.points[:-1], c.points[1:], strict=True):
        # p + t (q - p) = (a s + b, (1-a) s - b)
        m = np.array([[q[0] - p[0], -a], [q[1] - p[1], -(1 - a)]])
        rhs = np.array([b - p[0], -b - p[1]])
        if abs(np.linalg.det(m)) < 1e-15:
            continue
        t, s = np.linalg.solve(m, rhs)
        if -1e-9 <= t <= 1 + 1e-9:
            return s
    return np.nan


@pytest.mark.parametrize("resolution", [RES, (37, 23)])
def test_points_on_curves_satisfy_their_tie(resolution):
    # math.md 5: each curve vertex must satisfy |s_a - s_b| = k |s_c - s_d| (k = 1, 2),
    # with s re-evaluated by our own formula; residual in push units min(a,1-a) * (...).
    # A non-square lattice checks the index arithmetic of the compiled loops.
    f, g = random_pair(3, 6)
    w = default_window(f.bbox(), g.bbox())
    atlas = special_set(f, g, w, resolution=resolution)
    by_id = {c.id: c for c in f.contours + g.contours}
    checked = 0
    for piece in atlas.pieces:
        if piece.kind != "curve":
            continue
        (p1, p2), (q1, q2) = piece.tie.pairs
        k = 1.0 if piece.tie.condition == "equal" else 2.0
        for a, b in shapely.get_coordinates(piece.geometry):
            s = [own_parameter(by_id[i], a, b) for i in (p1, p2, q1, q2)]
            if np.isnan(s).any():  # end points lie on the domain boundary itself
                continue
            r = min(a, 1 - a) * (abs(s[0] - s[1]) - k * abs(s[2] - s[3]))
            assert abs(r) <= 10 * atlas.tolerance, (piece.tie, a, b, r)
            checked += 1
    assert checked > 50


def _vertices(atlas) -> np.ndarray:
    return np.vstack([shapely.get_coordinates(p.geometry) for p in atlas.pieces])


def vertex_hausdorff(x: np.ndarray, y: np.ndarray) -> float:
    """Hausdorff distance of two vertex sets (curve vertices are at most a cell apart)."""
    from scipy.spatial import cKDTree

    return max(cKDTree(y).query(x)[0].max(), cKDTree(x).query(y)[0].max())


def test_swap_symmetry():
    # math.md 6: swapping coordinates of both grids maps r(a,b) to r(1-a,-b), so the
    # special set reflects by (a, b) -> (1 - a, -b); the window must reflect too.
    f, g = random_pair(5, 6)
    w = default_window(f.bbox(), g.bbox())
    ws = Window((1 - w.a[1], 1 - w.a[0]), (-w.b[1], -w.b[0]))
    at = special_set(f, g, w, resolution=RES)
    at2 = special_set(f.swapped(), g.swapped(), ws, resolution=RES)
    assert at.counts() == at2.counts()
    L1 = sum(c.length for c in at.components)
    L2 = sum(c.length for c in at2.components)
    assert L2 == pytest.approx(L1, rel=1e-6)
    v2 = _vertices(at2) * np.array([-1.0, -1.0]) + np.array([1.0, 0.0])
    assert vertex_hausdorff(_vertices(at), v2) < 1e-6


def test_exchanging_f_and_g_changes_nothing():
    # math.md 6: the special set is symmetric in (f, g).
    f, g = random_pair(7, 6)
    w = default_window(f.bbox(), g.bbox())
    at = special_set(f, g, w, resolution=RES)
    at2 = special_set(g, f, w, resolution=RES)
    assert at.counts() == at2.counts()
    assert {p.tie for p in at.pieces} == {p.tie for p in at2.pieces}
    assert vertex_hausdorff(_vertices(at), _vertices(at2)) < 1e-6


def _translated_pair(seed):
    f = random_grid(seed, 4, "f", proper_fraction=0.25)
    c = 0.3137
    g = Grid(tuple(k.translated(c, 0.0, "g:" + k.id.split(":", 1)[1]) for k in f.contours))
    return f, g


def test_translated_copy_has_patches_and_perturbation_removes_them():
    # math.md 5: g = f + (c, 0) makes differences tie on open sets (e.g. a vertical x0 and
    # its copy: d = c/a for every vertical; a horizontal and its copy coincide so
    # {h, k} and {h', k} tie); a generic perturbation of every contour of g destroys them.
    f, g = _translated_pair(11)
    w = default_window(f.bbox(), g.bbox())
    at = special_set(f, g, w, resolution=RES)
    assert at.counts()["patch"] >= 1 and at.total_area > 0
    rng = np.random.default_rng(1)
    gp = Grid(tuple(k.translated(*rng.uniform(-0.02, 0.02, 2)) for k in g.contours))
    at2 = special_set(f, gp, w, resolution=RES)
    assert at2.total_area == 0.0 and at2.counts()["patch"] == 0


def test_sweep_and_naive_agree():
    # design.md: the output-sensitive sweep must find the naive method's set; compare the
    # crossings and the geometry (Hausdorff <= one cell).
    f, g = random_pair(13, 8)
    w = default_window(f.bbox(), g.bbox())
    s = special_set(f, g, w, resolution=RES, method="sweep")
    n = special_set(f, g, w, resolution=RES, method="naive")
    assert s.stats["crossings"] == n.stats["crossings"]
    assert s.stats["candidate_item_pairs"] < n.stats["candidate_item_pairs"]
    assert {p.tie for p in s.pieces} == {p.tie for p in n.pieces}
    cell = np.hypot((w.a[1] - w.a[0]) / (RES - 1), (w.b[1] - w.b[0]) / (RES - 1))
    assert vertex_hausdorff(_vertices(s), _vertices(n)) <= cell


@pytest.mark.parametrize("seed,pairs", [(3, "all"), (4, "roles"), (5, "all"), (6, "roles"), (7, "all")])
def test_compiled_sweep_finds_exactly_the_naive_crossings(seed, pairs):
    # the naive reference evaluates every allowed tie on every lattice edge (vectorised numpy); the
    # compiled sweep must return the identical set of (tie, edge) crossings, in both pair modes
    from specmap.special.compute import default_tolerance
    from specmap.special.detect import find_crossings, sample
    from specmap.special.lattice import Lattice
    from specmap.special.pairs import pair_table
    from specmap.special.reference import naive_crossings

    f, g = random_pair(seed, 9)
    table = pair_table(f, g, pairs)
    samples = sample(table, Lattice.of(default_window(f.bbox(), g.bbox()), 29, 23))
    tol = default_tolerance(f, g)
    cs, es, _ = find_crossings(table, samples, tol=tol, snap=1e-3 * tol)
    cn, en, _ = naive_crossings(table, samples, tol=tol, snap=1e-3 * tol)
    assert cs.size > 0
    np.testing.assert_array_equal(cs, cn)
    np.testing.assert_array_equal(es, en)


def test_roles_is_a_subset_of_all():
    # math.md 5: the role-aware ties are a subset of all ties.
    f, g = random_pair(17, 6)
    w = default_window(f.bbox(), g.bbox())
    a = special_set(f, g, w, resolution=RES)
    r = special_set(f, g, w, resolution=RES, pairs="roles")
    assert {p.tie for p in r.pieces} <= {p.tie for p in a.pieces}
    for p in r.pieces:
        (p1, p2), (q1, q2) = p.tie.pairs
        cross_p = p1[0] != p2[0]
        cross_q = q1[0] != q2[0]
        # half: the larger difference is a same-grid pair (diagonal cost), the doubled one a cross pair
        assert (cross_p == cross_q) if p.tie.condition == "equal" else (not cross_p and cross_q)


def test_progress_is_reported():
    f, g = random_pair(19, 4)
    calls = []
    special_set(
        f, g, default_window(f.bbox(), g.bbox()), resolution=RES, progress=lambda d, t: calls.append((d, t))
    )
    assert calls and calls[-1][0] == calls[-1][1]


def test_roles_keeps_only_diagonal_vs_matching_half_ties():
    # math.md 5, role-aware refinement (closed form, derived here): with vertical half-lines
    # every abscissa difference is constant in b, so a tie holds on the whole window or nowhere.
    # Case 1: f at x = 0, 2 (same-grid difference 2) and g at x = 3 (cross difference |2 - 3| = 1):
    # |d_same| = 2 |d_cross| is a diagonal cost tying a matching cost -> kept by "roles".
    # Case 2: f at x = 0, 1 and g at x = 2: every tie is cross-vs-cross half, mixed equal, or
    # cross = 2 * same -> none is kept by "roles", while "all" has a patch.
    from specmap.grids.model import Contour, Grid
    from specmap.strip import Window

    def vgrid(label, xs):
        return Grid(tuple(Contour(f"{label}:v{i}", "vertical", [[x, -50.0]]) for i, x in enumerate(xs)))

    w = Window((0.3, 0.45), (-0.5, 0.5))
    kept = special_set(vgrid("f", [0, 2]), vgrid("g", [3]), w, resolution=21, pairs="roles")
    assert kept.to_json()["area_fraction"] > 0.99
    dropped = special_set(vgrid("f", [0, 1]), vgrid("g", [2]), w, resolution=21, pairs="roles")
    assert dropped.to_json()["total_area"] == 0
    everything = special_set(vgrid("f", [0, 1]), vgrid("g", [2]), w, resolution=21, pairs="all")
    assert everything.to_json()["area_fraction"] > 0.99


@pytest.mark.parametrize("seed", [3, 4, 5])
def test_lattice_components_match_generic_components(seed):
    """Components linked through the lattice (chord interleaving) equal the generic segment test."""
    from specmap.special.reference import reference_components

    f, g = random_pair(seed, 10)
    w = default_window(f.bbox(), g.bbox())
    at = special_set(f, g, w, resolution=RES + 6)
    generic = reference_components(at.pieces, w)

    def key(cs):
        return sorted(
            (tuple((t.condition, t.pairs) for t in c.ties), round(c.length, 9), round(c.area, 9)) for c in cs
        )

    assert key(at.components) == key(generic)
