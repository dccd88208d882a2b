"""Mesh hygiene on reading: loose vertices, duplicates, collapsed triangles, components.

Expected counts are closed form, derived in each test from how the file is
built. The octahedron has V = 6, E = 12, F = 8, so V - E + F = 2, the Euler
characteristic of the sphere [Milnor 1963]; for k disjoint spheres it is 2k.
"""

from __future__ import annotations

import numpy as np
import pytest

from specmap.errors import MeshError
from specmap.shapes.meshes import clean_mesh, euler_characteristic, read_mesh, write_mesh


def octahedron(shift=0.0):
    V = np.array([[1, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0], [0, 0, 1], [0, 0, -1]], dtype=float)
    V[:, 0] += shift
    T = np.array([[0, 2, 4], [2, 1, 4], [1, 3, 4], [3, 0, 4], [2, 0, 5], [1, 2, 5], [3, 1, 5], [0, 3, 5]])
    return V, T


@pytest.mark.parametrize("suffix", [".off", ".ply", ".obj"])
def test_loose_vertices_dropped_and_counted(tmp_path, suffix, capsys):
    V, T = octahedron()
    loose = np.array([[5.0, 5, 5], [6.0, 6, 6], [7.0, 7, 7]])  # 3 vertices on no triangle
    V2 = np.vstack([V[:2], loose, V[2:]])  # loose ones in the middle: indices must shift
    T2 = np.where(T >= 2, T + 3, T)
    path = tmp_path / f"oct{suffix}"
    write_mesh(path, V2, T2)
    counts: dict = {}
    Vc, Tc, _ = read_mesh(path, counts=counts)
    assert counts["loose_vertices"] == 3  # closed form: 3 added
    assert counts["duplicate_vertices"] == 0
    assert counts["components"] == 1
    assert Vc.shape == (6, 3) and Tc.shape == (8, 3)
    assert euler_characteristic(Vc, Tc) == 2  # sphere [Milnor 1963]
    np.testing.assert_array_equal(Vc, V)
    assert "3 vertices on no triangle" in capsys.readouterr().err


def test_loose_vertices_drop_fields_consistently(tmp_path):
    V, T = octahedron()
    V2 = np.vstack([V, [[9.0, 9, 9]]])
    vals = np.column_stack([V2[:, 0], V2[:, 2]])  # f1 = x, f2 = z
    path = tmp_path / "oct.ply"
    write_mesh(path, V2, T, vals)
    Vc, Tc, values = read_mesh(path, fields=("f1", "f2"))
    assert values.shape == (6, 2)
    np.testing.assert_allclose(values, np.column_stack([Vc[:, 0], Vc[:, 2]]))


def test_two_disjoint_octahedra_accepted(tmp_path):
    V1, T1 = octahedron()
    V2, T2 = octahedron(shift=5.0)
    path = tmp_path / "two.off"
    write_mesh(path, np.vstack([V1, V2]), np.vstack([T1, T2 + 6]))
    counts: dict = {}
    Vc, Tc, _ = read_mesh(path, counts=counts)
    assert counts["components"] == 2
    assert len(Vc) == 12 and len(Tc) == 16
    assert euler_characteristic(Vc, Tc) == 4  # two spheres: 2 + 2 [Milnor 1963]


def test_duplicate_vertex_merged(tmp_path):
    V, T = octahedron()
    # vertex 4 (north pole) duplicated as vertex 6; half of its triangles use the copy
    V2 = np.vstack([V, V[4:5]])
    T2 = T.copy()
    T2[:2] = np.where(T2[:2] == 4, 6, T2[:2])
    path = tmp_path / "dup.off"
    write_mesh(path, V2, T2)
    counts: dict = {}
    Vc, Tc, _ = read_mesh(path, counts=counts)
    assert counts["duplicate_vertices"] == 1  # closed form: one copy added
    assert counts["loose_vertices"] == 0
    assert counts["collapsed_triangles"] == 0
    assert len(Vc) == 6 and len(Tc) == 8
    assert euler_characteristic(Vc, Tc) == 2  # [Milnor 1963]


def test_collapsed_triangle_after_merge_dropped():
    V, T = octahedron()
    # add a copy of vertex 0 and a triangle (0, copy, 2): collapses after merging
    V2 = np.vstack([V, V[0:1]])
    T2 = np.vstack([T, [[0, 6, 2]]])
    Vc, Tc, _, counts = clean_mesh(V2, T2)
    assert counts == {
        "loose_vertices": 0,
        "duplicate_vertices": 1,
        "collapsed_triangles": 1,
        "zero_area_triangles": 0,
        "components": 1,
    }
    assert len(Vc) == 6 and len(Tc) == 8


def test_zero_area_collinear_triangle_counted():
    # closed form: three collinear points give a cross product of zero
    V = np.array([[0.0, 0, 0], [1, 0, 0], [2, 0, 0]])
    _, _, _, counts = clean_mesh(V, np.array([[0, 1, 2]]))
    assert counts["zero_area_triangles"] == 1


