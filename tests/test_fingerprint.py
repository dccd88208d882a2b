"""Settings fingerprints, result-file versions and job-count determinism (issue 14 items 1, 2, 4).

Sources of the expectations: the result-file contract of ``specmap/fingerprint.py`` and
``specmap/report/load.py`` (every file carries the hashes of the settings and inputs it depends on;
files of one folder that disagree on a shared part are refused, naming both), the error contract
(one line, exit 2) and, for the job count, the sequential run as the reference (``--jobs`` only
splits the line evaluations; the lines chosen must not depend on it).
"""

from __future__ import annotations

import dataclasses
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from specmap.fingerprint import FORMAT_VERSION, digest, inconsistency, inputs_part, stamp
from specmap.report.load import load_results, take_notes
from specmap.study import load_study

STUDY = """[study]
name = "fp"
seed = 1
[f]
surface = "ellipsoid"
radii = [2, 1, 1]
map = ["x", "y"]
resolution = 400
[g]
surface = "ellipsoid"
radii = [2, 1, 1]
map = ["x", "y + 0.1*z"]
resolution = 400
[map]
resolution = 21
[distance]
dense_resolution = 5
degrees = [0]
"""

FILES = ("study.json", "grid_f.json", "grid_g.json", "special.json", "special.geojson", "distance.json")


def cli(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=600,
    )


