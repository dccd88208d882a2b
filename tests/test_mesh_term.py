"""The mesh-to-surface term of issue 13 item 1 (``[distance] mesh_check``, ``--mesh-check``).

Sources named beside each check:
- "closed form, derived here (CDFFL13 stability + the limit line)": f = (x, y) on the ellipsoid
  x^2/4 + y^2 + z^2 = 1 and g = (x, y) on x^2/0.25 + y^2 + z^2 = 1, both meshed (specmap's
  surfaces) from the same unit-sphere triangulation W scaled by the radii, so the two meshes share
  triangles and f - g = (1.5 w_1, 0) vertex by vertex. Stability on one mesh [CDFFL13] gives
  h_0 <= ||F*_f - F*_g||_inf <= max_v |f1 - g1| = 1.5 s, s = max_v |w_1|. On a = 1/2 with b below
  every value of f2 - f1 (b <= -1.5 s - 1 here), F* = x - b at every vertex, so the essential H0
  points are born at min x - b and h_0 = |min x_f - min x_g| = 1.5 |min_v w_1| = 1.5 s (the geodesic
  sphere is centrally symmetric, so min w_1 = -max w_1). Hence D_0 of the meshed pair is 1.5 s_m
  exactly at every mesh factor m, s_m read off that mesh's vertices here, and the surface's D_0 is
  1.5 (s -> 1). The certified interval of each factor must contain 1.5 s_m;
- "definition (issue 13 item 1)": movement = max_m |D_k(m) - D_k(1)|, recomputed in the test;
- "an independent run": the re-meshed study written as its own study file (resolution x m, the
  window given) and run by StudyRun alone must give the same numbers (a bookkeeping check);
- "the project's error contract": bad settings give one line naming file, field and fix, exit 2.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from test_cli_errors import assert_user_error, run_cli

from specmap.meshterm import MeshRow, mesh_term_block, movement
from specmap.pipeline import StudyRun
from specmap.report.summary import mesh_term_sentence
from specmap.shapes.surfaces import Ellipsoid
from specmap.study import load_study

RES = 200
STUDY = f"""[study]
name = "two"

[f]
surface = "ellipsoid"
radii = [2.0, 1.0, 1.0]
map = ["x", "y"]
resolution = {RES}

[g]
surface = "ellipsoid"
radii = [0.5, 1.0, 1.0]
map = ["x", "y"]
resolution = {RES}
{{window}}
[map]
resolution = 31

