"""What the mesh file formats say that meshio does not check: PLY headers, OBJ relative indices.

- A binary PLY file declares the number of each element (``element vertex N``)
  and the size of every property in its header; :func:`ply_header_problem`
  walks the data with those sizes and tells whether it ends exactly at the end
  of the file. A header that lies about a count otherwise makes the reader take
  vertex bytes for faces (seen as "polygon faces") or read past the end.
- OBJ face indices count from 1; a negative index ``-k`` is relative and means
  the k-th vertex defined before that face line (so ``-1`` is the last one).
  meshio keeps them negative; :func:`obj_triangles` resolves them.
- meshio refuses valid OBJ files whose texture coordinates (``vt``) or normals
  (``vn``) are not one per vertex, as textured scans usually are;
  :func:`obj_geometry` reads the ``v`` and ``f`` statements alone.

References
----------
.. [PLY] Turk, "The PLY polygon file format" (1994): header, element and
   property declarations, ``list`` properties, binary encodings.
.. [OBJ] Wavefront Technologies, "Object Files (.obj)", Advanced Visualizer
   manual, appendix B1: ``v`` and ``f`` statements; "a negative reference
   number ... refers to vertices immediately above".
"""

from __future__ import annotations

import struct
from pathlib import Path

import numpy as np

PLY_TYPES = {
    "char": 1,
    "int8": 1,
    "uchar": 1,
    "uint8": 1,
    "short": 2,
    "int16": 2,
    "ushort": 2,
    "uint16": 2,
    "int": 4,
    "int32": 4,
    "uint": 4,
    "uint32": 4,
    "float": 4,
    "float32": 4,
    "double": 8,
    "float64": 8,
}
_STRUCT = {1: "B", 2: "H", 4: "I", 8: "Q"}


def _ply_header(data: bytes) -> tuple[str, list[tuple[str, int, list[tuple]]], int] | None:
    """(format, [(element, count, properties)], data offset), or None if the header is unreadable.

    A property is ``(size,)`` for a scalar or ``(count size, item size)`` for a list.
    """
    end = data.find(b"end_header")
    if not data.startswith(b"ply") or end < 0:
        return None
    nl = data.find(b"\n", end)
    if nl < 0:
        return None
    fmt = ""
    elements: list[tuple[str, int, list[tuple]]] = []
    for raw in data[:end].decode("ascii", "replace").splitlines():
        words = raw.split()
        if not words:
            continue
        try:
            if words[0] == "format":
                fmt = words[1]
            elif words[0] == "element":
                elements.append((words[1], int(words[2]), []))
            elif words[0] == "property" and elements:
                if words[1] == "list":
                    elements[-1][2].append((PLY_TYPES[words[2]], PLY_TYPES[words[3]]))
                else:
                    elements[-1][2].append((PLY_TYPES[words[1]],))
        except (IndexError, KeyError, ValueError):
            return None
    return fmt, elements, nl + 1


def _walk_row(data: bytes, pos: int, props: list[tuple], order: str) -> tuple[int, list[int]] | None:
    """(Offset just after one row at ``pos``, the lengths of its lists), or None if a count lies past the end."""
    lengths = []
    for p in props:
        if len(p) == 1:
            pos += p[0]
            continue
        if pos + p[0] > len(data):
            return None
        n = struct.unpack_from(order + _STRUCT[p[0]], data, pos)[0]
        lengths.append(n)
        pos += p[0] + n * p[1]
    return pos, lengths


def _walk_element(
    data: bytes, offset: int, count: int, props: list[tuple], order: str
) -> tuple[int, int | None] | None:
    """(Offset just after ``count`` rows of an element, shortest list or None), or None past the end."""
    if all(len(p) == 1 for p in props):
        end = offset + count * sum(p[0] for p in props)
        return (end, None) if end <= len(data) else None
    # Rows with lists: try "every row like the first" in one strided check, else walk row by row.
    walked = _walk_row(data, offset, props, order)
    if walked is None:
        return None
    pos, first = walked
    row = pos - offset
    if count and offset + count * row <= len(data):
        rows = np.frombuffer(data, dtype=np.uint8, count=count * row, offset=offset).reshape(count, row)
        same, pos, k = True, 0, 0
        for p in props:
            if len(p) == 2:
                dt = np.dtype(f"{'<' if order == '<' else '>'}u{p[0]}")
                counts = rows[:, pos : pos + p[0]].copy().view(dt).reshape(-1)
                same &= bool(np.all(counts == first[k]))
                pos += p[0] + first[k] * p[1]
                k += 1
            else:
                pos += p[0]
        if same:
            return offset + count * row, min(first)
    pos, shortest = offset, None
    for _ in range(count):
        walked = _walk_row(data, pos, props, order)
        if walked is None:
            return None
        pos, lengths = walked
        if lengths:
            shortest = min(lengths) if shortest is None else min(shortest, *lengths)
        if pos > len(data):
            return None
    return pos, shortest


