"""What the terminal shows (issue 15, "Terminal"): counts pluralised, numbers rounded, reached_on in
words, the demo's D per degree and verdict, and a quiet test run.

The expected strings are written out here from the inputs of each case (closed form: the counts and
values given), not read back from the code under test.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

from specmap.cli import REACHED, special_line
from specmap.demo import DemoOutcome, summary_lines

ROOT = Path(__file__).resolve().parents[1]
LONG = re.compile(r"\d\.\d{7,}")  # a number printed with 7 or more decimals (repr of a float)


def test_map_line_pluralises_each_count() -> None:
    one = {"counts": {"curve": 1, "patch": 1, "point": 1}, "area_fraction": 0.5, "stats": {"tie_curves": 1}}
    assert special_line(one, "s.json").startswith(
        "special set: 1 patch, 1 curve component and 1 point component (connected components); "
        "1 tie curve; patches cover 50%"
    )
    many = {"counts": {"curve": 2, "patch": 3, "point": 0}, "area_fraction": 0.123456789, "stats": {}}
    line = special_line(many, "s.json")
    assert "3 patches, 2 curve components and 0 point components" in line
    assert "12.3%" in line and not LONG.search(line)
    # no stats.tie_curves (an older special.json): the tie curves are the ties of curve components
    assert "0 tie curves" in line


# issue 15 item 2: "counts that say 'components' and 'tie curves' separately". The study is two
# ellipsoids under linear maps (as in tests/test_special_reuse.py); at map resolution 21 its special
# set is one patch and one curve component holding many tie curves, so "N curves" would be wrong
WORDS_STUDY = """
[study]
name = "words"
seed = 3

[f]
surface = "ellipsoid"
radii = [2.0, 1.3, 0.7]
map = ["x + 0.4*y - 0.3*z", "0.2*x + y + 0.5*z"]
resolution = 300

[g]
surface = "ellipsoid"
radii = [1.8, 1.4, 0.8]
map = ["x + 0.3*y", "-0.1*x + y + 0.6*z"]
resolution = 300

