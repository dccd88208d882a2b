"""Tests for specmap.perturb: perturbation models, run sets (parallel, resumable), summaries.

Every check names its source: "closed form, derived in the test", "math.md section N",
"checks.md", "[CDFFL13]" (stability of the matching distance), "[Wil27]" (Wilson interval) or
"construction" (a property the model promises by definition, re-measured independently).
"""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from specmap.grids.model import Contour, Grid, validate_grid
from specmap.perturb import (
    PerturbSettings,
    perturb_grid,
    perturb_shape,
    random_field,
    run_seed,
    wilson_interval,
)
from specmap.perturb.geometry import set_hausdorff
from specmap.perturb.models import PerturbedMap, sample_points
from specmap.perturb.store import load_runs, records_without_time, repair_tail
from specmap.perturb.summary import verdict
from specmap.shapes.model import Shape
from specmap.strip import Window

Z = 1.96


# --------------------------------------------------------------------------- Wilson interval
def test_wilson_zero_successes_closed_form():
    # [Wil27]; closed form derived in the test: with p = 0 the upper bound is
    # (z^2/(2n) + z * sqrt(z^2/(4n^2))) / (1 + z^2/n) = z^2 / (n + z^2).
    for n in (1, 10, 50, 1000):
        lo, hi = wilson_interval(0, n, z=Z)
        assert lo == 0.0
        assert hi == pytest.approx(Z**2 / (n + Z**2), rel=1e-12)
    assert wilson_interval(0, 50, z=Z)[1] == pytest.approx(0.0713, abs=1e-4)


def test_wilson_all_successes_is_mirror_image():
    # [Wil27]; symmetry p -> 1 - p of the score interval, so k = n gives lower bound n/(n + z^2).
    for n in (5, 50):
        lo, hi = wilson_interval(n, n, z=Z)
        assert hi == 1.0
        assert lo == pytest.approx(n / (n + Z**2), rel=1e-12)


def test_wilson_half_closed_form():
    # [Wil27]; closed form derived in the test for p = 1/2: centre 1/2 and half width
    # z / (1 + z^2/n) * sqrt(1/(4n) + z^2/(4 n^2)).
    n = 10
    lo, hi = wilson_interval(5, n, z=Z)
    half = Z / (1 + Z**2 / n) * math.sqrt(0.25 / n + Z**2 / (4 * n * n))
    assert lo == pytest.approx(0.5 - half, rel=1e-12)
    assert hi == pytest.approx(0.5 + half, rel=1e-12)
    assert wilson_interval(0, 0) == (0.0, 1.0)
    with pytest.raises(ValueError):
        wilson_interval(3, 2)


def test_verdict_sentence():
    # construction: the sentence format given in the design brief.
    text = verdict(
        {"total_area": 0.84, "counts": {"patch": 1, "curve": 0, "point": 0}},
        50,
        0,
        wilson_interval(0, 50, z=Z),
        1e-3,
        0.84,
    )
    assert text == (
        "The base special set has 1 patch (area 0.84, 100% of the window); 0 of 50 perturbed "
        "runs of size 0.001 kept a patch (95% CI 0-7.1%)."
    )


# --------------------------------------------------------------------------- grid model
def four_verticals() -> tuple[Grid, Grid]:
    """checks.md: vertical half-lines x = 0, 1 (f) and x = 2, 3 (g), starting low enough to be met."""
    gf = Grid((Contour("f:v0", "vertical", [[0.0, -10.0]]), Contour("f:v1", "vertical", [[1.0, -10.0]])))
    gg = Grid((Contour("g:v0", "vertical", [[2.0, -10.0]]), Contour("g:v1", "vertical", [[3.0, -10.0]])))
    return gf, gg


def staircase_grid() -> Grid:
    t = np.linspace(0.0, 1.0, 40)
    arc = np.stack([np.cos(0.5 * math.pi * (1 - t)), -np.sin(0.5 * math.pi * t) + 0.3 * t], axis=1)
    arc[:, 1] = np.minimum.accumulate(arc[:, 1])
    steps = np.array([[0.0, 1.0], [0.0, 0.5], [0.2, 0.5], [0.2, 0.5], [0.7, 0.1]])  # flat runs, a repeat
    return validate_grid(
        Grid(
            (
                Contour("f:p0", "proper", arc),
                Contour("f:p1", "proper", steps),
                Contour("f:p2", "proper", [[0.5, 0.5]]),
                Contour("f:v0", "vertical", [[0.1, 0.2]]),
                Contour("f:h0", "horizontal", [[0.3, -0.4]]),
            )
        )
    )