def ply_header_problem(path: str | Path) -> str | None:
    """Why a binary PLY file's data do not match its header, or None when they do (or it is ASCII).

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    str or None
        One clause, e.g. ``"the header's element counts (vertex 50, face 80) run past the end
        of the data (file truncated, or the counts are wrong)"``.

    References
    ----------
    .. [PLY] Turk (1994): binary data are the elements in header order, each row its
       properties in order, a list being its count followed by that many items.
    """
    data = Path(path).read_bytes()
    head = _ply_header(data)
    if head is None:
        return None
    fmt, elements, offset = head
    if fmt not in ("binary_little_endian", "binary_big_endian"):
        return None
    order = "<" if fmt == "binary_little_endian" else ">"
    declared = ", ".join(f"{name} {n}" for name, n, _ in elements)
    for name, count, props in elements:
        walked = _walk_element(data, offset, count, props, order)
        if walked is None:
            return (
                f"the header's element counts ({declared}) run past the end of the data "
                "(file truncated, or the counts are wrong)"
            )
        offset, shortest = walked
        if name == "face" and shortest is not None and shortest < 3:
            return (
                f"read with the header's element counts ({declared}), a face lists {shortest} "
                "vertices (the counts do not match the data, or the file is corrupt)"
            )
    if offset != len(data):
        return (
            f"the header's element counts ({declared}) leave {len(data) - offset} bytes of data "
            "unread (the counts do not match the data)"
        )
    return None


def obj_triangles(path: str | Path) -> np.ndarray:
    """The triangles of an OBJ file, 0-based, with relative (negative) indices resolved.

    Index ``i > 0`` is vertex ``i - 1``; ``i < 0`` is vertex ``n + i`` where ``n``
    is the number of ``v`` lines before the face line [OBJ]. Faces are returned
    in file order (the order meshio gives); only ``f`` lines with three
    vertices are kept (other faces are refused before this is called).

    Raises
    ------
    ValueError
        Index 0, or a relative index reaching before the first vertex: the
        message names the line.

    Examples
    --------
    >>> import tempfile, os
    >>> text = "v 0 0 0\\nv 1 0 0\\nv 0 1 0\\nf -3 -2 -1\\nv 0 0 1\\nf 1 -2 -1\\n"
    >>> with tempfile.NamedTemporaryFile("w", suffix=".obj", delete=False) as fh:
    ...     _ = fh.write(text)
    >>> obj_triangles(fh.name).tolist()
    [[0, 1, 2], [0, 2, 3]]
    >>> os.unlink(fh.name)
    """
    tris: list[list[int]] = []
    n = 0
    with open(path, encoding="utf-8", errors="replace") as fh:
        for lineno, line in enumerate(fh, 1):
            words = line.split()
            if not words:
                continue
            if words[0] == "v":
                n += 1
            elif words[0] == "f" and len(words) == 4:
                row = []
                for w in words[1:]:
                    i = int(w.split("/")[0])
                    k = i - 1 if i > 0 else n + i
                    if i == 0 or k < 0:
                        raise ValueError(
                            f"line {lineno}: index {i} names no vertex "
                            f"({n} defined so far; OBJ counts from 1, -1 is the last)"
                        )
                    row.append(k)
                tris.append(row)
    return np.asarray(tris, dtype=np.int64).reshape(-1, 3)


def obj_geometry(path: str | Path) -> tuple[np.ndarray, list[np.ndarray]]:
    """Vertex positions and faces of an OBJ file from its ``v`` and ``f`` statements alone [OBJ].

    Texture coordinates, normals, groups and materials are ignored (a face vertex
    ``i/t/n`` keeps ``i``), so a textured file whose ``vt`` count differs from its
    ``v`` count reads as its geometry. Relative indices are resolved as in
    :func:`obj_triangles`.

    Returns
    -------
    points : ndarray (n, 3)
        The first three coordinates of every ``v`` line (a fourth, the weight, is dropped).
    faces : list of ndarray (k,) of int
        0-based vertex indices of each face, in file order (triangles have k = 3).

    Raises
    ------
    ValueError
        A ``v`` line with fewer than three numbers, or a face index naming no vertex: the
        message names the line.

    Examples
    --------
    >>> import tempfile, os
    >>> text = "v 0 0 0\\nv 1 0 0\\nv 0 1 0\\nvt 0 0\\nvt 1 0\\nvt 0 1\\nvt 1 1\\nf 1/4 2/2 3/3\\n"
    >>> with tempfile.NamedTemporaryFile("w", suffix=".obj", delete=False) as fh:
    ...     _ = fh.write(text)
    >>> V, F = obj_geometry(fh.name)
    >>> V.shape, [f.tolist() for f in F]
    ((3, 3), [[0, 1, 2]])
    >>> os.unlink(fh.name)
    """
    points: list[list[float]] = []
    faces: list[np.ndarray] = []
    with open(path, encoding="utf-8", errors="replace") as fh:
        for lineno, line in enumerate(fh, 1):
            words = line.split()
            if not words:
                continue
            if words[0] == "v":
                try:
                    points.append([float(w) for w in words[1:4]])
                except ValueError:
                    raise ValueError(
                        f"line {lineno}: a vertex with a coordinate that is not a number"
                    ) from None
                if len(points[-1]) < 3:
                    raise ValueError(f"line {lineno}: a vertex with fewer than three coordinates")
            elif words[0] == "f":
                n = len(points)
                row = []
                for w in words[1:]:
                    try:
                        i = int(w.split("/")[0])
                    except ValueError:
                        raise ValueError(f"line {lineno}: face index {w!r} is not a whole number") from None
                    k = i - 1 if i > 0 else n + i
                    if i == 0 or not 0 <= k < n:
                        raise ValueError(
                            f"line {lineno}: index {i} names no vertex "
                            f"({n} defined so far; OBJ counts from 1, -1 is the last)"
                        )
                    row.append(k)
                faces.append(np.asarray(row, dtype=np.int64))
    return np.asarray(points, dtype=float).reshape(-1, 3), faces
