"""The PL route to the extended Pareto grid, checked against closed forms and theorems."""

from __future__ import annotations

import time

import gudhi
import numpy as np
import pytest
from meshgen import ellipsoid_mesh, torus_mesh
from scipy.spatial import cKDTree

from specmap.grids.model import validate_grid
from specmap.grids.piecewise import piecewise_grid, pl_critical_vertices
from specmap.shapes.meshes import check_closed_manifold, edges_and_faces, euler_characteristic
from specmap.strip import line_parameter, push_scale

RADII = np.array([2.0, 1.3, 0.7])
LMAP = np.array([[1.0, 0.4, -0.3], [0.2, 1.0, 0.5]])


# ---------------------------------------------------------------- closed form: linear map on an ellipsoid
def ellipse_pareto_arcs(n: int = 40000) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pareto arcs of f = L p on the ellipsoid with radii D, derived here.

    The ellipsoid is {D w : |w| = 1}, so its image is {M w : |w| <= 1} with M = L D. With the
    SVD M = U S Vt, the image is the filled ellipse {U S c : |c| <= 1}, boundary U S c(t),
    c(t) = (cos t, sin t) (only w = Vt^T c, in the row space of M, reaches it). The boundary is
    the level |S^-1 U^T y| = 1, whose gradient at y = U S c is parallel to U S^-1 c: the outward
    normal. Pareto points (CEF19, math.md 4; checks.md 'general ellipsoid'): normal in the closed
    first or third quadrant. Extreme points of f1 (f2): normal (+-1, 0) ((0, +-1)), i.e.
    c = +- S U^T e / |S U^T e|.

    Returns (arc points (k, 2), extreme points of f1 (2, 2), extreme points of f2 (2, 2)).
    """
    M = LMAP * RADII
    U, S, _ = np.linalg.svd(M, full_matrices=False)
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    c = np.stack([np.cos(t), np.sin(t)])
    y = (U @ (S[:, None] * c)).T
    nrm = (U @ (c / S[:, None])).T
    arcs = y[nrm[:, 0] * nrm[:, 1] >= 0]

    def extremes(e):
        cc = S * (U.T @ e)
        cc /= np.linalg.norm(cc)
        return np.stack([U @ (S * cc), U @ (S * -cc)])

    return arcs, extremes(np.array([1.0, 0.0])), extremes(np.array([0.0, 1.0]))


def densify(grid, step: float) -> np.ndarray:
    """Points along every proper contour with spacing <= step."""
    out = []
    for c in grid.by_kind("proper"):
        P = c.points
        out.append(P[:1])
        for p, q in zip(P[:-1], P[1:], strict=True):
            k = max(int(np.ceil(np.linalg.norm(q - p) / step)), 1)
            out.append(p + (q - p) * (np.arange(1, k + 1) / k)[:, None])
    return np.concatenate(out)


def ellipse_boundary(n: int = 200000) -> np.ndarray:
    """The whole image-ellipse boundary U S c(t) (see :func:`ellipse_pareto_arcs`)."""
    U, S, _ = np.linalg.svd(LMAP * RADII, full_matrices=False)
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return (U @ (S[:, None] * np.stack([np.cos(t), np.sin(t)]))).T


def ellipsoid_errors(level: int) -> tuple[float, float, float, object]:
    """(Hausdorff distance grid <-> Pareto arcs, normal distance to the ellipse, tolerance, grid)."""
    V, T = ellipsoid_mesh(RADII, level, seed=7)
    grid = piecewise_grid(V, T, V @ LMAP.T)
    arcs, _, _ = ellipse_pareto_arcs()
    pts = densify(grid, grid.tolerance / 20)
    d_out = cKDTree(arcs).query(pts)[0].max()  # contours near the arcs
    d_in = cKDTree(pts).query(arcs)[0].max()  # arcs covered by the contours
    vertices = np.concatenate([c.points for c in grid.by_kind("proper")])
    normal = cKDTree(ellipse_boundary()).query(vertices)[0].max()
    return max(d_out, d_in), normal, grid.tolerance, grid


def test_ellipsoid_linear_map_closed_form():
    h, normal, tol, grid = ellipsoid_errors(16)
    assert h <= tol, (h, tol)
    assert normal <= 0.1 * tol, (normal, tol)  # second order (see the sweep below)
    _, ext1, ext2 = ellipse_pareto_arcs()
    vert = np.array([c.start for c in grid.by_kind("vertical")])
    hori = np.array([c.start for c in grid.by_kind("horizontal")])
    # a linear function on a convex polyhedron has one PL minimum and one PL maximum [Ban67]
    assert len(vert) == 2 and len(hori) == 2
    for got, want in ((vert, ext1), (hori, ext2)):
        d = np.linalg.norm(got[:, None] - want[None], axis=2)
        assert d.min(axis=0).max() <= tol and d.min(axis=1).max() <= tol, d
    assert grid.meta["critical_vertices"]["f1"] == {"min": 1, "saddle": 0, "max": 1}
    assert grid.route == "piecewise" and grid.meta["vertices"] == len(ellipsoid_mesh(RADII, 16)[0])


@pytest.mark.slow
def test_ellipsoid_convergence_sweep():
    rows = [ellipsoid_errors(level)[:3] for level in (10, 20, 40, 80)]
    h, normal, tol = (np.array(col) for col in zip(*rows, strict=True))
    print("\nHausdorff", h, "normal", normal, "tolerance", tol)
    print("rates: Hausdorff", np.log2(h[:-1] / h[1:]), "normal", np.log2(normal[:-1] / normal[1:]))
    # Observed (levels 10, 20, 40, 80 = 1002 .. 64002 vertices, mesh size halving each step):
    #   tolerance 0.29, 0.15, 0.073, 0.037 (rate 1);
    #   normal distance of contour vertices to the ellipse 4.2e-3, 1.5e-3, 3.6e-4, 8.2e-5
    #   (rates 1.5, 2.0, 2.1: second order, the PL fold sits O(h^2) inside the smooth one);
    #   Hausdorff to the Pareto arcs 8.7e-3 .. 5.6e-2, 2.9e-2, 2.8e-2, 3.3e-3: first order at best and
    #   erratic, set by where the PL extreme vertices fall along the ellipse near its tangency
    #   points (the arc ends), always below the tolerance.
    assert np.all(h <= tol)
    assert np.log2(normal[0] / normal[-1]) / 3 > 1.5


# ---------------------------------------------------------------- torus of revolution, f = (x, y)
@pytest.mark.parametrize("offset", [0.0, 0.0123])
def test_torus_checks_md_grid(offset):
    V, T = torus_mesh(2.0, 1.0, 96, 48, offset=offset)
    grid = piecewise_grid(V, T, V[:, :2])
    tol = grid.tolerance
    # checks.md (torus R=2, r=1, f=(x, y)): proper arcs on circles of radius 3 and 1 in quadrants
    # I and III; vertical half-lines x = +-1, +-3 from y = 0; horizontal y = +-1, +-3 from x = 0.
    pts = densify(grid, tol / 10)
    rad = np.hypot(pts[:, 0], pts[:, 1])
    assert np.minimum(abs(rad - 3), abs(rad - 1)).max() <= tol
    assert (pts[:, 0] * pts[:, 1]).min() >= -tol * 3  # closed quadrants I and III (up to tol)
    th = np.linspace(0, np.pi / 2, 400)
    for R in (1.0, 3.0):
        for sgn in (1, -1):
            arc = sgn * R * np.stack([np.cos(th), np.sin(th)], 1)
            assert cKDTree(pts).query(arc)[0].max() <= tol
    vert = sorted(c.start.tolist() for c in grid.by_kind("vertical"))
    hori = sorted((c.start.tolist() for c in grid.by_kind("horizontal")), key=lambda q: q[1])
    assert len(vert) == 4 and len(hori) == 4
    np.testing.assert_allclose(vert, [[-3, 0], [-1, 0], [1, 0], [3, 0]], atol=tol)
    np.testing.assert_allclose(hori, [[0, -3], [0, -1], [0, 1], [0, 3]], atol=tol)


# ---------------------------------------------------------------- Morse counts
def random_smooth_map(V: np.ndarray, seed: int) -> np.ndarray:
    """Random quadratic plus a sine, two components."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(2):
        A = rng.normal(size=(3, 3))
        w = rng.normal(size=3) * 2
        q = np.einsum("ij,jk,ik->i", V, A + A.T, V) + V @ rng.normal(size=3)
        out.append(q + rng.uniform(0.3, 1.5) * np.sin(V @ w + rng.uniform(0, 6)))
    return np.column_stack(out)