@pytest.mark.parametrize("size", [1e-3, 0.05, 0.4])
def test_perturb_grid_moves_at_most_size_and_validates(size):
    # construction: no point moves by more than size (Euclidean), proper contours stay
    # non-increasing (validate_grid), ids and kinds are kept.
    grid = staircase_grid()
    for seed in range(20):
        new, moved = perturb_grid(grid, size, np.random.default_rng(seed))
        validate_grid(new, tol=0.0)
        worst = 0.0
        for a, b in zip(grid.contours, new.contours, strict=True):
            assert (a.id, a.kind, a.points.shape) == (b.id, b.kind, b.points.shape)
            worst = max(worst, float(np.max(np.linalg.norm(b.points - a.points, axis=1))))
        assert worst <= size * (1 + 1e-12)
        assert moved == pytest.approx(worst)
        assert worst > 0.0
        assert new.route == "perturbed"


def test_perturb_grid_is_seeded():
    # construction: the model is a pure function of the generator state.
    g = staircase_grid()
    a, _ = perturb_grid(g, 0.01, np.random.default_rng(7))
    b, _ = perturb_grid(g, 0.01, np.random.default_rng(7))
    c, _ = perturb_grid(g, 0.01, np.random.default_rng(8))
    assert all(np.array_equal(x.points, y.points) for x, y in zip(a.contours, b.contours, strict=True))
    assert not all(np.array_equal(x.points, y.points) for x, y in zip(a.contours, c.contours, strict=True))


# --------------------------------------------------------------------------- function model
def octahedron_shape(source: str = "mesh") -> Shape:
    V = np.array([[1, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0], [0, 0, 1], [0, 0, -1]], dtype=float)
    T = np.array([[0, 2, 4], [2, 1, 4], [1, 3, 4], [3, 0, 4], [2, 0, 5], [1, 2, 5], [3, 1, 5], [0, 3, 5]])
    return Shape("f", source, V, T, V[:, :2].copy())


def test_random_field_gradient_matches_finite_differences():
    # closed form check: central differences (step 1e-6) approximate the exact gradient to ~1e-8.
    rng = np.random.default_rng(3)
    h = random_field(rng, np.array([0.5, -1.0, 2.0]), 3.0)
    P = rng.normal(size=(25, 3)) * 2.0
    eps = 1e-6
    fd = np.stack([(h.values(P + eps * e) - h.values(P - eps * e)) / (2 * eps) for e in np.eye(3)], axis=1)
    assert np.allclose(h.gradient(P), fd, atol=1e-7, rtol=1e-6)


def test_perturb_mesh_sup_norm_is_size():
    # construction: each h is normalised so max |h| over the vertices is 1, hence
    # ||f' - f||_inf on the vertices equals size (the quantity in the [CDFFL13] bound).
    rng = np.random.default_rng(11)
    shape = octahedron_shape()
    for size in (1e-3, 0.2):
        new, applied = perturb_shape(shape, size, rng)
        delta = new.values - shape.values
        assert np.max(np.abs(delta)) == pytest.approx(size, rel=1e-12)
        assert applied == pytest.approx(size, rel=1e-12)
        # each component reaches the size on its own (two independent normalised fields)
        assert np.max(np.abs(delta[:, 0])) == pytest.approx(size, rel=1e-12)
        assert np.max(np.abs(delta[:, 1])) == pytest.approx(size, rel=1e-12)
        assert not np.allclose(delta[:, 0], delta[:, 1])
        assert np.array_equal(new.vertices, shape.vertices)


def test_perturb_surface_gives_map_with_exact_jacobian():
    # closed form: the base map f = (x, y) has Jacobian [[1,0,0],[0,1,0]]; the perturbed map's
    # Jacobian is checked against central differences of its values, and its values at the
    # vertices equal the new vertex values (construction).
    from specmap.expr import compile_map
    from specmap.shapes.surfaces import make_surface

    surface = make_surface("ellipsoid", (2.0, 1.0, 1.0))
    V, T = surface.mesh(200)
    fmap = compile_map(["x", "y"])
    shape = Shape("f", "surface", V, T, fmap.values(V), surface=surface, fmap=fmap)
    new, applied = perturb_shape(shape, 0.05, np.random.default_rng(5))
    assert isinstance(new.fmap, PerturbedMap)
    # the closed form needs a linear map: a run asks for the perturbed grid with route "auto"
    from specmap.perturb.run import perturbed_grid_settings
    from specmap.settings import GridSettings

    assert new.fmap.is_linear() is False
    assert perturbed_grid_settings(GridSettings(route="exact", resolution=500)) == GridSettings("auto", 500)
    assert perturbed_grid_settings(GridSettings(route="smooth")).route == "smooth"
    assert np.allclose(new.fmap.values(V), new.values, atol=1e-14)
    P = V[:30]
    eps = 1e-6
    fd = np.stack(
        [(new.fmap.values(P + eps * e) - new.fmap.values(P - eps * e)) / (2 * eps) for e in np.eye(3)], axis=2
    )
    assert np.allclose(new.fmap.jacobian(P), fd, atol=1e-7)
    # sup over the denser sample (projected midpoints and centroids) is the size; vertices <= it
    S = sample_points(shape)
    assert len(S) > len(V)
    assert np.allclose(surface.implicit(S), 0.0, atol=1e-9)  # samples lie on the surface
    dense = np.max(np.abs(new.fmap.values(S) - fmap.values(S)))
    assert dense == pytest.approx(0.05, rel=1e-12)
    assert applied <= 0.05 * (1 + 1e-12)


