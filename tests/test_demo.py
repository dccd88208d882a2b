"""End to end: the shipped studies and the demo (issue: reports and the demo).

The PDF is read back with pypdf (a reference reader, independent of matplotlib) and its
text must carry the numbers of the JSON results it was built from.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from pypdf import PdfReader

ROOT = Path(__file__).resolve().parents[1]
STUDIES = sorted((ROOT / "studies").glob("*.toml"))


def run_cli(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "specmap", "--quiet", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=900)


@pytest.mark.parametrize("study", STUDIES, ids=[s.stem for s in STUDIES])
def test_grid_works_on_every_shipped_study(study: Path, tmp_path: Path) -> None:
    proc = run_cli(["grid", str(study), "--out", str(tmp_path / "out")], tmp_path)
    assert proc.returncode == 0, proc.stderr
    for name in ("grid_f.json", "grid_g.json", "study.json", "figures/grids.png"):
        assert (tmp_path / "out" / name).is_file()
    grid = json.loads((tmp_path / "out" / "grid_f.json").read_text())
    assert grid["format"] == "specmap-grid/1" and grid["contours"]


def test_demo_quick_end_to_end(tmp_path: Path) -> None:
    out = tmp_path / "results"
    pdf = tmp_path / "demo.pdf"
    proc = run_cli(["demo", "--quick", "--out", str(out), "--pdf", str(pdf), "--jobs", "2"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    for name in ("grid_f.json", "special.json", "special.geojson", "distance.json",
                 "perturb/runs.jsonl", "perturb/summary.json", "report.pdf"):
        assert (out / name).is_file(), name
    reader = PdfReader(str(pdf))
    text = " ".join(page.extract_text() for page in reader.pages)
    flat = " ".join(text.split())
    # one page each: cover, grids, special set, distance, perturbation, findings, methods (at least)
    assert len(reader.pages) >= 7
    for heading in ("Special set", "Matching distance", "Perturbation", "Findings"):
        assert heading in flat, heading
    special = json.loads((out / "special.json").read_text())
    dist = json.loads((out / "distance.json").read_text())
    summary = json.loads((out / "perturb" / "summary.json").read_text())
    assert f"{dist['value']:.4g}" in flat
    counts = special["counts"]
    assert f"{counts['patch']} patch" in flat
    assert f"{summary['runs_with_patch']} of {summary['runs']}" in flat
    runs = [json.loads(line) for line in (out / "perturb" / "runs.jsonl").read_text().splitlines()]
    assert len({r["run"] for r in runs}) == summary["runs"]
