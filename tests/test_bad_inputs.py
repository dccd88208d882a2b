"""Bad-input corpus of issue 14: each case is a one-line error with exit status 2, or a correct result.

Source of each expectation: the project's error contract (specmap/errors.py: one line
``file: field: problem; fix``, exit 2, no traceback) and issue 14's list of cases; messages
are checked for the file and field they must name, not for exact wording.
"""

from __future__ import annotations

import json
import os
import stat
import subprocess
from pathlib import Path

import numpy as np
import pytest

from specmap.errors import ExpressionError
from specmap.expr import compile_expr
from tests.test_cli_errors import assert_user_error as _one_line_error
from tests.test_cli_errors import run_cli

HEAD = '[study]\nname = "t"\nseed = 1\n'


def assert_user_error(proc: subprocess.CompletedProcess, *needles: str) -> None:
    """The shared one-line check of tests/test_cli_errors.py, plus the line's prefix."""
    _one_line_error(proc, *needles)
    assert proc.stderr.strip().startswith("specmap: error:"), proc.stderr


# --------------------------------------------------------------------------- 1. expressions


@pytest.mark.parametrize("text", ["x + y # + 100*z", "# x", "x#"])
def test_hash_in_expression_is_rejected(text: str) -> None:
    # Issue 14: '#' silently dropped the rest of the text; it must be refused.
    with pytest.raises(ExpressionError, match="#") as info:
        compile_expr(text, file="s.toml", field="f.map[0]")
    assert "s.toml" in str(info.value) and "f.map[0]" in str(info.value)


def test_hash_in_study_map_one_line_exit_2(tmp_path: Path) -> None:
    body = (
        '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y # + 100*z"]\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\n'
    )
    (tmp_path / "s.toml").write_text(HEAD + body)
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "s.toml", "f.map", "#")


# --------------------------------------------------------------------------- 2. grid files


def _grid(**extra: object) -> dict:
    g = {"format": "specmap-grid/1", "contours": [{"id": "p0", "kind": "proper", "points": [[0, 1], [1, 0]]}]}
    g.update(extra)
    return g


def _run_grid_file(tmp_path: Path, text: str) -> subprocess.CompletedProcess:
    (tmp_path / "g.json").write_text(text)
    (tmp_path / "s.toml").write_text(HEAD + '[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n')
    return run_cli(["grid", "s.toml"], tmp_path)


BIG = "1" + "0" * 399  # a 400-digit integer

GRID_CASES = {
    "tolerance_string": (json.dumps(_grid(tolerance="0.1")), ["tolerance"]),
    "tolerance_list": (json.dumps(_grid(tolerance=[0.1])), ["tolerance"]),
    "tolerance_huge_int": (json.dumps(_grid()).replace("{", '{"tolerance": ' + BIG + ", ", 1), ["tolerance"]),
    "meta_list": (json.dumps(_grid(meta=[1, 2])), ["meta", "object"]),
    "meta_string": (json.dumps(_grid(meta="x")), ["meta", "object"]),
    "coordinate_400_digits": (
        json.dumps(_grid()).replace("[0, 1]", "[0, " + BIG + "]"),
        ["contours[0].points", "1e+12"],
    ),
    "coordinate_1e308": (
        json.dumps(_grid()).replace("[0, 1]", "[0, 1e308]"),
        ["contours[0].points", "1e+12"],
    ),
    # 1e308 made the tolerance infinite and so accepted an increasing contour (issue 14)
    "increasing_with_1e308": (
        json.dumps(
            {
                "format": "specmap-grid/1",
                "contours": [
                    {"id": "p0", "kind": "proper", "points": [[0, 0], [1, 1]]},
                    {"id": "v0", "kind": "vertical", "start": [1e308, 0]},
                ],
            }
        ),
        ["contours[1].start", "1e+12"],
    ),
    # tolerance relative to the data: at a scale of 1e-8 a rise of 5e-10 (5 %) is an increasing contour
    # (it passed under the old absolute floor of 1e-9)
    "increasing_at_small_scale": (
        json.dumps(
            {
                "format": "specmap-grid/1",
                "contours": [{"id": "p0", "kind": "proper", "points": [[0, 0], [1e-8, 5e-10]]}],
            }
        ),
        ["contours[0]", "non-increasing"],
    ),
    "nested_1e5": (
        '{"format": "specmap-grid/1", "contours": ' + "[" * 100_000 + "]" * 100_000 + "}",
        ["g.json", "nested"],
    ),
}


