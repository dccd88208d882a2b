"""Pairs outside the theory (constant or functionally dependent components) are refused (issue 14).

Source: closed forms derived in the test. A pair (f1, f2) with f2 = phi(f1) has parallel
tangential gradients at every point (chain rule: grad f2 = phi'(f1) grad f1), so its Jacobi set
is the whole surface and it is not normal (math.md section 4); a constant component has zero
gradient everywhere. Coordinate pairs (x, y) on an ellipsoid or a torus are normal: their Jacobi
set is where the surface normal is horizontal or vertical in a fixed way, a union of curves.
"""

from __future__ import annotations

import json
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


@pytest.mark.parametrize("scale", [1e-150, 1e70, 1e150])
def test_the_test_does_not_depend_on_the_scale(mesh, scale):
    # closed form: scaling the surface by c > 0 scales the normals' lengths only and the gradients
    # of x, y by 1, of x*y by c; normality is a property of the pair, not of the units (the old test
    # overflowed at 1e150 and called (x, y) "parallel everywhere")
    V, T = mesh
    Vs = V * scale
    for texts, normal in ((["x", "y"], True), (["x + 0.3*z", "y - 0.2*z"], True), (["x", "3*x"], False)):
        fmap = compile_map(texts)
        why = degeneracy(Vs, T, fmap.values(Vs), fmap.jacobian(Vs))
        assert (why is None) == normal, (texts, why)
    assert degeneracy(Vs, T, Vs[:, :2]) is None
    assert "affinely dependent" in degeneracy(Vs, T, np.c_[Vs[:, 0], -2 * Vs[:, 0]])


def test_insist_flag_records_instead_of_refusing(tmp_path: Path):
    # closed form of the module doc: f2 = x^3 + 2x = phi(x) is dependent (chain rule); the builder
    # refuses it, unless the spec insists: then the reason is kept in the shape's meta
    from specmap.errors import StudyError
    from specmap.shapes.build import build_shape
    from specmap.study import load_study

    study = tmp_path / "s.toml"
    body = (
        '[study]\nname = "t"\n[f]\nsurface = "ellipsoid"\nradii = [1, 0.8, 0.6]\nresolution = 400\n'
        'map = ["x", "x*x*x + 2*x"]\nINSIST[g]\nsurface = "ellipsoid"\nradii = [1, 0.8, 0.6]\n'
        'resolution = 400\nmap = ["x", "y"]\n'
    )
    study.write_text(body.replace("INSIST", ""))
    s = load_study(study)
    with pytest.raises(StudyError, match="parallel everywhere"):
        build_shape(s.f, s)
    assert "not_normal" not in build_shape(s.g, s).meta  # a normal pair adds nothing
    study.write_text(body.replace("INSIST", "insist = true\n"))
    s = load_study(study)
    assert "parallel everywhere" in build_shape(s.f, s).meta["not_normal"]


def test_insist_goes_on_with_the_caveat_in_every_result(tmp_path: Path):
    # the dependent pair of test_cli_refuses_a_dependent_pair, with [f] insist = true: computed,
    # one note on the terminal, and the caveat in each result file (specmap/fingerprint.py contract)
    (tmp_path / "d.toml").write_text(
        '[study]\nname = "dep"\n'
        '[f]\nsurface = "torus"\nradii = [1.0, 0.4]\nresolution = 400\nmap = ["x*y", "x*y"]\ninsist = true\n'
        '[g]\nsurface = "torus"\nradii = [1.0, 0.4]\nresolution = 400\nmap = ["x", "y"]\n'
        "[map]\nresolution = 21\n"
    )
    proc = run_cli(["grid", "d.toml", "--out", "res"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    notes = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert len(notes) == 1 and "insist = true" in notes[0] and "not a normal pair" in notes[0]
    for name in ("grid_f.json", "grid_g.json", "study.json"):
        caveats = json.loads((tmp_path / "res" / name).read_text())["caveats"]
        assert len(caveats) == 1 and caveats[0].startswith("f is not a normal pair"), name
    from specmap.report.load import load_results

    assert load_results(tmp_path / "res")["caveats"] == caveats


def test_report_first_note_is_the_caveat():
    # page 1's boxed note is the first of ranked_notes (specmap/report/pdf.py); a caveat outranks all
    from specmap.report.summary import SEVERITY_NAMES, ranked_notes

    caveat = "f is not a normal pair (f1 is constant on the surface); computed only because ..."
    res = {
        "caveats": [caveat],
        "stages": {"grids": True, "special": False, "distance": False, "perturb": False},
    }
    notes = ranked_notes(res)
    assert notes[0].severity == 0 and caveat in notes[0].text and "insist" in notes[0].todo
    assert SEVERITY_NAMES[0] == "outside the theory"
    assert [n.severity for n in notes[1:]] == [4, 4, 4]
    assert all(n.severity > 0 for n in ranked_notes({**res, "caveats": []}))