def test_open_and_nonmanifold_still_refused(tmp_path):
    V, T = octahedron()
    path = tmp_path / "open.off"
    write_mesh(path, V, T[:-1])  # one triangle removed: 3 boundary edges
    with pytest.raises(MeshError, match="not closed: 3 boundary edges"):
        read_mesh(path)
    V1, T1 = octahedron()
    # two octahedra glued along edge 0-2 (shared vertices): that edge is on 4 triangles
    V2 = np.vstack([V1, [[0, 0, 3.0], [0, 0, -3.0], [3.0, 3, 0], [-3.0, 3, 0]]])
    T2 = np.array([[0, 2, 6], [2, 9, 6], [9, 8, 6], [8, 0, 6], [2, 0, 7], [9, 2, 7], [8, 9, 7], [0, 8, 7]])
    path = tmp_path / "nm.off"
    write_mesh(path, V2, np.vstack([T1, T2]))
    with pytest.raises(MeshError, match="not a 2-manifold"):
        read_mesh(path)


def test_hygiene_counts_reach_the_grid_json(tmp_path):
    # issue 11 item 1: the counts of what was cleaned are kept in the grid's meta (grid_f.json)
    import json
    import subprocess
    import sys

    V, T = octahedron()
    loose = np.array([[5.0, 5, 5], [6.0, 6, 6]])  # closed form: 2 loose vertices
    V2 = np.vstack([V, loose])
    for name in ("a", "b"):
        values = np.c_[V2[:, 0] + 0.1 * V2[:, 2], V2[:, 1] - 0.2 * V2[:, 2] + (name == "b") * 0.3 * V2[:, 0]]
        write_mesh(tmp_path / f"{name}.ply", V2, T, values)
    study = tmp_path / "s.toml"
    study.write_text(
        '[study]\nname = "h"\nseed = 1\n[f]\nmesh = "a.ply"\nfields = ["f1", "f2"]\n'
        '[g]\nmesh = "b.ply"\nfields = ["f1", "f2"]\n'
    )
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", "grid", str(study), "--out", str(tmp_path / "o")],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    meta = json.loads((tmp_path / "o" / "grid_f.json").read_text())["meta"]
    assert meta["mesh_hygiene"]["loose_vertices"] == 2


# -- issue 14: a zero-area triangle that no edge flip removes is one clear line, exit 2 -------------
# Closed form, derived here. The tetrahedron on u, v, m, w with m = (u + v) / 2 (exact in binary) is
# a closed 2-manifold (V - E + F = 4 - 6 + 4 = 2) whose triangle (u, v, m) has cross product exactly
# 0: a triangle doubly covered by (u, v, w) and (u, m, w) + (m, v, w). The only flip that removes
# the sliver (u, v, m) is uv -> mw, and mw is already an edge (of (u, m, w)): the flip would put mw
# on four triangles, so the stated rule (specmap/shapes/slivers.py) refuses it. In the second case
# all four vertices lie on one line: every triangle is zero-area and every neighbour is a sliver too.
FLAT_TETRAHEDRA = {
    "doubly_covered_triangle": (
        np.array([[0.0, 0, 0], [2, 0, 0], [1, 0, 0], [0.5, 1, 0]]),  # u, v, m, w
        np.array([[0, 1, 2], [1, 0, 3], [0, 2, 3], [2, 1, 3]]),
        [0],
    ),
    "four_collinear_points": (
        np.array([[0.0, 0, 0], [1, 0, 0], [2, 0, 0], [3, 0, 0]]),
        np.array([[0, 1, 2], [1, 0, 3], [0, 2, 3], [2, 1, 3]]),
        [0, 1, 2, 3],
    ),
}


@pytest.mark.parametrize("case", sorted(FLAT_TETRAHEDRA))
def test_zero_area_triangle_no_flip_removes(case):
    from specmap.shapes.slivers import flip_slivers, zero_area_mask

    V, T, slivers = FLAT_TETRAHEDRA[case]
    assert euler_characteristic(V, T) == 2
    assert np.nonzero(zero_area_mask(V, T))[0].tolist() == slivers
    T2, flipped, left = flip_slivers(V, T)
    assert flipped == 0 and left.tolist() == slivers
    np.testing.assert_array_equal(T2, T)  # nothing was changed on the way


@pytest.mark.parametrize("case", sorted(FLAT_TETRAHEDRA))
def test_zero_area_triangle_no_flip_removes_is_one_line_exit_2(tmp_path, case):
    import subprocess
    import sys

    V, T, slivers = FLAT_TETRAHEDRA[case]
    write_mesh(tmp_path / "flat.off", V, T)
    (tmp_path / "s.toml").write_text(
        '[study]\nname = "t"\n[f]\nmesh = "flat.off"\nmap = ["x", "y"]\n'
        '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\n'
    )
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", "grid", "s.toml", "--out", "r"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert proc.returncode == 2 and len(lines) == 1 and "Traceback" not in proc.stderr, proc.stderr
    assert "flat.off" in lines[0] and "mesh" in lines[0]
    assert f"{len(slivers)} zero-area (collinear) triangles that no edge flip removes" in lines[0]
    assert "re-triangulate" in lines[0]
    assert not (tmp_path / "r").exists()
