"""``specmap distance`` reads back the map ``specmap map`` wrote (issue 15: distance mapped again).

The check is against the code's own fresh computation: the distance of a folder whose map was
read back must equal, key by key (timings aside), the distance of a fresh folder that maps it;
the pieces read back must be the written pieces bit for bit (hex WKB, exact by construction of
the format, ISO/OGC Simple Features WKB).
"""

from __future__ import annotations

import json
from pathlib import Path

import shapely

from specmap.cli import run
from specmap.pipeline import StudyRun
from specmap.study import load_study

STUDY = """
[study]
name = "reuse"
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
resolution = {res}

[distance]
degrees = [0, 1]
dense_resolution = 11
"""


def _study(tmp: Path, res: int = 31) -> Path:
    p = tmp / f"reuse_{res}.toml"
    p.write_text(STUDY.format(res=res))
    return p


def _timeless(d):  # type: ignore[no-untyped-def]
    """The JSON without wall-clock fields (they differ between any two runs)."""
    if isinstance(d, dict):
        return {k: _timeless(v) for k, v in d.items() if "seconds" not in k}
    if isinstance(d, list):
        return [_timeless(v) for v in d]
    return d


def test_distance_reads_the_written_map_and_gives_the_fresh_distance(tmp_path: Path) -> None:
    study = load_study(_study(tmp_path))
    made = StudyRun(study, tmp_path / "mapped", show_progress=False)
    made.write_map()
    written = made.atlas()
    again = StudyRun(study, tmp_path / "mapped", show_progress=False)
    back = again.stored_atlas(again.map_settings())
    assert back is not None
    # every piece bit for bit and in order (the reduced search names pieces by index)
    assert [(p.tie, p.kind) for p in back.pieces] == [(p.tie, p.kind) for p in written.pieces]
    assert all(
        shapely.to_wkb(p.geometry) == shapely.to_wkb(q.geometry)
        for p, q in zip(back.pieces, written.pieces, strict=True)
    )
    assert [(c.id, c.kind, c.ties, c.reasons) for c in back.components] == [
        (c.id, c.kind, c.ties, c.reasons) for c in written.components
    ]
    assert all(
        shapely.equals_exact(c.geometry, d.geometry, 0.0)
        for c, d in zip(back.components, written.components, strict=True)
    )
    js_reuse = again.write_distance(method="reduced")
    assert again.maps_made == 0  # the mapping stage did not run
    fresh = StudyRun(study, tmp_path / "fresh", show_progress=False)
    js_fresh = fresh.write_distance(method="reduced")
    assert fresh.maps_made == 1
    assert _timeless(js_reuse) == _timeless(js_fresh)
    on_disk = [json.loads((tmp_path / d / "distance.json").read_text()) for d in ("mapped", "fresh")]
    assert _timeless(on_disk[0]) == _timeless(on_disk[1])


def test_a_map_of_other_settings_or_a_torn_file_is_mapped_again(tmp_path: Path) -> None:
    out = tmp_path / "out"
    StudyRun(load_study(_study(tmp_path, 31)), out, show_progress=False).write_map()
    other = StudyRun(load_study(_study(tmp_path, 21)), out, show_progress=False)
    assert other.stored_atlas(other.map_settings()) is None  # the map part of the stamp differs
    same = StudyRun(load_study(_study(tmp_path, 31)), out, show_progress=False)
    assert same.stored_atlas(same.map_settings()) is not None
    pieces = out / "special_pieces.json"
    pieces.write_text(pieces.read_text()[: len(pieces.read_text()) // 2])  # torn
    assert same.stored_atlas(same.map_settings()) is None
    pieces.unlink()  # a folder written before the pieces file existed
    assert same.stored_atlas(same.map_settings()) is None


def test_cli_distance_after_map_does_not_map_again(tmp_path: Path, monkeypatch, capsys) -> None:
    import specmap.special as special

    study = _study(tmp_path)
    out = tmp_path / "cli"
    assert run(["map", str(study), "--out", str(out)]) == 0
    calls = []
    real = special.special_set
    monkeypatch.setattr(special, "special_set", lambda *a, **k: calls.append(1) or real(*a, **k))
    assert run(["distance", str(study), "--out", str(out), "--method", "reduced"]) == 0
    err = capsys.readouterr().err
    assert calls == []
    assert "reading the special set of" in err
    assert "maps the special set again" not in err


def test_a_streamed_map_is_summarised_and_the_distance_maps_its_focused_source(
    tmp_path: Path, monkeypatch
) -> None:
    # reference: the one-piece map and the fresh distance of the same study. A map merged from
    # its tile files (specmap.special.stream: the merged output held whole would not fit, forced
    # here by a huge measured cost per crossing) writes special.json and a streamed GeoJSON but
    # no pieces file; the reduced search then maps its focused source, and D is the same
    from specmap.special import preflight

    path = _study(tmp_path)
    js_one = StudyRun(load_study(path), tmp_path / "one", show_progress=False).write_map()
    path.write_text(path.read_text().replace("[map]\n", '[map]\ntiles = [2, 2]\nmemory = "8GB"\n'))
    study = load_study(path)
    monkeypatch.setattr(preflight, "MERGED_BYTES_PER_CROSSING", 1e12)
    js_st = StudyRun(study, tmp_path / "st", show_progress=False).write_map()
    assert js_st["stats"]["plan"]["streamed"] is True and js_st["stats"]["streamed"] is True
    assert js_st["counts"] == js_one["counts"]
    assert [(c["id"], c["kind"], c["ties"]) for c in js_st["components"]] == [
        (c["id"], c["kind"], c["ties"]) for c in js_one["components"]
    ]
    assert not (tmp_path / "st" / "special_pieces.json").exists()
    feats = json.loads((tmp_path / "st" / "special.geojson").read_text())["features"]
    assert {f["properties"]["component"] for f in feats} == {c["id"] for c in js_st["components"]}
    js_d = StudyRun(study, tmp_path / "st", show_progress=False).write_distance(method="reduced")
    monkeypatch.undo()
    (tmp_path / "plain").mkdir()
    fresh = StudyRun(load_study(_study(tmp_path / "plain")), tmp_path / "fresh", show_progress=False)
    fresh_d = fresh.write_distance(method="reduced")
    assert js_d["value"] == fresh_d["value"] and js_d["value"] > 0
    assert {k: d["value"] for k, d in js_d["by_degree"].items()} == {
        k: d["value"] for k, d in fresh_d["by_degree"].items()
    }
