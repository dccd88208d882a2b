"""Mesh reading and checking: every user mistake gives a MeshError naming file and fix."""

from __future__ import annotations

import numpy as np
import pytest
from meshgen import ellipsoid_mesh, tetra_pair_sharing, torus_mesh

from specmap.errors import MeshError
from specmap.shapes.meshes import (
    check_closed_manifold,
    edges_and_faces,
    euler_characteristic,
    orient_consistently,
    read_mesh,
    write_mesh,
)


@pytest.fixture
def sphere():
    return ellipsoid_mesh((1.0, 1.0, 1.0), 3)


def _raises(path, **kw) -> MeshError:
    with pytest.raises(MeshError) as info:
        read_mesh(path, **kw)
    err = info.value
    text = str(err)
    assert str(path) in text and err.fix, text  # one line naming the file and the fix
    assert "\n" not in text
    return err


def test_missing_file(tmp_path):
    err = _raises(tmp_path / "nope.ply")
    assert "not found" in err.problem


def test_unknown_format_and_garbage(tmp_path):
    p = tmp_path / "m.xyz"
    p.write_text("1 2 3\n")
    assert "format" in _raises(p).problem
    q = tmp_path / "m.ply"
    q.write_text("garbage")
    assert "cannot read" in _raises(q).problem


def test_open_mesh_counts_boundary_edges(tmp_path, sphere):
    V, T = sphere
    p = tmp_path / "open.ply"
    write_mesh(p, V, T[1:])
    err = _raises(p)
    # removing one triangle of a closed surface opens exactly its 3 edges
    assert "not closed" in err.problem and "3 boundary edges" in err.problem


def test_non_manifold_edge(tmp_path, sphere):
    V, T = sphere
    u, v = edges_and_faces(T).edges[0]
    V2 = np.vstack([V, [[5.0, 5.0, 5.0]]])
    T2 = np.vstack([T, [[u, v, len(V)]]])  # a third triangle on edge uv
    p = tmp_path / "fin.ply"
    write_mesh(p, V2, T2)
    err = _raises(p)
    assert "more than two triangles" in err.problem
    Vt, Tt = tetra_pair_sharing("edge")  # closed, but one edge on four triangles
    with pytest.raises(MeshError, match="more than two triangles"):
        check_closed_manifold(Vt, Tt)


def test_pinched_vertex():
    V, T = tetra_pair_sharing("vertex")  # every edge has two triangles; vertex 0 has two link cycles
    with pytest.raises(MeshError, match="link that is not one cycle") as info:
        check_closed_manifold(V, T, file="pinch.off")
    assert "vertex 0" in str(info.value) and info.value.fix


def test_nan_vertex(tmp_path, sphere):
    V, T = sphere
    V = V.copy()
    V[5, 1] = np.nan
    p = tmp_path / "nan.ply"
    write_mesh(p, V, T)
    assert "NaN" in _raises(p).problem


def test_nan_field(tmp_path, sphere):
    V, T = sphere
    vals = V[:, :2].copy()
    vals[3, 0] = np.inf
    p = tmp_path / "inf.ply"
    write_mesh(p, V, T, vals)
    err = _raises(p, fields=("f1", "f2"))
    assert err.field == "f1" and "NaN/inf" in err.problem


def test_unknown_field_lists_available(tmp_path, sphere):
    V, T = sphere
    p = tmp_path / "fields.ply"
    write_mesh(p, V, T, V[:, :2], names=("height", "width"))
    err = _raises(p, fields=("height", "depth"))
    assert err.field == "depth"
    assert "height" in err.problem and "width" in err.problem


def test_quads_rejected(tmp_path):
    import meshio

    cube = np.array([[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)], float)
    quads = np.array([[0, 1, 3, 2], [4, 6, 7, 5], [0, 4, 5, 1], [2, 3, 7, 6], [0, 2, 6, 4], [1, 5, 7, 3]])
    p = tmp_path / "cube.obj"
    meshio.write(p, meshio.Mesh(cube, [("quad", quads)]))
    err = _raises(p)
    assert "not triangles" in err.problem and "triangulate" in err.fix
    q = tmp_path / "cube.off"  # meshio's OFF reader refuses polygons itself
    q.write_text(
        "OFF\n8 6 0\n"
        + "".join(f"{x} {y} {z}\n" for x, y, z in cube)
        + "".join("4 " + " ".join(map(str, f)) + "\n" for f in quads)
    )
    assert "triangulate" in _raises(q).fix


