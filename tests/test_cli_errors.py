"""Bad input gives one line naming file, field and fix, exit status 2, no traceback, no files.

Source of each expectation: the project's error contract (design.md "Errors" and
the foundation issue's list of user mistakes); the messages are checked for the
field they must name, not for exact wording.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

GOOD_F = '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\nresolution = 400\n'
GOOD_G = '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y + 0.1*z"]\nresolution = 400\n'
HEAD = '[study]\nname = "t"\nseed = 1\n'


def run_cli(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=300,
    )


def assert_user_error(proc: subprocess.CompletedProcess, *needles: str) -> str:
    """The error contract: exit 2, one line naming the needles, no traceback; returns the line."""
    assert proc.returncode == 2, proc.stderr
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, proc.stderr
    assert "Traceback" not in proc.stderr
    for n in needles:
        assert n in lines[0], (n, lines[0])
    return lines[0]


CASES = {
    "malformed_toml": (HEAD + "[f\n", ["(syntax)"]),
    "unknown_table": (HEAD + GOOD_F + GOOD_G + "[extra]\nx = 1\n", ["[extra]", "unknown table"]),
    "unknown_key": (
        HEAD + GOOD_F.replace("resolution", "resolutoin") + GOOD_G,
        ["f.resolutoin", "use one of"],
    ),
    "unknown_surface": (HEAD + GOOD_F.replace("ellipsoid", "klein") + GOOD_G, ["f.surface", "klein"]),
    "radii_count": (HEAD + GOOD_F.replace("[2, 1, 1]", "[2, 1]") + GOOD_G, ["f.radii", "expected 3"]),
    "radii_sign": (HEAD + GOOD_F.replace("[2, 1, 1]", "[2, -1, 1]") + GOOD_G, ["f.radii", "positive"]),
    # issue 14: radii 1e300 read as a dependent pair, 1e-300 as a non-finite grid contour; the stated
    # range is specmap.study.RADII_RANGE
    "radii_huge": (HEAD + GOOD_F.replace("[2, 1, 1]", "[1e300, 1, 1]") + GOOD_G, ["f.radii", "range"]),
    "radii_tiny": (
        HEAD + GOOD_F.replace("[2, 1, 1]", "[1e-300, 1e-300, 1e-300]") + GOOD_G,
        ["f.radii", "range"],
    ),
    "torus_order": (
        HEAD + '[f]\nsurface = "torus"\nradii = [1, 2]\nmap = ["x", "y"]\n' + GOOD_G,
        ["f.radii", "R > r"],
    ),
    "two_sources": (
        HEAD + GOOD_F.replace("[f]\n", '[f]\ngrid = "x.json"\n') + GOOD_G,
        ["[f]", "exactly one"],
    ),
    "missing_g": (HEAD + GOOD_F, ["[g]", "missing table"]),
    "unknown_name": (HEAD + GOOD_F.replace('"y"]', '"y + q"]') + GOOD_G, ["f.map", "q"]),
    "attribute": (HEAD + GOOD_F.replace('"y"]', '"x.__class__"]') + GOOD_G, ["f.map"]),
    "import": (HEAD + GOOD_F.replace('"y"]', "\"__import__('os')\"]") + GOOD_G, ["f.map"]),
    "subscript": (HEAD + GOOD_F.replace('"y"]', '"x[0]"]') + GOOD_G, ["f.map"]),
    "call_outside": (HEAD + GOOD_F.replace('"y"]', '"open(x)"]') + GOOD_G, ["f.map"]),
    "nan_values": (HEAD + GOOD_F.replace('"y"]', '"log(x - 10)"]') + GOOD_G, ["f.map", "NaN"]),
    "window_a": (HEAD + GOOD_F + GOOD_G + "[window]\na = [0, 1.2]\nb = [-1, 1]\n", ["window.a"]),
    "pairs_option": (HEAD + GOOD_F + GOOD_G + '[map]\npairs = "some"\n', ["map.pairs"]),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_study_one_line_exit_2_nothing_written(case: str, tmp_path: Path) -> None:
    text, needles = CASES[case]
    study = tmp_path / "s.toml"
    study.write_text(text)
    proc = run_cli(["grid", str(study)], tmp_path)
    assert_user_error(proc, str(study.name), *needles)
    assert not (tmp_path / "results").exists()


def test_missing_study_file(tmp_path: Path) -> None:
    proc = run_cli(["grid", "nope.toml"], tmp_path)
    assert_user_error(proc, "nope.toml", "not found")


def test_grid_file_increasing_proper_contour(tmp_path: Path) -> None:
    # A proper contour must be non-increasing (CEF19: Pareto contours are monotone).
    grid = {
        "format": "specmap-grid/1",
        "contours": [{"id": "p0", "kind": "proper", "points": [[0, 0], [1, 1]]}],
    }
    (tmp_path / "g.json").write_text(json.dumps(grid))
    (tmp_path / "s.toml").write_text(HEAD + '[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n')
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "g.json", "contours[0]", "non-increasing")
    assert not (tmp_path / "results").exists()


def test_grid_file_nan(tmp_path: Path) -> None:
    (tmp_path / "g.json").write_text(
        '{"format": "specmap-grid/1", "contours": [{"id": "v0", "kind": "vertical", "start": [NaN, 0]}]}'
    )
    (tmp_path / "s.toml").write_text(HEAD + '[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n')
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "g.json", "non-finite")


def test_distance_on_grid_only_study_says_so(tmp_path: Path) -> None:
    grid = {"format": "specmap-grid/1", "contours": [{"id": "v0", "kind": "vertical", "start": [0, 0]}]}
    (tmp_path / "g.json").write_text(json.dumps(grid))
    (tmp_path / "s.toml").write_text(HEAD + '[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n')
    proc = run_cli(["distance", "s.toml"], tmp_path)
    assert_user_error(proc, "no slice diagrams")


def _open_mesh(path: Path) -> None:
    import meshio

    # an octahedron with one face removed: 3 boundary edges
    V = np.array([[1, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0], [0, 0, 1], [0, 0, -1]], float)
    T = np.array([[0, 2, 4], [2, 1, 4], [1, 3, 4], [3, 0, 4], [2, 0, 5], [1, 2, 5], [3, 1, 5]])
    meshio.write(str(path), meshio.Mesh(V, [("triangle", T)]))


def test_open_mesh(tmp_path: Path) -> None:
    _open_mesh(tmp_path / "m.off")
    (tmp_path / "s.toml").write_text(HEAD + '[f]\nmesh = "m.off"\nmap = ["x", "y"]\n' + GOOD_G)
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "m.off")
    assert not (tmp_path / "results").exists()


def test_missing_mesh_file(tmp_path: Path) -> None:
    (tmp_path / "s.toml").write_text(HEAD + '[f]\nmesh = "absent.ply"\nmap = ["x", "y"]\n' + GOOD_G)
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "f.mesh", "not found")


@pytest.mark.parametrize("route", ["auto", "smooth", "exact"])
def test_rank_deficient_linear_map(route: str, tmp_path: Path) -> None:
    # map = ["x", "2*x"]: f2 = 2 f1, so the map is functionally dependent and outside the theory
    # (CEF19 needs independent components; the closed form of grids/exact.py needs rank(L D) = 2).
    # Whatever the route, the user gets one line naming f.map, not a ValueError traceback.
    # The pipeline attaches the study file to the core error.
    f = GOOD_F.replace('"y"]', '"2*x"]') + f'route = "{route}"\n'
    (tmp_path / "s.toml").write_text(HEAD + f + GOOD_G)
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "s.toml", "f.map", "independent")
    assert not (tmp_path / "results").exists()


def test_rank_deficient_exact_route_core_error_then_located(tmp_path: Path) -> None:
    # The same map (f2 = 2 f1, rank 1: construction) asked for the exact route, given to the core
    # directly (the study loader refuses it earlier, above). The core raises in its own words
    # (which input, what is wrong; no file, no study key); the pipeline adds the study file and
    # the key "f.map", which the CLI prints as one line.
    from specmap.errors import UnsupportedInputError
    from specmap.expr import compile_map
    from specmap.grids import pareto_grid
    from specmap.pipeline import StudyRun
    from specmap.settings import GridSettings
    from specmap.shapes.model import Shape
    from specmap.shapes.surfaces import make_surface
    from specmap.study import load_study

    surface = make_surface("ellipsoid", (2.0, 1.0, 1.0))
    V, T = surface.mesh(200)
    fmap = compile_map(["x", "2*x"])
    shape = Shape("f", "surface", V, T, fmap.values(V), surface=surface, fmap=fmap)
    with pytest.raises(UnsupportedInputError) as core:
        pareto_grid(shape, GridSettings(route="exact"))
    assert core.value.subject == "map" and core.value.file is None and core.value.field is None
    assert "toml" not in str(core.value) and "f.map" not in str(core.value)
    (tmp_path / "s.toml").write_text(HEAD + GOOD_F + GOOD_G)
    located = StudyRun(load_study(tmp_path / "s.toml"), show_progress=False).located(core.value, "f")
    assert isinstance(located, UnsupportedInputError)
    line = located.one_line()
    assert line.startswith(f"{tmp_path / 's.toml'}: f.map: the two components") and "\n" not in line


def test_exact_route_needs_a_linear_map(tmp_path: Path) -> None:
    # route = "exact" is the closed form for linear maps on ellipsoids (grids/exact.py); a
    # quadratic component is outside it: one line naming the file and f.route.
    f = GOOD_F.replace('"y"]', '"y*y"]') + 'route = "exact"\n'
    (tmp_path / "s.toml").write_text(HEAD + f + GOOD_G)
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "s.toml", "f.route", "linear map")
    assert not (tmp_path / "results").exists()


@pytest.mark.parametrize(
    "args, field",
    [
        (["map", "--resolution", "1"], "--resolution"),  # was a ValueError (issue 14)
        (["map", "--resolution", "2"], "--resolution"),  # the file's minimum is 5
        (["map", "--resolution", "20000"], "--resolution"),  # above the file's maximum 4001
    ],
)
def test_flags_obey_the_study_file_limits(tmp_path: Path, args: list[str], field: str) -> None:
    # issue 14: one validation path for file and flag values (limits from specmap.study.LIMITS)
    study = tmp_path / "s.toml"
    study.write_text(HEAD + GOOD_F + GOOD_G)
    proc = run_cli([args[0], str(study), *args[1:], "--out", str(tmp_path / "o")], tmp_path)
    assert_user_error(proc, field)
    assert not (tmp_path / "o").exists()


def test_runs_flag_obeys_the_study_file_limit(tmp_path: Path) -> None:
    # issue 14: --runs 1000000000 used to end in a MemoryError
    study = tmp_path / "s.toml"
    study.write_text(HEAD + GOOD_F + GOOD_G + "[perturb]\nsize = 0.01\nruns = 2\n")
    proc = run_cli(["perturb", str(study), "--runs", "1000000000", "--out", str(tmp_path / "o")], tmp_path)
    assert_user_error(proc, "--runs")


def test_map_over_the_memory_budget_is_refused_before_mapping(tmp_path: Path) -> None:
    # Issue 14 section 3: estimate before an N^4 stage, never die after. With --memory 1MB no plan
    # fits (even the smallest tiles hold the grids' crossings), so the map must be refused in one
    # line with the estimate, the budget and the remedies, before any map work: no folder, no tiles.
    import re

    study = tmp_path / "s.toml"
    study.write_text(HEAD + GOOD_F + GOOD_G)
    out = tmp_path / "o"
    proc = run_cli(["map", str(study), "--out", str(out), "--memory", "1MB"], tmp_path)
    assert_user_error(proc, "s.toml", "map", "1 MB", "--memory", "--pairs roles", "--method dense")
    # no lattice fits 1 MB (the interpreter and grids alone are estimated at 150 MB): a coarser
    # --resolution is not offered (tests/test_map_remedies.py: only remedies that change the outcome)
    assert "--resolution" not in proc.stderr
    m = re.search(
        r"(\d+) \+ (\d+) contours \((\d+) pairs, about ([0-9.e+]+) crossings\) needs about ([0-9.]+) (MB|GB)",
        proc.stderr,
    )
    assert m, proc.stderr
    n = int(m[1]) + int(m[2])
    assert int(m[3]) == n * (n - 1) // 2  # closed form: unordered pairs of n contours
    assert float(m[5]) * {"MB": 1e6, "GB": 1e9}[m[6]] > 1e6  # the estimate is over the 1 MB budget
    assert not out.exists()


@pytest.mark.parametrize("route", ["auto", "exact"])
def test_constant_linear_map_on_an_ellipsoid(route: str, tmp_path: Path) -> None:
    # issue 14 section 2: a constant map on an ellipsoid gave a raw ValueError from the exact route;
    # a constant f2 has zero gradient everywhere (closed form), outside the theory (math.md section 4)
    f = GOOD_F.replace('"y"]', '"3"]') + f'route = "{route}"\n'
    (tmp_path / "s.toml").write_text(HEAD + f + GOOD_G)
    assert_user_error(run_cli(["grid", "s.toml"], tmp_path), "s.toml", "f.map", "constant")
    assert not (tmp_path / "results").exists()
