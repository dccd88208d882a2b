"""Certified simplification in studies: ``simplify = delta | "auto"`` from the study file to distance.json.

Sources:
- stability of the matching distance [Cerri, Di Fabio, Ferri, Frosini, Landi 2013, CDFFL13]:
  D_k(f, g) <= ||f - g||_inf, and per line r(a, b) the bottleneck distance of the slice
  diagrams is at most ||F*_f - F*_f'||_inf <= ||f - f'||_inf (the normalised slice function of
  math.md section 2 is 1-Lipschitz in f) [Cohen-Steiner, Edelsbrunner, Harer 2007]. By the
  triangle inequality, on every line |h(f, g) - h(f', g')| <= ||f - f'||_inf + ||g - g'||_inf,
  and the same for the max over any set of lines;
- the noisy-scan generator (tests/scangen.py): the smooth pair is the same triangulation without
  noise, so ||noisy - smooth||_inf is known in the test;
- the persistence-sensitive simplification contract [Edelsbrunner, Morozov, Pascucci 2006]:
  ||f - f'||_inf <= delta.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from scangen import noisy_scan, write_scan

from specmap.cli import main, run
from specmap.errors import StudyError
from specmap.shapes.meshes import write_mesh
from specmap.study import load_study

DELTA = 0.05
WINDOW = "[window]\na = [0.1, 0.9]\nb = [-2.0, 2.0]\n"
DIST = '[distance]\nmethod = "dense"\ndegrees = [0, 1]\ndense_resolution = 13\n'


def study_text(name: str, f: str, g: str, simplify: str | None, extra: str = "") -> str:
    s = f"simplify = {simplify}\n" if simplify is not None else ""
    return (
        f'[study]\nname = "{name}"\n[f]\nmesh = "{f}"\nfields = ["f1", "f2"]\n{s}'
        f'[g]\nmesh = "{g}"\nfields = ["f1", "f2"]\n{s}{WINDOW}{DIST}{extra}'
    )


@pytest.fixture(scope="module")
def scans(tmp_path_factory) -> dict:
    d = tmp_path_factory.mktemp("scans")
    f = noisy_scan((2.0, 1.2, 1.0), 8, 0.01, seed=1)
    g = noisy_scan((2.0, 1.3, 0.9), 8, 0.01, seed=2)
    write_scan(d / "f.ply", f)
    write_scan(d / "g.ply", g)
    write_mesh(d / "fs.ply", f.smooth_vertices, f.triangles, f.smooth_values, names=("f1", "f2"))
    write_mesh(d / "gs.ply", g.smooth_vertices, g.triangles, g.smooth_values, names=("f1", "f2"))
    return {"dir": d, "f": f, "g": g}


def run_study(d: Path, name: str, text: str, *commands: str) -> Path:
    path = d / f"{name}.toml"
    path.write_text(text)
    out = d / f"r_{name}"
    for c in commands:
        assert run([c, str(path), "--out", str(out)]) == 0
    return out


def read(path: Path) -> dict:
    return json.loads(path.read_text())


@pytest.fixture(scope="module")
def results(scans) -> dict:
    d = scans["dir"]
    return {
        "simplified": run_study(
            d, "simp", study_text("simp", "f.ply", "g.ply", str(DELTA)), "grid", "distance"
        ),
        "noisy": run_study(d, "noisy", study_text("noisy", "f.ply", "g.ply", None), "distance"),
        "smooth": run_study(d, "smooth", study_text("smooth", "fs.ply", "gs.ply", None), "distance"),
    }


def test_grid_meta_records_the_simplification(results) -> None:
    for side in ("f", "g"):
        rec = read(results["simplified"] / f"grid_{side}.json")["meta"]["simplification"]
        assert rec["delta"] == DELTA
        assert all(0.0 <= s <= DELTA for s in rec["sup_change"])  # ||f - f'||_inf <= delta [EMP06]
        assert rec["contours_after"] <= rec["contours_before"]
        # the count after is the grid actually written (contours of the simplified pair)
        assert rec["contours_after"] == len(read(results["simplified"] / f"grid_{side}.json")["contours"])
    study = read(results["simplified"] / "study.json")
    assert study["f"]["simplify"] == DELTA
    assert study["simplification"]["g"]["delta"] == DELTA
    assert read(results["noisy"] / "study.json")["simplification"] == {"f": None, "g": None}


def test_distance_bounds_hold_the_original_and_the_smooth_pair(results, scans) -> None:
    simp = read(results["simplified"] / "distance.json")
    noisy = read(results["noisy"] / "distance.json")
    smooth = read(results["smooth"] / "distance.json")
    recs = [read(results["simplified"] / f"grid_{s}.json")["meta"]["simplification"] for s in ("f", "g")]
    margin = max(recs[0]["sup_change"]) + max(recs[1]["sup_change"])
    assert simp["simplification"]["margin"] == pytest.approx(margin)
    assert "simplification" not in noisy and "simplified_bounds" not in noisy["by_degree"]["0"]
    noise = scans["f"].noise_sup + scans["g"].noise_sup  # ||noisy - smooth||_inf of f plus g (test-known)
    for k in ("0", "1"):
        entry = simp["by_degree"][k]
        lo, hi = entry["simplified_bounds"]
        lower, upper = entry.get("bounds") or (entry["value"], entry["value"])  # certified, else [D', D']
        assert (lo, hi) == pytest.approx((max(0.0, lower - margin), upper + margin))
        # the original pair's distance: in [D' - margin, D' + margin] on the same lines (below)
        # per line (same lattice, same window): |h(f, g) - h(f', g')| <= s_f + s_g  [CDFFL13]
        hs = np.array(simp["landscape"]["by_degree"][k], dtype=float)
        hn = np.array(noisy["landscape"]["by_degree"][k], dtype=float)
        hm = np.array(smooth["landscape"]["by_degree"][k], dtype=float)
        assert np.nanmax(np.abs(hs - hn)) <= margin + 1e-12
        # the max over the lattice of the original pair lies in the node-max interval
        assert abs(np.nanmax(hn) - np.nanmax(hs)) <= margin + 1e-12
        # the smooth pair: the bounds widened by the known noise hold it [CDFFL13]
        assert np.nanmax(np.abs(hs - hm)) <= margin + noise + 1e-12
        assert lo - noise <= smooth["by_degree"][k]["value"] <= hi + noise


def test_auto_meets_a_budget(scans, capsys) -> None:
    d = scans["dir"]
    budget = 12
    out = run_study(
        d, "auto", study_text("auto", "f.ply", "g.ply", '"auto"', f"[map]\nmax_contours = {budget}\n"), "grid"
    )
    assert any(read(out / f"grid_{s}.json")["meta"]["simplification"]["met"] for s in ("f", "g"))
    for side in ("f", "g"):
        rec = read(out / f"grid_{side}.json")["meta"]["simplification"]
        assert rec["setting"] == "auto" and rec["budget"] == budget
        n = len(read(out / f"grid_{side}.json")["contours"])
        assert rec["contours_after"] == n
        if rec["met"]:
            assert n <= budget
            assert all(s <= rec["delta"] for s in rec["sup_change"])
        else:
            assert "budget 12 not met" in capsys.readouterr().err


def test_auto_budget_not_met_is_one_note(scans, capsys) -> None:
    d = scans["dir"]
    out = run_study(
        d, "tight", study_text("tight", "f.ply", "g.ply", '"auto"', "[map]\nmax_contours = 1\n"), "grid"
    )
    err = [line for line in capsys.readouterr().err.splitlines() if "not met" in line]
    # f1 and f2 each have a minimum and a maximum on a closed surface: at least 4 half-lines > budget 1
    assert len(err) == 2 and all("budget 1 not met" in line for line in err)
    assert read(out / "grid_f.json")["meta"]["simplification"]["met"] is False


@pytest.mark.parametrize(
    "value, problem",
    [("-1", "is negative"), ('"sometimes"', "unknown value"), ("true", "not a finite number")],
)
def test_bad_simplify_values(scans, value: str, problem: str) -> None:
    path = scans["dir"] / "bad.toml"
    path.write_text(study_text("bad", "f.ply", "g.ply", value))
    with pytest.raises(StudyError) as exc:
        load_study(path)
    line = exc.value.one_line()
    assert "\n" not in line and str(path) in line and "f.simplify" in line and problem in line


def test_bad_simplify_is_exit_2(scans, capsys) -> None:
    path = scans["dir"] / "bad2.toml"
    path.write_text(study_text("bad2", "f.ply", "g.ply", '"sometimes"'))
    with pytest.raises(SystemExit) as exc:
        main(["grid", str(path)])
    assert exc.value.code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "f.simplify" in err[0] and "Traceback" not in err[0]


def test_bad_max_contours(scans) -> None:
    path = scans["dir"] / "bad3.toml"
    path.write_text(study_text("bad3", "f.ply", "g.ply", '"auto"', "[map]\nmax_contours = 0\n"))
    with pytest.raises(StudyError, match="map.max_contours"):
        load_study(path)


def test_map_refuses_a_grid_pair_too_large_in_one_line(tmp_path, capsys) -> None:
    # 300 + 300 random contours: P = 179 700 pairs, so the atlas (N^4 work) is far over any
    # machine's memory by the measured model of specmap.special.preflight (16 P^2 crossings at 41^2)
    import time

    from gridgen import random_pair

    from specmap.io import write_json

    gf, gg = random_pair(5, 600)
    write_json(tmp_path / "f.json", gf.to_json())
    write_json(tmp_path / "g.json", gg.to_json())
    path = tmp_path / "big.toml"
    path.write_text(
        '[study]\nname = "big"\n[f]\ngrid = "f.json"\n[g]\ngrid = "g.json"\n'
        "[window]\na = [0.1, 0.9]\nb = [-1.0, 1.0]\n"
    )
    t = time.perf_counter()
    with pytest.raises(SystemExit) as exc:
        main(["map", str(path), "--out", str(tmp_path / "out")])
    assert exc.value.code == 2
    assert time.perf_counter() - t < 30  # before any lattice work
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "memory" in err[0] and "simplify" in err[0] and "--pairs roles" in err[0]
