"""Mesh and study inputs of issue 14 (hardening): each case a one-line error or a correct result.

Sources: the OBJ format (Wavefront, "Object Files (.obj)", Advanced Visualizer manual, appendix
B1: ``v``/``f`` statements, 1-based indices, negative indices count back from the last vertex
defined), the PLY format (Turk 1994: header, ``element``/``property`` lines, binary rows in header
order, a ``list`` being its count then its items), and TOML strings (toml.io v1.0: basic strings
may hold escaped newlines and control characters).
"""

from __future__ import annotations

import struct
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from meshgen import ellipsoid_mesh, torus_mesh

from specmap.errors import MeshError, StudyError
from specmap.shapes.meshes import read_mesh
from specmap.study import load_study


def _one_line_mesh_error(path: Path, **kw) -> str:
    with pytest.raises(MeshError) as info:
        read_mesh(path, **kw)
    text = str(info.value)
    assert "\n" not in text and str(path) in text and info.value.fix, text
    return text


# -- OBJ: relative (negative) indices ------------------------------------------------------------
def _obj(V: np.ndarray, T: np.ndarray, *, relative: bool, interleave: bool) -> tuple[str, np.ndarray]:
    """(OBJ text, face order) written in the test from the spec: ``v x y z`` lines, ``f i j k`` lines.

    ``relative``: every index written as -(vertices defined so far - index), i.e. -1 for the last
    vertex defined (OBJ appendix B1). ``interleave``: each face comes right after the last vertex it
    needs, so the same vertex has different relative numbers on different lines.
    """
    lines: list[str] = []
    defined = 0
    order = np.argsort(T.max(axis=1), kind="stable") if interleave else np.arange(len(T))
    for t in T[order] if interleave else T:
        need = int(t.max()) + 1 if interleave else len(V)
        while defined < need:
            x, y, z = V[defined]
            lines.append(f"v {float(x)!r} {float(y)!r} {float(z)!r}")
            defined += 1
        idx = [int(i) - defined if relative else int(i) + 1 for i in t]
        lines.append("f " + " ".join(str(i) for i in idx))
    return "\n".join(lines) + "\n", order


@pytest.mark.parametrize("interleave", [False, True])
def test_obj_negative_indices_read_like_absolute(tmp_path: Path, interleave: bool) -> None:
    # OBJ appendix B1: "-1" is the vertex defined last before the face line. The file with relative
    # indices and the file with absolute ones describe the same mesh: same vertices and triangles.
    V, T = torus_mesh(2.0, 0.7, 8, 5)
    text_rel, order = _obj(V, T, relative=True, interleave=interleave)
    text_abs, _ = _obj(V, T, relative=False, interleave=interleave)
    faces = [ln.split()[1:] for ln in text_rel.splitlines() if ln.startswith("f ")]
    assert all(w.startswith("-") for f in faces for w in f)
    (tmp_path / "rel.obj").write_text(text_rel)
    (tmp_path / "abs.obj").write_text(text_abs)
    Vr, Tr, _ = read_mesh(tmp_path / "rel.obj")
    Va, Ta, _ = read_mesh(tmp_path / "abs.obj")
    assert np.array_equal(Vr, Va) and np.array_equal(Tr, Ta)
    # and it is the torus: same vertex set, same triangles as vertex triples (orientation aside)
    assert np.array_equal(Vr, V)
    assert sorted(map(sorted, Tr.tolist())) == sorted(map(sorted, T.tolist()))


def test_obj_index_zero_or_before_first_vertex(tmp_path: Path) -> None:
    # OBJ appendix B1: indices count from 1; -k needs k vertices defined above the face.
    p = tmp_path / "zero.obj"
    p.write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nf -3 -2 -1\nf 0 1 2\n")
    text = _one_line_mesh_error(p)
    assert "OBJ" in text and "index 0" in text and "line 5" in text
    q = tmp_path / "far.obj"
    q.write_text("v 0 0 0\nv 1 0 0\nf -1 -2 -3\nv 0 1 0\n")
    assert "index -3" in _one_line_mesh_error(q)


# -- binary PLY whose header lies about the vertex count ------------------------------------------
def _binary_ply(V: np.ndarray, T: np.ndarray, n_vertex: int | None = None) -> bytes:
    """A binary little-endian PLY packed in the test with struct (PLY spec, Turk 1994)."""
    n = len(V) if n_vertex is None else n_vertex
    head = (
        f"ply\nformat binary_little_endian 1.0\nelement vertex {n}\nproperty float x\n"
        f"property float y\nproperty float z\nelement face {len(T)}\n"
        "property list uchar int vertex_indices\nend_header\n"
    ).encode()
    body = b"".join(struct.pack("<3f", *v) for v in V)
    body += b"".join(struct.pack("<B3i", 3, *map(int, t)) for t in T)
    return head + body


def test_honest_binary_ply_reads(tmp_path: Path) -> None:
    # The struct-packed file is a valid PLY: read back, it is the mesh that was packed.
    V, T = ellipsoid_mesh((1.0, 1.0, 1.0), 2)
    p = tmp_path / "ok.ply"
    p.write_bytes(_binary_ply(V, T))
    Vr, Tr, _ = read_mesh(p)
    assert np.allclose(Vr, V.astype(np.float32)) and len(Tr) == len(T)


