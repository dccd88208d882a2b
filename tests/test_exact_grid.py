"""Tests of the closed-form grid of linear maps on ellipsoids (specmap.grids.exact)."""

from __future__ import annotations

import numpy as np
import pytest

from specmap.grids.exact import ellipsoid_linear_grid, is_dependent_linear, is_exact_case
from specmap.shapes.surfaces import Ellipsoid, Torus

RADII = np.array([2.0, 1.3, 0.7])
L = np.array([[1.0, 0.4, -0.3], [0.2, 1.0, 0.5]])
C = np.array([0.1, -0.2])


def ellipse_form() -> np.ndarray:
    """Q^{-1} for the image ellipse, derived here: f(E) = c + M B^3 with M = L D, and
    M B^3 = {y : y^T (M M^T)^{-1} y <= 1} (image of the unit ball under a rank-2 map)."""
    M = L * RADII
    return np.linalg.inv(M @ M.T)


def residual(Y: np.ndarray) -> np.ndarray:
    """(y - c)^T Q^{-1} (y - c) - 1: zero on the image ellipse."""
    Z = Y - C
    return np.einsum("ni,ij,nj->n", Z, ellipse_form(), Z) - 1.0


def extreme(i: int, sign: float) -> np.ndarray:
    """Image of the extreme point of f_i on the ellipsoid, derived by Cauchy-Schwarz in 3-D:
    max of l . p over x^2/r^2 = 1 is at p = D^2 l / |D l| with value |D l|."""
    p = sign * RADII**2 * L[i] / np.linalg.norm(RADII * L[i])
    return L @ p + C


def test_arcs_lie_on_the_image_ellipse_with_pareto_normals():
    g = ellipsoid_linear_grid(RADII, L, C)
    proper = g.by_kind("proper")
    assert len(proper) == 2
    Qi = ellipse_form()
    for contour, quadrant in zip(proper, (-1.0, 1.0), strict=True):
        Y = contour.points
        # on the boundary of the image (derived quadratic form)
        assert np.abs(residual(Y)).max() < 1e-12
        # outward normal Q^{-1}(y - c) in the closed first (p1) or third (p0) quadrant [CEF19]
        n = (Y - C) @ Qi.T
        assert np.all(quadrant * n >= -1e-9 * np.linalg.norm(n, axis=1)[:, None])
        # non-increasing, oriented by increasing x
        d = np.diff(Y, axis=0)
        assert np.all(d[:, 0] >= -1e-12) and np.all(d[:, 1] <= 1e-12)


def test_half_lines_start_at_extreme_points():
    g = ellipsoid_linear_grid(RADII, L, C)
    v = g.by_kind("vertical")
    h = g.by_kind("horizontal")
    assert len(v) == 2 and len(h) == 2
    # two critical points per component on an ellipsoid: min and max [Mil63, chi = 2]
    assert np.allclose(v[0].start, extreme(0, -1.0), atol=1e-12)
    assert np.allclose(v[1].start, extreme(0, 1.0), atol=1e-12)
    assert np.allclose(h[0].start, extreme(1, -1.0), atol=1e-12)
    assert np.allclose(h[1].start, extreme(1, 1.0), atol=1e-12)
    # the Pareto arcs run between them: third quadrant min f1 -> min f2, first max f2 -> max f1
    p0, p1 = g.by_kind("proper")
    assert np.allclose(p0.points[0], v[0].start) and np.allclose(p0.points[-1], h[0].start)
    assert np.allclose(p1.points[0], h[1].start) and np.allclose(p1.points[-1], v[1].start)


def test_arcs_cover_the_pareto_boundary_within_tolerance():
    g = ellipsoid_linear_grid(RADII, L, C, n_points=301)
    # independent parametrisation: y = c + K (cos t, sin t) with K K^T = Q (Cholesky)
    K = np.linalg.cholesky(np.linalg.inv(ellipse_form()))
    t = np.linspace(0, 2 * np.pi, 40001)
    Y = C + np.stack([np.cos(t), np.sin(t)], 1) @ K.T
    n = (Y - C) @ ellipse_form().T
    for contour, quadrant in zip(g.by_kind("proper"), (-1.0, 1.0), strict=True):
        dense = Y[np.all(quadrant * n >= 0, axis=1)]
        dist = _to_polyline(dense, contour.points)
        # every true arc point is within the reported chord tolerance (plus sampling of dense)
        assert dist.max() <= 1.05 * g.tolerance + 1e-6
    assert 0 < g.tolerance < 1e-3


