"""Triangle meshes: read, check (closed 2-manifold), orient, write.

A mesh is a pair ``(V, T)``: vertex positions ``V`` of shape (n, 3) and
triangles ``T`` of shape (m, 3) (integer vertex indices). Two values per
vertex (the filtering functions f1, f2) travel alongside as an (n, 2) array.

Every mistake in a user's mesh raises :class:`specmap.errors.MeshError` with
the file, the field and the fix, so that the CLI can print one line.

Supported files (read through meshio): ``.ply``, ``.off``, ``.obj``. Only
PLY keeps per-vertex data (meshio's ``point_data``); meshio's OFF and OBJ
writers and readers drop it, so values for OFF/OBJ meshes must be given by
expressions rather than fields.
"""

from __future__ import annotations

import contextlib
import io
import sys
from pathlib import Path

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import breadth_first_order, connected_components

from specmap.errors import MeshError
from specmap.meshtable import EdgeTable, edges_and_faces
from specmap.shapes.formats import obj_triangles, ply_header_problem
from specmap.shapes.slivers import flip_slivers, zero_area_mask

FORMATS = {".ply": "ply", ".off": "off", ".obj": "obj"}


def euler_characteristic(V: np.ndarray, T: np.ndarray) -> int:
    """Euler characteristic V - E + F of the surface spanned by the triangles.

    Only vertices used by some triangle are counted.

    Parameters
    ----------
    V : ndarray (n, 3)
        Vertex positions; not needed for the count (unused vertices are ignored).
    T : ndarray (m, 3) of int
    """
    T = np.asarray(T, dtype=np.int64).reshape(-1, 3)
    n_used = len(np.unique(T))
    n_edges = len(edges_and_faces(T).edges)
    return int(n_used - n_edges + len(T))


def check_closed_manifold(
    V: np.ndarray, T: np.ndarray, *, file: str | None = None, field: str = "mesh"
) -> None:
    """Check that (V, T) is a closed triangulated 2-manifold with finite vertices.

    Checks, in order: shapes, finite coordinates, indices in range, no
    repeated vertex within a triangle, no duplicated triangle, every vertex
    used, every edge on exactly two triangles (more: non-manifold edge; one:
    boundary), and every vertex link one cycle (else a pinched vertex).

    Parameters
    ----------
    V : ndarray (n, 3)
    T : ndarray (m, 3) of int
    file, field : str
        Named in the error.

    Raises
    ------
    MeshError
    """
    V = np.asarray(V)
    T = np.asarray(T)
    if V.ndim != 2 or V.shape[1] != 3 or len(V) == 0:
        raise MeshError(
            f"vertices have shape {V.shape}, expected (n, 3)",
            file=file,
            field=field,
            fix="give 3D vertex coordinates",
        )
    if T.ndim != 2 or T.shape[1] != 3 or len(T) == 0:
        raise MeshError(
            "the mesh has no triangles",
            file=file,
            field=field,
            fix="give a surface made of triangles (faces with 3 vertices)",
        )
    bad = np.nonzero(~np.isfinite(V).all(axis=1))[0]
    if bad.size:
        raise MeshError(
            f"{bad.size} vertices have NaN or inf coordinates (first: vertex {bad[0]})",
            file=file,
            field=field,
            fix="repair or remove those vertices",
        )
    if T.min() < 0 or T.max() >= len(V):
        raise MeshError(
            f"triangle indices outside 0..{len(V) - 1}",
            file=file,
            field=field,
            fix="index existing vertices only",
        )
    T = T.astype(np.int64)
    degenerate = (T[:, 0] == T[:, 1]) | (T[:, 1] == T[:, 2]) | (T[:, 0] == T[:, 2])
    if degenerate.any():
        k = int(np.nonzero(degenerate)[0][0])
        raise MeshError(
            f"{int(degenerate.sum())} triangles repeat a vertex (first: triangle {k})",
            file=file,
            field=field,
            fix="remove degenerate triangles",
        )
    key = np.sort(T, axis=1)
    if len(np.unique(key, axis=0)) < len(T):
        raise MeshError(
            "some triangles appear twice", file=file, field=field, fix="remove duplicated triangles"
        )
    used = np.zeros(len(V), dtype=bool)
    used[T.reshape(-1)] = True
    if not used.all():
        k = int(np.nonzero(~used)[0][0])
        raise MeshError(
            f"{int((~used).sum())} vertices belong to no triangle (first: vertex {k})",
            file=file,
            field=field,
            fix="remove unreferenced vertices",
        )
    table = edges_and_faces(T)
    over = table.counts > 2
    if over.any():
        u, v = table.edges[np.nonzero(over)[0][0]]
        raise MeshError(
            f"not a 2-manifold: {int(over.sum())} edges lie on more than two triangles "
            f"(first: edge {u}-{v} on {int(table.counts[over][0])})",
            file=file,
            field=field,
            fix="split the surface so that every edge has exactly two triangles",
        )
    open_ = table.counts == 1
    if open_.any():
        u, v = table.edges[np.nonzero(open_)[0][0]]
        raise MeshError(
            f"not closed: {int(open_.sum())} boundary edges lie on one triangle only (first: edge {u}-{v})",
            file=file,
            field=field,
            fix="close the holes (every edge must have exactly two triangles)",
        )
    cycles = _link_cycles(T, table, len(V))
    pinched = np.nonzero(cycles != 1)[0]
    if pinched.size:
        raise MeshError(
            f"not a 2-manifold: {pinched.size} vertices have a link that is not one cycle "
            f"(first: vertex {pinched[0]}, {int(cycles[pinched[0]])} cycles)",
            file=file,
            field=field,
            fix="split pinched vertices into separate copies",
        )