@pytest.mark.parametrize("lie", [-12, -1, 1, 8, 1000])
def test_binary_ply_lying_vertex_count_is_not_polygons(tmp_path: Path, lie: int) -> None:
    # PLY spec: binary rows follow the header counts, so a wrong "element vertex" count shifts the
    # face rows (the old message blamed "polygon faces"). The error says the file is inconsistent.
    V, T = ellipsoid_mesh((1.0, 1.0, 1.0), 2)
    p = tmp_path / "lie.ply"
    p.write_bytes(_binary_ply(V, T, n_vertex=len(V) + lie))
    text = _one_line_mesh_error(p)
    assert "polygon" not in text and "not triangles" not in text
    assert "inconsistent PLY" in text and f"vertex {len(V) + lie}" in text


def test_truncated_binary_ply(tmp_path: Path) -> None:
    # A PLY cut short: the header's rows run past the end of the data.
    V, T = ellipsoid_mesh((1.0, 1.0, 1.0), 2)
    data = _binary_ply(V, T)
    p = tmp_path / "cut.ply"
    p.write_bytes(data[: len(data) - 20])
    text = _one_line_mesh_error(p)
    assert "inconsistent PLY" in text and "truncated" in text


# -- an unreadable mesh names its own format and the real problem --------------------------------
def test_unreadable_obj_names_obj_and_permission(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Permission denied is simulated (the tests may run as root, who reads anything).
    V, T = torus_mesh(2.0, 0.7, 8, 5)
    p = tmp_path / "m.obj"
    p.write_text(_obj(V, T, relative=False, interleave=False)[0])
    real_open = Path.open

    def denied(self: Path, *a, **k):
        if self == p:
            raise PermissionError(13, "Permission denied", str(self))
        return real_open(self, *a, **k)

    monkeypatch.setattr(Path, "open", denied)
    text = _one_line_mesh_error(p)
    assert "OBJ" in text and "permission denied" in text and "PLY" not in text


def test_garbled_obj_names_obj(tmp_path: Path) -> None:
    # A face index that is not a number (OBJ appendix B1: f takes vertex numbers).
    p = tmp_path / "bad.obj"
    p.write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 x\n")
    text = _one_line_mesh_error(p)
    assert "as OBJ" in text and "valid OBJ" in text and "PLY" not in text


def _textured_obj(V: np.ndarray, T: np.ndarray, *, quad: bool = False) -> str:
    """OBJ text with texture coordinates and normals not one per vertex (OBJ appendix B1: ``vt``, ``vn``
    and ``f v/vt/vn``), as textured scans are written: a seam duplicates texture coordinates.
    """
    lines = [f"v {float(x)!r} {float(y)!r} {float(z)!r}" for x, y, z in V]
    lines += [f"vt {k / (2 * len(V))!r} 0.5" for k in range(2 * len(V))]  # twice as many vt as v
    lines += ["vn 0 0 1"]
    lines += [f"f {i + 1}/{2 * i + 1}/1 {j + 1}/{2 * j + 2}/1 {k + 1}/{2 * k + 1}/1" for i, j, k in T]
    if quad:
        lines.append("f 1/1/1 2/2/1 3/3/1 4/4/1")
    return "\n".join(lines) + "\n"


def test_textured_obj_reads_as_its_geometry(tmp_path: Path) -> None:
    # A valid OBJ whose vt count differs from its v count (meshio refuses it): the v and f
    # statements alone give the mesh, the same vertices and triangles as the plain file.
    V, T = torus_mesh(2.0, 0.7, 8, 5)
    plain, _ = _obj(V, T, relative=False, interleave=False)
    (tmp_path / "plain.obj").write_text(plain)
    (tmp_path / "textured.obj").write_text(_textured_obj(V, T))
    Vp, Tp, _ = read_mesh(tmp_path / "plain.obj")
    Vt, Tt, _ = read_mesh(tmp_path / "textured.obj")
    assert np.array_equal(Vt, V) and np.array_equal(Vt, Vp) and np.array_equal(Tt, Tp)


def test_textured_obj_with_a_quad_is_refused_as_not_triangles(tmp_path: Path) -> None:
    V, T = torus_mesh(2.0, 0.7, 8, 5)
    p = tmp_path / "quad.obj"
    p.write_text(_textured_obj(V, T, quad=True))
    assert "not triangles" in _one_line_mesh_error(p)


# -- study.name on one line ----------------------------------------------------------------------
GOOD = (
    '[f]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y"]\nresolution = 400\n'
    '[g]\nsurface = "ellipsoid"\nradii = [2, 1, 1]\nmap = ["x", "y + z"]\nresolution = 400\n'
)


@pytest.mark.parametrize("escaped", ["a\\nb", "a\\tb", "a\\u0007b", "tail\\r"])
def test_study_name_with_control_characters_refused(tmp_path: Path, escaped: str) -> None:
    # TOML v1.0 basic strings decode \n, \t, \r, \uXXXX: the name then holds a control character,
    # which would split the one-line messages and the report's title. Refused in one line.
    p = tmp_path / "s.toml"
    p.write_text(f'[study]\nname = "{escaped}"\n' + GOOD)
    with pytest.raises(StudyError, match="study.name") as info:
        load_study(p)
    assert "\n" not in str(info.value) and "non-printing" in str(info.value)
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", "grid", str(p)],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=120,
    )
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert proc.returncode == 2 and len(lines) == 1 and "study.name" in lines[0], proc.stderr
    assert not (tmp_path / "results").exists()


def test_study_name_plain_accepted(tmp_path: Path) -> None:
    # The control: the same file with a printable name loads.
    p = tmp_path / "s.toml"
    p.write_text('[study]\nname = "my-study 2"\n' + GOOD)
    assert load_study(p).name == "my-study 2"
