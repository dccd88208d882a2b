"""Bad paths give one line, exit status 2, no traceback; ``--quiet`` after the verb; option help.

Source of each expectation: the project's error contract, issue 14 section 2
("--out that is a file, under a file, or read-only; an unreadable study ...;
report --out a directory (and it leaves .NAME.tmp behind); report silently
overwrites any existing file given as --out"; "a directory given as study is
'file not found'"). Messages are checked for what they must name, not wording.
"""

from __future__ import annotations

import importlib.util
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent


def _load(name: str):
    spec = importlib.util.spec_from_file_location(f"_specmap_{name}", HERE / f"{name}.py")
    mod = importlib.util.module_from_spec(spec)
    assert spec.loader is not None
    spec.loader.exec_module(mod)
    return mod


_errors = _load("test_cli_errors")
run_cli, assert_user_error = _errors.run_cli, _errors.assert_user_error
STUDY_TEXT = _errors.HEAD + _errors.GOOD_F + _errors.GOOD_G
make_folder = _load("test_report").make_folder


def _study(tmp_path: Path) -> Path:
    p = tmp_path / "s.toml"
    p.write_text(STUDY_TEXT)
    return p


def _skip_if_root() -> None:
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        pytest.skip("running as root: permissions do not stop root")


# -- 1. --out of a study verb, and the study path ---------------------------------
def test_out_is_existing_file(tmp_path: Path) -> None:
    (tmp_path / "taken").write_text("x")
    proc = run_cli(["grid", str(_study(tmp_path)), "--out", "taken"], tmp_path)
    assert_user_error(proc, "--out", "taken", "folder")
    assert (tmp_path / "taken").read_text() == "x"


def test_out_under_a_file(tmp_path: Path) -> None:
    (tmp_path / "afile").write_text("x")
    proc = run_cli(["grid", str(_study(tmp_path)), "--out", "afile/res"], tmp_path)
    assert_user_error(proc, "--out", "afile", "folder")


def test_out_read_only_folder(tmp_path: Path) -> None:
    _skip_if_root()
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        proc = run_cli(["grid", str(_study(tmp_path)), "--out", "ro"], tmp_path)
        assert_user_error(proc, "--out", "ro", "read-only")
        proc = run_cli(["grid", str(_study(tmp_path)), "--out", "ro/sub"], tmp_path)
        assert_user_error(proc, "--out", "ro/sub")
    finally:
        ro.chmod(0o755)


def test_study_is_a_folder(tmp_path: Path) -> None:
    (tmp_path / "studydir").mkdir()
    proc = run_cli(["grid", "studydir"], tmp_path)
    assert_user_error(proc, "studydir", "folder")
    assert "not found" not in proc.stderr


def test_study_unreadable(tmp_path: Path) -> None:
    _skip_if_root()
    p = _study(tmp_path)
    p.chmod(0o000)
    try:
        proc = run_cli(["grid", str(p)], tmp_path)
        assert_user_error(proc, "s.toml", "permission denied")
    finally:
        p.chmod(0o644)


# -- 2. report --out ----------------------------------------------------------------
def test_report_out_is_a_folder_no_tmp_left(tmp_path: Path) -> None:
    res = make_folder(tmp_path / "res")
    target = tmp_path / "pdfdir"
    target.mkdir()
    proc = run_cli(["report", str(res), "--out", str(target)], tmp_path)
    assert_user_error(proc, "--out", "folder")
    assert not list(tmp_path.glob(".*.tmp")) and not list(target.glob(".*.tmp"))
    assert list(target.iterdir()) == []