def test_perturb_shape_rejects_grid_only():
    # construction: a shape without vertex values has nothing to perturb (grid files give a Grid,
    # perturbed by perturb_grid).
    with pytest.raises(ValueError, match="grid"):
        perturb_shape(Shape("f", "mesh"), 0.1, np.random.default_rng(0))


# --------------------------------------------------------------------------- pure helpers
def test_run_seed_matches_spawn_and_is_independent_of_count():
    # construction: numpy SeedSequence.spawn gives child i the spawn key (i,), whatever the count.
    kids = np.random.SeedSequence(42).spawn(10)
    for i in (0, 3, 9):
        assert run_seed(42, i) == int(kids[i].generate_state(1, dtype=np.uint32)[0])
    assert len({run_seed(42, i) for i in range(100)}) == 100


def test_set_hausdorff_conventions_and_value():
    # closed form: two parallel segments at distance 0.3; empty-set conventions (documented).
    from shapely import GeometryCollection
    from shapely.geometry import LineString, box

    w = Window((0.0, 1.0), (0.0, 2.0))
    a = LineString([(0.2, 0.0), (0.2, 2.0)])
    b = LineString([(0.5, 0.0), (0.5, 2.0)])
    assert set_hausdorff(a, b, w) == pytest.approx(0.3)
    assert set_hausdorff(GeometryCollection(), GeometryCollection(), w) == 0.0
    assert set_hausdorff(a, GeometryCollection(), w) == pytest.approx(math.sqrt(5.0))
    # a square against its left side: the far side is at distance 1 (densified, not vertex-only)
    sq = box(0.0, 0.0, 1.0, 1.0)
    assert set_hausdorff(sq, LineString([(0, 0), (0, 1)]), w) == pytest.approx(1.0)


def test_repair_tail_and_load_runs(tmp_path):
    # construction: a torn last line is removed; complete lines are kept, first record per run wins.
    p = tmp_path / "runs.jsonl"
    p.write_bytes(
        b'{"run":0,"fingerprint":"x","v":1}\n{"run":1,"fingerprint":"y"}\n'
        b'{"run":0,"fingerprint":"x","v":2}\n{"run":2,"finger'
    )
    assert repair_tail(p) == len(b'{"run":2,"finger')
    assert p.read_bytes().endswith(b"\n")
    assert repair_tail(p) == 0
    recs = load_runs(p, "x")
    assert list(recs) == [0] and recs[0]["v"] == 1
    assert sorted(load_runs(p)) == [0, 1]
    q = tmp_path / "one.jsonl"
    q.write_bytes(b'{"run":0')
    assert repair_tail(q) == 8 and q.read_bytes() == b""


def test_settings_validation():
    # construction: impossible settings are core errors (value and what it should be, no study
    # vocabulary) that also are ValueErrors; the pipeline attaches file and field.
    from specmap.errors import InputValueError

    with pytest.raises(InputValueError, match="'noise'") as info:
        PerturbSettings(model="noise")
    assert info.value.subject == "model" and info.value.file is None and "perturb." not in str(info.value)
    with pytest.raises(ValueError, match="-1.0"):
        PerturbSettings(size=-1.0)
    where = info.value.located(file="s.toml", field="perturb.model")
    assert isinstance(where, InputValueError) and where.one_line().startswith("s.toml: perturb.model: model")


# --------------------------------------------------------------------------- run sets (need special_set)
def _special_available() -> bool:
    try:
        from specmap.special import special_set  # noqa: F401
    except ImportError:
        return False
    return True


needs_special = pytest.mark.skipif(
    not _special_available(), reason="specmap.special.special_set is not importable yet"
)

# All four half-lines are met by every line of this window: at x0 >= 0 >= b the line's height
# (1-a)/a (x0 - b) - b is >= 0 > -10 (math.md section 5, vertical half-line).
WINDOW = Window((0.25, 0.75), (-1.0, 0.0))
RESOLUTION = 21


def grid_base():
    from specmap.perturb import make_base

    gf, gg = four_verticals()
    settings = PerturbSettings(model="grid", size=1e-3, runs=6, seed=5, resolution=RESOLUTION)
    return make_base((gf, gg), WINDOW, settings=settings), settings


def read_lines(path: Path) -> list[bytes]:
    return path.read_bytes().splitlines(keepends=True)


