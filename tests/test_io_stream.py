"""The streamed JSON writer writes the bytes the whole-object writer writes (issue 14 item 3).

Source: the standard library's ``json.dumps(obj, indent=2)`` (through ``io.write_json``) is the
reference; the streamed writer must agree byte for byte on arbitrary JSON values.
"""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from specmap.io import write_json, write_json_streamed

json_values = st.recursive(
    st.none()
    | st.booleans()
    | st.integers(-(10**6), 10**6)
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=5),
    lambda kids: st.lists(kids, max_size=4) | st.dictionaries(st.text(max_size=4), kids, max_size=4),
    max_leaves=20,
)


@settings(max_examples=150, deadline=None)
@given(
    head=st.dictionaries(st.text(max_size=4), json_values, max_size=4),
    items=st.lists(json_values, max_size=5),
    at=st.integers(0, 4),
)
def test_streamed_bytes_equal_whole_object(tmp_path_factory, head, items, at):
    d = tmp_path_factory.mktemp("s")
    keys = list(head)
    key = "features"
    head.pop(key, None)
    keys = [k for k in keys if k != key]
    keys.insert(min(at, len(keys)), key)
    ordered = {k: (None if k == key else head[k]) for k in keys}
    write_json_streamed(d / "a.json", ordered, key, iter(items))
    write_json(d / "b.json", {**ordered, key: items})
    assert (d / "a.json").read_bytes() == (d / "b.json").read_bytes()


def test_atlas_geojson_streamed_equals_whole(tmp_path: Path):
    from specmap.special import special_set
    from specmap.strip import Window
    from tests.gridgen import random_pair

    gf, gg = random_pair(3, 8)
    atlas = special_set(gf, gg, Window((0.05, 0.95), (-1.0, 1.0)), resolution=31)
    write_json_streamed(tmp_path / "a.geojson", atlas.geojson_head(), "features", atlas.iter_features())
    write_json(tmp_path / "b.geojson", atlas.to_geojson())
    assert (tmp_path / "a.geojson").read_bytes() == (tmp_path / "b.geojson").read_bytes()


def test_lazy_geojson_features_write_the_same_bytes(tmp_path: Path):
    # reference: json.dumps(indent=2) of the whole FeatureCollection (write_json). The map CLI writes
    # multi-part coordinates one part at a time (Atlas.iter_features_streamed, plain=True): same bytes,
    # on curves (random pair) and on a patch crossed by curves (verticals at 0, 1 and 3, 4 tie on the
    # whole window: closed form, see tests/test_tiles.py)
    from specmap.grids.model import Contour, Grid
    from specmap.special import special_set
    from specmap.strip import Window
    from tests.gridgen import random_pair

    w = Window((0.05, 0.95), (-1.0, 1.0))
    rf, rg = random_pair(3, 6)
    vf = (Contour("f:v90", "vertical", [0.0, -50.0]), Contour("f:v91", "vertical", [1.0, -50.0]))
    vg = (Contour("g:v90", "vertical", [3.0, -50.0]), Contour("g:v91", "vertical", [4.0, -50.0]))
    patchy = (Grid(vf + rf.contours), Grid(vg + rg.contours))
    for gf, gg in (random_pair(1, 14), patchy):
        atlas = special_set(gf, gg, w, resolution=31, reading="contours")
        lazy = atlas.iter_features_streamed()
        write_json_streamed(tmp_path / "a.geojson", atlas.geojson_head(), "features", lazy, plain=True)
        write_json(tmp_path / "b.geojson", atlas.to_geojson())
        assert (tmp_path / "a.geojson").read_bytes() == (tmp_path / "b.geojson").read_bytes()
    assert atlas.counts()["patch"] >= 1 and atlas.stats["tie_curves"] > 0  # curves over the patch


def test_compact_geojson_is_the_same_json_one_feature_a_line(tmp_path: Path):
    # reference: json.loads of json.dumps(indent=2) of the whole FeatureCollection (write_json); the
    # map writes special.geojson compact (one feature a line), lazily made parts included
    from specmap.special import special_set
    from specmap.strip import Window
    from tests.gridgen import random_pair

    gf, gg = random_pair(1, 14)
    atlas = special_set(gf, gg, Window((0.05, 0.95), (-1.0, 1.0)), resolution=31, reading="contours")
    lazy = atlas.iter_features_streamed()
    write_json_streamed(
        tmp_path / "a.geojson", atlas.geojson_head(), "features", lazy, plain=True, compact=True
    )
    write_json(tmp_path / "b.geojson", atlas.to_geojson())
    a, b = (tmp_path / "a.geojson").read_bytes(), (tmp_path / "b.geojson").read_bytes()
    assert json.loads(a) == json.loads(b) and len(json.loads(a)["features"]) > 0
    assert len(a) < 0.5 * len(b)
    lines = a.decode().splitlines()
    assert sum(1 for line in lines if line.lstrip().startswith('{"type":"Feature"')) == len(
        json.loads(a)["features"]
    )


def test_interrupted_stream_leaves_no_file(tmp_path: Path):
    def items():
        yield {"ok": 1}
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        write_json_streamed(tmp_path / "x.json", {"features": None}, "features", items())
    assert list(tmp_path.iterdir()) == []


def test_streamed_file_mode_honours_umask(tmp_path: Path):
    old = os.umask(0o022)
    try:
        write_json_streamed(tmp_path / "m.json", {"f": None}, "f", iter([1]))
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "m.json").stat().st_mode) == 0o644
