"""Pairs outside the theory (constant or functionally dependent components) are refused (issue 14).

Source: closed forms derived in the test. A pair (f1, f2) with f2 = phi(f1) has parallel
tangential gradients at every point (chain rule: grad f2 = phi'(f1) grad f1), so its Jacobi set
is the whole surface and it is not normal (math.md section 4); a constant component has zero
gradient everywhere. Coordinate pairs (x, y) on an ellipsoid or a torus are normal: their Jacobi
set is where the surface normal is horizontal or vertical in a fixed way, a union of curves.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from specmap.expr import compile_map
from specmap.shapes.normality import degeneracy
from specmap.shapes.surfaces import make_surface
from tests.test_cli_errors import assert_user_error, run_cli


@pytest.fixture(scope="module", params=[("ellipsoid", (1.0, 0.8, 0.6)), ("torus", (1.0, 0.4))])
def mesh(request):
    kind, radii = request.param
    return make_surface(kind, radii).mesh(600)


@pytest.mark.parametrize(
    "texts, needle",
    [
        (["1.5", "y"], "f1 is constant"),
        (["x", "x*x - x*x"], "f2 is constant"),
        (["x*y", "x*y"], "parallel everywhere"),
        (["x", "x*x*x + 2*x"], "parallel everywhere"),
        (["exp(z)", "sin(z)"], "parallel everywhere"),
    ],
)
def test_degenerate_maps_are_found(mesh, texts, needle):
    V, T = mesh
    fmap = compile_map(texts)
    why = degeneracy(V, T, fmap.values(V), fmap.jacobian(V))
    assert why is not None and needle in why


@pytest.mark.parametrize("texts", [["x", "y"], ["x + 0.3*z", "y - 0.2*x*z"], ["x*y", "z"]])
def test_normal_maps_pass(mesh, texts):
    V, T = mesh
    fmap = compile_map(texts)
    assert degeneracy(V, T, fmap.values(V), fmap.jacobian(V)) is None


def test_piecewise_fields(mesh):
    V, T = mesh
    assert "f1 is constant" in degeneracy(V, T, np.c_[np.full(len(V), 3.0), V[:, 1]])
    assert "affinely dependent" in degeneracy(V, T, np.c_[V[:, 0], -2 * V[:, 0] + 1])
    assert degeneracy(V, T, V[:, :2]) is None
    # nonlinear dependence is not affine per triangle: the PL test does not claim it
    assert degeneracy(V, T, np.c_[V[:, 0], V[:, 0] ** 3]) is None


def test_cli_refuses_a_dependent_pair(tmp_path: Path):
    (tmp_path / "d.toml").write_text(
        '[study]\nname = "dep"\n'
        '[f]\nsurface = "torus"\nradii = [1.0, 0.4]\nresolution = 400\nmap = ["x*y", "x*y"]\n'
        '[g]\nsurface = "torus"\nradii = [1.0, 0.4]\nresolution = 400\nmap = ["x", "y"]\n'
    )
    proc = run_cli(["grid", "d.toml"], tmp_path)
    assert_user_error(proc, "d.toml", "f.map", "not normal", "independent")
    assert not (tmp_path / "results").exists()