def test_ply_round_trip_fields(tmp_path):
    V, T = torus_mesh(2.0, 1.0, 12, 8)
    rng = np.random.default_rng(0)
    vals = rng.normal(size=(len(V), 2))
    p = tmp_path / "torus.ply"
    write_mesh(p, V, T, vals)
    V2, T2, vals2 = read_mesh(p, fields=("f1", "f2"))
    np.testing.assert_allclose(V2, V)
    np.testing.assert_allclose(vals2, vals)  # PLY keeps vertex properties (float64)
    # same triangles up to orientation repair
    assert {tuple(sorted(t)) for t in T2} == {tuple(sorted(t)) for t in T}
    for ext in (".off", ".obj"):  # geometry only
        q = tmp_path / f"torus{ext}"
        write_mesh(q, V, T)
        V3, T3, none = read_mesh(q)
        assert none is None and len(T3) == len(T)
        np.testing.assert_allclose(V3, V, atol=1e-6)


def test_euler_characteristic():
    # Euler: chi(sphere) = 2, chi(torus) = 0 [standard]
    assert euler_characteristic(*ellipsoid_mesh((2, 1, 1), 4)) == 2
    assert euler_characteristic(*torus_mesh(2, 1, 10, 6)) == 0
    assert euler_characteristic(*tetra_pair_sharing("edge")) == 2 + 2 - 1  # two spheres sharing an edge


def test_orientation_repair():
    V, T = torus_mesh(2.0, 1.0, 9, 7)
    rng = np.random.default_rng(3)
    flip = rng.random(len(T)) < 0.5
    Tm = T.copy()
    Tm[flip] = Tm[flip][:, ::-1]
    To = orient_consistently(Tm)
    # consistent orientation: every directed edge appears exactly once
    directed = np.concatenate([To[:, [0, 1]], To[:, [1, 2]], To[:, [2, 0]]])
    assert len(np.unique(directed, axis=0)) == len(directed)
    # and the total signed volume (divergence theorem) is the torus volume 2 pi^2 R r^2 up to sign
    a, b, c = (V[To[:, k]] for k in range(3))
    vol = np.einsum("ij,ij->i", a, np.cross(b, c)).sum() / 6
    assert abs(abs(vol) - 2 * np.pi**2 * 2.0) < 0.25 * 2 * np.pi**2 * 2.0


def test_edge_table_matches_brute_force():
    # The one edge/face table (specmap.meshtable) against a dictionary built triangle by triangle
    # in the test (brute force): edges, counts, the two faces, opposite vertices, per-triangle edge ids.
    from specmap.meshtable import edges_and_faces as table_of
    from specmap.meshtable import mesh_edges

    V, T = torus_mesh(2.0, 0.7, 9, 6)
    seen: dict[tuple[int, int], list[tuple[int, int]]] = {}
    for t, tri in enumerate(T.tolist()):
        for k in range(3):
            u, v, w = tri[k], tri[(k + 1) % 3], tri[(k + 2) % 3]
            seen.setdefault((min(u, v), max(u, v)), []).append((t, w))
    keys = sorted(seen)
    table = table_of(T)
    assert table.edges.tolist() == [list(e) for e in keys]
    assert mesh_edges(T).tolist() == table.edges.tolist()
    assert table.counts.tolist() == [len(seen[e]) for e in keys]
    assert table.faces.tolist() == [[f for f, _ in seen[e]] for e in keys]
    assert table.opposite.tolist() == [[w for _, w in seen[e]] for e in keys]
    for t, tri in enumerate(T.tolist()):
        ends = [sorted((tri[k], tri[(k + 1) % 3])) for k in range(3)]
        assert [table.edges[i].tolist() for i in table.triangle_edges[t]] == ends