def test_monte_carlo_image_inside_ellipse():
    # random points of the ellipsoid map into the filled ellipse, touching its boundary
    rng = np.random.default_rng(0)
    W = rng.normal(size=(200000, 3))
    P = W / np.linalg.norm(W, axis=1)[:, None] * RADII
    r = residual(P @ L.T + C)
    assert r.max() <= 1e-12
    assert r.max() > -1e-3


def test_swap_symmetry():
    # math.md section 6: the grid of (f2, f1) is the swapped grid of (f1, f2)
    g = ellipsoid_linear_grid(RADII, L, C)
    s = ellipsoid_linear_grid(RADII, L[::-1], C[::-1]).swapped()
    for a, b in zip(
        sorted(g.by_kind("proper"), key=lambda c: c.points[0, 0]),
        sorted(s.by_kind("proper"), key=lambda c: c.points[0, 0]),
        strict=True,
    ):
        assert np.allclose(a.points[[0, -1]], b.points[[0, -1]], atol=1e-12)
    for kind in ("vertical", "horizontal"):
        A = sorted(tuple(c.start) for c in g.by_kind(kind))
        B = sorted(tuple(c.start) for c in s.by_kind(kind))
        assert np.allclose(A, B, atol=1e-12)


def test_critical_points_meta_and_json():
    g = ellipsoid_linear_grid(RADII, L, C, label="g")
    assert g.route == "exact"
    assert {c.id for c in g.contours} == {"g:p0", "g:p1", "g:v0", "g:v1", "g:h0", "g:h1"}
    cp = g.meta["critical_points"]["f1"]
    assert [c["index"] for c in cp] == [0, 2]
    P = np.array([c["point"] for c in cp])
    assert np.allclose(Ellipsoid(tuple(RADII)).implicit(P), 0.0, atol=1e-12)
    assert g.to_json()["contours"][2]["kind"] == "vertical"


class _Lin:
    def __init__(self, M, linear=True):
        self.M = np.asarray(M, dtype=float)
        self.linear = linear

    def is_linear(self):
        return self.linear

    def matrix(self):
        return self.M


def test_is_exact_case_and_degenerate_maps():
    E = Ellipsoid(tuple(RADII))
    assert is_exact_case(E, _Lin(L))
    assert not is_exact_case(E, _Lin(L, linear=False))
    assert not is_exact_case(Torus((2, 1)), _Lin(L))
    assert not is_exact_case(E, _Lin([[1, 0, 0], [2, 0, 0]]))  # rank 1
    assert not is_exact_case(E, object())
    # rank by hand: rows (1,0,0) and (2,0,0) are parallel; (1,0,0), (0,1,0) are not
    assert is_dependent_linear(_Lin([[1, 0, 0], [2, 0, 0]]))
    assert is_dependent_linear(_Lin([[0, 0, 0], [0, 0, 0]]))
    assert not is_dependent_linear(_Lin(L))
    assert not is_dependent_linear(_Lin([[1, 0, 0], [2, 0, 0]], linear=False))
    with pytest.raises(ValueError):
        ellipsoid_linear_grid(RADII, [[1, 0, 0], [2, 0, 0]])
    with pytest.raises(ValueError):
        ellipsoid_linear_grid((1, 1), L)


def test_is_exact_case_with_compiled_map():
    expr = pytest.importorskip("specmap.expr")
    f = expr.compile_map(["x + 0.4*y - 0.3*z + 0.1", "0.2*x + y + 0.5*z - 0.2"])
    E = Ellipsoid(tuple(RADII))
    assert is_exact_case(E, f)
    g = ellipsoid_linear_grid(E.radii, f.matrix(), f.offset())
    assert np.allclose(g.by_kind("vertical")[1].start, extreme(0, 1.0), atol=1e-12)
    assert not is_exact_case(E, expr.compile_map(["x*y", "z"]))


def _to_polyline(X: np.ndarray, poly: np.ndarray) -> np.ndarray:
    """Distance of each point of X to the polyline (independent helper)."""
    a, b = poly[:-1], poly[1:]
    ab = b - a
    best = np.full(len(X), np.inf)
    for k in range(0, len(a), 64):
        aa, bb = a[k : k + 64], ab[k : k + 64]
        w = X[:, None, :] - aa[None]
        t = np.clip(np.einsum("nki,ki->nk", w, bb) / np.maximum((bb**2).sum(1), 1e-300), 0, 1)
        d = np.linalg.norm(w - t[..., None] * bb[None], axis=2).min(axis=1)
        best = np.minimum(best, d)
    return best