@pytest.mark.parametrize("case", sorted(GRID_CASES))
def test_bad_grid_file_one_line_exit_2(case: str, tmp_path: Path) -> None:
    text, needles = GRID_CASES[case]
    proc = _run_grid_file(tmp_path, text)
    assert_user_error(proc, "g.json", *needles)
    assert not (tmp_path / "results").exists()


def test_grid_file_tolerance_number_accepted() -> None:
    # A finite numeric tolerance and an object meta are kept as given (the specmap-grid/1 contract).
    from specmap.grids.model import grid_from_json

    g = grid_from_json(_grid(tolerance=0.25, meta={"a": 1}), file="g.json")
    assert g.tolerance == 0.25 and g.meta == {"a": 1}


# --------------------------------------------------------------------------- 4. files: modes


@pytest.mark.parametrize("mask", [0o022, 0o077, 0o002])
def test_result_files_honour_umask(mask: int, tmp_path: Path) -> None:
    # Expected mode: 0o666 & ~umask, what open(path, "w") gives (POSIX creat semantics).
    from specmap.io import append_jsonl, write_json, write_text

    old = os.umask(mask)
    try:
        paths = [write_json(tmp_path / "a.json", {"x": 1}), write_text(tmp_path / "b.txt", "t")]
        append_jsonl(tmp_path / "c.jsonl", {"x": 1})
        paths.append(tmp_path / "c.jsonl")
    finally:
        os.umask(old)
    for p in paths:
        assert stat.S_IMODE(p.stat().st_mode) == 0o666 & ~mask, p
    assert [q.name for q in tmp_path.iterdir() if q.name.startswith(".")] == []


# --------------------------------------------------------------------------- 5. report inputs

STUDY_JSON = {
    "name": "t",
    "study_file": "s.toml",
    "seed": 1,
    "window": {"a": [0, 1], "b": [-1, 1]},
    "commands": [],
}

REPORT_CASES = {
    # file, content, needles (the file and the field the report must name)
    "special_list": ("special.json", "[]", ["special.json", "(root)", "list"]),
    "special_no_counts": (
        "special.json",
        json.dumps({"components": [], "total_area": 0.0}),
        ["special.json", "counts"],
    ),
    "special_counts_list": (
        "special.json",
        json.dumps({"counts": [], "components": [], "total_area": 0.0}),
        ["special.json", "counts"],
    ),
    "distance_empty": ("distance.json", "{}", ["distance.json", "value"]),
    "grid_no_contours": (
        "grid_f.json",
        json.dumps({"format": "specmap-grid/1"}),
        ["grid_f.json", "contours"],
    ),
    "summary_list": ("perturb/summary.json", "[1]", ["summary.json", "(root)"]),
    "runs_line_list": ("perturb/runs.jsonl", "[1, 2]\n", ["runs.jsonl", "line 1"]),
}


@pytest.mark.parametrize("case", sorted(REPORT_CASES))
def test_bad_result_file_report_one_line_exit_2(case: str, tmp_path: Path) -> None:
    name, content, needles = REPORT_CASES[case]
    root = tmp_path / "res"
    (root / "perturb").mkdir(parents=True)
    (root / "study.json").write_text(json.dumps(STUDY_JSON))
    if name == "perturb/runs.jsonl":
        (root / "perturb" / "summary.json").write_text(json.dumps({"runs": 1}))
    (root / name).write_text(content)
    proc = run_cli(["report", str(root)], tmp_path)
    assert_user_error(proc, *needles)
    assert not (root / "report.pdf").exists()


