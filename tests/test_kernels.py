"""The compiled loops of the atlas against the array formulas and closed forms.

Sources: the closed forms of math.md section 5 (vertical/horizontal half-lines:
abscissa x0, ordinate y0) for the contour parameter; the vectorised
evaluation of specmap.special.evaluate as the reference of the flat form;
bisection as the reference of the root finder; the cross-interleaving rule of
chords in a convex cell (closed form, derived in the test).
"""

from __future__ import annotations

import numpy as np
import pytest
from gridgen import random_grid

from specmap.grids.model import Contour
from specmap.special.compiled.components import lattice_labels
from specmap.special.compiled.contours import FlatContours, ext_param, refine_edges
from specmap.special.compiled.curves import chain_walk
from specmap.special.evaluate import extended_parameter


def _contours(seed: int) -> list[Contour]:
    rng = np.random.default_rng(seed)
    out = list(random_grid(seed, 12).contours)
    # a long polyline (binary-search path), a single point and a repeated vertex
    xs = np.cumsum(rng.uniform(0.01, 0.1, 14))
    ys = 1.0 - np.cumsum(rng.uniform(0.01, 0.1, 14))
    out.append(Contour("f:long", "proper", np.stack([xs, ys], axis=1)))
    out.append(Contour("f:dot", "proper", np.array([[0.3, 0.4]])))
    out.append(Contour("f:rep", "proper", np.array([[0.2, 0.5], [0.2, 0.5], [0.6, 0.1]])))
    return out


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_flat_evaluation_matches_array_evaluation(seed):
    contours = _contours(seed)
    flat = FlatContours.of(contours)
    rng = np.random.default_rng(100 + seed)
    a = rng.uniform(0.02, 0.98, 400)
    b = rng.uniform(-1.5, 1.5, 400)
    for c, contour in enumerate(contours):
        s_ref, met_ref = extended_parameter(contour, a, b)
        got = [ext_param(*flat.args, c, x, y) for x, y in zip(a, b, strict=True)]
        s = np.array([g[0] for g in got])
        met = np.array([g[1] for g in got])
        assert np.array_equal(met, met_ref), contour.id
        np.testing.assert_allclose(s, s_ref, rtol=1e-12, atol=1e-12, err_msg=contour.id)


def test_half_line_parameters_closed_form():
    # math.md section 5: on r(a, b) the vertical half-line x = x0 has abscissa x0,
    # the horizontal one y = y0 has ordinate y0 (point = (a s + b, (1 - a) s - b))
    flat = FlatContours.of(
        [Contour("f:v", "vertical", [0.7, -5.0]), Contour("f:h", "horizontal", [-5.0, 0.4])]
    )
    for a, b in [(0.3, 0.1), (0.5, -0.2), (0.8, 0.4)]:
        s, met = ext_param(*flat.args, 0, a, b)
        assert met and a * s + b == pytest.approx(0.7, abs=1e-15)
        s, met = ext_param(*flat.args, 1, a, b)
        assert met and (1 - a) * s - b == pytest.approx(0.4, abs=1e-15)


def test_refine_finds_the_closed_form_root():
    # equal tie of verticals (0, 1) and horizontals (0, 1): for a <= 1/2 the abscissa
    # differences are 1 and a/(1-a); they tie at a = 1/2 (math.md section 5, exact)
    cs = [
        Contour("f:v0", "vertical", [0.0, -9.0]),
        Contour("f:v1", "vertical", [1.0, -9.0]),
        Contour("g:h0", "horizontal", [-9.0, 0.0]),
        Contour("g:h1", "horizontal", [-9.0, 1.0]),
    ]
    flat = FlatContours.of(cs)
    slots = np.array([[0, 1, 2, 3]] * 3, dtype=np.int64)
    a0 = np.array([0.3, 0.41, 0.2])
    a1 = np.array([0.6, 0.52, 0.7])
    b = np.array([0.0, 0.3, -0.4])
    out = refine_edges(*flat.args, slots, np.ones(3), a0, b, a1, b, 0.0, 1e-13)
    np.testing.assert_allclose(out[:, 0], 0.5, atol=1e-12)
    np.testing.assert_array_equal(out[:, 1], b)
    # half tie (factor 2): 1 = 2 a/(1-a) at a = 1/3
    out = refine_edges(
        *flat.args, slots, np.full(3, 2.0), np.full(3, 0.2), b, np.full(3, 0.45), b, 0.0, 1e-13
    )
    np.testing.assert_allclose(out[:, 0], 1 / 3, atol=1e-12)


def test_chain_walk_paths_and_loops():
    # path 0-1-2, loop 3-4-5-3, isolated 6 (closed form: read off the edges)
    nbr = np.array([[1, -1], [0, 2], [1, -1], [4, 5], [3, 5], [4, 3], [-1, -1]])
    deg = (nbr >= 0).sum(axis=1)
    flat, length, closed = chain_walk(nbr, deg)
    assert length.tolist() == [3, 3, 1]
    assert flat[:3].tolist() in ([0, 1, 2], [2, 1, 0])
    assert sorted(flat[3:6].tolist()) == [3, 4, 5]
    assert closed.tolist() == [False, True, False]


def _interleave(t, u):
    (a0, a1), (b0, b1) = sorted(t), sorted(u)
    return (a0 < b0 < a1) != (a0 < b1 < a1)


def _on_perimeter(t):
    """Point of the unit square at perimeter position t in [0, 4) (counter-clockwise from (0, 0))."""
    side, f = int(t), t - int(t)
    return [(f, 0.0), (1.0, f), (1.0 - f, 1.0), (0.0, 1.0 - f)][side]