def _link_cycles(T: np.ndarray, table: EdgeTable, n: int) -> np.ndarray:
    # Nodes are the corners (triangle, vertex). Across every edge uv, the two
    # corners at u (and the two at v) are joined; the components at a vertex are
    # the cycles of its link (every edge has two triangles here).
    m = len(T)
    corner_id = np.arange(3 * m).reshape(m, 3)

    def corner_of(face: np.ndarray, vert: np.ndarray) -> np.ndarray:
        local = np.argmax(T[face] == vert[:, None], axis=1)
        return corner_id[face, local]

    f0, f1 = table.faces[:, 0], table.faces[:, 1]
    rows, cols = [], []
    for end in (0, 1):
        w = table.edges[:, end]
        rows.append(corner_of(f0, w))
        cols.append(corner_of(f1, w))
    r = np.concatenate(rows)
    c = np.concatenate(cols)
    graph = coo_matrix((np.ones(len(r)), (r, c)), shape=(3 * m, 3 * m))
    ncomp, labels = connected_components(graph, directed=False)
    comp_vertex = np.empty(ncomp, dtype=np.int64)
    comp_vertex[labels] = T.reshape(-1)
    return np.bincount(comp_vertex, minlength=n)


def orient_consistently(T: np.ndarray) -> np.ndarray:
    """Flip triangles so that neighbours induce opposite directions on shared edges.

    Works component by component (breadth-first from the lowest triangle). A
    non-orientable component (e.g. a Klein bottle) cannot be oriented; it is
    returned with the best effort of the traversal, which is harmless for
    specmap (grids and persistence do not use orientation).

    Parameters
    ----------
    T : ndarray (m, 3) of int
        Triangles of a closed 2-manifold (each edge on two triangles).

    Returns
    -------
    ndarray (m, 3) of int
    """
    T = np.asarray(T, dtype=np.int64).copy()
    m = len(T)
    table = edges_and_faces(T)
    two = table.counts == 2
    e = table.edges[two]
    f0, f1 = table.faces[two, 0], table.faces[two, 1]
    # direction of edge (lo -> hi) inside each triangle: +1 if lo follows by hi cyclically
    d0 = _direction(T, f0, e[:, 0], e[:, 1])
    d1 = _direction(T, f1, e[:, 0], e[:, 1])
    same = d0 == d1  # the two triangles disagree: one of them must flip
    graph = coo_matrix((np.ones(len(f0)), (f0, f1)), shape=(m, m)).tocsr()
    ncomp, labels = connected_components(graph, directed=False)
    pred = np.arange(m)
    for comp in range(ncomp):
        root = int(np.argmax(labels == comp))
        _, p = breadth_first_order(graph, root, directed=False, return_predecessors=True)
        hit = p >= 0
        pred[hit] = p[hit]
    # parity of the tree edge (pred[t], t), looked up among the mesh edges
    key_edge = np.minimum(f0, f1) * m + np.maximum(f0, f1)
    order = np.argsort(key_edge)
    key_tree = np.minimum(pred, np.arange(m)) * m + np.maximum(pred, np.arange(m))
    pos = np.clip(np.searchsorted(key_edge[order], key_tree), 0, max(len(order) - 1, 0))
    acc = np.zeros(m, dtype=bool)
    is_tree = pred != np.arange(m)
    if len(order):
        acc[is_tree] = same[order[pos[is_tree]]]
    # flip[t] = XOR of the parities on the tree path to the root (pointer doubling)
    anc = pred.copy()
    while True:
        nxt = anc[anc]
        if np.array_equal(nxt, anc):
            break
        acc = acc ^ acc[anc]
        anc = nxt
    flip = acc
    T[flip] = T[flip][:, ::-1]
    return T


