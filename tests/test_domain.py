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


# -- bounded gradients (issue 14): singular and near-singular points the guards only touch ----------
# Closed forms, derived here, on the unit sphere S (D = 2, the longest side of its bounding box):
#  * sqrt(x + c), c > 1: |grad| = 1 / (2 sqrt(x + c)), largest at x = -1: 1 / (2 sqrt(c - 1));
#    range sqrt(c + 1) - sqrt(c - 1). c = 1 + 1e-7: G = 1581.1, G D / R = 2236 > 1e3 (refused);
#    c = 1.001: G = 15.81, G D / R = 22.9 (accepted). c = 1: the gradient is infinite at (-1, 0, 0).
#  * sin(k x): G = k (at x = 0), R = 2, so G D / R = k.
#  * tan(20 x) on the sphere of radius 0.0785 (20 r = 1.5700 < pi / 2): G = 20 / cos(20 r)^2 at
#    x = r, R = 2 tan(20 r), D = 2 r: G D / R = 20 r / (sin(20 r) cos(20 r)) = 1980 (refused).
from specmap.shapes.steep import STEEP_LIMIT, steepest  # noqa: E402


@pytest.fixture(scope="module")
def sphere():
    S = make_surface("ellipsoid", (1.0, 1.0, 1.0))
    V, T = S.mesh(400)
    return S, V, T


def test_near_singular_sqrt_is_found_where_the_closed_form_puts_it(sphere):
    S, V, T = sphere
    hit = steepest(compile_expr("sqrt(x + 1.0000001)"), V, T, S)
    assert hit.gradient == pytest.approx(1 / (2 * np.sqrt(1e-7)), rel=1e-3)
    np.testing.assert_allclose(hit.at, [-1.0, 0.0, 0.0], atol=1e-3)
    assert hit.ratio > STEEP_LIMIT and hit.ratio == pytest.approx(2236, rel=0.02)


def test_singular_sqrt_has_no_finite_gradient(sphere):
    S, V, T = sphere
    hit = steepest(compile_expr("sqrt(x + 1)"), V, T, S)
    assert not hit.finite and hit.at[0] == pytest.approx(-1.0, abs=1e-6)


def test_tan_just_inside_its_pole_is_steep():
    r = 0.0785
    S = make_surface("ellipsoid", (r, r, r))
    V, T = S.mesh(400)
    hit = steepest(compile_expr("tan(20*x)"), V, T, S)
    assert 20 * r / (np.sin(20 * r) * np.cos(20 * r)) > STEEP_LIMIT  # the closed form refuses it
    # the search finds a point near x = +-r, steeper than the limit, and no steeper than the maximum
    assert hit.ratio > STEEP_LIMIT and abs(hit.at[0]) == pytest.approx(r, rel=1e-3)
    assert hit.gradient <= 20 / np.cos(20 * r) ** 2 * (1 + 1e-9)


@pytest.mark.parametrize("text, ratio", [("x", 1.0), ("sin(20*x)", 20.0), ("sqrt(x + 1.001)", 22.9)])
def test_smooth_maps_have_their_closed_form_steepness(sphere, text, ratio):
    S, V, T = sphere
    hit = steepest(compile_expr(text), V, T, S)
    assert hit.finite and hit.ratio <= STEEP_LIMIT
    # vertex values may miss the extremes by a chord's sagitta: R and D a little short
    assert hit.ratio == pytest.approx(ratio, rel=0.05)


def test_constant_map_is_left_to_the_normality_check(sphere):
    S, V, T = sphere
    assert steepest(compile_expr("2.5"), V, T, S) is None  # no range: shapes/normality.py says so


def _study(tmp_path: Path, f_table: str) -> Path:
    study = tmp_path / "steep.toml"
    study.write_text(
        '[study]\nname = "steep"\n'
        + f_table
        + '[g]\nsurface = "ellipsoid"\nradii = [1, 1, 1]\nmap = ["x", "y"]\n'
    )
    return study


@pytest.mark.parametrize(
    "text, needles",
    [
        ("sqrt(x + 1.0000001)", ["too steep", "limit 1000"]),
        ("sqrt(x + 1)", ["no finite gradient", "(-1, "]),
        ("1/(x*x + 1e-6)", ["too steep"]),
    ],
)
def test_cli_refuses_a_steep_map_with_file_field_and_where(tmp_path: Path, text: str, needles: list[str]):
    study = _study(tmp_path, f'[f]\nsurface = "ellipsoid"\nradii = [1, 1, 1]\nmap = ["y", "{text}"]\n')
    proc = run_cli(["grid", str(study), "--out", str(tmp_path / "out")], tmp_path)
    assert_user_error(proc, "steep.toml", "f.map[1]", text, *needles)
    assert not (tmp_path / "out").exists()


def test_cli_refuses_a_steep_map_on_a_mesh_file(tmp_path: Path):
    from specmap.shapes.meshes import write_mesh

    # On a mesh the map lives on the flat triangles, which stay off the sphere's pole by a chord's
    # sagitta, so sqrt(x + 1.0000001) is tame there; put the near-zero at the leftmost vertex instead:
    # sqrt(x - x0 + 1e-7) has |grad| = 1 / (2 sqrt(1e-7)) = 1581 there (closed form), ratio > 1e3.
    V, T = make_surface("ellipsoid", (1.0, 1.0, 1.0)).mesh(400)
    write_mesh(tmp_path / "ball.ply", V, T)
    text = f"sqrt(x + {1e-7 - V[:, 0].min():.17g})"
    study = _study(tmp_path, f'[f]\nmesh = "ball.ply"\nmap = ["y", "{text}"]\n')
    proc = run_cli(["grid", str(study), "--out", str(tmp_path / "out")], tmp_path)
    assert_user_error(proc, "steep.toml", "f.map[1]", "too steep")
    tame = _study(tmp_path, '[f]\nmesh = "ball.ply"\nmap = ["y", "sqrt(x + 1.0000001)"]\n')
    assert run_cli(["grid", str(tame), "--out", str(tmp_path / "out2")], tmp_path).returncode == 0
