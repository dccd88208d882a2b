"""Tests of specmap.shapes.surfaces: meshes, derivatives, projection."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from specmap.shapes.surfaces import Ellipsoid, Torus, make_surface

SURFACES = [Ellipsoid((2.0, 1.3, 0.7)), Torus((2.0, 1.0)), Torus((3.0, 0.5))]


def _edge_counts(T: np.ndarray) -> tuple[dict[tuple[int, int], int], dict[tuple[int, int], int]]:
    directed: dict[tuple[int, int], int] = {}
    undirected: dict[tuple[int, int], int] = {}
    for a, b, c in T:
        for u, v in ((a, b), (b, c), (c, a)):
            directed[(int(u), int(v))] = directed.get((int(u), int(v)), 0) + 1
            key = (int(min(u, v)), int(max(u, v)))
            undirected[key] = undirected.get(key, 0) + 1
    return directed, undirected


@pytest.mark.parametrize("surface", SURFACES, ids=lambda s: f"{s.kind}{s.radii}")
def test_mesh_is_closed_oriented_manifold(surface):
    V, T = surface.mesh(1500)
    directed, undirected = _edge_counts(T)
    # closed 2-manifold: every edge in exactly two triangles
    assert set(undirected.values()) == {2}
    # consistent orientation: each directed edge used once, its reverse once
    assert set(directed.values()) == {1}
    assert all((v, u) in directed for (u, v) in directed)
    # vertex links are single cycles (no pinched vertices): link edges form one loop
    for vtx in range(0, len(V), 97):
        link = [tuple(int(w) for w in t if w != vtx) for t in T if vtx in t]
        nodes = {w for e in link for w in e}
        assert len(link) == len(nodes)  # a cycle has as many edges as nodes
        adj: dict[int, list[int]] = {}
        for u, w in link:
            adj.setdefault(u, []).append(w)
            adj.setdefault(w, []).append(u)
        start = next(iter(nodes))
        seen, stack = {start}, [start]
        while stack:
            for w in adj[stack.pop()]:
                if w not in seen:
                    seen.add(w)
                    stack.append(w)
        assert seen == nodes
    # Euler characteristic V - E + F: 2 for the sphere, 0 for the torus [Mil63]
    chi = len(V) - len(undirected) + len(T)
    assert chi == surface.euler_characteristic == (2 if surface.kind == "ellipsoid" else 0)
    # about `resolution` vertices
    assert 0.6 * 1500 <= len(V) <= 1.5 * 1500


@pytest.mark.parametrize("surface", SURFACES, ids=lambda s: f"{s.kind}{s.radii}")
def test_mesh_vertices_on_surface_and_outward(surface):
    V, T = surface.mesh(3000)
    assert np.abs(surface.implicit(V)).max() < 1e-12
    # divergence theorem: signed volume sum det(a, b, c) / 6 > 0 for outward faces, and close
    # to the closed-form volume: 4/3 pi r1 r2 r3 (ellipsoid), 2 pi^2 R r^2 (Pappus, torus)
    vol = np.einsum("ij,ij->i", V[T[:, 0]], np.cross(V[T[:, 1]], V[T[:, 2]])).sum() / 6.0
    if surface.kind == "ellipsoid":
        exact = 4.0 / 3.0 * math.pi * np.prod(surface.radii)
    else:
        R, r = surface.radii
        exact = 2.0 * math.pi**2 * R * r * r
    assert vol > 0
    assert abs(vol - exact) / exact < 0.02


@pytest.mark.parametrize("surface", SURFACES, ids=lambda s: f"{s.kind}{s.radii}")
def test_derivatives_match_finite_differences(surface):
    rng = np.random.default_rng(3)
    P = rng.normal(size=(20, 3)) * surface.size * 0.6
    h = 1e-6
    E = np.eye(3) * h
    fd_grad = np.stack([(surface.implicit(P + e) - surface.implicit(P - e)) / (2 * h) for e in E], 1)
    g = surface.gradient(P)
    assert np.allclose(g, fd_grad, rtol=1e-6, atol=1e-6 * np.abs(g).max())
    fd_hess = np.stack([(surface.gradient(P + e) - surface.gradient(P - e)) / (2 * h) for e in E], 1)
    H = surface.hessian(P)
    assert np.allclose(H, fd_hess, rtol=1e-6, atol=1e-6 * np.abs(H).max())
    assert np.allclose(H, H.transpose(0, 2, 1))


@pytest.mark.parametrize("surface", SURFACES, ids=lambda s: f"{s.kind}{s.radii}")
def test_project_converges_and_parametrize_on_surface(surface):
    (u0, u1), (v0, v1) = surface.parameter_box
    rng = np.random.default_rng(5)
    u = rng.uniform(u0, u1, 200)
    v = rng.uniform(v0, v1, 200)
    P = surface.parametrize(u, v)
    assert P.shape == (200, 3)
    assert np.abs(surface.implicit(P)).max() < 1e-12
    noisy = P + rng.normal(size=P.shape) * 0.05 * surface.size
    Q = surface.project(noisy)
    # on the surface to round-off, and moved by about the noise (not to a far point)
    grad = np.linalg.norm(surface.gradient(Q), axis=1)
    assert np.max(np.abs(surface.implicit(Q)) / grad) < 1e-12 * surface.size
    assert np.linalg.norm(Q - noisy, axis=1).max() < 0.5 * surface.size


def test_torus_distance_to_centre_circle_after_projection():
    # closed form: the torus is the set at distance r from the circle x^2+y^2=R^2, z=0
    T = Torus((2.0, 1.0))
    rng = np.random.default_rng(11)
    P = T.parametrize(rng.uniform(0, 6.28, 50), rng.uniform(0, 6.28, 50)) * 1.03
    Q = T.project(P)
    d = np.hypot(np.hypot(Q[:, 0], Q[:, 1]) - 2.0, Q[:, 2])
    assert np.allclose(d, 1.0, atol=1e-12)


def test_make_surface_and_bad_input():
    assert make_surface("ellipsoid", [1, 2, 3]).radii == (1.0, 2.0, 3.0)
    assert make_surface("torus", (2, 1)).euler_characteristic == 0
    for kind, radii in [
        ("ellipsoid", (1, 2)),
        ("ellipsoid", (1, -2, 3)),
        ("torus", (1, 2)),
        ("torus", (2, 0)),
        ("cube", (1, 1, 1)),
    ]:
        with pytest.raises(ValueError):
            make_surface(kind, radii)


@settings(max_examples=10, deadline=None)
@given(st.tuples(*[st.floats(0.2, 5.0)] * 3), st.integers(50, 800))
def test_ellipsoid_mesh_property(radii, resolution):
    E = Ellipsoid(radii)
    V, T = E.mesh(resolution)
    _, und = _edge_counts(T)
    assert set(und.values()) == {2}
    assert len(V) - len(und) + len(T) == 2  # sphere [Mil63]
    assert np.abs(E.implicit(V)).max() < 1e-12