def one_line_error(proc: subprocess.CompletedProcess) -> str:
    assert proc.returncode == 2, proc.stderr
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in proc.stderr, proc.stderr
    return lines[0]


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A folder made by grid, map and distance of a small ellipsoid pair (built once)."""
    root = tmp_path_factory.mktemp("fp")
    (root / "s.toml").write_text(STUDY)
    for verb in ("grid", "map", "distance"):
        proc = cli(verb, "s.toml", "--out", "res", cwd=root)
        assert proc.returncode == 0, proc.stderr
    return root


@pytest.fixture
def folder(built: Path, tmp_path: Path) -> Path:
    """A private copy of the built study and its results."""
    shutil.copy(built / "s.toml", tmp_path / "s.toml")
    shutil.copytree(built / "res", tmp_path / "res")
    return tmp_path


def parts(folder: Path, name: str) -> dict[str, str]:
    return json.loads((folder / "res" / name).read_text())["fingerprint_parts"]


def test_every_result_file_is_stamped_with_the_parts_it_depends_on(folder: Path) -> None:
    # contract (specmap/fingerprint.py): grids depend on the inputs only, the atlas adds the window and
    # the map settings, the distance (method "both" reads the atlas) adds the distance settings
    want = {
        "study.json": {"inputs", "window"},
        "grid_f.json": {"inputs"},
        "grid_g.json": {"inputs"},
        "special.json": {"inputs", "window", "map"},
        "special.geojson": {"inputs", "window", "map"},
        "distance.json": {"inputs", "window", "map", "distance"},
    }
    for name, keys in want.items():
        data = json.loads((folder / "res" / name).read_text())
        assert data["format_version"] == FORMAT_VERSION, name
        assert set(data["fingerprint_parts"]) == keys, name
        assert data["fingerprint"] == stamp(data["fingerprint_parts"])["fingerprint"], name
    assert len({parts(folder, n)["inputs"] for n in want}) == 1


def test_identical_rerun_keeps_the_fingerprints_and_the_report_accepts(folder: Path) -> None:
    before = {n: json.loads((folder / "res" / n).read_text())["fingerprint"] for n in FILES}
    proc = cli("map", "s.toml", "--out", "res", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    after = {n: json.loads((folder / "res" / n).read_text())["fingerprint"] for n in FILES}
    assert after == before
    res = load_results(folder / "res")
    assert res["notes"] == [] and res["caveats"] == []


def test_changed_map_rerun_alone_is_refused_naming_both_files(folder: Path) -> None:
    study = folder / "s.toml"
    study.write_text(STUDY.replace("resolution = 21", "resolution = 25"))
    assert cli("map", "s.toml", "--out", "res", cwd=folder).returncode == 0
    line = one_line_error(cli("report", "res", cwd=folder))
    assert "special.json" in line and "distance.json" in line and "map" in line
    assert "remove the stale file" in line and "specmap distance" in line  # distance.json is the older
    # rerunning the stale stage makes the folder consistent again
    assert cli("distance", "s.toml", "--out", "res", cwd=folder).returncode == 0
    assert load_results(folder / "res")["stages"]["distance"]


def test_changed_input_rerun_downstream_only_names_the_stale_grid(folder: Path) -> None:
    (folder / "s.toml").write_text(STUDY.replace('"y + 0.1*z"', '"y + 0.2*z"'))
    assert cli("distance", "s.toml", "--out", "res", cwd=folder).returncode == 0
    line = one_line_error(cli("report", "res", cwd=folder))
    assert "grid_f.json" in line and "inputs" in line and "specmap grid" in line


def test_newer_format_version_is_refused(folder: Path) -> None:
    path = folder / "res" / "distance.json"
    data = json.loads(path.read_text())
    data["format_version"] = FORMAT_VERSION + 1
    path.write_text(json.dumps(data))
    line = one_line_error(cli("report", "res", cwd=folder))
    assert "distance.json" in line and "newer specmap" in line and "format_version" in line


@pytest.mark.parametrize("bad", ["2", None, True, 0])
def test_unknown_format_version_values_are_refused(folder: Path, bad: object) -> None:
    path = folder / "res" / "special.json"
    data = json.loads(path.read_text())
    data["format_version"] = bad
    path.write_text(json.dumps(data))
    with pytest.raises(Exception) as err:
        load_results(folder / "res")
    assert "format_version" in str(err.value) and "special.json" in str(err.value)


def test_old_files_without_version_are_read_with_one_note(folder: Path) -> None:
    for name in FILES:
        path = folder / "res" / name
        data = json.loads(path.read_text())
        for key in ("format_version", "fingerprint", "fingerprint_parts"):
            data.pop(key)
        path.write_text(json.dumps(data))
    take_notes()
    res = load_results(folder / "res")
    assert len(res["notes"]) == 1 and "no format_version" in res["notes"][0]
    assert take_notes() == res["notes"] and take_notes() == []
    proc = cli("report", "res", "--out", "r.pdf", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    assert [ln for ln in proc.stderr.splitlines() if "no format_version" in ln] == proc.stderr.splitlines()


def test_inconsistency_compares_only_shared_parts() -> None:
    # brute force over the definition: a clash is two files with different values for one part
    stamps = {"a": {"inputs": "1"}, "b": {"inputs": "1", "map": "x"}, "c": {"map": "y"}}
    assert inconsistency(stamps) == ("b", "c", "map")
    assert inconsistency({"a": {"inputs": "1"}, "b": {"map": "y"}}) is None
    assert digest({"x": [1, 2]}) != digest({"x": [2, 1]})


def test_inputs_part_follows_the_bytes_of_a_mesh_file_not_its_path(tmp_path: Path) -> None:
    # contract: paths are not hashed, file bytes are (a moved folder keeps its fingerprints)
    from specmap.study import ShapeSpec, Study

    def study(mesh: Path, fmap: tuple[str, str] = ("x", "y")) -> Study:
        f = ShapeSpec("f", "mesh", path=mesh, map=fmap)
        g = ShapeSpec("g", "surface", surface="ellipsoid", radii=(2.0, 1.0, 1.0), map=("x", "y"))
        return Study("s", 0, tmp_path / "s.toml", f, g)

    (tmp_path / "a").mkdir()
    first, moved = tmp_path / "m.off", tmp_path / "a" / "m.off"
    first.write_bytes(b"OFF\n4 4 0\n")
    moved.write_bytes(first.read_bytes())
    assert inputs_part(study(first)) == inputs_part(study(moved))
    moved.write_bytes(b"OFF\n4 4 0\n\n")
    assert inputs_part(study(first)) != inputs_part(study(moved))
    assert inputs_part(study(first)) != inputs_part(study(first, ("x", "z")))


def test_jobs_do_not_change_the_search(folder: Path) -> None:
    # reference: the sequential run (jobs = 1); with the default batch (fixed, not derived from the
    # jobs) two jobs must evaluate the same lines in the same rounds
    from specmap.pipeline import StudyRun

    run = StudyRun(load_study(folder / "s.toml"), folder / "res", show_progress=False)
    settings = run.distance_settings(method="reduced")
    one, two = (run.distance(settings, jobs=j).to_json() for j in (1, 2))

    def strip(x: object) -> object:
        """Timings and the job count removed, at any depth (they may differ, nothing else may)."""
        if isinstance(x, dict):
            return {k: strip(v) for k, v in x.items() if "seconds" not in k and k != "jobs"}
        if isinstance(x, list):
            return [strip(v) for v in x]
        return x

    assert strip(one) == strip(two)
    assert one["reduced"]["lines"] == two["reduced"]["lines"]
    assert one["reduced"]["slope_search"]["rounds"] == two["reduced"]["slope_search"]["rounds"]
    assert dataclasses.replace(settings).batch is not None  # the default does not follow the jobs


def test_map_with_other_pairs_after_a_perturbation_study_is_refused(folder: Path) -> None:
    # issue 14: `map --pairs roles` after a perturbation study on all pairs mixed 82% and 98% patch
    # figures in one finding; the summary records the map part of the runs' own settings
    (folder / "s.toml").write_text(STUDY + "[perturb]\nsize = 1e-3\nruns = 2\n")
    assert cli("perturb", "s.toml", "--out", "res", cwd=folder).returncode == 0
    summary = json.loads((folder / "res" / "perturb" / "summary.json").read_text())
    assert summary["fingerprint_parts"]["perturb"] == summary["fingerprint"]  # the run-set fingerprint
    assert summary["fingerprint_parts"]["map"] == parts(folder, "special.json")["map"]
    load_results(folder / "res")  # consistent so far
    assert cli("map", "s.toml", "--out", "res", "--pairs", "roles", cwd=folder).returncode == 0
    line = one_line_error(cli("report", "res", cwd=folder))
    assert "special.json" in line and "map" in line and ("summary.json" in line or "distance.json" in line)


@pytest.mark.parametrize("order", ["distance_then_map_flag", "map_flag_then_distance"])
def test_a_map_flag_override_is_named_and_one_command_fixes_it(folder: Path, order: str) -> None:
    # Issue 14: after `map --resolution 25` (a flag, the study file unchanged) and `distance`, the
    # report named the older file's stage, which reran with the file's [map] and stayed inconsistent.
    # Expected: the file made with the flag is the stale one, whatever the order, and the command
    # the message names makes the folder consistent (checked by running it).
    flagged = ["map", "s.toml", "--out", "res", "--resolution", "25"]
    steps = [["distance", "s.toml", "--out", "res"], flagged]
    for args in steps if order == "distance_then_map_flag" else steps[::-1]:
        assert cli(*args, cwd=folder).returncode == 0
    line = one_line_error(cli("report", "res", cwd=folder))
    assert "special.json" in line and "distance.json" in line and "--resolution" in line
    assert "special.json was made with map settings other than those of " in line
    assert "rerun `specmap map " in line and "s.toml` without overriding flags" in line
    assert cli("map", "s.toml", "--out", "res", cwd=folder).returncode == 0
    assert load_results(folder / "res")["stages"]["distance"]
