"""Tests of the smooth route (specmap.grids.smooth) against closed forms and Morse theory."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from specmap.grids.exact import ellipsoid_linear_grid
from specmap.grids.smooth import critical_points, smooth_grid
from specmap.shapes.surfaces import Ellipsoid, Torus

RADII = np.array([2.0, 1.3, 0.7])
L = np.array([[1.0, 0.4, -0.3], [0.2, 1.0, 0.5]])
C = np.array([0.1, -0.2])


class Linear:
    """f(p) = A p + c with its exact Jacobian (duck-typed map)."""

    def __init__(self, A, c=(0.0, 0.0)):
        self.A = np.asarray(A, dtype=float)
        self.c = np.asarray(c, dtype=float)

    def values(self, P):
        return P @ self.A.T + self.c

    def jacobian(self, P):
        return np.broadcast_to(self.A, (len(P), 2, 3)).copy()


class QuadSine:
    """f_k(p) = p^T S_k p + b_k . p + e sin(w_k . p), random; exact gradient
    2 S_k p + b_k + e cos(w_k . p) w_k (derived by hand)."""

    def __init__(self, seed: int, e: float = 0.1):
        rng = np.random.default_rng(seed)
        A = rng.normal(size=(2, 3, 3))
        self.S = (A + A.transpose(0, 2, 1)) / 2
        self.b = rng.normal(size=(2, 3))
        self.w = rng.normal(size=(2, 3)) * 2
        self.e = e

    def values(self, P):
        return np.einsum("ni,kij,nj->nk", P, self.S, P) + P @ self.b.T + self.e * np.sin(P @ self.w.T)

    def jacobian(self, P):
        return (
            2 * np.einsum("kij,nj->nki", self.S, P)
            + self.b[None]
            + self.e * np.cos(P @ self.w.T)[:, :, None] * self.w[None]
        )


# ----------------------------------------------------------------------------- helpers
def ellipse_residual(Y):
    """Image ellipse of f = L p + c on the ellipsoid, derived in this file: f(E) = c + M B^3,
    M = L D, whose boundary is (y - c)^T (M M^T)^{-1} (y - c) = 1."""
    M = L * RADII
    Z = Y - C
    return np.einsum("ni,ij,nj->n", Z, np.linalg.inv(M @ M.T), Z) - 1.0


def exact_arcs(n=100001):
    """Dense samples of the two Pareto arcs: ellipse points with outward normal
    (M M^T)^{-1}(y - c) in the closed third / first quadrant [CEF19, checks.md]."""
    M = L * RADII
    Q = M @ M.T
    K = np.linalg.cholesky(Q)
    t = np.linspace(0, 2 * np.pi, n)
    Y = C + np.stack([np.cos(t), np.sin(t)], 1) @ K.T
    nrm = (Y - C) @ np.linalg.inv(Q).T
    return [Y[np.all(q * nrm >= 0, axis=1)] for q in (-1.0, 1.0)]


def to_polyline(X, poly):
    a, ab = poly[:-1], np.diff(poly, axis=0)
    best = np.full(len(X), np.inf)
    for k in range(0, len(a), 64):
        aa, bb = a[k : k + 64], ab[k : k + 64]
        w = X[:, None, :] - aa[None]
        t = np.clip(np.einsum("nki,ki->nk", w, bb) / np.maximum((bb**2).sum(1), 1e-300), 0, 1)
        best = np.minimum(best, np.linalg.norm(w - t[..., None] * bb[None], axis=2).min(axis=1))
    return best


def hausdorff_to_exact(grid):
    """Hausdorff distance between the smooth proper contours and the exact Pareto arcs."""
    proper = sorted(grid.by_kind("proper"), key=lambda c: c.points[0, 0])
    assert len(proper) == 2
    worst = 0.0
    for contour, dense in zip(proper, exact_arcs(), strict=True):
        worst = max(worst, to_polyline(dense, contour.points).max(), to_polyline(contour.points, dense).max())
    return worst


def extreme(i, sign):
    """Image of the extreme point of f_i = l . p + c_i on the ellipsoid (Cauchy-Schwarz):
    p = +-D^2 l / |D l|."""
    p = sign * RADII**2 * L[i] / np.linalg.norm(RADII * L[i])
    return L @ p + C


def ring_sign_changes(surface, fmap, which, p, rho):
    """Sign changes of f_i - f_i(p) on a small ring of the surface around p: 0 at an
    extremum, 4 at a non-degenerate saddle (Morse lemma [Mil63])."""
    n = surface.gradient(p[None])[0]
    n /= np.linalg.norm(n)
    e1 = np.cross(n, [1.0, 0.0, 0.0] if abs(n[0]) < 0.9 else [0.0, 1.0, 0.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(n, e1)
    th = np.linspace(0, 2 * np.pi, 720, endpoint=False)
    ring = surface.project(p + rho * (np.outer(np.cos(th), e1) + np.outer(np.sin(th), e2)))
    d = fmap.values(ring)[:, which] - fmap.values(p[None])[0, which]
    s = np.sign(d)
    return int((s != np.roll(s, 1)).sum()), float(np.sign(d.mean()))


# ----------------------------------------------------------------------------- torus (checks.md)
def test_torus_xy_grid_matches_closed_form():
    g = smooth_grid(Torus((2.0, 1.0)), Linear(np.eye(3)[:2]), resolution=4000)
    proper = g.by_kind("proper")
    # checks.md: proper arcs on the circles of radius 3 and 1 in quadrants I and III
    assert len(proper) == 4
    radii = []
    for c in proper:
        r = np.hypot(c.points[:, 0], c.points[:, 1])
        assert np.ptp(r) < 1e-8
        radii.append(round(float(r.mean()), 6))
        assert np.all(c.points[:, 0] * c.points[:, 1] >= -1e-12)  # quadrant I or III
        # the arc covers the whole quarter circle: from an axis to the other axis
        ends = np.sort(np.abs(c.points[[0, -1]]).ravel())
        assert np.allclose(ends, [0, 0, r.mean(), r.mean()], atol=1e-9)
    assert sorted(radii) == [1.0, 1.0, 3.0, 3.0]
    # checks.md: vertical half-lines x = +-1, +-3 from y = 0; horizontal y = +-1, +-3 from x = 0
    v = np.array(sorted(tuple(c.start) for c in g.by_kind("vertical")))
    h = np.array(sorted(tuple(c.start[::-1]) for c in g.by_kind("horizontal")))
    expected = np.array([[-3, 0], [-1, 0], [1, 0], [3, 0]], dtype=float)
    assert np.allclose(v, expected, atol=1e-9)
    assert np.allclose(h, expected, atol=1e-9)
    # x on the torus: min at x=-3, saddles at x=-1 and x=1, max at x=3 [Mil63]
    idx = [c["index"] for c in g.meta["critical_points"]["f1"]]
    assert idx == [0, 1, 1, 2]
    assert g.meta["euler_check"]["f1"]["ok"] and g.meta["euler_check"]["f2"]["ok"]


# ----------------------------------------------------------------------------- ellipsoid, linear
def test_ellipsoid_linear_matches_closed_form():
    E = Ellipsoid(tuple(RADII))
    g = smooth_grid(E, Linear(L, C), resolution=4000)
    assert g.route == "smooth"
    for c in g.by_kind("proper"):
        # points are refined onto the Jacobi curve, so their images lie on the ellipse
        assert np.abs(ellipse_residual(c.points)).max() < 1e-8
    # half-lines start at the extreme points (derived in 3-D by Cauchy-Schwarz)
    v = sorted(g.by_kind("vertical"), key=lambda c: c.start[0])
    h = sorted(g.by_kind("horizontal"), key=lambda c: c.start[1])
    assert len(v) == 2 and len(h) == 2
    for got, want in [
        (v[0], extreme(0, -1)),
        (v[1], extreme(0, 1)),
        (h[0], extreme(1, -1)),
        (h[1], extreme(1, 1)),
    ]:
        assert np.linalg.norm(got.start - want) < 1e-8
    hd = hausdorff_to_exact(g)
    # the reported tolerance bounds the observed distance (with 10% slack)
    assert hd <= 1.1 * g.tolerance
    assert hd < 2e-3
    # agrees with the closed-form route (independent code path) on the half-line starts
    ex = ellipsoid_linear_grid(RADII, L, C)
    for kind in ("vertical", "horizontal"):
        A = np.array(sorted(tuple(c.start) for c in g.by_kind(kind)))
        B = np.array(sorted(tuple(c.start) for c in ex.by_kind(kind)))
        assert np.allclose(A, B, atol=1e-8)
    json.dumps(g.to_json())  # meta is JSON-ready


@pytest.mark.slow
def test_ellipsoid_linear_convergence_rate():
    # Observed (this machine, 2026-12): Hausdorff error ~ 2.3e-3, 7.7e-4, 1.7e-4 at
    # resolutions 1000, 4000, 16000, i.e. about resolution^-1 = (mesh spacing)^2, the chord
    # error of a polyline through exact curve points.
    E = Ellipsoid(tuple(RADII))
    res = [1000, 4000, 16000]
    errs = [float(hausdorff_to_exact(smooth_grid(E, Linear(L, C), resolution=n))) for n in res]
    rates = [math.log(errs[i] / errs[i + 1]) / math.log(res[i + 1] / res[i]) for i in range(2)]
    print(f"smooth route Hausdorff errors {errs}, rates in resolution {rates}")
    assert errs[0] > errs[1] > errs[2]
    assert min(rates) > 0.7


# ----------------------------------------------------------------------------- Morse theory
@pytest.mark.parametrize(
    "surface", [Ellipsoid((2.0, 1.3, 0.7)), Torus((2.0, 1.0))], ids=["ellipsoid", "torus"]
)
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_morse_counts_on_random_maps(surface, seed):
    fmap = QuadSine(seed)
    g = smooth_grid(surface, fmap, resolution=3000)
    chi = surface.euler_characteristic
    for which, key, kind in ((0, "f1", "vertical"), (1, "f2", "horizontal")):
        cps = g.meta["critical_points"][key]
        counts = [sum(1 for c in cps if c["index"] == k) for k in range(3)]
        # [Mil63]: #min - #saddle + #max = chi; hence #half-lines = chi (mod 2)
        assert counts[0] - counts[1] + counts[2] == chi
        assert len(g.by_kind(kind)) % 2 == chi % 2
        assert counts[0] >= 1 and counts[2] >= 1
        # independent index check: sign pattern of f_i - f_i(p) on a small ring (Morse lemma)
        for c in cps:
            p = np.array(c["point"])
            changes, mean_sign = ring_sign_changes(surface, fmap, which, p, 2e-3 * surface.size)
            if c["index"] == 1:
                assert changes == 4
            else:
                assert changes == 0
                assert mean_sign == (1.0 if c["index"] == 0 else -1.0)
    for c in g.by_kind("proper"):
        d = np.diff(c.points, axis=0)
        assert np.all(d[:, 0] >= -1e-7) and np.all(d[:, 1] <= 1e-7)


@pytest.mark.parametrize(
    "surface", [Ellipsoid((2.0, 1.3, 0.7)), Torus((2.0, 1.0))], ids=["ellipsoid", "torus"]
)
def test_proper_contours_end_at_critical_values_or_cusps(surface):
    # [CEF19]: the image of J_P is cut only at critical points of f1, f2 and at cusps; a cusp
    # is shared by exactly the two pieces meeting there
    g = smooth_grid(surface, QuadSine(1), resolution=3000)
    starts = np.array([c.start for c in g.contours if c.kind != "proper"])
    proper = g.by_kind("proper")
    ends = [(i, p.points[j]) for i, p in enumerate(proper) for j in (0, -1)]
    n_cusp_ends = 0
    for i, q in ends:
        if np.min(np.linalg.norm(starts - q, axis=1)) < 1e-8:
            continue
        shared = [k for k, r in ends if k != i and np.linalg.norm(r - q) < 1e-12]
        assert len(shared) == 1
        n_cusp_ends += 1
    assert n_cusp_ends % 2 == 0


def test_hard_map_reports_and_repairs_missed_critical_points():
    # a wiggly map on a thin torus: at 3000 vertices a close min-saddle pair of f1 is missed,
    # which the Morse check [Mil63] detects; one retry at 4x resolution finds it
    surface, fmap = Torus((3.0, 0.5)), QuadSine(1, e=0.5)
    coarse = smooth_grid(surface, fmap, resolution=3000, retries=0)
    assert not coarse.meta["euler_check"]["f1"]["ok"]
    fine = smooth_grid(surface, fmap, resolution=3000, retries=1)
    assert fine.meta["resolution"] == 12000 and fine.meta["requested_resolution"] == 3000
    for key in ("f1", "f2"):
        assert fine.meta["euler_check"][key]["alternating_sum"] == 0  # chi(torus) [Mil63]


def test_pareto_fronts_lie_on_proper_contours():
    # Minimal (and maximal) points of f(M) are Pareto critical [CEF19], so the non-dominated
    # samples of a dense random sampling must lie near the proper contours.
    surface, fmap = Torus((2.0, 1.0)), QuadSine(4)
    g = smooth_grid(surface, fmap, resolution=3000)
    rng = np.random.default_rng(1)
    P = surface.parametrize(rng.uniform(0, 2 * np.pi, 400000), rng.uniform(0, 2 * np.pi, 400000))
    Y = fmap.values(P)
    span = float(np.ptp(Y, axis=0).max())
    poly = [c.points for c in g.by_kind("proper")]
    for sgn in (1.0, -1.0):  # lower-left front, then upper-right front
        Z = sgn * Y
        order = np.lexsort((Z[:, 1], Z[:, 0]))
        best = np.minimum.accumulate(Z[order, 1])
        front = Y[order][np.concatenate([[True], Z[order, 1][1:] < best[:-1]])]
        dist = np.min([to_polyline(front, q) for q in poly], axis=0)
        # observed: 90% quantile ~ 1e-3 span, max ~ 1.3e-3 span (sampling gap of the front)
        assert np.quantile(dist, 0.9) < 3e-3 * span
        assert dist.max() < 1e-2 * span


def test_critical_points_api_on_ellipsoid():
    E = Ellipsoid((2.0, 1.3, 0.7))
    cps = critical_points(E, Linear(np.eye(3)[:2]), 0, resolution=1000)
    # x on the ellipsoid: min at (-2, 0, 0), max at (2, 0, 0)
    assert [c.index for c in cps] == [0, 2]
    assert np.allclose([c.point for c in cps], [[-2, 0, 0], [2, 0, 0]], atol=1e-9)
    assert np.allclose([c.value[0] for c in cps], [-2, 2], atol=1e-9)
    with pytest.raises(ValueError):
        critical_points(E, Linear(np.eye(3)[:2]), 2)


def test_ids_and_labels():
    g = smooth_grid(Ellipsoid((1.0, 1.0, 1.0)), QuadSine(7), label="g", resolution=1500)
    ids = [c.id for c in g.contours]
    assert len(set(ids)) == len(ids)
    for c in g.contours:
        prefix, tail = c.id.split(":")
        assert prefix == "g" and tail[0] == {"proper": "p", "vertical": "v", "horizontal": "h"}[c.kind]
    assert g.meta["resolution"] == 1500 and g.tolerance > 0