def _direction(T: np.ndarray, face: np.ndarray, u: np.ndarray, v: np.ndarray) -> np.ndarray:
    tri = T[face]
    iu = np.argmax(tri == u[:, None], axis=1)
    iv = np.argmax(tri == v[:, None], axis=1)
    return np.where((iu + 1) % 3 == iv, 1, -1)


def clean_mesh(
    V: np.ndarray, T: np.ndarray, values: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None, dict]:
    """Mesh hygiene: drop loose vertices, merge exact duplicates, drop collapsed triangles.

    In order: vertices on no triangle are dropped; vertices with exactly the
    same coordinates are merged into the first of them (triangles remapped);
    triangles that then repeat a vertex index (collapsed, zero area) are
    dropped, and vertices left on no triangle by that are dropped too.
    Triangles with three distinct but collinear vertices (zero area, the
    rule of :mod:`specmap.shapes.slivers`) are counted and kept here: they
    do not change the topology; :func:`read_mesh` then removes them by edge
    flips (:func:`specmap.shapes.slivers.flip_slivers`). Per-vertex ``values``
    follow the vertices (a merged vertex keeps the values of its first copy).

    Parameters
    ----------
    V : ndarray (n, 3)
    T : ndarray (m, 3) of int, indices in range
    values : ndarray (n, k), optional

    Returns
    -------
    V, T, values
        The cleaned mesh (``values`` None when not given).
    counts : dict
        ``loose_vertices``, ``duplicate_vertices``, ``collapsed_triangles``
        (dropped), ``zero_area_triangles`` (collinear, kept), ``components``.
    """
    V = np.asarray(V, dtype=float)
    T = np.asarray(T, dtype=np.int64).reshape(-1, 3)
    vals = None if values is None else np.asarray(values, dtype=float)
    n0 = len(V)
    used = np.zeros(n0, dtype=bool)
    used[T.reshape(-1)] = True
    loose = int((~used).sum())
    # merge exact duplicates among the used vertices
    idx_used = np.nonzero(used)[0]
    _, first, inverse = np.unique(V[idx_used], axis=0, return_index=True, return_inverse=True)
    inverse = np.asarray(inverse).reshape(-1)
    duplicates = int(len(idx_used) - len(first))
    target = np.arange(n0)
    target[idx_used] = idx_used[first][inverse]
    T = target[T]
    collapsed = (T[:, 0] == T[:, 1]) | (T[:, 1] == T[:, 2]) | (T[:, 0] == T[:, 2])
    n_collapsed = int(collapsed.sum())
    T = T[~collapsed]
    keep = np.zeros(n0, dtype=bool)
    keep[T.reshape(-1)] = True
    # vertices left loose only by dropping collapsed triangles count as loose too
    loose += int((used & ~keep).sum()) - duplicates
    new_index = np.full(n0, -1, dtype=np.int64)
    new_index[keep] = np.arange(int(keep.sum()))
    V = V[keep]
    T = new_index[T]
    if vals is not None:
        vals = vals[keep]
    zero_area = 0
    ncomp = 0
    if len(T):
        zero_area = int(zero_area_mask(V, T).sum())
        m = len(T)
        ev = np.concatenate([T[:, 0], T[:, 1]]), np.concatenate([T[:, 1], T[:, 2]])
        graph = coo_matrix((np.ones(2 * m), ev), shape=(len(V), len(V)))
        ncomp = int(connected_components(graph, directed=False)[0])
    counts = {
        "loose_vertices": max(loose, 0),
        "duplicate_vertices": duplicates,
        "collapsed_triangles": n_collapsed,
        "zero_area_triangles": zero_area,
        "components": ncomp,
    }
    return V, T, vals, counts


