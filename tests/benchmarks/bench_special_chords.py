"""Chord and segment-end tests of the atlas components at a coarse lattice, old path vs new (issue 12).

    nice python tests/benchmarks/bench_special_chords.py FOLDER [N] [RESOLUTION] [TILES]

The pair is ``random_pair(100 + N, N)`` (tests/gridgen.py), its default window, pairs "all",
an ``RESOLUTION x RESOLUTION`` lattice (default N = 80 at 21 x 21, the case where a cell holds
~1e5 chords). The tie curves are made tile by tile (``TILES``, default 4x4, each tile in a fresh
subprocess: the whole map at this size needs ~10 GB) by
:func:`specmap.special.tiles.tile_atlas_items` and their segments saved to ``FOLDER`` (reused by
a rerun). Then, on each tile's segments, the same run times
``lattice_labels`` of the production kernel (:mod:`specmap.special.compiled.components`) and of
the kernel before commit 670d3f2 (tests/benchmarks/old_chords.py), checks that both give the same
partition of the lines, and writes tests/benchmarks/results_special_chords.md.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
CHILD = r"""
import sys
import numpy as np, shapely
sys.path.insert(0, {tests!r})
from gridgen import random_pair
from specmap.settings import MapSettings
from specmap.special.compute import default_tolerance
from specmap.special.components import segments
from specmap.special.lattice import Lattice
from specmap.special.tiles import plan_tiles, tile_atlas_items
from specmap.strip import default_window
n, res, tiles, k, out = {n}, {res}, {tiles!r}, {k}, {out!r}
f, g = random_pair(100 + n, n)
w = default_window(f.bbox(), g.bbox())
s = MapSettings(resolution=res, tol=default_tolerance(f, g))
frame = Lattice.of(w, res, res)
tile = plan_tiles(res, res, tiles)[k]
_, items, _ = tile_atlas_items(f, g, frame, tile.halo, s)
lines = [ln for _, kind, geom in items if kind == "curve" for ln in shapely.get_parts(geom)]
i0, i1, j0, j1 = tile.halo
if lines:
    p, q, owner = segments(lines)
else:
    p = q = np.zeros((0, 2)); owner = np.zeros(0, np.int64)
np.savez(out, p=p, q=q, owner=owner, n_lines=len(lines), av=frame.av[i0 : i1 + 1], bv=frame.bv[j0 : j1 + 1],
    eps=1e-9 * w.diameter)
"""


def make_inputs(folder: Path, n: int, res: int, tiles: tuple[int, int]) -> list[Path]:
    """One ``.npz`` of segments per tile (made in subprocesses, reused when present)."""
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for k in range(tiles[0] * tiles[1]):
        path = folder / f"segments_{n}_{res}_{tiles[0]}x{tiles[1]}_{k}.npz"
        if not path.exists():
            tmp = path.with_suffix(".part.npz")
            code = CHILD.format(tests=str(HERE.parent), n=n, res=res, tiles=tiles, k=k, out=str(tmp))
            subprocess.run([sys.executable, "-c", code], check=True)
            tmp.rename(path)
        paths.append(path)
    return paths


def run_labels(fn, d) -> tuple[np.ndarray, float]:  # type: ignore[no-untyped-def]
    """Labels and seconds of one ``lattice_labels`` kernel on the saved arrays ``d``."""
    p, q = np.ascontiguousarray(d["p"]), np.ascontiguousarray(d["q"])
    ends = np.vstack([p, q])
    eps = float(d["eps"])
    kk = np.round((ends - ends.min(axis=0)) / eps).astype(np.int64)
    vkey = kk[:, 0] * (int(kk[:, 1].max()) + 1) + kk[:, 1]
    order = np.argsort(vkey)
    t = time.perf_counter()
    label, _, _ = fn(p, q, d["owner"], int(d["n_lines"]), d["av"], d["bv"], eps, vkey, order)
    return label, time.perf_counter() - t


def same_partition(a: np.ndarray, b: np.ndarray) -> bool:
    """Two label arrays describe the same partition (labels may differ by name)."""
    pairs = np.unique(np.stack([a, b], axis=1), axis=0)
    return len(pairs) == len(np.unique(a)) == len(np.unique(b))


def main(argv: list[str]) -> None:
    sys.path.insert(0, str(HERE))
    import old_chords

    from specmap.special.compiled import components as new

    folder = Path(argv[0]).resolve()
    n = int(argv[1]) if len(argv) > 1 else 80
    res = int(argv[2]) if len(argv) > 2 else 21
    tiles = tuple(int(x) for x in (argv[3] if len(argv) > 3 else "4x4").split("x"))
    paths = make_inputs(folder, n, res, tiles)  # type: ignore[arg-type]
    # compile both outside the timing
    small = min((np.load(p) for p in paths if int(np.load(p)["n_lines"])), key=lambda d: len(d["owner"]))
    for fn in (old_chords.lattice_labels, new.lattice_labels):
        run_labels(fn, small)
    rows = []
    for path in paths:
        d = dict(np.load(path))
        if int(d["n_lines"]) == 0:
            continue
        lo, t_old = run_labels(old_chords.lattice_labels, d)
        ln, t_new = run_labels(new.lattice_labels, d)
        cells = np.diff(np.searchsorted(np.sort(_cells(d)), np.arange(_n_cells(d) + 1)))
        rows.append(
            (
                path.stem.rsplit("_", 1)[1],
                len(d["owner"]),
                int(cells.max()),
                t_old,
                t_new,
                same_partition(lo, ln),
            )
        )
        print(rows[-1], flush=True)
    load = os.getloadavg()
    t_old = sum(r[3] for r in rows)
    t_new = sum(r[4] for r in rows)
    lines = [
        "# Chord and segment-end tests at a coarse lattice (tests/benchmarks/bench_special_chords.py)",
        "",
        f"Pair `random_pair({100 + n}, {n})`, default window, pairs all, {res} x {res} lattice; tie curves made in "
        f"{tiles[0]} x {tiles[1]} tiles (halo cells included), `lattice_labels` timed on each tile's segments, "
        f"old kernel (before 670d3f2, tests/benchmarks/old_chords.py) and production kernel in the same run; "
        f"load average at the end {load[0]:.2f} on {os.cpu_count()} cores.",
        "",
        "| tile | segments | fullest cell (segments) | old (s) | new (s) | ratio | same components |",
        "|---|---|---|---|---|---|---|",
    ]
    for name, segs, full, a, b, same in rows:
        lines.append(
            f"| {name} | {segs:,} | {full:,} | {a:.2f} | {b:.2f} | {a / max(b, 1e-9):.1f}x | {same} |"
        )
    lines.append(
        f"| all | {sum(r[1] for r in rows):,} | {max(r[2] for r in rows):,} | {t_old:.1f} | {t_new:.1f} | "
        f"{t_old / max(t_new, 1e-9):.1f}x | {all(r[5] for r in rows)} |"
    )
    (HERE / "results_special_chords.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))


def _n_cells(d: dict) -> int:
    return (len(d["av"]) - 1) * (len(d["bv"]) - 1)


def _cells(d: dict) -> np.ndarray:
    """Cell of each segment by its midpoint (as the kernels number them)."""
    mid = 0.5 * (d["p"] + d["q"])
    na1 = len(d["av"]) - 1
    ci = np.clip(np.searchsorted(d["av"], mid[:, 0], side="right") - 1, 0, na1 - 1)
    cj = np.clip(np.searchsorted(d["bv"], mid[:, 1], side="right") - 1, 0, len(d["bv"]) - 2)
    return cj * na1 + ci


if __name__ == "__main__":
    main(sys.argv[1:])