# --------------------------------------------------------------------------- 3. huge numbers


def _scaled_mesh(path: Path, scale: float) -> Path:
    """An ellipsoid mesh (radii 2, 1, 1) with every coordinate multiplied by ``scale``, as PLY."""
    import meshio

    from specmap.shapes.surfaces import make_surface

    V, T = make_surface("ellipsoid", (2.0, 1.0, 1.0)).mesh(400)
    meshio.write(path, meshio.Mesh(V * scale, [("triangle", T.astype(np.int32))]))
    return path


def _mesh_study(tmp_path: Path, mesh: str, fmap: str) -> Path:
    study = tmp_path / "s.toml"
    study.write_text(
        HEAD + f'[f]\nmesh = "{mesh}"\nmap = [{fmap}]\n[g]\nmesh = "{mesh}"\nmap = ["x", "y + z"]\n'
    )
    return study


@pytest.mark.parametrize("scale", [1e99, 1e150, 1e200])
def test_huge_coordinates_one_line_exit_2(tmp_path: Path, scale: float) -> None:
    # Issue 14: coordinates of 1e200 printed dozens of numpy overflow warnings (and 1e150 made the
    # normality test call x, y "parallel everywhere"); the range |x| <= 1e75 is stated in
    # specmap/shapes/normality.py (products of four coordinates stay below 1.8e308, closed form)
    _scaled_mesh(tmp_path / "big.ply", scale)
    _mesh_study(tmp_path, "big.ply", '"x", "y"')
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "big.ply", "f.mesh", "coordinates", "rescale")
    assert "RuntimeWarning" not in proc.stderr


def test_huge_values_one_line_exit_2(tmp_path: Path) -> None:
    # coordinates of 2e30 are in range, x^4 reaches 1.6e121 (closed form: (2e30)^4), beyond 1e75
    _scaled_mesh(tmp_path / "m.ply", 1e30)
    _mesh_study(tmp_path, "m.ply", '"x*x*x*x", "y"')
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "s.toml", "f.map", "values", "1e+75")


def test_large_but_in_range_mesh_runs_with_a_quiet_stderr(tmp_path: Path) -> None:
    # 1e74 is inside the stated range: the grid is computed (the same contour count as the unit
    # mesh, since scaling a PL pair by c > 0 maps its Pareto grid by c) and nothing is printed
    _scaled_mesh(tmp_path / "m.ply", 1e74)
    _scaled_mesh(tmp_path / "u.ply", 1.0)
    counts = []
    for mesh in ("m.ply", "u.ply"):
        _mesh_study(tmp_path, mesh, '"x", "y"')
        proc = run_cli(["grid", "s.toml", "--out", "r-" + mesh], tmp_path)
        assert proc.returncode == 0 and proc.stderr.strip() == "", proc.stderr
        counts.append(len(json.loads((tmp_path / ("r-" + mesh) / "grid_f.json").read_text())["contours"]))
    assert counts[0] == counts[1]


def test_float_warnings_become_one_counted_line(monkeypatch: pytest.MonkeyPatch, capsys) -> None:
    # 40 overflows and 3 invalid values in a successful run: one line with the counts, not 86 lines
    import specmap.cli as cli

    def noisy(argv: list[str] | None = None) -> int:
        big = np.array([1e300])
        for _ in range(40):
            _ = big * big
        for _ in range(3):
            _ = np.array([np.inf]) - np.array([np.inf])
        return 0

    monkeypatch.setattr(cli, "run", noisy)
    with pytest.raises(SystemExit) as code:
        cli.main([])
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln.strip()]
    assert code.value.code == 0 and len(err) == 1, err
    assert "overflow 40" in err[0] and "invalid value 3" in err[0] and "43" in err[0]


