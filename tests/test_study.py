"""Study loading: defaults, relative paths, the default window (math.md section 3)."""

from __future__ import annotations

from pathlib import Path

import pytest

from specmap.errors import StudyError
from specmap.strip import default_window
from specmap.study import load_study


def write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "s.toml"
    p.write_text(text)
    return p


def test_defaults_and_relative_paths(tmp_path: Path) -> None:
    sub = tmp_path / "data"
    sub.mkdir()
    (sub / "g.json").write_text('{"format": "specmap-grid/1", "contours": []}')
    p = write(sub, '[study]\nname = "x"\n[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n[perturb]\nruns = 3\n')
    s = load_study(p)
    assert s.f.path == (sub / "g.json").resolve()  # resolved against the study's folder
    assert s.map.pairs == "all" and s.map.method == "sweep"
    assert s.distance.degrees == (0, 1, 2)
    assert s.perturb is not None and s.perturb.model == "grid" and s.perturb.runs == 3
    assert s.window is None


def test_function_model_rejected_for_grid_files(tmp_path: Path) -> None:
    (tmp_path / "g.json").write_text("{}")
    p = write(
        tmp_path,
        '[study]\nname = "x"\n[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n[perturb]\nmodel = "function"\n',
    )
    with pytest.raises(StudyError, match="perturb.model"):
        load_study(p)


def test_default_window_closed_form() -> None:
    # math.md section 3: b- = min(min f1, min g1, -max f2, -max g2), b+ = max(max f1, max g1, -min f2, -min g2)
    w = default_window((-2, -1, 2, 1), (0, -3, 5, 0.5))
    assert w.b == (min(-2, 0, -1, -0.5), max(2, 5, 1, 3))
    assert w.a == (0.02, 0.98)


def test_grid_file_side_is_a_grid_and_sets_the_window(tmp_path: Path) -> None:
    # A grid file gives a Grid, not a Shape: StudyRun.shapes holds None for it, StudyRun.grids the
    # file's contours (ids prefixed "f:"/"g:"). The default window uses the contour points of a grid
    # side and the vertex values of a mesh side, by the formula of math.md section 3 written here.
    import json

    import numpy as np

    from specmap.grids.model import Grid
    from specmap.pipeline import StudyRun
    from specmap.shapes.model import Shape

    pts = [[-0.5, 2.0], [0.25, 1.0], [1.5, -0.75]]
    (tmp_path / "f.json").write_text(
        json.dumps(
            {
                "format": "specmap-grid/1",
                "contours": [
                    {"id": "p0", "kind": "proper", "points": pts},
                    {"id": "v0", "kind": "vertical", "start": [3.0, 0.5]},
                ],
            }
        )
    )
    p = write(
        tmp_path,
        '[study]\nname = "x"\n[f]\ngrid = "f.json"\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\nresolution = 300\n',
    )
    run = StudyRun(load_study(p), tmp_path / "out", show_progress=False)
    sf, sg = run.shapes
    assert sf is None and isinstance(sg, Shape) and sg.has_mesh
    gf, gg = run.grids
    assert isinstance(gf, Grid) and [c.id for c in gf.contours] == ["f:p0", "f:v0"]
    f = np.array(pts + [[3.0, 0.5]])
    g = sg.values
    b_lo = min(f[:, 0].min(), g[:, 0].min(), -f[:, 1].max(), -g[:, 1].max())
    b_hi = max(f[:, 0].max(), g[:, 0].max(), -f[:, 1].min(), -g[:, 1].min())
    assert run.window.b == (b_lo, b_hi) and run.window.a == (0.02, 0.98)
    assert not (tmp_path / "out").exists()  # computing stages writes nothing


def test_distance_certificate_keys_are_read_and_checked(tmp_path: Path) -> None:
    # the settings a why_not sentence tells the user to change are study keys (issue 13: a reason a
    # user can act on); a bad value is one StudyError naming the field
    (tmp_path / "g.json").write_text('{"format": "specmap-grid/1", "contours": []}')
    head = '[study]\nname = "x"\n[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n[distance]\n'
    s = load_study(write(tmp_path, head + 'certify = "each"\nslope_max_lines = 900\nstrip_budget = 4.0\n'))
    assert (s.distance.certify, s.distance.slope_max_lines, s.distance.strip_budget) == ("each", 900, 4.0)
    d = load_study(write(tmp_path, head)).distance
    assert (d.certify, d.slope_max_lines, d.strip_budget) == ("max", 200, 2.5)  # settings.py defaults
    for bad, field in (
        ('certify = "all"', "distance.certify"),
        ("slope_max_lines = 0", "distance.slope_max_lines"),
        ("strip_budget = -1", "distance.strip_budget"),
        ('strip_budget = "x"', "distance.strip_budget"),
    ):
        with pytest.raises(StudyError, match=field.replace(".", r"\.")):
            load_study(write(tmp_path, head + bad + "\n"))