@needs_special
def test_equal_spacing_patch_is_destroyed_by_grid_perturbation(tmp_path):
    # checks.md (four vertical half-lines at 0, 1, 2, 3): the base special set is one patch with
    # the window's area; math.md section 5: the equal-difference condition is not generic, so
    # moving all four half-lines generically (size 1e-3) leaves no patch in any run.
    from specmap.perturb import run_study

    base, settings = grid_base()
    assert base.counts["patch"] >= 1
    assert base.total_area == pytest.approx(WINDOW.area, rel=1e-6)
    summary = run_study(base, settings, tmp_path / "perturb")
    assert summary["runs"] == settings.runs
    assert summary["runs_with_patch"] == 0
    assert summary["total_area"]["max"] == 0.0
    lo, hi = summary["runs_with_patch_ci95"]
    assert lo == 0.0 and hi == pytest.approx(Z**2 / (settings.runs + Z**2), rel=1e-3)  # [Wil27]
    assert summary["verdict"].startswith("The base special set has 1 patch")
    assert "0 of 6 perturbed runs of size 0.001 kept a patch" in summary["verdict"]
    on_disk = json.loads((tmp_path / "perturb" / "summary.json").read_text())
    assert on_disk["runs_with_patch"] == 0 and on_disk["fingerprint"] == summary["fingerprint"]
    for rec in load_runs(tmp_path / "perturb" / "runs.jsonl").values():
        # the patch filled the window; what is left is at most curves, so the Hausdorff
        # distance is positive and at most the window diameter (documented convention)
        assert 0.0 < rec["hausdorff"] <= WINDOW.diameter + 1e-12
        assert max(rec["applied"]) <= settings.size


@needs_special
def test_same_seed_same_records_for_one_and_two_jobs(tmp_path):
    # construction: per-run seeds depend on (seed, run index) only (SeedSequence spawn keys).
    from specmap.perturb import run_study

    base, settings = grid_base()
    run_study(base, settings, tmp_path / "one", jobs=1)
    run_study(base, settings, tmp_path / "two", jobs=2)
    one = records_without_time(read_jsonl_list(tmp_path / "one" / "runs.jsonl"))
    two = records_without_time(read_jsonl_list(tmp_path / "two" / "runs.jsonl"))
    assert [r["run"] for r in one] == list(range(settings.runs))
    assert one == two


def read_jsonl_list(path: Path) -> list[dict]:
    return [json.loads(line) for line in read_lines(path)]


@needs_special
def test_changed_settings_start_a_new_run_set_and_old_one_comes_back(tmp_path):
    # construction (documented layout): a different fingerprint moves runs.jsonl aside; returning
    # to the old settings restores it and computes nothing new.
    from specmap.perturb import run_study

    base, settings = grid_base()
    folder = tmp_path / "perturb"
    small = PerturbSettings(**{**settings.to_json(), "runs": 3, "degrees": tuple(settings.degrees)})
    first = run_study(base, small, folder)
    other = PerturbSettings(**{**small.to_json(), "size": 2e-3, "degrees": tuple(settings.degrees)})
    second = run_study(base, other, folder)
    assert first["fingerprint"] != second["fingerprint"]
    assert (folder / f"runs-{first['fingerprint']}.jsonl").exists()
    assert {r["fingerprint"] for r in read_jsonl_list(folder / "runs.jsonl")} == {second["fingerprint"]}
    before = (folder / f"runs-{first['fingerprint']}.jsonl").read_bytes()
    again = run_study(base, small, folder)
    assert (folder / "runs.jsonl").read_bytes() == before  # nothing recomputed
    assert again["runs"] == 3 and again["fingerprint"] == first["fingerprint"]
    assert json.loads((folder / "settings.json").read_text())["fingerprint"] == first["fingerprint"]


KILL_SCRIPT = textwrap.dedent("""
    import sys
    from specmap.grids.model import Contour, Grid
    from specmap.perturb import PerturbSettings, make_base, run_study
    from specmap.strip import Window

    gf = Grid((Contour("f:v0", "vertical", [[0.0, -10.0]]), Contour("f:v1", "vertical", [[1.0, -10.0]])))
    gg = Grid((Contour("g:v0", "vertical", [[2.0, -10.0]]), Contour("g:v1", "vertical", [[3.0, -10.0]])))
    w = Window((0.25, 0.75), (-1.0, 0.0))
    s = PerturbSettings(model="grid", size=1e-3, runs=int(sys.argv[2]), seed=9, resolution=int(sys.argv[3]))
    run_study(make_base((gf, gg), w, settings=s), s, sys.argv[1], jobs=int(sys.argv[4]))
""")


