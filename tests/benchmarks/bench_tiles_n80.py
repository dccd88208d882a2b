"""N = 80 random contours at the default 121 x 121 lattice, tile by tile (issue 12).

    nice python tests/benchmarks/bench_tiles_n80.py FOLDER [N] [RESOLUTION] [TILES]

The pair is ``random_pair(100 + N, N)`` (tests/gridgen.py, N contours together), its default
window, pairs "all". Each tile of the ``TILES`` split (default 4x4) is mapped by
:func:`specmap.special.tiles.tile_pieces` in a fresh subprocess (its peak RSS from
``resource.getrusage``) and written to ``FOLDER/tile_<row>_<col>.json`` with the fingerprint
:func:`specmap.special.tiles.tiled_special_set` uses, so a finished tile is skipped by a rerun
(and by ``tiled_special_set(..., folder=FOLDER)``). The merge is not run here: it holds the
whole output in memory (about 160 bytes per crossing), which is what the report says.
Writes tests/benchmarks/results_tiles_n80.md (per-tile time, crossings, curves, peak; sums).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
CHILD = r"""
import json, resource, sys, time
from pathlib import Path
sys.path.insert(0, {tests!r})
from gridgen import random_pair
from specmap.settings import MapSettings
from specmap.special.compute import default_tolerance
from specmap.special.tiles import fingerprint, plan_tiles, tile_pieces, write_tile
from specmap.strip import default_window
n, res, tiles, k, folder = {n}, {res}, {tiles!r}, {k}, Path({folder!r})
f, g = random_pair(100 + n, n)
w = default_window(f.bbox(), g.bbox())
s = MapSettings(resolution=res, tol=default_tolerance(f, g))
tile = plan_tiles(res, res, tiles)[k]
fp = fingerprint(f, g, w, (res, res), tiles, s)
t = time.perf_counter()
r = tile_pieces(f, g, w, (res, res), tile, s)
dt = time.perf_counter() - t
path = write_tile(folder, fp, r)
curves = sum(len(it.cuts) for it in r.items if it.kind == "curve")
print(json.dumps({{"tile": r.name, "seconds": dt, "peak_rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
    "crossings": r.stats.get("crossings"), "core_curves": curves, "file_bytes": path.stat().st_size,
    "halo_cells": tile.cells}}))
"""


def main(argv: list[str]) -> None:
    folder = Path(argv[0]).resolve()
    n = int(argv[1]) if len(argv) > 1 else 80
    res = int(argv[2]) if len(argv) > 2 else 121
    tiles = tuple(int(x) for x in (argv[3] if len(argv) > 3 else "4x4").split("x"))
    folder.mkdir(parents=True, exist_ok=True)
    log = folder / "bench_log.jsonl"
    done = {}
    if log.exists():
        for line in log.read_text().splitlines():
            d = json.loads(line)
            done[d["tile"]] = d
    t_all = time.perf_counter()
    for k in range(tiles[0] * tiles[1]):
        name = f"tile_{k // tiles[0]}_{k % tiles[0]}"
        if name in done:
            continue
        code = CHILD.format(tests=str(HERE.parent), n=n, res=res, tiles=tiles, k=k, folder=str(folder))
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
        d = json.loads(out.stdout.strip().splitlines()[-1])
        done[d["tile"]] = d
        with log.open("a") as fh:
            fh.write(json.dumps(d) + "\n")
        print(d, flush=True)
    rows = list(done.values())
    load = os.getloadavg()
    tot = sum(r["seconds"] for r in rows)
    lines = [
        "# N = 80 random contours at 121 x 121, tile by tile (tests/benchmarks/bench_tiles_n80.py)",
        "",
        f"Pair `random_pair({100 + n}, {n})`, default window, pairs all, {res} x {res} lattice, "
        f"{tiles[0]} x {tiles[1]} tiles, one tile per subprocess, one at a time (`nice`); load average at "
        f"the end {load[0]:.2f} on {os.cpu_count()} cores; this invocation {time.perf_counter() - t_all:.0f} s. "
        "Crossings count the halo cells in each tile that maps them; curves are the clipped core "
        "curves (a curve cut at a tile border counts in each tile).",
        "",
        "| tile | seconds | crossings | core curves | peak RSS (GB) | tile file (MB) |",
        "|---|---|---|---|---|---|",
    ]
    for r in sorted(rows, key=lambda r: r["tile"]):
        lines.append(
            f"| {r['tile']} | {r['seconds']:.1f} | {r['crossings']:,} | {r['core_curves']:,} | "
            f"{r['peak_rss'] / 1e9:.2f} | {r['file_bytes'] / 1e6:.1f} |"
        )
    lines.append(
        f"| all {len(rows)} | {tot:.1f} | {sum(r['crossings'] for r in rows):,} | "
        f"{sum(r['core_curves'] for r in rows):,} | {max(r['peak_rss'] for r in rows) / 1e9:.2f} (max) | "
        f"{sum(r['file_bytes'] for r in rows) / 1e6:.1f} |"
    )
    (HERE / "results_tiles_n80.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))


if __name__ == "__main__":
    main(sys.argv[1:])