[distance]
method = "both"
degrees = [0]
dense_resolution = 9
certify = "each"
{{mesh_check}}
"""


def _study(tmp_path: Path, name: str = "s.toml", *, mesh_check: str = "mesh_check = [2, 4]", **kw) -> Path:
    p = tmp_path / name
    text = STUDY.format(window=kw.get("window", ""), mesh_check=mesh_check)
    p.write_text(text.replace(f"resolution = {RES}", f"resolution = {kw.get('res', RES)}"))
    return p


def _closed_form(m: int) -> float:
    # closed form, derived here (module docstring): D_0 of the meshed pair = 1.5 max_v |w_1|
    V, _ = Ellipsoid((2.0, 1.0, 1.0)).mesh(m * RES)
    w1 = V[:, 0] / 2.0
    assert abs(w1.max() + w1.min()) < 1e-12  # centrally symmetric sphere mesh: min w_1 = -max w_1
    return 1.5 * float(np.abs(w1).max())


@pytest.fixture(scope="module")
def measured(tmp_path_factory):
    out = tmp_path_factory.mktemp("mesh_term")
    run = StudyRun(load_study(_study(out)), out / "res", show_progress=False)
    js = run.write_distance()
    return run, js, out


def test_each_factor_is_the_closed_form_of_its_mesh_and_the_movement_is_their_spread(measured):
    run, js, _ = measured
    block = js["mesh_term"]
    assert js["mesh_term_why_not"] is None
    assert block["factors"] == [1, 2, 4]
    tol = float(js["tolerance"])
    e = block["by_degree"]["0"]
    exact = [_closed_form(m) for m in block["factors"]]
    for i, m in enumerate(block["factors"]):
        V, _ = Ellipsoid((2.0, 1.0, 1.0)).mesh(m * RES)
        assert block["vertices"]["f"][i] == block["vertices"]["g"][i] == len(V)
        lo, hi = e["bounds"][i]
        # closed form, derived here: the certified interval of the meshed pair holds 1.5 s_m
        assert lo - 1e-12 <= exact[i] <= hi + 1e-12, (m, lo, exact[i], hi)
        assert e["certified"][i] is True and hi - lo <= tol
        assert abs(e["values"][i] - exact[i]) <= tol
    assert block["vertices"]["f"][0] < block["vertices"]["f"][1] < block["vertices"]["f"][2]
    # factor 1 is the study's own answer
    assert e["values"][0] == js["by_degree"]["0"]["value"]
    # definition (issue 13 item 1): the movement is the largest move from 1x, recomputed here
    vals = e["values"]
    want = max(abs(v - vals[0]) for v in vals)
    assert e["movement"] == pytest.approx(want, abs=1e-15)
    assert e["moved_most_at"] == block["factors"][int(np.argmax([abs(v - vals[0]) for v in vals]))]
    assert e["steps"] == pytest.approx([abs(vals[1] - vals[0]), abs(vals[2] - vals[1])], abs=1e-15)
    # and it is the spread of the closed forms, to the certified widths
    spread = max(abs(x - exact[0]) for x in exact)
    assert spread > 3 * tol  # the mesh moves D_0 well above the tolerance on this pair
    assert abs(e["movement"] - spread) <= 2 * tol
    # measured, not bounded (DEVELOPERS "M"): the finest mesh is nearer the surface's 1.5 than the
    # movement, but the 1x gap to the surface exceeds the movement: it is no bound for the 1x value
    assert 1.5 - vals[-1] < e["movement"] < 1.5 - vals[0]
    assert "D_0 moves by" in block["sentence"] and "between 1x and 4x" in block["sentence"]


def test_factor_values_agree_with_an_independent_run_of_the_remeshed_study(measured, tmp_path):
    # an independent run: the 2x study as its own file (resolution doubled, the 1x window given)
    run, js, _ = measured
    w = run.window
    window = f"\n[window]\na = [{w.a[0]!r}, {w.a[1]!r}]\nb = [{w.b[0]!r}, {w.b[1]!r}]\n"
    path = _study(tmp_path, "x2.toml", mesh_check="", window=window, res=2 * RES)
    alone = StudyRun(load_study(path), tmp_path / "alone", show_progress=False)
    res = alone.distance(alone.distance_settings())
    mine = js["mesh_term"]["by_degree"]["0"]
    assert res.by_degree[0]["value"] == pytest.approx(mine["values"][1], abs=1e-12)
    assert list(res.by_degree[0]["bounds"]) == pytest.approx(mine["bounds"][1], abs=1e-12)
    assert len(alone.shapes[0].values) == js["mesh_term"]["vertices"]["f"][1]


def test_a_rerun_reads_back_finished_factors_and_recomputes_a_torn_or_stale_one(measured):
    run, js, out = measured
    folder = run.out / "mesh_term"
    assert sorted(p.name for p in folder.glob("*.json")) == ["x2.json", "x4.json"]
    again = StudyRun(load_study(_study(out)), run.out, show_progress=False)
    js2 = again.write_distance()
    assert js2["mesh_term"]["reused"] == [False, True, True]
    assert js2["mesh_term"]["by_degree"] == js["mesh_term"]["by_degree"]
    (folder / "x4.json").write_text('{"factor": 4, "vert')  # torn
    js3 = StudyRun(load_study(_study(out)), run.out, show_progress=False).write_distance()
    assert js3["mesh_term"]["reused"] == [False, True, False]
    assert js3["mesh_term"]["by_degree"]["0"]["values"] == pytest.approx(
        js["mesh_term"]["by_degree"]["0"]["values"], abs=1e-12
    )
    # another map resolution: the stored factors carry another stamp, so nothing is read back
    text = _study(out).read_text().replace("[map]\nresolution = 31", "[map]\nresolution = 25")
    other = out / "other.toml"
    other.write_text(text)
    js4 = StudyRun(load_study(other), run.out, show_progress=False).write_distance()
    assert js4["mesh_term"]["reused"] == [False, False, False]
    from specmap.fingerprint import map_part

    stored = json.loads((folder / "x2.json").read_text())
    assert stored["fingerprint_parts"]["map"] == map_part(load_study(other).map)


def test_movement_is_the_largest_move_from_the_first_factor():
    # definition (issue 13 item 1): not the last minus the first, nor the largest step
    rows = [
        MeshRow(m, (10 * m, 10 * m), {"0": {"value": v, "bounds": [v, v], "certified": True}})
        for m, v in ((1, 0.30), (2, 0.35), (4, 0.32))
    ]
    e = mesh_term_block(rows, settings="test")["by_degree"]["0"]
    assert e["movement"] == pytest.approx(0.05) and e["moved_most_at"] == 2
    assert e["steps"] == pytest.approx([0.05, 0.03])
    # infinite at every factor (torus against sphere in degree 1): no move; finite against inf: inf
    assert movement([np.inf, np.inf, np.inf]) == (0.0, 0)
    assert movement([0.1, np.inf]) == (np.inf, 1)
    with pytest.raises(ValueError):
        mesh_term_block(rows[1:], settings="test")


def _mesh_study(tmp_path: Path, cli_check: str = "") -> Path:
    import meshio

    V, T = Ellipsoid((0.5, 1.0, 1.0)).mesh(RES)
    meshio.write(tmp_path / "g.ply", meshio.Mesh(V, [("triangle", T.astype(np.int32))]))
    text = STUDY.format(window="", mesh_check=cli_check)
    head, tail = text.split("[g]", 1)
    tail = tail.split("[map]", 1)[1]
    p = tmp_path / "m.toml"
    p.write_text(head + '[g]\nmesh = "g.ply"\nmap = ["x", "y"]\n\n[map]' + tail)
    return p


def test_a_mesh_file_shape_gives_null_with_why_not(tmp_path):
    run = StudyRun(load_study(_mesh_study(tmp_path, "mesh_check = [2]")), tmp_path / "r", show_progress=False)
    js = run.write_distance()
    assert js["mesh_term"] is None
    assert "g is a mesh file (g.ply)" in js["mesh_term_why_not"]
    assert "cannot be re-meshed" in js["mesh_term_why_not"]
    assert not (tmp_path / "r" / "mesh_term").exists()
    assert (
        mesh_term_sentence(js)
        == "Mesh term: not measured (g is a mesh file (g.ply): it cannot be re-meshed)."
    )
    # off: null too, and page 1 says "not measured"
    off = StudyRun(load_study(_mesh_study(tmp_path)), tmp_path / "r2", show_progress=False).write_distance()
    assert off["mesh_term"] is None and "mesh_check is off" in off["mesh_term_why_not"]
    assert mesh_term_sentence(off).startswith("Mesh term: not measured")


@pytest.mark.parametrize(
    ("setting", "needles"),
    [
        ("mesh_check = [1, 2]", ("distance.mesh_check", "factor 1 is out of range", "[2, 64]")),
        ("mesh_check = 2", ("distance.mesh_check", "not a list of whole factors", "mesh_check = [2, 4]")),
        ("mesh_check = [2.5]", ("distance.mesh_check", "not a list of whole factors")),
        (
            "mesh_check = [64]",
            ("distance.mesh_check", "factor 64 times f.resolution 200", "lower f.resolution"),
        ),
    ],
)
def test_bad_study_settings_give_the_one_line_error(tmp_path, setting, needles):
    path = _study(tmp_path, mesh_check=setting)
    if "[64]" in setting:
        path.write_text(path.read_text().replace(f"resolution = {RES}", "resolution = 40000", 1))
        needles = ("distance.mesh_check", "factor 64 times f.resolution 40000", "lower f.resolution")
    line = assert_user_error(run_cli(["distance", str(path)], tmp_path), str(path), *needles)
    assert line.startswith("specmap: error: ")
    assert not (tmp_path / "results").exists()


def test_cli_flag_bad_values_and_a_mesh_file_are_one_line_errors(tmp_path):
    path = _study(tmp_path, mesh_check="")
    assert_user_error(
        run_cli(["distance", str(path), "--mesh-check", "1,2"], tmp_path), "--mesh-check", "[2, 64]"
    )
    assert_user_error(
        run_cli(["distance", str(path), "--mesh-check", "two"], tmp_path), "--mesh-check", "'two'"
    )
    # asked for explicitly, a shape that cannot be re-meshed is an error, before any work
    mesh = _mesh_study(tmp_path)
    line = assert_user_error(
        run_cli(["distance", str(mesh), "--mesh-check", "2,4"], tmp_path), str(mesh), "g.mesh"
    )
    assert "cannot be re-meshed" in line and "drop --mesh-check" in line
    assert not (tmp_path / "results").exists()


def test_cli_flag_runs_the_term_and_prints_its_sentence(tmp_path):
    path = _study(tmp_path, mesh_check="")
    proc = run_cli(["distance", str(path), "--mesh-check", "2", "--out", str(tmp_path / "o")], tmp_path)
    assert proc.returncode == 0, proc.stderr
    js = json.loads((tmp_path / "o" / "distance.json").read_text())
    assert js["mesh_term"]["factors"] == [1, 2]
    assert js["mesh_term"]["sentence"] in proc.stdout
    # the flag is part of the distance settings, so of the distance fingerprint; off, the part is the
    # one of the settings before mesh_check existed (older distance.json files stay current)
    from dataclasses import asdict

    from specmap.fingerprint import digest, distance_part

    study = load_study(path)
    assert js["fingerprint_parts"]["distance"] != distance_part(study.distance)
    before = asdict(study.distance)
    assert before.pop("mesh_check") == ()
    assert distance_part(study.distance) == digest(before)


def test_report_first_page_states_the_term_or_not_measured(measured, tmp_path):
    # the report reads distance.json only: page 1 carries the sentence of mesh_term, else "not measured"
    from pypdf import PdfReader

    from specmap.report.pdf import build_report

    run, js, _ = measured
    run.write_grids()
    run.record()
    pdf = build_report(run.out, tmp_path / "r.pdf")
    page1 = " ".join(PdfReader(str(pdf)).pages[0].extract_text().split())
    move = js["mesh_term"]["by_degree"]["0"]["movement"]
    assert "Mesh term: D_0 moves by" in page1 and "between 1x and 4x the mesh resolution" in page1, page1
    assert f"{move:.3f}" in page1  # to the digits the tolerance (0.004) resolves
    assert "measured, not bounded" in page1
    data = json.loads((run.out / "distance.json").read_text())
    data.update(mesh_term=None, mesh_term_why_not=None)
    (run.out / "distance.json").write_text(json.dumps(data))
    page1 = " ".join(
        PdfReader(str(build_report(run.out, tmp_path / "r2.pdf"))).pages[0].extract_text().split()
    )
    assert "Mesh term: not measured" in page1, page1
