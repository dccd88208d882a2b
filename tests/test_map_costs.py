"""The map restricted to a band of tied costs (``[map] costs = [lo, hi]``, ``specmap map --costs``).

References of the checks:
- the whole map (``special_set`` without ``keep`` or ``band``: a different code path) is the
  reference of the banded one: every banded piece is a piece of a whole-map tie, within one
  lattice cell of that tie's curve, and the whole curve's points whose cost lies inside the band
  (by more than the cost's change over one cell) are within one cell of a banded piece;
- the tied cost is computed here in closed form from math.md section 5 (derived in
  :func:`tied_cost`): with push coordinates c = min(a, 1 - a) s (s the line parameter of
  ``strip.line_parameter``, the one place lines meet contours), a pair's difference is
  d = |c_1 - c_2|; an equal tie of two cross pairs ties the matching costs d, of two same-grid
  pairs the diagonal costs d / 2; a half tie (d_big = 2 d_small) ties the diagonal cost
  d_big / 2 of the same-grid pair with the matching cost d_small of the cross pair [EFQT23];
- the project's error contract (design.md "Errors": one line naming file, field and fix, exit 2).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import shapely
from gridgen import random_pair
from test_cli_errors import GOOD_F, GOOD_G, HEAD, assert_user_error, run_cli

from specmap.cli import main
from specmap.pipeline import StudyRun
from specmap.settings import DistanceSettings, MapSettings, PerturbSettings
from specmap.special import special_set
from specmap.special.banded import banded_special_set
from specmap.strip import Window, line_parameter, push_scale
from specmap.study import load_study

W = Window((0.05, 0.95), (-1.0, 1.0))
RES = 31


def tied_cost(tie, by_id, a, b) -> tuple[np.ndarray, np.ndarray]:
    """The costs of the two tied pairs at lines (a, b), in closed form (math.md section 5, see above).

    Returns (cost of the first pair, cost of the second); on the tie's curve they agree.
    """
    m = push_scale(a)
    (p1, p2), (q1, q2) = tie.pairs
    d_p = np.abs(line_parameter(by_id[p1], a, b) - line_parameter(by_id[p2], a, b)) * m
    d_q = np.abs(line_parameter(by_id[q1], a, b) - line_parameter(by_id[q2], a, b)) * m
    cross_p = p1[0] != p2[0]  # ids are "f:..." / "g:...": the grid is the first letter
    if tie.condition == "half":  # the first pair carries the larger difference: d_big / 2 vs d_small
        return d_p / 2.0, d_q
    return (d_p if cross_p else d_p / 2.0), (d_q if cross_p else d_q / 2.0)


def _scaled(geom, ha: float, hb: float):
    """The geometry in lattice-cell units (a / ha, b / hb): one cell is a unit square."""
    return shapely.transform(geom, lambda xy: xy / np.array([ha, hb]))


def _curves(atlas) -> dict:
    return {p.tie: p.geometry for p in atlas.pieces if p.kind == "curve"}


@pytest.mark.parametrize("seed", [3, 7])
def test_banded_map_is_the_whole_map_cut_to_the_band(seed: int) -> None:
    gf, gg = random_pair(seed, 10)
    by_id = {c.id: c for c in (*gf.contours, *gg.contours)}
    whole = special_set(gf, gg, W, pairs="roles", resolution=RES)
    wc = _curves(whole)
    assert wc, "the whole map should have curves"
    costs = np.concatenate(
        [np.ravel(tied_cost(t, by_id, *shapely.get_coordinates(g).T)) for t, g in wc.items()]
    )
    lo, hi = np.nanquantile(costs, [0.3, 0.6])
    ms = MapSettings(pairs="roles", resolution=RES, costs=(float(lo), float(hi)))
    band = banded_special_set(gf, gg, W, ms)
    bc = _curves(band)
    assert bc, "a band between the 30% and 60% quantiles of the costs should keep curves"
    assert len(bc) < len(wc)
    ha, hb = (W.a[1] - W.a[0]) / (RES - 1), (W.b[1] - W.b[0]) / (RES - 1)
    # (1) every banded piece is a piece of a whole-map tie, within one cell of its curve
    for t, g in bc.items():
        assert t in wc, t
        far = shapely.distance(
            shapely.points(shapely.get_coordinates(_scaled(g, ha, hb))), _scaled(wc[t], ha, hb)
        )
        assert far.max() <= np.sqrt(2.0), (t, far.max())
    # (2) whole-map points whose cost is inside the band by more than one cell's cost step are banded
    checked = 0
    for t, g in wc.items():
        # points every quarter cell along the curve (its chords between refined crossings)
        a, b = (shapely.get_coordinates(shapely.segmentize(_scaled(g, ha, hb), 0.25)) * [ha, hb]).T
        c1, c2 = tied_cost(t, by_id, a, b)
        c = np.fmax(c1, c2)
        step = np.zeros_like(c)  # the costs' largest change to a point one cell away (both pairs)
        for da, db in ((ha, hb), (ha, -hb), (-ha, hb), (-ha, -hb)):
            e1, e2 = tied_cost(t, by_id, np.clip(a + da, *W.a), b + db)
            step = np.fmax(step, np.fmax(np.abs(e1 - c1), np.abs(e2 - c2)))
        inside = (c1 - step > lo) & (c2 - step > lo) & (c1 + step <= hi) & (c2 + step <= hi)
        if not inside.any():
            continue
        assert t in bc, (t, int(inside.sum()))
        pts = shapely.points(np.column_stack([a[inside] / ha, b[inside] / hb]))
        gap = shapely.distance(pts, _scaled(bc[t], ha, hb))
        assert gap.max() <= np.sqrt(2.0), (t, gap.max())
        checked += int(inside.sum())
    assert checked > 10
    # the components are computed, classified and measured as in the whole map
    assert band.components and band.stats["focus"]["pairs_kept"] < band.stats["focus"]["pairs_total"]
    assert band.stats["costs"] == [float(lo), float(hi)]


def test_a_band_above_every_cost_is_empty_and_one_over_all_costs_is_the_whole_map() -> None:
    gf, gg = random_pair(5, 9)
    whole = special_set(gf, gg, W, resolution=RES)
    # costs are at most the diameter of the window's push coordinates: 1e3 is above all of them
    none = banded_special_set(gf, gg, W, MapSettings(resolution=RES, costs=(1e3, 2e3)))
    assert none.pieces == () and none.stats["focus"]["pairs_kept"] == 0
    every = banded_special_set(gf, gg, W, MapSettings(resolution=RES, costs=(0.0, 1e3)))
    assert {(p.tie, p.kind) for p in every.pieces} == {(p.tie, p.kind) for p in whole.pieces}
    assert every.counts() == whole.counts()


# -- the study, the command line and the pipeline ---------------------------------------------------


def _study(tmp_path: Path, extra: str = "", name: str = "s.toml") -> Path:
    p = tmp_path / name
    p.write_text(HEAD + GOOD_F + GOOD_G + extra)
    return p


@pytest.mark.parametrize(
    "flag",
    ["1,0.5", "0.1", "0.1,nan", "abc,1", "-2,-1", "0.1,0.2,0.3"],
)
def test_bad_costs_flag_is_one_line(flag: str, tmp_path: Path, capsys) -> None:
    with pytest.raises(SystemExit) as exc:
        main(["map", str(_study(tmp_path)), "--out", str(tmp_path / "o"), f"--costs={flag}"])
    assert exc.value.code == 2
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln.strip()]
    assert len(err) == 1 and "s.toml" in err[0] and "--costs" in err[0] and "Traceback" not in err[0], err
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("value", ["[0.3, 0.2]", "[0.1]", '[0.1, "x"]', "0.5", "[-1, 0]"])
def test_bad_costs_in_the_study_is_one_line(value: str, tmp_path: Path) -> None:
    study = _study(tmp_path, f"[map]\ncosts = {value}\n")
    assert_user_error(
        run_cli(["grid", str(study), "--out", str(tmp_path / "o")], tmp_path), "s.toml", "map.costs"
    )


def test_cli_band_writes_a_partial_map_that_the_distance_does_not_read(tmp_path: Path) -> None:
    study = _study(tmp_path, "[map]\nresolution = 41\n")
    out = tmp_path / "o"
    main_ok = run_cli(["map", str(study), "--out", str(out), "--costs", "0.05,0.3"], tmp_path)
    assert main_ok.returncode == 0, main_ok.stderr
    assert "restricted to tied costs in [0.05, 0.3]" in main_ok.stdout
    js = json.loads((out / "special.json").read_text())
    assert js["costs"]["band"] == [0.05, 0.3]
    assert js["costs"]["pairs_kept"] == js["stats"]["focus"]["pairs_kept"] < js["costs"]["pairs_total"]
    assert not (out / "special_pieces.json").exists()
    # the stamp's map part is not the whole map's: a banded map is never taken for the whole one
    sr = StudyRun(load_study(study), out, show_progress=False)
    whole = sr.stamp(map_settings=sr.map_settings())["fingerprint_parts"]["map"]
    banded = sr.stamp(map_settings=sr.map_settings(costs=(0.05, 0.3)))["fingerprint_parts"]["map"]
    assert js["fingerprint_parts"]["map"] == banded != whole
    reduced = DistanceSettings(method="reduced")
    assert sr.reads_stored_map(reduced) is False and sr.stored_atlas(sr.map_settings()) is None
    # with the band in the study file too, the distance takes its focused source, never the banded map
    sr2 = StudyRun(
        load_study(_study(tmp_path, "[map]\nresolution = 41\ncosts = [0.05, 0.3]\n", "t.toml")), out
    )
    sr2.show_progress = False
    assert sr2.reads_stored_map(reduced) is False
    assert callable(sr2.distance_atlas(reduced)) and sr2.maps_made == 0


def test_whole_map_refusal_names_the_costs_remedy_and_a_band_too_large_is_refused(tmp_path: Path) -> None:
    study = _study(tmp_path)
    line = assert_user_error(
        run_cli(["map", str(study), "--out", str(tmp_path / "o"), "--memory", "1MB"], tmp_path),
        "s.toml",
        "map",
    )
    assert "[map] costs = [lo, hi] (--costs lo,hi)" in line
    # the banded map's own preflight: over a 1 MB budget (the interpreter alone is estimated at 150 MB)
    line = assert_user_error(
        run_cli(
            ["map", str(study), "--out", str(tmp_path / "p"), "--memory", "1MB", "--costs", "0.05,0.3"],
            tmp_path,
        ),
        "s.toml",
        "map.costs",
        "a narrower band",
    )
    assert not (tmp_path / "p").exists()


def test_the_refusal_suggests_a_band_around_the_distance_in_the_folder(tmp_path: Path) -> None:
    # a distance.json of the same inputs and window: the band offered is [0.9 D, the largest upper bound]
    study = _study(tmp_path)
    out = tmp_path / "o"
    out.mkdir()
    sr = StudyRun(load_study(study), out, show_progress=False)
    head = sr.stamp(distance_settings=DistanceSettings())
    (out / "distance.json").write_text(
        json.dumps({"value": 0.2, "by_degree": {"0": {"bounds": [0.2, 0.25]}}, **head})
    )
    assert sr.suggested_band() == pytest.approx((0.18, 0.25))
    from specmap.special.preflight import AtlasTooLargeError

    with pytest.raises(AtlasTooLargeError) as exc:
        sr.atlas(memory=1e6)
    assert "costs = [0.18, 0.25] (--costs 0.18,0.25)" in exc.value.one_line()


def test_perturbation_runs_map_the_same_band(tmp_path: Path) -> None:
    # settings plumbing: [perturb] inherits [map] costs; each run maps the band; the run set's
    # fingerprint (settings JSON) has costs only when set, so older run sets keep theirs
    study = load_study(
        _study(
            tmp_path,
            '[map]\nresolution = 31\ncosts = [0.05, 0.3]\n[perturb]\nmodel = "grid"\nsize = 0.01\nruns = 2\n',
        )
    )
    ps = study.perturb_settings()
    assert ps.costs == (0.05, 0.3) and ps.map_settings.costs == (0.05, 0.3)
    assert "costs" not in PerturbSettings().to_json() and ps.to_json()["costs"] == [0.05, 0.3]
    sr = StudyRun(study, tmp_path / "o", show_progress=False)
    summary = sr.write_perturb(runs=2)
    rows = [json.loads(x) for x in (tmp_path / "o" / "perturb" / "runs.jsonl").read_text().splitlines()]
    assert len(rows) == 2 and summary["settings"]["costs"] == [0.05, 0.3]
    assert summary["fingerprint_parts"]["map"] == sr.stamp(map_settings=study.map)["fingerprint_parts"]["map"]


def test_point_contacts_are_the_strtree_dwithin_pairs() -> None:
    # reference: shapely's STRtree.query(points, predicate="dwithin") over the lines and points (GEOS
    # distances); the points sit on line vertices, inside segments, and eps / 2 and 2 eps off them
    from specmap.special.components import point_contacts

    rng = np.random.default_rng(4)
    step = (0.03, 0.07)
    lines = []
    for _ in range(60):  # chords shorter than a cell, as the traced curves are
        start = rng.uniform([0.0, -1.0], [1.0, 1.0])
        lines.append(shapely.LineString(start + np.cumsum(rng.uniform(-0.5, 0.5, (8, 2)) * step, axis=0)))
    eps = 1e-9
    pts = []
    for ln in lines[:40]:
        c = shapely.get_coordinates(ln)
        k = int(rng.integers(0, len(c) - 1))
        mid = c[k] + rng.uniform() * (c[k + 1] - c[k])
        normal = np.array([c[k + 1][1] - c[k][1], c[k][0] - c[k + 1][0]])
        normal /= np.hypot(*normal)
        pts += [c[k], mid, mid + 0.5 * eps * normal, mid + 2 * eps * normal]
    pts += [pts[0] + [0.3 * eps, 0.0], rng.uniform([0.0, -1.0], [1.0, 1.0])]
    pts = np.array(pts)
    geoms = shapely.points(pts)
    tree = shapely.STRtree(np.concatenate([np.array(lines, dtype=object), geoms]))
    qi, ti = tree.query(geoms, predicate="dwithin", distance=eps)
    want = {(int(i), int(j)) for i, j in zip(qi, ti, strict=True)}
    pp_i, pp_j, pl_p, pl_l = point_contacts(pts, lines, eps)
    got = {(int(i), int(j) + len(lines)) for i, j in zip(pp_i, pp_j, strict=True)}
    got |= {(int(i), int(j)) for i, j in zip(pl_p, pl_l, strict=True)}
    assert got == want and len(want) > len(pts)  # contacts beyond each point with itself
