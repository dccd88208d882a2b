"""Tests for specmap.perturb: perturbation models, run sets (parallel, resumable), summaries.

Every check names its source: "closed form, derived in the test", "math.md section N",
"checks.md", "[CDFFL13]" (stability of the matching distance), "[Wil27]" (Wilson interval) or
"construction" (a property the model promises by definition, re-measured independently).
"""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from specmap.grids.model import Contour, Grid, validate_grid
from specmap.perturb import (
    PerturbSettings,
    perturb_grid,
    perturb_shape,
    random_field,
    run_seed,
    wilson_interval,
)
from specmap.perturb.models import PerturbedMap, sample_points
from specmap.perturb.runs import load_runs, records_without_time, repair_tail, set_hausdorff
from specmap.perturb.summary import verdict
from specmap.shapes.model import Shape
from specmap.strip import Window

Z = 1.96


# --------------------------------------------------------------------------- Wilson interval
def test_wilson_zero_successes_closed_form():
    # [Wil27]; closed form derived in the test: with p = 0 the upper bound is
    # (z^2/(2n) + z * sqrt(z^2/(4n^2))) / (1 + z^2/n) = z^2 / (n + z^2).
    for n in (1, 10, 50, 1000):
        lo, hi = wilson_interval(0, n, z=Z)
        assert lo == 0.0
        assert hi == pytest.approx(Z**2 / (n + Z**2), rel=1e-12)
    assert wilson_interval(0, 50, z=Z)[1] == pytest.approx(0.0713, abs=1e-4)


def test_wilson_all_successes_is_mirror_image():
    # [Wil27]; symmetry p -> 1 - p of the score interval, so k = n gives lower bound n/(n + z^2).
    for n in (5, 50):
        lo, hi = wilson_interval(n, n, z=Z)
        assert hi == 1.0
        assert lo == pytest.approx(n / (n + Z**2), rel=1e-12)


def test_wilson_half_closed_form():
    # [Wil27]; closed form derived in the test for p = 1/2: centre 1/2 and half width
    # z / (1 + z^2/n) * sqrt(1/(4n) + z^2/(4 n^2)).
    n = 10
    lo, hi = wilson_interval(5, n, z=Z)
    half = Z / (1 + Z**2 / n) * math.sqrt(0.25 / n + Z**2 / (4 * n * n))
    assert lo == pytest.approx(0.5 - half, rel=1e-12)
    assert hi == pytest.approx(0.5 + half, rel=1e-12)
    assert wilson_interval(0, 0) == (0.0, 1.0)
    with pytest.raises(ValueError):
        wilson_interval(3, 2)


def test_verdict_sentence():
    # construction: the sentence format given in the design brief.
    text = verdict({"total_area": 0.84, "counts": {"patch": 1, "curve": 0, "point": 0}},
                   50, 0, wilson_interval(0, 50, z=Z), 1e-3, 0.84)
    assert text == ("The base special set has 1 patch (area 0.84, 100% of the window); 0 of 50 perturbed "
                    "runs of size 0.001 kept a patch (95% CI 0-7.1%).")


# --------------------------------------------------------------------------- grid model
def four_verticals() -> tuple[Grid, Grid]:
    """checks.md: vertical half-lines x = 0, 1 (f) and x = 2, 3 (g), starting low enough to be met."""
    gf = Grid((Contour("f:v0", "vertical", [[0.0, -10.0]]), Contour("f:v1", "vertical", [[1.0, -10.0]])))
    gg = Grid((Contour("g:v0", "vertical", [[2.0, -10.0]]), Contour("g:v1", "vertical", [[3.0, -10.0]])))
    return gf, gg


def staircase_grid() -> Grid:
    t = np.linspace(0.0, 1.0, 40)
    arc = np.stack([np.cos(0.5 * math.pi * (1 - t)), -np.sin(0.5 * math.pi * t) + 0.3 * t], axis=1)
    arc[:, 1] = np.minimum.accumulate(arc[:, 1])
    steps = np.array([[0.0, 1.0], [0.0, 0.5], [0.2, 0.5], [0.2, 0.5], [0.7, 0.1]])  # flat runs, a repeat
    return validate_grid(Grid((
        Contour("f:p0", "proper", arc), Contour("f:p1", "proper", steps),
        Contour("f:p2", "proper", [[0.5, 0.5]]),
        Contour("f:v0", "vertical", [[0.1, 0.2]]), Contour("f:h0", "horizontal", [[0.3, -0.4]]),
    )))