@needs_special
def test_kill_minus_nine_then_resume_gives_each_run_once(tmp_path):
    # construction: lines are appended whole and fsynced by one writer; a rerun skips finished
    # run indices and truncates a torn tail, so the end state has exactly `runs` distinct lines.
    folder = tmp_path / "perturb"
    script = tmp_path / "study.py"
    script.write_text(KILL_SCRIPT)
    runs = 24
    args = [sys.executable, str(script), str(folder), str(runs), str(RESOLUTION), "2"]
    proc = subprocess.Popen(args, start_new_session=True)
    path = folder / "runs.jsonl"
    deadline = time.time() + 60
    while time.time() < deadline and proc.poll() is None:
        if path.exists() and len(read_lines(path)) >= 3:
            break
        time.sleep(0.01)
    killed = proc.poll() is None
    if killed:
        os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    have = len(read_lines(path))
    # simulate a kill in the middle of a write: a torn, unterminated last line
    with path.open("ab") as fh:
        fh.write(b'{"run": 999, "seed": 1, "tot')
    subprocess.run(args[:-1] + ["1"], check=True, timeout=120)
    lines = read_lines(path)
    assert all(line.endswith(b"\n") for line in lines)
    recs = [json.loads(line) for line in lines]
    assert sorted(r["run"] for r in recs) == list(range(runs))
    assert len(lines) == runs
    assert killed and 3 <= have < runs  # the kill really happened mid-way
    # the resumed records equal an uninterrupted run (same seeds)
    clean = tmp_path / "clean"
    subprocess.run(
        [sys.executable, str(script), str(clean), str(runs), str(RESOLUTION), "1"], check=True, timeout=120
    )
    assert records_without_time(recs) == records_without_time(read_jsonl_list(clean / "runs.jsonl"))


@needs_special
def test_corrupt_middle_line_is_dropped_and_its_run_recomputed_once(tmp_path):
    # construction (documented store): a line that is no record is dropped by an atomic rewrite,
    # the other lines stay byte for byte, and the missing run is computed again and appended once;
    # the resumed records equal an uninterrupted run set (same per-run seeds).
    from specmap.perturb import run_study

    base, settings = grid_base()
    folder = tmp_path / "perturb"
    run_study(base, settings, folder)
    path = folder / "runs.jsonl"
    clean = read_lines(path)
    assert len(clean) == settings.runs
    corrupt = [*clean[:2], b'{"run": 2, "seed": 7, "tot\n', b"[1, 2]\n", *clean[3:], clean[4]]
    path.write_bytes(b"".join(corrupt))  # run 2 lost to a corrupt line, a list line, run 4 twice
    run_study(base, settings, folder)
    lines = read_lines(path)
    recs = [json.loads(line) for line in lines]  # every line is JSON again
    assert all(isinstance(r, dict) for r in recs)
    assert sorted(r["run"] for r in recs) == list(range(settings.runs))  # each run once
    assert lines[:2] == clean[:2] and lines[2:-1] == clean[3:]  # kept lines unchanged, run 2 appended
    assert records_without_time(recs) == records_without_time([json.loads(x) for x in clean])


@needs_special
def test_dask_local_cluster_matches_joblib(tmp_path):
    # construction: the dask backend runs the same pure run_one with the same per-run seeds.
    distributed = pytest.importorskip("distributed", reason="dask.distributed is not installed")
    from specmap.perturb import run_study

    base, settings = grid_base()
    run_study(base, settings, tmp_path / "joblib", jobs=1)
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
    ) as cluster:
        run_study(base, settings, tmp_path / "dask", cluster=cluster.scheduler_address)
    a = records_without_time(read_jsonl_list(tmp_path / "joblib" / "runs.jsonl"))
    b = records_without_time(read_jsonl_list(tmp_path / "dask" / "runs.jsonl"))
    assert a == b


def _pid(_: int) -> int:
    import os

    return os.getpid()


def test_a_one_worker_cluster_runs_the_tasks_on_its_worker():
    # construction: joblib's dask backend ran every task in the calling process when the cluster
    # had one worker thread; the tasks must run in the worker process (another pid)
    import os

    from joblib import delayed

    from specmap.perturb.execution import _results

    distributed = pytest.importorskip("distributed", reason="dask.distributed is not installed")
    with distributed.LocalCluster(
        n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None
    ) as cluster:
        pids = set(_results([delayed(_pid)(i) for i in range(3)], 1, cluster.scheduler_address))
    assert len(pids) == 1 and os.getpid() not in pids


def test_cluster_without_dask_is_a_one_line_error(tmp_path, monkeypatch):
    # construction: dask is an optional extra; its absence is a StudyError with the fix.
    from specmap.errors import StudyError
    from specmap.perturb.execution import _results

    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(StudyError, match="dask") as info:
        list(_results([], 1, "tcp://127.0.0.1:1"))
    assert "\n" not in str(info.value) and "pip install" in str(info.value)


@needs_special
def test_perturbation_study_sweep_from_a_study(tmp_path):
    # construction: each size of a sweep is its own run set; the main size is reused.
    from specmap.perturb import make_base, perturbation_study
    from specmap.settings import DistanceSettings, MapSettings

    gf, gg = four_verticals()
    settings = PerturbSettings.of(
        model="grid",
        size=1e-3,
        runs=3,
        seed=2,
        distance=False,
        map=MapSettings(resolution=RESOLUTION),
        dist=DistanceSettings(),
    )
    base = make_base((gf, gg), WINDOW, settings=settings)
    summary = perturbation_study(base, settings, tmp_path / "perturb", sizes=(1e-3, 1e-2))
    assert [row["size"] for row in summary["sweep"]] == [1e-3, 1e-2]
    assert all(row["runs"] == 3 for row in summary["sweep"])
    assert (tmp_path / "perturb" / "sweep" / "size-0.01" / "runs.jsonl").exists()
    assert json.loads((tmp_path / "perturb" / "summary.json").read_text())["sweep"] == summary["sweep"]


