"""The remedies of a refused map name only what changes the outcome (issue 11, preflight refusal).

Before, the refusal of `specmap map` suggested ``simplify = "auto"`` even when the study already
had it. Sources of the checks: the project's error contract (design.md "Errors": one line naming
file, field and fix, exit 2) and the planner itself (:func:`specmap.special.preflight.plan_atlas`):
a contour count the remedy says fits must be accepted by the planner under the same budget, and
one more contour per grid refused. The closed form P = N (N - 1) / 2 for the pairs of N contours.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from specmap.settings import MapSettings
from specmap.special.preflight import AtlasTooLargeError, map_remedies, plan_atlas

ROOT = Path(__file__).resolve().parents[1]
MET = {"setting": "auto", "contours_after": 54, "budget": 60, "met": True}
CAPPED = {"setting": "auto", "contours_after": 97, "budget": 60, "met": False}


def test_without_simplification_simplify_comes_first() -> None:
    fix = map_remedies(97, 54, 61, budget=12e9)
    assert fix.startswith('set simplify = "auto"')
    assert "--pairs roles" in fix and "--method dense" in fix


def test_auto_already_met_suggests_a_contour_budget_that_the_planner_accepts() -> None:
    budget = 4e9
    fix = map_remedies(97, 54, 61, budget=budget, given_budget=True, pairs="roles", simplified=(MET, MET))
    assert "set simplify" not in fix and "--pairs roles" not in fix
    m = re.search(r"max_contours: about (\d+) contours per grid", fix)
    assert m, fix
    k = int(m[1])
    plan_atlas(k, k, 61, budget=budget)  # accepted (no exception)
    with pytest.raises(AtlasTooLargeError):
        plan_atlas(k + 1, k + 1, 61, budget=budget)


def test_auto_stopped_at_its_cap_is_not_told_to_lower_its_budget() -> None:
    # f's "auto" stopped at its cap: a lower max_contours gives the same f, so the count offered is g's
    # alone, with f's 97 contours kept; g cannot go low enough here, so no contour budget is offered
    fix = map_remedies(97, 54, 61, budget=2e9, pairs="roles", simplified=(CAPPED, MET))
    assert "f: simplify" in fix and "coarser" in fix
    assert "contours per grid" not in fix and "contours on g" not in fix
    few = map_remedies(
        30,
        54,
        61,
        budget=1e9,
        given_budget=True,
        pairs="roles",
        simplified=({**CAPPED, "contours_after": 30}, MET),
    )
    m = re.search(r"about (\d+) contours on g", few)
    assert m, few
    plan_atlas(30, int(m[1]), 61, budget=1e9)  # a --memory budget of 1 GB
    with pytest.raises(AtlasTooLargeError):
        plan_atlas(30, int(m[1]) + 1, 61, budget=1e9)


def test_a_delta_side_is_told_to_grow_its_delta() -> None:
    fix = map_remedies(97, 54, 61, budget=12e9, simplified=({"setting": 0.01, "met": None}, None))
    assert "a larger simplify delta on f" in fix and "set simplify" not in fix


def test_cli_refusal_of_an_auto_simplified_pair(tmp_path: Path) -> None:
    # the shipped knob meshes, simplify = "auto" on both sides under a budget they meet; a map
    # budget of 300 MB refuses their map (even streamed in tiles); the line must not suggest what is already set
    for name in ("knob_a.ply", "knob_b.ply"):
        shutil.copy(ROOT / "studies" / "data" / name, tmp_path / name)
    (tmp_path / "s.toml").write_text(
        '[study]\nname = "t"\nseed = 1\n'
        '[f]\nmesh = "knob_a.ply"\nfields = ["f1", "f2"]\nsimplify = "auto"\n'
        '[g]\nmesh = "knob_b.ply"\nfields = ["f1", "f2"]\nsimplify = "auto"\n'
        '[map]\npairs = "roles"\nmax_contours = 20\n'
    )
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", "map", "s.toml", "--out", "o", "--memory", "300MB"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 2, proc.stderr
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in proc.stderr, proc.stderr
    line = lines[0]
    assert "s.toml" in line and "map" in line
    assert "set simplify" not in line and "--pairs roles" not in line, line
    m = re.search(r"(\d+) \+ (\d+) contours \((\d+) pairs", line)
    assert m, line
    n = int(m[1]) + int(m[2])
    assert int(m[3]) == n * (n - 1) // 2
    k = re.search(r"max_contours \(now 20\): about (\d+) contours per grid", line)
    assert k, line
    res = MapSettings().resolution  # the study gives none: the default lattice
    plan_atlas(int(k[1]), int(k[1]), res, budget=300e6)
    with pytest.raises(AtlasTooLargeError):
        plan_atlas(int(k[1]) + 1, int(k[1]) + 1, res, budget=300e6)
    assert not (tmp_path / "o").exists()
