"""The audits on the shipped studies: green where the theory holds (issue 13 item 2).

Every shipped study with two surfaces or meshes (the grid-only ladder and the fetched scans have no
slices) satisfies the position theorem of [CEF19] up to the mesh term: on each audited line the
persistence-diagram coordinates of pairs longer than 2 delta (delta = the largest change of F*
along one mesh edge) lie on the contours of the extended Pareto grids, within the grid tolerance
plus delta (bottleneck stability, [CDFFL13]). The audit must then explain all of them; the
broken-grid case that must be red is in tests/test_certify.py. The slow test runs the whole
distance stage of each study and asks the theorem audit (both ways) to be quiet too.

References
----------
.. [CEF19] Cerri, Ethier, Frosini, "On the geometrical properties of the coherent matching
   distance in 2D persistent homology", J. Appl. Comput. Topol. (2019).
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in multidimensional persistent
   homology are stable functions", Math. Methods Appl. Sci. (2013).
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import pytest

from specmap.distance.audit import position_audit
from specmap.distance.bounds import value_range
from specmap.distance.compose import TOLERANCE_FRACTION
from specmap.pipeline import StudyRun
from specmap.study import load_study

ROOT = Path(__file__).resolve().parents[1]
WITH_SLICES = ("demo", "pebbles", "knob", "ring")


@pytest.mark.parametrize("name", WITH_SLICES)
def test_position_audit_is_green_on_the_shipped_study(name):
    run = StudyRun(load_study(ROOT / "studies" / f"{name}.toml"), Path("unused"), show_progress=False)
    (sf, sg), grids, w = run.shapes, run.grids, run.window
    given = run.study.distance.tolerance  # the distance stage's tolerance, as it passes it
    tol = TOLERANCE_FRACTION * value_range(sf, sg) if given is None else given
    got = position_audit(sf, sg, grids, w, tolerance=tol, lines=8, seed=5)
    assert got["coordinates"] > 0
    assert got["fraction_explained"] == 1.0, got["worst"]
    # and it can fail: without the contour that carries the most points of f's grid it is red (on 20
    # lines, enough to meet that contour on every study)
    gf, gg = grids
    longest = max(gf.contours, key=lambda c: len(c.points))
    broken = (dataclasses.replace(gf, contours=tuple(c for c in gf.contours if c is not longest)), gg)
    red = position_audit(sf, sg, broken, w, tolerance=tol, lines=20, seed=5)
    assert red["fraction_explained"] < 1.0


@pytest.mark.slow
@pytest.mark.parametrize("name", WITH_SLICES)
def test_distance_audits_are_green_on_the_shipped_study(name, tmp_path):
    from specmap.cli import run as cli_run

    assert (
        cli_run(["--quiet", "distance", str(ROOT / "studies" / f"{name}.toml"), "--out", str(tmp_path)]) == 0
    )
    audit = json.loads((tmp_path / "distance.json").read_text())["audit"]
    theorem = audit["theorem"]
    assert not (
        theorem["reduced_above_upper"] or theorem["dense_above_reduced"] or theorem["strip_above_reduced"]
    )
    assert audit["position"]["fraction_explained"] == 1.0