def test_float_warnings_before_a_user_error_leave_only_the_error(
    monkeypatch: pytest.MonkeyPatch, capsys
) -> None:
    import specmap.cli as cli
    from specmap.errors import StudyError

    def failing(argv: list[str] | None = None) -> int:
        _ = np.array([1e300]) * 1e300
        raise StudyError("bad", file="s.toml", field="f.map", fix="fix it")

    monkeypatch.setattr(cli, "run", failing)
    with pytest.raises(SystemExit) as code:
        cli.main([])
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln.strip()]
    assert code.value.code == 2 and len(err) == 1 and err[0].startswith("specmap: error: s.toml: f.map")


def test_insist_must_be_true_or_false(tmp_path: Path) -> None:
    body = (
        '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\ninsist = "yes"\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\n'
    )
    (tmp_path / "s.toml").write_text(HEAD + body)
    assert_user_error(run_cli(["grid", "s.toml"], tmp_path), "s.toml", "f.insist", "true or false")


# --------------------------------------------------------------------------- 1. zero-area triangles


def _t_junction_meshes(edge: int = 28) -> tuple[np.ndarray, ...]:
    """An ellipsoid mesh with one edge ab split at its midpoint c, two ways (built here).

    ``A``: both triangles on ab split at c (a proper triangulation). ``B``: one side split, the other
    kept whole and the T-junction sealed by the zero-area triangle (b, a, c). A and B cover the same
    point set; for an affine map, the PL map of A is the PL map of the unsplit mesh (closed form:
    the PL interpolant of an affine function is that function).
    """
    from specmap.meshtable import edges_and_faces
    from specmap.shapes.surfaces import make_surface

    V, T = make_surface("ellipsoid", (2.0, 1.0, 1.0)).mesh(400)
    T = np.asarray(T, np.int64)
    table = edges_and_faces(T)
    a, b = (int(i) for i in table.edges[edge])
    f0, f1 = (int(i) for i in table.faces[edge])
    c = len(V)
    V2 = np.vstack([V, (V[a] + V[b]) / 2])

    def split(f: int) -> tuple[list[list[int]], tuple[int, int, int]]:
        tri = T[f].tolist()
        r = next(r for r in range(3) if {tri[r], tri[(r + 1) % 3]} == {a, b})
        x, y, z = tri[r], tri[(r + 1) % 3], tri[(r + 2) % 3]
        return [[x, c, z], [c, y, z]], (x, y, z)

    (s0, _), (s1, (x, y, _)) = split(f0), split(f1)
    keep = [i for i in range(len(T)) if i not in (f0, f1)]
    A = np.vstack([T[keep], s0, s1])
    B = np.vstack([T[keep], s0, T[f1 : f1 + 1], [[y, x, c]]])
    return V2, A, B, np.asarray(V), T


def _contours(grid: object) -> list:
    return sorted((c.kind, tuple(np.round(c.points.ravel(), 12))) for c in grid.contours)


def test_zero_area_triangle_is_flipped_and_the_grid_is_that_of_the_surface(tmp_path: Path, capsys) -> None:
    # Issue 14: a zero-area triangle changed the PL grid silently (6 -> 8 contours). The stated rule
    # (specmap/shapes/slivers.py) flips it away; expected: the grid of mesh A, built in the test
    # without any zero-area triangle, and the contour count of the unsplit mesh (closed form above).
    from specmap.grids.piecewise import piecewise_grid
    from specmap.shapes.meshes import read_mesh, write_mesh

    V2, A, B, V, T = _t_junction_meshes()
    values = np.c_[V2[:, 0], V2[:, 1] + V2[:, 2]]
    unsplit = piecewise_grid(V, T, values[:-1], label="f")
    with_ = piecewise_grid(V2, A, values, label="f")
    raw = piecewise_grid(V2, B, values, label="f")
    assert len(with_) == len(unsplit)
    assert _contours(raw) != _contours(with_)  # the test can fail: unrepaired, the sliver adds contours
    write_mesh(tmp_path / "b.ply", V2, B)
    counts: dict = {}
    Vr, Tr, _ = read_mesh(tmp_path / "b.ply", counts=counts)
    assert counts["zero_area_triangles"] == 1 and counts["zero_area_flipped"] == 1
    assert "1 zero-area (collinear) triangles removed by 1 edge flips" in capsys.readouterr().err
    np.testing.assert_array_equal(Vr, V2)
    assert {tuple(sorted(t)) for t in Tr.tolist()} == {tuple(sorted(t)) for t in A.tolist()}
    repaired = piecewise_grid(Vr, Tr, np.c_[Vr[:, 0], Vr[:, 1] + Vr[:, 2]], label="f")
    assert _contours(repaired) == _contours(with_)


