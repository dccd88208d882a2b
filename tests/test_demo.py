"""End to end: the shipped studies and the demo (issue: reports and the demo).

The PDF is read back with pypdf (a reference reader, independent of matplotlib) and its
text must carry the numbers of the JSON results it was built from.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from decimal import ROUND_HALF_UP, Decimal
from pathlib import Path

import pytest
from pypdf import PdfReader

ROOT = Path(__file__).resolve().parents[1]
STUDIES = sorted((ROOT / "studies").glob("*.toml"))


def run_cli(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=900,
    )


@pytest.mark.parametrize("study", STUDIES, ids=[s.stem for s in STUDIES])
def test_grid_works_on_every_shipped_study(study: Path, tmp_path: Path) -> None:
    if study.stem == "scans" and not (study.parent / "data" / "scans" / "cow.ply").is_file():
        pytest.skip("real scans are fetched, not shipped: run python3 studies/data/fetch_scans.py")
    proc = run_cli(["grid", str(study), "--out", str(tmp_path / "out")], tmp_path)
    assert proc.returncode == 0, proc.stderr
    for name in ("grid_f.json", "grid_g.json", "study.json", "figures/grids.png"):
        assert (tmp_path / "out" / name).is_file()
    grid = json.loads((tmp_path / "out" / "grid_f.json").read_text())
    assert grid["format"] == "specmap-grid/1" and grid["contours"]


def test_demo_quick_end_to_end(tmp_path: Path) -> None:
    out = tmp_path / "results"
    pdf = tmp_path / "demo.pdf"
    pdf.write_bytes(b"an older report")  # the demo must say that it replaced it
    proc = run_cli(["demo", "--quick", "--out", str(out), "--pdf", str(pdf), "--jobs", "2"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    lines = proc.stdout.splitlines()
    assert any(ln.startswith("matching distance: D = ") for ln in lines), proc.stdout
    assert any(ln.startswith("verdict: ") for ln in lines), proc.stdout
    assert any(ln.startswith(f"report copied to {pdf} (replaced the previous file") for ln in lines), (
        proc.stdout
    )
    assert not any("0000000" in ln for ln in lines)  # numbers are rounded, not 16 digits
    # the command is recorded once, with its options
    cmds = json.loads((out / "study.json").read_text())["commands"]
    assert len(cmds) == 1 and "--quick" in cmds[0]["command"] and "--jobs 2" in cmds[0]["command"]
    for name in (
        "grid_f.json",
        "special.json",
        "special.geojson",
        "distance.json",
        "perturb/runs.jsonl",
        "perturb/summary.json",
        "report.pdf",
    ):
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
    # D to the digits it resolves (the rule, written out here): the place of the leading digit of the
    # width of the top degree's interval (else the tolerance), rounded half up
    top = max(dist["by_degree"].values(), key=lambda v: v["value"])
    lo, hi = (float(x) for x in top.get("bounds") or (0.0, 0.0))
    width = hi - lo if math.isfinite(hi - lo) and hi > lo else float(dist["tolerance"])
    place = math.floor(math.log10(width))
    place += 10.0 ** (place + 1) <= width
    shown = f"{Decimal(repr(dist['value'])).quantize(Decimal(1).scaleb(place), rounding=ROUND_HALF_UP):f}"
    assert shown in flat
    assert f"D = {shown}" in proc.stdout
    counts = special["counts"]
    assert f"{counts['patch']} patch" in flat
    assert f"{summary['runs_with_patch']} of {summary['runs']}" in flat
    runs = [json.loads(line) for line in (out / "perturb" / "runs.jsonl").read_text().splitlines()]
    assert len({r["run"] for r in runs}) == summary["runs"]


def test_compile_notice_only_when_the_kernels_are_not_cached(monkeypatch, capsys) -> None:
    from specmap import cli

    monkeypatch.setattr(cli, "kernels_cached", lambda: False)
    cli.compile_notice("map", True)
    assert "compiling the numba kernels" in capsys.readouterr().err
    cli.compile_notice("grid", True)  # grid calls no compiled loop
    cli.compile_notice("map", False)  # --quiet
    assert capsys.readouterr().err == ""
    monkeypatch.setattr(cli, "kernels_cached", lambda: True)
    cli.compile_notice("map", True)
    assert capsys.readouterr().err == ""


def test_terminal_lines_pluralise_and_round(tmp_path: Path) -> None:
    study = ROOT / "studies" / "ladder.toml"
    proc = run_cli(["grid", str(study), "--out", str(tmp_path / "o")], tmp_path)
    assert proc.returncode == 0, proc.stderr
    grid = json.loads((tmp_path / "o" / "grid_f.json").read_text())
    n = len(grid["contours"])
    assert f"f {n} contour{'s' if n != 1 else ''}," in proc.stdout