def _distance_available() -> bool:
    try:
        from specmap.distance import matching_distance  # noqa: F401
    except ImportError:
        return False
    return _special_available()


@pytest.mark.skipif(
    not _distance_available(),
    reason="specmap.distance.matching_distance (and special_set) not importable yet; "
    "enable by landing the distance module",
)
def test_stability_bound_holds_on_every_run(tmp_path):
    # [CDFFL13] (math.md section 3): |D(f', g') - D(f, g)| <= ||f - f'||_inf + ||g - g'||_inf,
    # degree by degree; the perturbation model makes each sup norm equal to size. The dense
    # method samples the same lines before and after, where per-line stability (math.md 1)
    # makes the bound hold exactly on the samples.
    from specmap.expr import compile_map
    from specmap.grids import pareto_grid
    from specmap.perturb import make_base, run_study
    from specmap.shapes.surfaces import make_surface
    from specmap.strip import default_window

    surface = make_surface("ellipsoid", (2.0, 1.0, 1.0))
    V, T = surface.mesh(300)
    f = Shape("f", "mesh", V, T, compile_map(["x", "y"]).values(V))
    g = Shape("g", "mesh", V, T, compile_map(["x + 0.3*z", "y - 0.2*x*z"]).values(V))
    grids = (pareto_grid(f), pareto_grid(g))
    window = default_window(f.value_bounds(), g.value_bounds())
    settings = PerturbSettings(
        model="function",
        size=0.05,
        runs=3,
        seed=4,
        resolution=31,
        distance=True,
        degrees=(0, 1),
        distance_method="dense",
        dense_resolution=9,
    )
    base = make_base(grids, window, shapes=(f, g), settings=settings)
    summary = run_study(base, settings, tmp_path / "perturb")
    recs = read_jsonl_list(tmp_path / "perturb" / "runs.jsonl")
    assert len(recs) == 3
    for r in recs:
        assert r["applied"] == pytest.approx([0.05, 0.05])
        assert r["stability_ok"] is True
        assert abs(r["distance"]["change"]) <= 0.1 + r["distance"]["slack"]
        assert r["distance"]["checked_degrees"] == ["0", "1"]  # every degree with a finite interval
    assert summary["stability_violations"] == 0
    assert summary["distance"]["runs"] == 3


def test_stability_check_flags_violations():
    # [CDFFL13]: |D_k(after) - D_k(before)| <= bound. With intervals containing each D_k, a change is
    # a certain violation only when the intervals are further apart than the bound (closed form:
    # the gap between [lo_a, hi_a] and [lo_b, hi_b] is max(lo_a - hi_b, lo_b - hi_a)).
    from specmap.perturb.run import stability_check

    def dig(v0, v1, w1=0.0):
        return {
            "value": max(v0, v1),
            "by_degree": {"0": v0, "1": v1},
            "bounds": {"0": [v0, v0], "1": [v1, v1 + w1]},
            "tolerance": 0.0,
        }

    before = dig(1.0, 0.2)
    assert stability_check(before, dig(1.05, 0.25), 0.1)[1] is True
    digest, ok = stability_check(before, dig(1.3, 0.2), 0.1)
    assert ok is False and digest["change"] == pytest.approx(0.3) and digest["checked_degrees"] == ["0", "1"]
    # degree 1 moved 0.7 by its best value, but its interval after is [0.25, 0.95]: within 0.1 of 0.2
    # only if the lower end is; 0.25 - 0.2 = 0.05 <= 0.1, so no certain violation
    assert stability_check(before, dig(1.0, 0.25, w1=0.7), 0.1)[1] is True
    assert stability_check(before, dig(1.0, 0.9), 0.1)[1] is False
    # a degree without an interval on one side is not judged
    no_b = {**dig(1.0, 0.9), "bounds": {"0": [1.0, 1.0]}}
    assert stability_check(before, no_b, 0.1)[1] is True and stability_check(before, no_b, 0.1)[0][
        "checked_degrees"
    ] == ["0"]