@pytest.mark.parametrize("seed", range(6))
def test_morse_counts_equal_euler_characteristic(seed):
    surfaces = {2: ellipsoid_mesh(RADII, 9, seed=seed), 0: torus_mesh(2.0, 0.8, 40, 22, offset=0.1 * seed)}
    for chi, (V, T) in surfaces.items():
        check_closed_manifold(V, T)
        assert euler_characteristic(V, T) == chi
        F = random_smooth_map(V, seed)
        for k in range(2):
            # Morse relation #min - #saddle + #max = chi(M) [Mil63], exact for PL functions with
            # saddle multiplicities [Ban67]
            counts = pl_critical_vertices(T, F[:, k]).counts()
            assert counts["min"] - counts["saddle"] + counts["max"] == chi, counts
        grid = piecewise_grid(V, T, F)
        cv = grid.meta["critical_vertices"]
        assert len(grid.by_kind("vertical")) >= cv["f1"]["min"] + cv["f1"]["max"]
        assert cv["f2"]["min"] - cv["f2"]["saddle"] + cv["f2"]["max"] == chi


def test_ties_are_broken_consistently():
    # constant f2 and coarse integer f1: every comparison is a tie somewhere; the result must still
    # be a valid grid with PL Morse counts adding to chi [Mil63, Ban67].
    V, T = torus_mesh(2.0, 1.0, 12, 8)
    F = np.column_stack([np.round(V[:, 0]), np.zeros(len(V))])
    grid = piecewise_grid(V, T, F)
    validate_grid(grid)
    for key in ("f1", "f2"):
        c = grid.meta["critical_vertices"][key]
        assert c["min"] - c["saddle"] + c["max"] == 0