[map]
resolution = 21
"""


def _kind(n: int, word: str) -> str:
    return f"{n} {word}" + ("" if n == 1 else "s")


def test_map_says_components_and_tie_curves_separately_on_a_small_study(tmp_path: Path) -> None:
    (tmp_path / "s.toml").write_text(WORDS_STUDY)
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", "map", "s.toml", "--out", "r"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    js = json.loads((tmp_path / "r" / "special.json").read_text())
    c, ties = js["counts"], js["stats"]["tie_curves"]
    assert ties > c["curve"]  # the case the wording is for: a component holds several tie curves
    # the expected words are written here from special.json's counts, in the PDF's order
    # (specmap/report/pdf.py, Special set page: patches, curve components, point components)
    patches = f"{c['patch']} patch" + ("" if c["patch"] == 1 else "es")
    want = (
        f"special set: {patches}, {_kind(c['curve'], 'curve component')} and "
        f"{_kind(c['point'], 'point component')} (connected components); {_kind(ties, 'tie curve')}; "
    )
    lines = [ln for ln in proc.stdout.splitlines() if ln.startswith("special set:")]
    assert len(lines) == 1 and lines[0].startswith(want), proc.stdout
    assert not re.search(r"\d curves\b", lines[0])  # no bare "curves" count


def test_reached_on_both_is_defined_in_words() -> None:
    assert "slope-one line" in REACHED["both"] and "special set" in REACHED["both"]
    assert "tolerance" in REACHED["both"]


def _outcome(tmp_path: Path, replaced: bool) -> DemoOutcome:
    distance = {
        "value": 0.27021896734751683,
        "at": [0.5, -0.40331129038211],
        "reached_on": "both",
        "tolerance": 0.0041512345,
        "by_degree": {
            "0": {"value": 0.27021896734751683, "certified": True, "bounds": [0.2702189673, 0.2743698427]},
            "1": {
                "value": 0.18403305094399047,
                "certified": False,
                "bounds": [0.18403305094399047, 0.274369842700693],
                "why_not": "slope-one search stopped at its 200-line cap: bound 0.178 against best 0.1617",
            },
        },
    }
    special = {"counts": {"curve": 1, "patch": 1, "point": 0}, "components": []}
    out = tmp_path / "results"
    return DemoOutcome(
        out,
        out / "report.pdf",
        tmp_path / "demo.pdf",
        replaced,
        distance,
        special,
        "0 of 20 runs kept a patch.",
    )


def test_demo_prints_d_per_degree_the_verdict_and_where_the_report_went(tmp_path: Path) -> None:
    lines = summary_lines(_outcome(tmp_path, replaced=True))
    text = "\n".join(lines)
    # to the digits each value resolves (derived by hand): D_0's interval is 0.00415 wide, so D and D_0
    # print to 1e-3 and the interval rounds outward there; D_1's is 0.0903 wide (1e-2); the numbers
    # inside the reason are values of h, printed to the tolerance 0.00415 (1e-3: 0.1617 -> 0.162)
    assert lines[0].startswith("matching distance: D = 0.270 at (a, b) = (0.5, -0.4033), reached on the")
    assert "  D_0 = 0.270, certified: in [0.270, 0.275]" in lines
    assert (
        "  D_1 = 0.18, not certified: in [0.18, 0.28]. The slope-one search stopped at its 200-line cap "
        "with the bound 0.178 against the best value 0.162."
    ) in lines
    assert "verdict: 0 of 20 runs kept a patch." in lines
    assert "1 patch" in text and "1 curve" in text
    assert f"report copied to {tmp_path / 'demo.pdf'} (replaced the previous file" in text
    assert not LONG.search(text), text
    fresh = "\n".join(summary_lines(_outcome(tmp_path, replaced=False)))
    assert f"report copied to {tmp_path / 'demo.pdf'}" in fresh and "replaced" not in fresh


def test_a_quiet_test_run_prints_only_the_progress_dots(tmp_path: Path) -> None:
    # pytest -q prints a line of dots, then the summary; anything else on stdout is a stray line
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "pytest",
            "-q",
            "-p",
            "no:randomly",
            "-p",
            "no:cacheprovider",
            str(ROOT / "tests" / "test_report.py"),
            "-k",
            "number_helpers or findings_full or why_not_reads",
        ],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stdout + proc.stderr
    lines = [ln for ln in proc.stdout.splitlines() if ln.strip()]
    assert re.fullmatch(r"\.+\s+\[100%\]", lines[0]), proc.stdout
    assert len(lines) == 2 and re.match(r"\d+ passed", lines[1]), proc.stdout


def test_progress_keeps_talking_when_the_total_grows(monkeypatch) -> None:
    # the reduced search plans lines batch by batch after the dense sweep's 625 lines reached 100%;
    # the clock advances 3 s per batch, so over 40 batches (120 s) the 10 s heartbeat prints a line
    # every 4th batch (12 s apart): 40 / 4 = 10 lines (closed form), each saying the total grows
    import io

    from specmap import progress

    now = [0.0]
    monkeypatch.setattr(progress.time, "perf_counter", lambda: now[0])
    out = io.StringIO()
    bar = progress.Progress("distance", stream=out)
    for done in range(0, 626, 125):
        bar(done, 625)
    first = out.getvalue().splitlines()
    assert first[-1].startswith("distance: 625/625 (100%")
    total = 625
    for _ in range(40):
        now[0] += 3.0
        total += 4
        bar(total, total)  # each batch finishes: done == total, the decile stays 10
    later = out.getvalue().splitlines()[len(first) :]
    assert len(later) == 10, later
    assert all("the total grows" in ln for ln in later), later
    assert later[-1].startswith(f"distance: {total}/{total} (100%, 120.0s"), later


def test_progress_is_silent_between_deciles_of_a_fixed_total(monkeypatch) -> None:
    import io

    from specmap import progress

    now = [0.0]
    monkeypatch.setattr(progress.time, "perf_counter", lambda: now[0])
    out = io.StringIO()
    bar = progress.Progress("map", stream=out)
    for done in range(0, 101):
        now[0] += 0.5  # 5 s per decile: the heartbeat (10 s) never comes first
        bar(done, 100)
    lines = out.getvalue().splitlines()
    assert len(lines) == 11 and lines[-1].startswith("map: 100/100 (100%")  # 0%, 10%, ..., 100%
    slow = progress.Progress("map", stream=io.StringIO())
    for done in range(0, 5):
        now[0] += 30.0  # a slow first decile: one line per call, 30 s apart
        slow(done, 100)
    assert len(slow.stream.getvalue().splitlines()) == 5


def test_distance_says_why_it_maps_again_when_special_json_exists(tmp_path: Path) -> None:
    from specmap.cli import remap_note

    assert remap_note(tmp_path, "reduced") is None  # no special.json: nothing to explain
    (tmp_path / "special.json").write_text("{}")
    assert "maps the special set again" in (remap_note(tmp_path, "reduced") or "")
    assert remap_note(tmp_path, "both") == remap_note(tmp_path, "reduced")
    assert remap_note(tmp_path, "dense") is None  # the dense sweep needs no map
