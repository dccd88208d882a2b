"""Large inputs are not silent: reading a mesh file and building its PL grid print progress lines.

Issue 14 ("long silent stages: a 2M-face mesh's grid, 30 s"). Measured by the lead on a 1 M-vertex,
2 M-triangle torus (busy 2-core machine): reading and checking the mesh 70 s, its PL grid 9.5 s,
neither printed anything before. The thresholds are lowered here so a small mesh takes the same
path; the expected lines follow from the step counts of ``build_shape`` and ``piecewise_grid``
(five checkpoints each, one line per 10% off a terminal: every step is a line).
"""

from __future__ import annotations

import meshio
import pytest
from meshgen import ellipsoid_mesh

from specmap import pipeline
from specmap.pipeline import StudyRun
from specmap.study import load_study


def _study(tmp_path):
    V, T = ellipsoid_mesh((1.0, 0.8, 0.6), 2, seed=3)
    meshio.write(tmp_path / "egg.ply", meshio.Mesh(V, [("triangle", T.astype("int32"))]))
    (tmp_path / "s.toml").write_text(
        '[study]\nname = "egg"\n[f]\nmesh = "egg.ply"\nmap = ["x", "y"]\n'
        '[g]\nmesh = "egg.ply"\nmap = ["x + 0.2*z", "y"]\n'
    )
    return load_study(tmp_path / "s.toml")


def test_large_mesh_and_grid_print_each_step(tmp_path, monkeypatch: pytest.MonkeyPatch, capsys) -> None:
    monkeypatch.setattr(pipeline, "LARGE_MESH_BYTES", 0)
    monkeypatch.setattr(pipeline, "LARGE_GRID_TRIANGLES", 0)
    run = StudyRun(_study(tmp_path), tmp_path / "out", show_progress=True)
    gf, gg = run.grids
    assert gf.contours and gg.contours
    err = capsys.readouterr().err
    for stage in ("mesh f", "mesh g", "grid f", "grid g"):
        steps = [line for line in err.splitlines() if line.startswith(f"{stage}: ")]
        assert [s.split()[2] for s in steps] == ["1/5", "2/5", "3/5", "4/5", "5/5"], err


def test_small_inputs_stay_quiet(tmp_path, capsys) -> None:
    run = StudyRun(_study(tmp_path), tmp_path / "out", show_progress=True)
    gf, gg = run.grids
    assert gf.contours and gg.contours
    err = capsys.readouterr().err
    assert not [line for line in err.splitlines() if line.startswith(("mesh ", "grid "))], err


def test_quiet_run_prints_nothing_even_when_large(tmp_path, monkeypatch: pytest.MonkeyPatch, capsys) -> None:
    monkeypatch.setattr(pipeline, "LARGE_MESH_BYTES", 0)
    monkeypatch.setattr(pipeline, "LARGE_GRID_TRIANGLES", 0)
    run = StudyRun(_study(tmp_path), tmp_path / "out", show_progress=False)
    gf, gg = run.grids
    assert gf.contours and gg.contours
    assert capsys.readouterr().err == ""