def hygiene_note(counts: dict, file: str | None = None) -> str | None:
    """One line describing what :func:`clean_mesh` changed, or None if nothing."""
    parts = []
    if counts.get("loose_vertices"):
        parts.append(f"dropped {counts['loose_vertices']} vertices on no triangle")
    if counts.get("duplicate_vertices"):
        parts.append(f"merged {counts['duplicate_vertices']} duplicate vertices")
    if counts.get("collapsed_triangles"):
        parts.append(f"dropped {counts['collapsed_triangles']} collapsed triangles")
    if counts.get("zero_area_triangles"):
        flipped = counts.get("zero_area_flipped")
        if flipped is None:
            parts.append(f"kept {counts['zero_area_triangles']} zero-area (collinear) triangles")
        else:
            parts.append(
                f"{counts['zero_area_triangles']} zero-area (collinear) triangles removed by {flipped} edge "
                "flips (the surface is unchanged, its triangulation refined at the T-junctions)"
            )
    if not parts:
        return None
    where = f"{file}: " if file else ""
    return f"note: {where}mesh cleaned: " + "; ".join(parts)


def read_mesh(
    path: str | Path, *, fields: tuple[str, str] | None = None, counts: dict | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Read a closed triangle mesh (.ply, .off, .obj) and optionally two vertex fields.

    The mesh is first cleaned by :func:`clean_mesh` (loose vertices dropped,
    exact duplicate vertices merged, collapsed triangles dropped; one note
    line on stderr when anything changed), then checked with
    :func:`check_closed_manifold`; zero-area (collinear) triangles are then
    removed by edge flips that keep the surface and refine its triangulation
    (:mod:`specmap.shapes.slivers`; counted in the note, an error when a flip
    cannot remove one); an inconsistent orientation of the
    triangles is repaired silently. Several components are accepted, each a
    closed 2-manifold (a closed surface need not be connected).

    Parameters
    ----------
    path : str or Path
    fields : (str, str), optional
        Names of two per-vertex arrays (PLY vertex properties) used as f1, f2.
    counts : dict, optional
        Filled with the counts of :func:`clean_mesh`.

    Returns
    -------
    V : ndarray (n, 3) float
    T : ndarray (m, 3) int
    values : ndarray (n, 2) float or None
        The two fields, or None when ``fields`` is None.

    Raises
    ------
    MeshError
        Missing or unreadable file, unknown format, faces that are not
        triangles, unknown field, NaN/inf, open or non-manifold surface.
    """
    p = Path(path)
    file = str(p)
    if not p.is_file():
        raise MeshError(
            "file not found",
            file=file,
            field="mesh",
            fix="check the path (relative paths resolve against the study file)",
        )
    fmt = FORMATS.get(p.suffix.lower())
    if fmt is None:
        raise MeshError(
            f"unknown mesh format '{p.suffix}'",
            file=file,
            field="mesh",
            fix=f"use one of {', '.join(FORMATS)}",
        )
    import meshio  # local: meshio is slow to import

    try:
        p.open("rb").close()
    except PermissionError:
        raise MeshError(
            f"the {fmt.upper()} file cannot be read (permission denied)",
            file=file,
            field="mesh",
            fix="make the file readable or copy it somewhere readable",
        ) from None
    chatter = io.StringIO()
    try:
        with contextlib.redirect_stdout(chatter), contextlib.redirect_stderr(chatter):
            mesh = meshio.read(p, file_format=fmt)
    except (Exception, SystemExit) as exc:  # meshio exits on some parse errors
        _check_ply_header(p, fmt)
        said = " ".join(chatter.getvalue().split()) or str(exc) or type(exc).__name__
        mesh = _obj_fallback(p) if fmt == "obj" else None
    else:
        said = ""
    if mesh is None:
        fix = f"write a valid {fmt.upper()} file of triangles"
        if "triangular" in said:
            fix = "triangulate the faces first (split every polygon into triangles)"
        raise MeshError(
            f"cannot read the file as {fmt.upper()} ({said})", file=file, field="mesh", fix=fix
        ) from None
    blocks = [b for b in mesh.cells if len(b.data)]
    others = sorted({b.type for b in blocks if b.type not in ("triangle", "vertex", "line")})
    if others:
        _check_ply_header(p, fmt)  # a header that lies about a count turns vertex bytes into "polygons"
        raise MeshError(
            f"faces that are not triangles ({', '.join(others)})",
            file=file,
            field="mesh",
            fix="triangulate the faces first (split every polygon into triangles)",
        )
    tris = [b.data for b in blocks if b.type == "triangle"]
    if not tris:
        _check_ply_header(p, fmt)
        raise MeshError(
            "the mesh has no triangles",
            file=file,
            field="mesh",
            fix="give a closed surface made of triangles",
        )
    V = np.asarray(mesh.points, dtype=float)
    if V.ndim == 2 and V.shape[1] == 2:
        V = np.column_stack([V, np.zeros(len(V))])
    T = np.concatenate(tris).astype(np.int64)
    if fmt == "obj" and T.min() < 0:  # relative indices (valid OBJ); meshio leaves them negative
        try:
            T = obj_triangles(p)
        except ValueError as exc:
            raise MeshError(
                f"bad OBJ face index ({exc})",
                file=file,
                field="mesh",
                fix="use indices 1..n, or -1..-k for the k vertices defined so far",
            ) from None
    values = None
    if fields is not None:
        available = sorted(mesh.point_data)
        cols = []
        for name in fields:
            if name not in mesh.point_data:
                listed = ", ".join(available) if available else "none"
                raise MeshError(
                    f"no vertex field '{name}' (available: {listed})",
                    file=file,
                    field=name,
                    fix="name one of the available vertex fields (PLY vertex properties; OFF/OBJ carry none)",
                )
            col = np.asarray(mesh.point_data[name], dtype=float)
            if col.shape != (len(V),):
                raise MeshError(
                    f"vertex field '{name}' has shape {col.shape}, expected ({len(V)},)",
                    file=file,
                    field=name,
                    fix="use a scalar per-vertex field",
                )
            bad = np.nonzero(~np.isfinite(col))[0]
            if bad.size:
                raise MeshError(
                    f"vertex field '{name}' has {bad.size} NaN/inf values (first: vertex {bad[0]})",
                    file=file,
                    field=name,
                    fix="give finite values at every vertex",
                )
            cols.append(col)
        values = np.column_stack(cols)
    if T.min() < 0 or T.max() >= len(V):
        _check_ply_header(p, fmt)
        raise MeshError(
            f"triangle indices outside 0..{len(V) - 1}",
            file=file,
            field="mesh",
            fix="index existing vertices only",
        )
    V, T, values, found = clean_mesh(V, T, values)
    if len(T) == 0:
        raise MeshError(
            "the mesh has no triangles of positive size",
            file=file,
            field="mesh",
            fix="give a closed surface made of triangles",
        )
    check_closed_manifold(V, T, file=file, field="mesh")
    if found["zero_area_triangles"]:
        T = _without_slivers(V, T, found, file)
    if counts is not None:
        counts.update(found)
    note = hygiene_note(found, file)
    if note:
        print(note, file=sys.stderr)
    return V, orient_consistently(T), values


def _without_slivers(V: np.ndarray, T: np.ndarray, found: dict, file: str) -> np.ndarray:
    """The triangles with the zero-area ones flipped away (:mod:`specmap.shapes.slivers`), or a MeshError."""
    T, flipped, left = flip_slivers(V, T)
    found["zero_area_flipped"] = flipped
    if left.size:
        k = int(left[0])
        raise MeshError(
            f"{left.size} zero-area (collinear) triangles that no edge flip removes "
            f"(first: triangle {k}, vertices {', '.join(str(int(i)) for i in T[k])})",
            file=file,
            field="mesh",
            fix="re-triangulate the mesh around them (no triangle with three collinear vertices)",
        )
    return T


def _obj_fallback(path: Path):
    """The OBJ file's geometry as a meshio Mesh when meshio itself refused it; None if that fails too.

    meshio refuses valid OBJ files whose ``vt``/``vn`` counts differ from the vertex count
    (textured scans); :func:`specmap.shapes.formats.obj_geometry` reads the ``v`` and ``f``
    statements alone. Faces that are not triangles come back as a ``polygon`` block, so the
    caller refuses them as it does for meshio's own result.
    """
    import meshio

    from specmap.shapes.formats import obj_geometry

    try:
        V, faces = obj_geometry(path)
    except (OSError, ValueError):
        return None
    if not len(V) or not faces:
        return None
    tri = [f for f in faces if len(f) == 3]
    cells = [("triangle", np.asarray(tri, dtype=np.int64).reshape(-1, 3))] if tri else []
    if len(tri) < len(faces):
        other = [f for f in faces if len(f) != 3]
        cells.append(("polygon", np.asarray(other[:1][0]).reshape(1, -1)))
    return meshio.Mesh(V, cells)


def _check_ply_header(p: Path, fmt: str) -> None:
    """Raise the real problem when a binary PLY file's data do not match its header."""
    if fmt != "ply":
        return
    try:
        problem = ply_header_problem(p)
    except OSError:
        return
    if problem:
        raise MeshError(
            f"inconsistent PLY file: {problem}",
            file=str(p),
            field="mesh",
            fix="export the mesh again (the element counts of the header must match the data)",
        )


def write_mesh(
    path: str | Path,
    V: np.ndarray,
    T: np.ndarray,
    values: np.ndarray | None = None,
    names: tuple[str, str] = ("f1", "f2"),
) -> None:
    """Write a triangle mesh, with two vertex fields when given.

    Use a ``.ply`` path to keep the values: meshio stores them as PLY vertex
    properties and reads them back as ``point_data``. meshio's OFF and OBJ
    writers drop vertex data.

    Parameters
    ----------
    path : str or Path
    V : ndarray (n, 3)
    T : ndarray (m, 3) of int
    values : ndarray (n, 2), optional
    names : (str, str)
        Property names of the two fields.
    """
    import meshio

    point_data = {}
    if values is not None:
        vals = np.asarray(values, dtype=float)
        point_data = {names[0]: vals[:, 0].copy(), names[1]: vals[:, 1].copy()}
    mesh = meshio.Mesh(
        np.asarray(V, dtype=float), [("triangle", np.asarray(T, dtype=np.int32))], point_data=point_data
    )
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        meshio.write(Path(path), mesh, file_format=FORMATS.get(Path(path).suffix.lower()))