def test_report_out_existing_file_needs_force(tmp_path: Path) -> None:
    res = make_folder(tmp_path / "res")
    target = tmp_path / "old.pdf"
    target.write_text("keep me")
    proc = run_cli(["report", str(res), "--out", str(target)], tmp_path)
    assert_user_error(proc, "--out", "--force")
    assert target.read_text() == "keep me"
    proc = run_cli(["report", str(res), "--out", str(target), "--force"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert target.read_bytes().startswith(b"%PDF")
    assert not list(tmp_path.glob(".*.tmp"))


def test_report_out_under_a_file(tmp_path: Path) -> None:
    res = make_folder(tmp_path / "res")
    (tmp_path / "afile").write_text("x")
    proc = run_cli(["report", str(res), "--out", str(tmp_path / "afile" / "r.pdf")], tmp_path)
    assert_user_error(proc, "--out", "afile")


# -- 3. --quiet after the verb --------------------------------------------------------
def test_quiet_after_verb(tmp_path: Path) -> None:
    from specmap.cli import build_parser

    p = build_parser()
    for verb in (
        ["grid", "s.toml"],
        ["map", "s.toml"],
        ["distance", "s.toml"],
        ["perturb", "s.toml"],
        ["report", "d"],
        ["demo"],
    ):
        assert p.parse_args([*verb, "--quiet"]).quiet is True, verb
        assert p.parse_args(["--quiet", *verb]).quiet is True, verb
        assert p.parse_args(verb).quiet is False, verb
    res = make_folder(tmp_path / "res")
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "report", str(res), "--quiet"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr


# -- 4. help for --runs, --jobs, --method ---------------------------------------------
def test_help_for_runs_jobs_method() -> None:
    from specmap.cli import build_parser

    p = build_parser()
    sub = next(a for a in p._actions if a.dest == "verb")
    seen = 0
    for name, sp in sub.choices.items():
        for act in sp._actions:
            if act.dest in ("runs", "jobs", "method"):
                seen += 1
                assert act.help and act.help.strip(), (name, act.dest)
    assert seen >= 5


# -- the same checks in process, with denied permissions simulated (they run as root too) --
def test_read_only_out_simulated(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from specmap.errors import SpecmapInputError
    from specmap.pipeline import check_out_dir
    from specmap.report.pdf import _check_out_pdf

    monkeypatch.setattr(os, "access", lambda *a, **k: False)
    for path in (tmp_path, tmp_path / "new" / "sub"):
        with pytest.raises(SpecmapInputError) as exc:
            check_out_dir(path)
        assert "--out" in exc.value.one_line() and "read-only" in exc.value.one_line()
        assert not (tmp_path / "new").exists()
    with pytest.raises(SpecmapInputError) as exc:
        _check_out_pdf(tmp_path / "r.pdf", overwrite=False)
    assert "--out" in exc.value.one_line() and "read-only" in exc.value.one_line()


def test_unreadable_study_simulated(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from specmap.cli import check_study_path
    from specmap.errors import SpecmapInputError

    p = _study(tmp_path)

    def denied(self, *a, **k):
        raise PermissionError(13, "Permission denied", str(self))

    monkeypatch.setattr(Path, "open", denied)
    with pytest.raises(SpecmapInputError) as exc:
        check_study_path(str(p))
    assert "s.toml" in exc.value.one_line() and "permission denied" in exc.value.one_line()


# -- 3. an unreadable grid file (issue 14 section 2: PermissionError became a traceback) ---------
_GRID_TEXT = (
    '{"format": "specmap-grid/1", "contours": [{"id": "p0", "kind": "proper", "points": [[0, 1], [1, 0]]}]}'
)


def _grid_study(tmp_path: Path) -> Path:
    (tmp_path / "s.toml").write_text(_errors.HEAD + '[f]\ngrid = "g.json"\n[g]\ngrid = "g.json"\n')
    return tmp_path / "s.toml"


def test_grid_file_unreadable_by_permissions(tmp_path: Path) -> None:
    # chmod 000 stops every user but root; as root the next two tests make the file unreadable
    _skip_if_root()
    _grid_study(tmp_path)
    g = tmp_path / "g.json"
    g.write_text(_GRID_TEXT)
    g.chmod(0o000)
    try:
        assert_user_error(run_cli(["grid", "s.toml"], tmp_path), "g.json", "permission denied")
    finally:
        g.chmod(0o644)


def test_grid_file_replaced_by_a_folder(tmp_path: Path) -> None:
    # a folder in the file's place cannot be read as a file, by root too; the line says what it is
    _grid_study(tmp_path)
    (tmp_path / "g.json").mkdir()
    proc = run_cli(["grid", "s.toml"], tmp_path)
    assert_user_error(proc, "s.toml", "f.grid", "g.json", "folder")
    assert "not found" not in proc.stderr
    assert not (tmp_path / "results").exists()


def test_grid_file_unreadable_simulated(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # a denied read (what chmod 000 gives a normal user), simulated so it runs as root too
    from specmap.errors import SpecmapInputError
    from specmap.grids.model import read_grid

    (tmp_path / "g.json").write_text(_GRID_TEXT)
    assert len(read_grid(tmp_path / "g.json").contours) == 1  # readable, it reads

    def denied(self, *a, **k):
        raise PermissionError(13, "Permission denied", str(self))

    monkeypatch.setattr(Path, "read_text", denied)
    with pytest.raises(SpecmapInputError) as exc:
        read_grid(tmp_path / "g.json")
    line = exc.value.one_line()
    assert "\n" not in line and "g.json" in line and "permission denied" in line


# -- every verb's --help says what the verb does (issue 15, "Terminal") ---------------
def _verbs() -> list[str]:
    """The verbs as ``specmap --help`` lists them (its "VERB" block), not as the parser holds them."""
    out = subprocess.run(
        [sys.executable, "-m", "specmap", "--help"], capture_output=True, text=True, timeout=60
    ).stdout
    block = out.split("positional arguments:", 1)[1].split("options:", 1)[0]
    found = re.findall(r"^ {4}([a-z]+)(.*)$", block, re.MULTILINE)
    assert all(rest.strip() for _, rest in found), found  # each verb listed with its one-line help
    return [name for name, _ in found]


def test_every_verb_help_has_a_description_line() -> None:
    verbs = _verbs()
    assert {"grid", "map", "distance", "perturb", "report", "explore", "demo"} <= set(verbs), verbs
    for verb in verbs:
        proc = subprocess.run(
            [sys.executable, "-m", "specmap", verb, "--help"], capture_output=True, text=True, timeout=60
        )
        assert proc.returncode == 0, (verb, proc.stderr)
        # argparse prints: usage (one or more lines), a blank line, the description, a blank line,
        # then "positional arguments:" or "options:"; without a description the block after the
        # usage is a section heading
        blocks = [b.strip() for b in proc.stdout.split("\n\n")]
        assert blocks[0].startswith(f"usage: specmap {verb}"), (verb, blocks[0])
        desc = blocks[1]
        first = desc.splitlines()[0] if desc else ""
        assert first and not first.endswith(":") and len(desc.split()) >= 4, (verb, desc)