def test_lattice_labels_join_exactly_the_crossing_chords():
    # straight chords of one convex cell cross iff their end points alternate on the
    # perimeter (closed form); the components must be those of the all-pairs graph
    import networkx as nx

    rng = np.random.default_rng(5)
    av = np.array([0.0, 1.0])
    bv = np.array([0.0, 1.0])
    for _ in range(40):
        k = int(rng.integers(2, 9))
        ends = (rng.permutation(4 * k)[: 2 * k].reshape(k, 2) + 0.5) / k
        p = np.array([_on_perimeter(t) for t in ends[:, 0]])
        q = np.array([_on_perimeter(t) for t in ends[:, 1]])
        keys = np.arange(2 * k, dtype=np.int64)  # no shared vertices
        label, cell, chord = lattice_labels(p, q, np.arange(k), k, av, bv, 1e-12, keys, np.argsort(keys))
        assert chord.all() and (cell == 0).all()
        g = nx.Graph()
        g.add_nodes_from(range(k))
        g.add_edges_from((i, j) for i in range(k) for j in range(i + 1, k) if _interleave(ends[i], ends[j]))
        expected = sorted(sorted(c) for c in nx.connected_components(g))
        got = {}
        for i, lab in enumerate(label.tolist()):
            got.setdefault(lab, []).append(i)
        assert sorted(got.values()) == expected


def test_lattice_labels_many_chords_and_ends_match_all_pairs_intersections():
    # brute force (written here): in general position two segments touch iff shapely says they
    # intersect; the components must be those of the all-pairs intersection graph. Many chords
    # and many segments ending inside one cell exercise the run bookkeeping of _cell_tests.
    import networkx as nx
    import shapely

    rng = np.random.default_rng(11)
    av = np.array([0.0, 1.0])
    bv = np.array([0.0, 1.0])
    for n_chord, n_end in ((60, 40), (300, 200)):
        # chords cutting a corner (ends on two adjacent sides: general position, many components)
        t0 = np.floor(rng.random(n_chord) * 4.0) + rng.uniform(0.7, 0.98, n_chord)
        p = [_on_perimeter(t) for t in t0]
        q = [_on_perimeter(t) for t in (np.floor(t0) + 1 + rng.uniform(0.02, 0.3, n_chord)) % 4.0]
        # segments from the perimeter towards the centre, ending inside (a tie's domain ends there)
        start = np.array([_on_perimeter(t) for t in rng.random(n_end) * 4.0])
        end = 0.5 + (start - 0.5) * rng.uniform(0.5, 0.95, (n_end, 1))
        p, q = np.vstack([p, start]), np.vstack([q, end])
        k = len(p)
        keys = np.arange(2 * k, dtype=np.int64)  # no shared vertices
        label, _, chord = lattice_labels(p, q, np.arange(k), k, av, bv, 1e-12, keys, np.argsort(keys))
        assert chord.sum() == n_chord
        segs = [shapely.LineString([a, b]) for a, b in zip(p, q, strict=True)]
        g = nx.Graph()
        g.add_nodes_from(range(k))
        g.add_edges_from((i, j) for i in range(k) for j in range(i + 1, k) if segs[i].intersects(segs[j]))
        expected = sorted(sorted(c) for c in nx.connected_components(g))
        got = {}
        for i, lab in enumerate(label.tolist()):
            got.setdefault(lab, []).append(i)
        assert sorted(got.values()) == expected
        assert len(expected) > 10  # not a trivial single component


def test_lattice_labels_join_shared_vertices():
    # two segments that only share an end point inside the cell are one component
    p = np.array([[0.2, 0.2], [0.5, 0.5]])
    q = np.array([[0.5, 0.5], [0.9, 0.1]])
    ends = np.vstack([p, q])
    keys = np.round(ends / 1e-9).astype(np.int64) @ np.array([10**10, 1])
    label, _, chord = lattice_labels(
        p, q, np.arange(2), 2, np.array([0.0, 1.0]), np.array([0.0, 1.0]), 1e-9, keys, np.argsort(keys)
    )
    assert not chord.any()
    assert label.tolist() == [0, 0]


def test_compiled_lattice_numbering_matches_the_lattice():
    # reference: the array implementation of the numbering (specmap.special.lattice.Lattice)
    from specmap.special.compiled.contours import edge_endpoints
    from specmap.special.compiled.lattice import edge_side_cell, interval_of
    from specmap.special.lattice import Lattice
    from specmap.strip import Window

    lat = Lattice.of(Window((0.1, 0.9), (-1.0, 2.0)), 7, 5)
    edges = np.arange(lat.n_edges, dtype=np.int64)
    n0, n1 = lat.edge_nodes(edges)
    a0, b0 = lat.node_ab(n0)
    a1, b1 = lat.node_ab(n1)
    np.testing.assert_array_equal(np.stack(edge_endpoints(edges, lat.av, lat.bv)), np.stack([a0, b0, a1, b1]))
    cells = lat.edge_cells(edges)
    for k, e in enumerate(edges.tolist()):
        for side in range(2):
            cj, ci = edge_side_cell(e, side, lat.n_a, lat.n_b)
            assert (cj * (lat.n_a - 1) + ci if cj >= 0 else -1) == cells[k, side]
    assert [interval_of(lat.av, x) for x in (0.0, 0.1, 0.5, 0.9, 5.0)] == [0, 0, 3, 5, 5]