@pytest.mark.parametrize("size", [1e-3, 0.05, 0.4])
def test_perturb_grid_moves_at_most_size_and_validates(size):
    # construction: no point moves by more than size (Euclidean), proper contours stay
    # non-increasing (validate_grid), ids and kinds are kept.
    grid = staircase_grid()
    for seed in range(20):
        new, moved = perturb_grid(grid, size, np.random.default_rng(seed))
        validate_grid(new, tol=0.0)
        worst = 0.0
        for a, b in zip(grid.contours, new.contours, strict=True):
            assert (a.id, a.kind, a.points.shape) == (b.id, b.kind, b.points.shape)
            worst = max(worst, float(np.max(np.linalg.norm(b.points - a.points, axis=1))))
        assert worst <= size * (1 + 1e-12)
        assert moved == pytest.approx(worst)
        assert worst > 0.0
        assert new.route == "perturbed"


def test_perturb_grid_is_seeded():
    # construction: the model is a pure function of the generator state.
    g = staircase_grid()
    a, _ = perturb_grid(g, 0.01, np.random.default_rng(7))
    b, _ = perturb_grid(g, 0.01, np.random.default_rng(7))
    c, _ = perturb_grid(g, 0.01, np.random.default_rng(8))
    assert all(np.array_equal(x.points, y.points) for x, y in zip(a.contours, b.contours, strict=True))
    assert not all(np.array_equal(x.points, y.points) for x, y in zip(a.contours, c.contours, strict=True))


# --------------------------------------------------------------------------- function model
def octahedron_shape(source: str = "mesh") -> Shape:
    V = np.array([[1, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0], [0, 0, 1], [0, 0, -1]], dtype=float)
    T = np.array([[0, 2, 4], [2, 1, 4], [1, 3, 4], [3, 0, 4], [2, 0, 5], [1, 2, 5], [3, 1, 5], [0, 3, 5]])
    return Shape("f", source, V, T, V[:, :2].copy())


def test_random_field_gradient_matches_finite_differences():
    # closed form check: central differences (step 1e-6) approximate the exact gradient to ~1e-8.
    rng = np.random.default_rng(3)
    h = random_field(rng, np.array([0.5, -1.0, 2.0]), 3.0)
    P = rng.normal(size=(25, 3)) * 2.0
    eps = 1e-6
    fd = np.stack([(h.values(P + eps * e) - h.values(P - eps * e)) / (2 * eps) for e in np.eye(3)], axis=1)
    assert np.allclose(h.gradient(P), fd, atol=1e-7, rtol=1e-6)


def test_perturb_mesh_sup_norm_is_size():
    # construction: each h is normalised so max |h| over the vertices is 1, hence
    # ||f' - f||_inf on the vertices equals size (the quantity in the [CDFFL13] bound).
    rng = np.random.default_rng(11)
    shape = octahedron_shape()
    for size in (1e-3, 0.2):
        new, applied = perturb_shape(shape, size, rng)
        delta = new.values - shape.values
        assert np.max(np.abs(delta)) == pytest.approx(size, rel=1e-12)
        assert applied == pytest.approx(size, rel=1e-12)
        # each component reaches the size on its own (two independent normalised fields)
        assert np.max(np.abs(delta[:, 0])) == pytest.approx(size, rel=1e-12)
        assert np.max(np.abs(delta[:, 1])) == pytest.approx(size, rel=1e-12)
        assert not np.allclose(delta[:, 0], delta[:, 1])
        assert np.array_equal(new.vertices, shape.vertices)