@needs_special
def test_perturbation_study_tests_the_predicted_breaking_size(tmp_path):
    # Issue 13 item 4: the perturbation study tests the breaks_at of the patch reasons, and the report
    # names the result. Closed form, derived here (checks.md four verticals at 0, 1, 2, 3; math.md
    # section 5): every tie of the patch is an equal spacing of exact values, so its defect is 0 and
    # breaks_at = the atlas tolerance (specmap/special/reasons.py). The grid model moves each half-line
    # by at most `size`, so a tied difference |dx| - k |dx'| (k <= 2) changes by at most 6 size, and by
    # at most 6 size / a_min = 24 size in line-parameter units (s = (x - b)/a, a >= 0.25 here): at
    # size = breaks_at / 100 that is below the tolerance on every line, so every run keeps the patch.
    # At 1e4 x breaks_at the random moves break every identity (each defect is a continuous random
    # variable of scale size; one below the tolerance has probability of order 1e-4 per tie).
    from specmap.perturb import make_base, run_study
    from specmap.report.summary import special_lines
    from specmap.special import special_set

    gf, gg = four_verticals()
    atlas = special_set(gf, gg, WINDOW, resolution=RESOLUTION)
    reasons = [r for c in atlas.components if c.kind == "patch" for r in c.reasons]
    assert reasons and {r["kind"] for r in reasons} == {"equal_spacing"}
    br = max(r["breaks_at"] for r in reasons)
    assert br == pytest.approx(atlas.tolerance, rel=1e-12)
    summaries = {}
    for name, size in (("below", br / 100), ("above", 1e4 * br)):
        settings = PerturbSettings(model="grid", size=size, runs=6, seed=5, resolution=RESOLUTION)
        base = make_base((gf, gg), WINDOW, settings=settings)
        summaries[name] = run_study(base, settings, tmp_path / name)
    assert summaries["below"]["runs_with_patch"] == 6  # below the threshold: kept in every run
    assert summaries["above"]["runs_with_patch"] == 0  # above it: gone in every run
    sp = atlas.to_json()

    def genericity(summary):
        lines = special_lines({"special": sp, "perturb": {"summary": summary}})
        return next(x for x in lines if x.startswith("Genericity:"))

    # the report's verdict names the reason, the threshold and the result
    why = next(x for x in special_lines({"special": sp}) if x.startswith("Why the patch"))
    assert "equal spacing" in why and f"larger than {br:.3g} breaks it" in why
    above = genericity(summaries["above"])
    assert (
        "0 of 6 perturbed runs" in above
        and f"as its reasons predict (size {1e4 * br:.3g} > {br:.3g})" in above
    )
    below = genericity(summaries["below"])
    assert "6 of 6 perturbed runs" in below and "predict" not in below and "artefact" not in below
    # a patch kept above the threshold contradicts the reasons: the line says so (a hand-made summary,
    # the "above" one with one run marked as keeping a patch)
    kept = genericity({**summaries["above"], "runs_with_patch": 1})
    assert "some patch has another cause" in kept


@needs_special
def test_the_study_verdict_names_the_reason_and_the_breaking_size(tmp_path):
    # Issue 13 item 4: perturb/summary.json's own verdict (printed by specmap perturb) names why the
    # patch exists, its breaking size and the result, not only the report. Closed form, derived here
    # (as in test_perturbation_study_tests_the_predicted_breaking_size): vertical half-lines at 0, 1 (f)
    # and 2, 3 (g) differ by 1 = 1, an equal spacing of critical values of f1 and g1 with defect 0, so
    # breaks_at = the atlas tolerance; runs of size breaks_at / 100 keep the patch, of 1e4 x breaks_at
    # lose it (6 of 6 and 0 of 6 there).
    from specmap.perturb import make_base, run_study
    from specmap.special import special_set

    gf, gg = four_verticals()
    br = special_set(gf, gg, WINDOW, resolution=RESOLUTION).tolerance
    said = {}
    for name, size in (("below", br / 100), ("above", 1e4 * br)):
        settings = PerturbSettings(model="grid", size=size, runs=6, seed=5, resolution=RESOLUTION)
        base = make_base((gf, gg), WINDOW, settings=settings)
        run_study(base, settings, tmp_path / name)
        said[name] = json.loads((tmp_path / name / "summary.json").read_text())  # what the CLI prints
    for s in said.values():
        assert s["base"]["breaks_at"] == pytest.approx(br, rel=1e-12)
        assert s["base"]["reason"].startswith("equal spacing (") and s["base"]["reason"].endswith(
            "of the critical values of f1 and g1"
        )
        assert (
            f"non-generic by {s['base']['reason']}, which breaks at perturbations larger than {br:.3g}"
            in (s["verdict"])
        )
    above, below = said["above"]["verdict"], said["below"]["verdict"]
    assert f"0 of 6 perturbed runs of size {1e4 * br:g} kept a patch" in above
    assert f"as its reasons predict (size {1e4 * br:.3g} > {br:.3g})" in above
    assert f"6 of 6 perturbed runs of size {br / 100:g} kept a patch" in below and "predict" not in below
    # a patch kept above the breaking size contradicts the reason: the verdict says so (hand-made count)
    kept = verdict(said["above"]["base"], 6, 1, wilson_interval(1, 6), 1e4 * br, WINDOW.area)
    assert "some patch has another cause" in kept
    # a base without recorded reasons keeps the plain sentence (no claim of a reason)
    plain = verdict({"total_area": 0.25, "counts": {"patch": 1}}, 6, 0, wilson_interval(0, 6), 1e-3, 0.25)
    assert "non-generic" not in plain and "predict" not in plain


