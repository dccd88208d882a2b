"""Peak memory and time of the atlas in one piece against tiles (issue 12), same run.

    python tests/benchmarks/bench_tiles.py [N] [RESOLUTION] [TILES ...]

Each case runs in a fresh subprocess (its peak RSS from ``resource.getrusage``): a random
generic pair of N contours together (tests/gridgen.py, seed 3), window a in [0.05, 0.95],
b in [-1, 1], pairs "all". The numba kernels are loaded once before timing in each child.
Cases: "2x2" (tiles merged in memory), "s2x2" (tiles written to disk and merged from the files,
:func:`specmap.special.tiles.streamed_tiled_map`), "dask2" (2 x 2 tiles on a LocalCluster of 2
workers). Writes tests/benchmarks/results_tiles.md with time per crossing (halo cells counted).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
PROLOGUE = r"""
import json, resource, sys, time
sys.path.insert(0, {tests!r})
from gridgen import random_pair
from specmap.settings import MapSettings
from specmap.special import special_set
from specmap.special.tiles import _settings, plan_tiles, tile_pieces, tiled_special_set
from specmap.strip import Window
w = Window((0.05, 0.95), (-1.0, 1.0))
gf, gg = random_pair(3, {n})
s, _ = random_pair(1, 4)
special_set(s, _, w, resolution=9)  # load the compiled kernels outside the timing
"""
CHILD = (
    PROLOGUE
    + r"""
n, res, na, nb = {n}, {res}, {na}, {nb}
t = time.perf_counter()
workers = {workers}
if workers:  # 2 x 2 tiles on a local Dask cluster of that many single-threaded worker processes
    from distributed import LocalCluster
    cl = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None)
    tiled_special_set(s, _, w, tiles=(2, 1), settings=MapSettings(resolution=9), cluster=cl.scheduler_address)
    t = time.perf_counter()
    at = tiled_special_set(gf, gg, w, tiles=(na, nb), settings=MapSettings(resolution=res),
        cluster=cl.scheduler_address)
elif {streamed}:  # tiles written to a temporary folder and merged from it one at a time
    import tempfile
    from specmap.special.tiles import streamed_tiled_map
    d = tempfile.mkdtemp()
    at = streamed_tiled_map(gf, gg, w, tiles=(na, nb), settings=MapSettings(resolution=res),
        folder=d + "/tiles", geojson=d + "/special.geojson")
elif (na, nb) == (1, 1):
    at = special_set(gf, gg, w, resolution=res)
else:
    at = tiled_special_set(gf, gg, w, tiles=(na, nb), settings=MapSettings(resolution=res))
dt = time.perf_counter() - t
print(json.dumps({{"seconds": dt, "peak_rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
    "crossings": at.stats.get("crossings"), "tie_curves": at.stats.get("tie_curves"),
    "components": len(at.components)}}))
"""
)


TILE_CHILD = (
    PROLOGUE
    + r"""
settings, lattice, _tol = _settings(gf, gg, MapSettings(resolution={res}), None)
tile = plan_tiles(*lattice, (2, 2))[{k}]
t = time.perf_counter()
tile_pieces(gf, gg, w, lattice, tile, settings)
print(json.dumps({{"seconds": time.perf_counter() - t}}))
"""
)


def two_process_ceiling(n: int, res: int, k: int = 2) -> tuple[float, float, float]:
    """Seconds of 2 x 2 tile ``k`` mapped alone, and by each of two processes at once (same tile).

    What this machine gives two workers at best: if two copies of one tile take ``x`` times
    the time of one, two workers are at most ``2 / x`` times one worker on the tile phase.
    """
    code = TILE_CHILD.format(tests=str(HERE.parent), n=n, res=res, k=k)

    def start() -> subprocess.Popen:
        return subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)

    def seconds(p: subprocess.Popen) -> float:
        out, _ = p.communicate()
        return float(json.loads(out.strip().splitlines()[-1])["seconds"])

    alone = seconds(start())
    a, b = start(), start()
    return alone, seconds(a), seconds(b)


def run_case(n: int, res: int, tiles: tuple[int, int], workers: int = 0, streamed: bool = False) -> dict:
    code = CHILD.format(
        tests=str(HERE.parent), n=n, res=res, na=tiles[0], nb=tiles[1], workers=workers, streamed=streamed
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv: list[str]) -> None:
    n = int(argv[0]) if argv else 40
    res = int(argv[1]) if len(argv) > 1 else 81
    # a case "2x2" runs in this process; "dask2" is 2 x 2 tiles on a LocalCluster of 2 workers;
    # "s2x2" is 2 x 2 tiles streamed: written to disk and merged from the files (-1 in the key);
    # "dask2:4x4" is 4 x 4 tiles on 2 workers
    cases = [(1, 1, 0)] + [
        (*(int(x) for x in t.split(":")[1].split("x")), int(t[4:].split(":")[0]))
        if t.startswith("dask") and ":" in t
        else (2, 2, int(t[4:]))
        if t.startswith("dask")
        else (*(int(x) for x in t[1:].split("x")), -1)
        if t.startswith("s")
        else (*(int(x) for x in t.split("x")), 0)
        for t in (argv[2:] or ["2x2", "3x3"])
    ]
    rows = []
    for na, nb, workers in cases:
        r = run_case(n, res, (na, nb), max(workers, 0), workers < 0)
        t = (na, nb, workers)
        rows.append((t, r))
        print(t, r, flush=True)
    base = rows[0][1]
    load = os.getloadavg()
    lines = [
        "# Atlas in one piece vs tiles (tests/benchmarks/bench_tiles.py)",
        "",
        f"Random pair of {n} contours (gridgen seed 3), {res} x {res} lattice, pairs all; "
        f"load average at the end {load[0]:.2f} on {os.cpu_count()} cores. Tiled crossings count the "
        "halo cells in each tile that maps them. Dask rows: peak RSS is the driver's only (the "
        "workers are other processes).",
        "",
        "| plan | time (s) | peak RSS (GB) | crossings | tie curves | components | time ratio | "
        "us per crossing | per-crossing ratio | memory ratio |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for t, r in rows:
        lines.append(
            f"| {_name(t)} | {r['seconds']:.1f} | "
            f"{r['peak_rss'] / 1e9:.2f} | {r['crossings']:,} | {r['tie_curves']:,} | {r['components']} | "
            f"{r['seconds'] / base['seconds']:.2f} | {1e6 * r['seconds'] / r['crossings']:.2f} | "
            f"{(r['seconds'] / r['crossings']) / (base['seconds'] / base['crossings']):.2f} | "
            f"{r['peak_rss'] / base['peak_rss']:.2f} |"
        )
    alone, a, b = two_process_ceiling(n, res)
    lines += [
        "",
        f"Two processes at once on this machine: tile 2 of the 2 x 2 plan alone {alone:.1f} s; two copies "
        f"started together {a:.1f} s and {b:.1f} s ({max(a, b) / alone:.2f}x), so two workers are at most "
        f"{2 * alone / max(a, b):.2f}x one worker on the tile phase here, before the merge.",
    ]
    (HERE / "results_tiles.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))


def _name(t: tuple[int, int, int]) -> str:
    if t[2] < 0:
        return f"{t[0]} x {t[1]} tiles, streamed"
    if t[2]:
        return f"{t[0]} x {t[1]} tiles, Dask {t[2]} worker{'s' if t[2] > 1 else ''}"
    return "one piece" if t[:2] == (1, 1) else f"{t[0]} x {t[1]} tiles"


if __name__ == "__main__":
    main(sys.argv[1:])