def test_perturb_surface_gives_map_with_exact_jacobian():
    # closed form: the base map f = (x, y) has Jacobian [[1,0,0],[0,1,0]]; the perturbed map's
    # Jacobian is checked against central differences of its values, and its values at the
    # vertices equal the new vertex values (construction).
    from specmap.expr import compile_map
    from specmap.shapes.surfaces import make_surface

    surface = make_surface("ellipsoid", (2.0, 1.0, 1.0))
    V, T = surface.mesh(200)
    fmap = compile_map(["x", "y"])
    shape = Shape("f", "surface", V, T, fmap.values(V), surface=surface, fmap=fmap, meta={"route": "exact"})
    new, applied = perturb_shape(shape, 0.05, np.random.default_rng(5))
    assert isinstance(new.fmap, PerturbedMap)
    assert new.fmap.is_linear() is False and new.meta["route"] == "auto"
    assert np.allclose(new.fmap.values(V), new.values, atol=1e-14)
    P = V[:30]
    eps = 1e-6
    fd = np.stack([(new.fmap.values(P + eps * e) - new.fmap.values(P - eps * e)) / (2 * eps)
                   for e in np.eye(3)], axis=2)
    assert np.allclose(new.fmap.jacobian(P), fd, atol=1e-7)
    # sup over the denser sample (projected midpoints and centroids) is the size; vertices <= it
    S = sample_points(shape)
    assert len(S) > len(V)
    assert np.allclose(surface.implicit(S), 0.0, atol=1e-9)  # samples lie on the surface
    dense = np.max(np.abs(new.fmap.values(S) - fmap.values(S)))
    assert dense == pytest.approx(0.05, rel=1e-12)
    assert applied <= 0.05 * (1 + 1e-12)


def test_perturb_shape_rejects_grid_only():
    # construction: grid-only shapes have no values to perturb.
    g, _ = four_verticals()
    with pytest.raises(ValueError, match="grid"):
        perturb_shape(Shape("f", "grid", grid=g), 0.1, np.random.default_rng(0))


# --------------------------------------------------------------------------- pure helpers
def test_run_seed_matches_spawn_and_is_independent_of_count():
    # construction: numpy SeedSequence.spawn gives child i the spawn key (i,), whatever the count.
    kids = np.random.SeedSequence(42).spawn(10)
    for i in (0, 3, 9):
        assert run_seed(42, i) == int(kids[i].generate_state(1, dtype=np.uint32)[0])
    assert len({run_seed(42, i) for i in range(100)}) == 100


def test_set_hausdorff_conventions_and_value():
    # closed form: two parallel segments at distance 0.3; empty-set conventions (documented).
    from shapely.geometry import LineString, box
    from shapely import GeometryCollection

    w = Window((0.0, 1.0), (0.0, 2.0))
    a = LineString([(0.2, 0.0), (0.2, 2.0)])
    b = LineString([(0.5, 0.0), (0.5, 2.0)])
    assert set_hausdorff(a, b, w) == pytest.approx(0.3)
    assert set_hausdorff(GeometryCollection(), GeometryCollection(), w) == 0.0
    assert set_hausdorff(a, GeometryCollection(), w) == pytest.approx(math.sqrt(5.0))
    # a square against its left side: the far side is at distance 1 (densified, not vertex-only)
    sq = box(0.0, 0.0, 1.0, 1.0)
    assert set_hausdorff(sq, LineString([(0, 0), (0, 1)]), w) == pytest.approx(1.0)


def test_repair_tail_and_load_runs(tmp_path):
    # construction: a torn last line is removed; complete lines are kept, first record per run wins.
    p = tmp_path / "runs.jsonl"
    p.write_bytes(b'{"run":0,"fingerprint":"x","v":1}\n{"run":1,"fingerprint":"y"}\n'
                  b'{"run":0,"fingerprint":"x","v":2}\n{"run":2,"finger')
    assert repair_tail(p) == len(b'{"run":2,"finger')
    assert p.read_bytes().endswith(b"\n")
    assert repair_tail(p) == 0
    recs = load_runs(p, "x")
    assert list(recs) == [0] and recs[0]["v"] == 1
    assert sorted(load_runs(p)) == [0, 1]
    q = tmp_path / "one.jsonl"
    q.write_bytes(b'{"run":0')
    assert repair_tail(q) == 8 and q.read_bytes() == b""


def test_settings_validation():
    # construction: user-facing errors for impossible settings.
    from specmap.errors import StudyError

    with pytest.raises(StudyError):
        PerturbSettings(model="noise")
    with pytest.raises(StudyError):
        PerturbSettings(size=-1.0)