def test_speed_20k(capsys):
    V, T = ellipsoid_mesh(RADII, 45, seed=2)  # 20252 vertices
    F = random_smooth_map(V, 11)
    t0 = time.perf_counter()
    piecewise_grid(V, T, F)
    dt = time.perf_counter() - t0
    with capsys.disabled():
        print(f"\npiecewise_grid on {len(V)} vertices: {dt:.3f} s")
    assert dt < 5.0


# ---------------------------------------------------------------- position theorem audit [CEF19]
def slice_pairs(T: np.ndarray, edges: np.ndarray, F: np.ndarray, a: float, b: float):
    """Finite (birth, death) coordinates with their persistence, lower-star of F*(a, b), by gudhi.

    F*(a,b) = min(a, 1-a) * max((f1 - b)/a, (f2 + b)/(1 - a))   (math.md 2, [CDFFL13]).
    Returns (coordinates (k,), persistence of the pair of each coordinate (k,), F* at the vertices).
    """
    phi = min(a, 1 - a) * np.maximum((F[:, 0] - b) / a, (F[:, 1] + b) / (1 - a))
    st = gudhi.SimplexTree()
    st.insert_batch(np.arange(len(F))[None, :], phi)
    st.insert_batch(edges.T, phi[edges].max(axis=1))
    st.insert_batch(T.T, phi[T].max(axis=1))
    st.compute_persistence(persistence_dim_max=True)
    coords, pers = [], []
    for _, (birth, death) in st.persistence():
        for c in (birth, death):
            if np.isfinite(c):
                coords.append(c)
                pers.append(death - birth)
    return np.array(coords), np.array(pers), phi


def test_position_theorem_audit(capsys):
    """Position theorem [CEF19] on a PL mesh, up to mesh size.

    The lower-star filtration interpolates F* linearly from the vertices, while the PL grid
    describes max(g1, g2) of the interpolated g's; the two differ by at most delta = the largest
    edge variation of F*. By bottleneck stability [CDFFL13], pairs of persistence > 2 delta are
    genuine and sit within delta of the diagram of the PL map; shorter pairs (PL noise along the
    crease g1 = g2, observed persistence < 0.1 delta) may sit anywhere and are only counted.
    """
    V, T = ellipsoid_mesh(RADII, 24, seed=5)  # 5762 vertices
    x, y, z = V.T
    F = np.column_stack([x + 0.35 * np.sin(2.0 * y) + 0.3 * z * z, y - 0.4 * np.cos(1.5 * x) + 0.25 * x * z])
    grid = piecewise_grid(V, T, F)
    edges = edges_and_faces(T).edges
    rng = np.random.default_rng(1)
    worst_ratio, checked, noise = 0.0, 0, 0
    lo = min(F[:, 0].min(), -F[:, 1].max())
    hi = max(F[:, 0].max(), -F[:, 1].min())
    for _ in range(20):
        a = rng.uniform(0.1, 0.9)
        b = rng.uniform(lo, hi)
        coords, pers, phi = slice_pairs(T, edges, F, a, b)
        delta = np.abs(phi[edges[:, 0]] - phi[edges[:, 1]]).max()
        push = np.array([line_parameter(c, a, b) for c in grid.contours]) * push_scale(a)
        push = push[np.isfinite(push)]
        genuine = pers > 2 * delta
        noise += int((~genuine).sum())
        if not genuine.any():
            continue
        dev = np.abs(coords[genuine][:, None] - push[None, :]).min(axis=1)
        checked += int(genuine.sum())
        worst_ratio = max(worst_ratio, dev.max() / delta)
        # position theorem [CEF19]: each finite coordinate is the push coordinate of a point of
        # r(a, b) ∩ grid; here within a few mesh sizes
        assert dev.max() <= 3 * delta, (a, b, dev.max(), delta)
    assert checked >= 20
    with capsys.disabled():
        print(
            f"\nposition audit: {checked} coordinates checked, max deviation {worst_ratio:.2f} x delta "
            f"(max edge variation of F*); {noise} coordinates of sub-2-delta pairs not checked"
        )