@needs_special
def test_cli_perturb_prints_the_verdict_with_its_reason(tmp_path):
    # The shipped grid-file study studies/ladder.toml: vertical half-lines at 0, 1 (f) and 2, 3 (g)
    # (tests/test_reasons.py reads the files back), an equal spacing of critical values of f1 and g1;
    # its [perturb] size 1e-3 is far above breaks_at = the atlas tolerance (< 1e-6), so a run set
    # with no patch left reads "as its reasons predict".
    root = Path(__file__).resolve().parents[1]
    out = tmp_path / "ladder"
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "specmap",
            "--quiet",
            "perturb",
            str(root / "studies" / "ladder.toml"),
            "--out",
            str(out),
            "--runs",
            "4",
        ],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, proc.stderr
    s = json.loads((out / "perturb" / "summary.json").read_text())
    assert s["verdict"] in proc.stdout.splitlines()
    assert "non-generic by equal spacing (" in s["verdict"] and "critical values of f1 and g1" in s["verdict"]
    assert s["base"]["breaks_at"] < 1e-6
    assert s["runs_with_patch"] == 0 and "as its reasons predict (size 0.001 >" in s["verdict"]


def test_curve_movement_per_unit_size_and_its_slope_over_a_sweep(tmp_path):
    # Issue 13 item 4, curves: how far the tie curves move per unit of perturbation size. Reference:
    # the raw run records (runs.jsonl of each size, read back here) and the least-squares slope through
    # the origin, k = sum s m / sum s^2 (closed form of the fit, derived here). A generic random pair
    # has regular tie curves (implicit-function theorem), so their movement is linear in a small size:
    # the per-size ratios of the three sizes agree within a factor of 3.
    import sys

    from specmap.perturb import make_base, run_study
    from specmap.perturb.execution import size_tag
    from specmap.report.findings import _perturb_sentences

    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from gridgen import random_pair

    gf, gg = random_pair(2, 6)
    sizes = (1e-3, 2e-3, 4e-3)
    settings = PerturbSettings(model="grid", size=sizes[0], runs=4, seed=3, resolution=RESOLUTION)
    base = make_base((gf, gg), WINDOW, settings=settings)
    summary = run_study(base, settings, tmp_path / "p", sizes=sizes)
    means = {}
    for s in sizes:
        folder = tmp_path / "p" if s == sizes[0] else tmp_path / "p" / "sweep" / size_tag(s)
        recs = load_runs(folder / "runs.jsonl").values()
        moves = [float(r["curve_movement"]) for r in recs]
        assert len(moves) == 4
        means[s] = sum(moves) / len(moves)
        if s == sizes[0]:
            per = summary["curve_movement_per_size"]
            assert per["mean"] == pytest.approx(sum(m / s for m in moves) / 4, rel=1e-12)
            assert per["max"] == pytest.approx(max(moves) / s, rel=1e-12)
    k = sum(s * means[s] for s in sizes) / sum(s * s for s in sizes)
    assert summary["curve_movement_slope"] == pytest.approx(k, rel=1e-9) and k > 0
    ratios = [means[s] / s for s in sizes]
    assert max(ratios) <= 3 * min(ratios)
    text = " ".join(_perturb_sentences({"perturb": {"summary": summary}}))
    assert "per unit of perturbation size" in text


def test_curve_movement_that_does_not_scale_with_the_size_gets_no_rate():
    # closed form, derived here: mean movements 0.115 and 0.2 at sizes 0.0005 and 0.02 are 230 and 10 per
    # unit of size (ratio 23 > 3): not a linear move of the base curves (the demo's base is one patch that
    # vanishes), so the Findings give no rate; movements 0.001 and 0.004 at sizes 0.001 and 0.004 (1 per
    # unit at both) keep the least-squares rate
    from specmap.report.findings import _perturb_sentences

    def rows(pts):
        return [{"size": s, "runs": 4, "runs_with_patch": 0, "curve_movement_mean": m} for s, m in pts]

    base = {"runs": 4, "size": 0.02, "runs_with_patch": 0, "runs_with_patch_ci95": [0.0, 0.49]}

    def sentences(pts, slope):
        summary = {**base, "sweep": rows(pts), "curve_movement_slope": slope}
        return " ".join(_perturb_sentences({"perturb": {"summary": summary}}))

    bad = sentences([(0.0005, 0.115), (0.02, 0.2)], 10.0)
    assert "does not scale with the size (230 per unit at size 0.0005, 10 at 0.02)" in bad
    assert "move by about" not in bad
    good = sentences([(0.001, 0.001), (0.004, 0.004)], 1.0)
    assert "move by about 1 in (a, b) per unit of perturbation size" in good
