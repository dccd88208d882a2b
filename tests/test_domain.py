"""Maps with a pole or a domain boundary on the surface are refused (issue 14, wrong answers with exit 0).

Source of every expectation: closed form, derived in the test. On the ellipsoid
x^2 + (y/0.8)^2 + (z/0.6)^2 = 1 the plane x = 0 cuts the surface, so 1/x has a pole on it;
tan(20 x) has poles where 20 x = pi/2 + k pi, i.e. x = 0.0785..., inside [-1, 1]; log(x + 2)
and 1/(x^2 + 1) are finite on the whole surface because x + 2 >= 1 and x^2 + 1 >= 1 there.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from specmap.expr import compile_expr, domain_break
from specmap.meshtable import mesh_edges
from specmap.shapes.surfaces import make_surface
from tests.test_cli_errors import assert_user_error, run_cli


@pytest.fixture(scope="module")
def ellipsoid_mesh():
    V, T = make_surface("ellipsoid", (1.0, 0.8, 0.6)).mesh(300)
    return V, mesh_edges(T)


@pytest.mark.parametrize("text", ["1/x", "tan(20*x)", "x**-1", "log(x + 0.5)", "sqrt(y)", "1/(x - 0.3*y)"])
def test_poles_between_vertices_are_found(ellipsoid_mesh, text):
    V, E = ellipsoid_mesh
    hit = domain_break(compile_expr(text), V, E)
    assert hit is not None, text
    what, at = hit
    # the reported point is an edge midpoint of the mesh: close to the surface (chord sagitta only)
    r = np.sqrt(at[0] ** 2 + (at[1] / 0.8) ** 2 + (at[2] / 0.6) ** 2)
    assert 0.9 < r <= 1.0 + 1e-12


@pytest.mark.parametrize(
    "text", ["x", "1/(x*x + 1)", "log(x + 2)", "sqrt(x + 1.5)", "tan(0.5*x)", "y - x*z/3"]
)
def test_maps_finite_on_the_surface_pass(ellipsoid_mesh, text):
    V, E = ellipsoid_mesh
    assert domain_break(compile_expr(text), V, E) is None


def test_vertices_avoiding_the_pole_do_not_hide_it():
    # two vertices on either side of x = 0: 1/x is finite at both, infinite between them
    P = np.array([[-0.01, 0.0, 0.0], [0.02, 0.0, 0.0]])
    assert np.isfinite(compile_expr("1/x")(P[:, 0], P[:, 1], P[:, 2])).all()
    what, at = domain_break(compile_expr("1/x"), P, np.array([[0, 1]]))
    assert "division" in what and at[0] == pytest.approx(0.005)


def test_cli_refuses_a_pole_with_file_and_field(tmp_path: Path):
    study = tmp_path / "pole.toml"
    study.write_text(
        '[study]\nname = "pole"\n'
        '[f]\nsurface = "ellipsoid"\nradii = [1.0, 0.8, 0.6]\nresolution = 300\nmap = ["x", "1/x"]\n'
        '[g]\nsurface = "ellipsoid"\nradii = [1.0, 0.8, 0.6]\nresolution = 300\nmap = ["x", "y"]\n'
    )
    proc = run_cli(["grid", str(study), "--out", str(tmp_path / "out")], tmp_path)
    assert_user_error(proc, "pole.toml", "f.map[1]", "1/x", "division")