def test_zero_area_triangle_counted_in_grid_meta_and_one_note(tmp_path: Path) -> None:
    # the CLI route of the test above: the counts travel into grid_f.json meta, one note line on stderr
    from specmap.grids.piecewise import piecewise_grid
    from specmap.shapes.meshes import write_mesh

    V2, A, B, _, _ = _t_junction_meshes()
    write_mesh(tmp_path / "b.ply", V2, B)
    (tmp_path / "s.toml").write_text(
        HEAD + '[f]\nmesh = "b.ply"\nmap = ["x", "y + z"]\n[g]\nmesh = "b.ply"\nmap = ["x + z", "y"]\n'
    )
    proc = run_cli(["grid", "s.toml", "--out", "r"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    notes = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert notes and all("b.ply" in ln and "edge flips" in ln for ln in notes), notes
    js = json.loads((tmp_path / "r" / "grid_f.json").read_text())
    hyg = js["meta"]["mesh_hygiene"]
    assert hyg["zero_area_triangles"] == 1 and hyg["zero_area_flipped"] == 1
    assert len(js["contours"]) == len(piecewise_grid(V2, A, np.c_[V2[:, 0], V2[:, 1] + V2[:, 2]], label="f"))


def _overflowing_task(n: int) -> int:
    """n overflows and one invalid value, in whatever process runs it (a joblib worker below)."""
    big = np.array([1e300])
    for _ in range(n):
        _ = big * big
    _ = np.array([np.inf]) - np.array([np.inf])
    return os.getpid()


def test_float_warnings_of_worker_processes_are_counted(monkeypatch: pytest.MonkeyPatch, capsys) -> None:
    # Issue 14: warnings raised in joblib workers printed there and were not in the count. Expected
    # counts by construction: tasks of 1..4 overflows give 10 overflows and 4 invalid values.
    import joblib

    import specmap.cli as cli
    from specmap.floatwarn import Counted, unwrap

    pids: set[int] = set()

    def parallel(argv: list[str] | None = None) -> int:
        tasks = [joblib.delayed(Counted(_overflowing_task))(n) for n in (1, 2, 3, 4)]
        pids.update(map(unwrap, joblib.Parallel(n_jobs=2)(tasks)))
        return 0

    monkeypatch.setattr(cli, "run", parallel)
    with pytest.raises(SystemExit) as code:
        cli.main([])
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln.strip()]
    assert os.getpid() not in pids  # the tasks really ran in other processes
    assert code.value.code == 0 and len(err) == 1, err
    assert "14 floating-point" in err[0] and "overflow 10" in err[0] and "invalid value 4" in err[0]


# --------------------------------------------------------------------------- 1. degenerate maps (CLI)


@pytest.mark.parametrize(
    "surface, texts, needle",
    [
        ('"torus"\nradii = [1.0, 0.4]', '"1.5", "y"', "f1 is constant"),  # was 4,830 half-lines at one point
        ('"torus"\nradii = [1.0, 0.4]', '"x", "x*x - x*x"', "f2 is constant"),  # was 2,254 contours
        ('"ellipsoid"\nradii = [2, 1, 1]', '"x*y", "x*y"', "parallel everywhere"),  # was a 99.9% patch
    ],
)
def test_degenerate_map_one_line_exit_2(tmp_path: Path, surface: str, texts: str, needle: str) -> None:
    # closed forms: a constant has zero gradient; f2 = f1 has parallel gradients (math.md section 4)
    body = f"[f]\nsurface = {surface}\nresolution = 400\nmap = [{texts}]\n"
    body += '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nresolution = 400\nmap = ["x", "y"]\n'
    (tmp_path / "s.toml").write_text(HEAD + body)
    assert_user_error(run_cli(["grid", "s.toml"], tmp_path), "s.toml", "f.map", needle, "not normal")
    assert not (tmp_path / "results").exists()


def test_constant_mesh_fields_one_line_exit_2(tmp_path: Path) -> None:
    # constant vertex fields gave 60 half-lines at one point; a constant f1 has no critical structure
    from specmap.shapes.meshes import write_mesh
    from specmap.shapes.surfaces import make_surface

    V, T = make_surface("ellipsoid", (2.0, 1.0, 1.0)).mesh(400)
    write_mesh(tmp_path / "m.ply", V, T, np.c_[np.full(len(V), 2.0), V[:, 1]], names=("a", "b"))
    (tmp_path / "s.toml").write_text(
        HEAD + '[f]\nmesh = "m.ply"\nfields = ["a", "b"]\n[g]\nmesh = "m.ply"\nmap = ["x", "y"]\n'
    )
    assert_user_error(run_cli(["grid", "s.toml"], tmp_path), "m.ply", "f.fields", "f1 is constant")


# --------------------------------------------------------------------------- 4. processes


def test_jobs_above_the_core_count_is_capped_with_one_note(tmp_path: Path) -> None:
    # issue 14: --jobs above the number of cores is capped, and said in one line (os.cpu_count())
    body = (
        '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nresolution = 400\nmap = ["x", "y"]\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nresolution = 400\nmap = ["x", "y + 0.1*z"]\n'
        "[map]\nresolution = 5\n"
    )
    (tmp_path / "s.toml").write_text(HEAD + body)
    jobs = (os.cpu_count() or 1) + 7
    proc = run_cli(["map", "s.toml", "--out", "r", "--jobs", str(jobs)], tmp_path)
    assert proc.returncode == 0, proc.stderr
    notes = [ln for ln in proc.stderr.splitlines() if "--jobs" in ln]
    assert len(notes) == 1 and f"--jobs {jobs}" in notes[0] and f"using {os.cpu_count()}" in notes[0]


# --------------------------------------------------------------------------- 1. report: untracked stability


def _pdf_text(path: Path) -> str:
    """The text of a PDF: poppler's pdftotext when installed, else pypdf (both outside the project)."""
    import shutil

    if shutil.which("pdftotext"):
        return subprocess.run(
            ["pdftotext", "-layout", str(path), "-"], capture_output=True, text=True, check=True
        ).stdout
    pypdf = pytest.importorskip("pypdf")
    return "\n".join(page.extract_text() or "" for page in pypdf.PdfReader(str(path)).pages)


def test_report_without_tracked_distance_claims_no_stability_check(tmp_path: Path) -> None:
    # Issue 14: "Stability violations: 0" was printed when [perturb] distance = false, i.e. a check
    # that never ran. Expected: the PDF says the stability of D was not tracked and gives no count.
    body = (
        '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nresolution = 200\nmap = ["x", "y"]\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nresolution = 200\nmap = ["x", "y + 0.3*z"]\n'
        "[map]\nresolution = 21\n"
        '[perturb]\nmodel = "function"\nsize = 0.01\nruns = 2\ndistance = false\n'
    )
    (tmp_path / "s.toml").write_text(HEAD + body)
    proc = run_cli(["perturb", "s.toml", "--out", "r"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    summary = json.loads((tmp_path / "r" / "perturb" / "summary.json").read_text())
    assert summary["stability_violations"] is None and summary["distance"] is None
    proc = run_cli(["report", "r"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    text = " ".join(_pdf_text(tmp_path / "r" / "report.pdf").split())
    assert "Perturbation" in text  # the page that would carry the count is there
    assert "Stability violations" not in text
    assert "violate the stability bound" not in text
    assert "respected the stability bound" not in text
    assert "Stability of the distance: not tracked" in text


# --------------------------------------------------------------------------- 2. float warnings of all workers


def _overflowing_tile(*args: object, **kwargs: object) -> object:
    """One overflow, then the real tile (module level, so the workers import it by name)."""
    from specmap.special import tiles

    _ = np.array([1e300]) * np.array([1e300])
    real = getattr(tiles, "_real_tile_pieces", tiles.tile_pieces)  # a worker imports the real module
    return real(*args, **kwargs)


def _counted_main(monkeypatch: pytest.MonkeyPatch, capsys, work) -> list[str]:
    """Run ``work`` as the CLI's verb; the non-empty stderr lines."""
    import specmap.cli as cli

    def verb(argv: list[str] | None = None) -> int:
        work()
        return 0

    monkeypatch.setattr(cli, "run", verb)
    with pytest.raises(SystemExit) as code:
        cli.main([])
    assert code.value.code == 0
    return [ln for ln in capsys.readouterr().err.splitlines() if ln.strip()]


def _evaluator_pair():
    from specmap.shapes.surfaces import make_surface
    from specmap.slices import SliceEngine

    # values near 5e307 and lines with b = -1.7e308: f1 - b exceeds the largest double (closed form)
    V, T = make_surface("ellipsoid", (2.0, 1.0, 1.0)).mesh(100)
    return SliceEngine(T, np.c_[V[:, 0], V[:, 1]] * 5e307), SliceEngine(T, np.c_[V[:, 0], V[:, 2]] * 5e307)


def test_float_warnings_of_distance_workers_are_counted(monkeypatch: pytest.MonkeyPatch, capsys) -> None:
    # Issue 14: the distance evaluator's joblib workers printed their warnings (two lines each) and
    # the CLI's one line missed them. Expected: the count of the same lines evaluated in this process
    # (numpy warns once per operation on each line, so the count does not depend on the chunks).
    import warnings

    from specmap.distance.evaluator import LineEvaluator
    from specmap.floatwarn import float_warning_kind, take_worker_counts

    a = np.full(8, 0.5)
    b = np.r_[np.full(4, -1.7e308), np.linspace(-0.1, 0.1, 4)]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        here = LineEvaluator(*_evaluator_pair(), jobs=1)(a, b)
    expected = sum(1 for w in caught if float_warning_kind(w.message, w.category) == "overflow")
    assert expected >= 4  # at least one overflow per line with b = -1.7e308
    take_worker_counts()
    out: list = []
    err = _counted_main(
        monkeypatch, capsys, lambda: out.append(LineEvaluator(*_evaluator_pair(), jobs=2)(a, b))
    )
    np.testing.assert_array_equal(out[0], here)
    assert len(err) == 1, err
    assert f"overflow {expected}" in err[0], err


def test_float_warnings_of_map_tiles_are_counted(monkeypatch: pytest.MonkeyPatch, capsys) -> None:
    # Issue 14: the same for the map's tile workers. Expected: one overflow per tile, raised by the
    # wrapper above in whichever process maps the tile (4 tiles, 2 workers), and no other line.
    from specmap.settings import MapSettings
    from specmap.special import tiles
    from specmap.strip import Window
    from tests.gridgen import random_pair

    gf, gg = random_pair(2, 6)
    monkeypatch.setattr(tiles, "_real_tile_pieces", tiles.tile_pieces, raising=False)
    monkeypatch.setattr(tiles, "tile_pieces", _overflowing_tile)
    ms = MapSettings(resolution=21)
    window = Window((0.05, 0.95), (-1.0, 1.0))
    err = _counted_main(
        monkeypatch,
        capsys,
        lambda: tiles.tiled_special_set(gf, gg, window, tiles=(2, 2), settings=ms, jobs=2),
    )
    assert len(err) == 1 and "numpy met 4 floating-point" in err[0] and "overflow 4" in err[0], err
