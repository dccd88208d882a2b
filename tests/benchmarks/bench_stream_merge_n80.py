"""The streamed merge of the N = 80, 121 x 121 map from its tile files (issue 12).

    nice python tests/benchmarks/bench_stream_merge_n80.py FOLDER [N] [RESOLUTION] [TILES]

``FOLDER`` holds the finished tiles written by ``bench_tiles_n80.py`` (same pair, lattice and
split; the fingerprint is checked, a missing or stale tile is mapped here). The map is then
completed by :func:`specmap.special.tiles.streamed_tiled_map`: tile files read one at a time,
summaries merged, the GeoJSON written feature by feature. Prints one JSON line (seconds, peak
RSS of this process from ``resource.getrusage``, tie curves, components by kind, GeoJSON size)
and appends a row to tests/benchmarks/results_tiles_n80.md.
"""

from __future__ import annotations

import json
import os
import resource
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))


def main(argv: list[str]) -> None:
    from gridgen import random_pair

    from specmap.settings import MapSettings
    from specmap.special.compute import default_tolerance
    from specmap.special.tiles import streamed_tiled_map
    from specmap.strip import default_window

    folder = Path(argv[0]).resolve()
    n = int(argv[1]) if len(argv) > 1 else 80
    res = int(argv[2]) if len(argv) > 2 else 121
    tiles = tuple(int(x) for x in (argv[3] if len(argv) > 3 else "4x4").split("x"))
    f, g = random_pair(100 + n, n)
    w = default_window(f.bbox(), g.bbox())
    s = MapSettings(resolution=res, tol=default_tolerance(f, g))
    geo = folder / "special.geojson"
    t = time.perf_counter()
    atlas = streamed_tiled_map(f, g, w, tiles=(tiles[0], tiles[1]), folder=folder, geojson=geo, settings=s)
    dt = time.perf_counter() - t
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    counts = atlas.counts()
    row = {
        "seconds": round(dt, 1),
        "peak_rss_gb": round(peak / 1e9, 2),
        "tiles_reused": atlas.stats["tiles"]["reused"],
        "merge_s": atlas.stats["tiles"]["merge_s"],
        "tie_curves": atlas.stats["tie_curves"],
        "clipped_lines": atlas.stats["clipped_lines"],
        "components": counts,
        "geojson_mb": round(geo.stat().st_size / 1e6, 1),
        "load": round(os.getloadavg()[0], 2),
    }
    print(json.dumps(row), flush=True)
    out = HERE / "results_tiles_n80.md"
    with out.open("a") as fh:
        fh.write(
            f"\nStreamed merge (bench_stream_merge_n80.py, {len(atlas.stats['tiles']['seconds_per_tile'])} tiles, "
            f"{row['tiles_reused']} read back from the tile folder): {row['seconds']} s, peak RSS of the merge "
            f"process {row['peak_rss_gb']} GB, {row['tie_curves']:,} tie curves "
            f"({row['clipped_lines']:,} clipped lines), components {counts}, special.geojson {row['geojson_mb']} MB; "
            f"load average at the end {row['load']} on 2 cores.\n"
        )


if __name__ == "__main__":
    main(sys.argv[1:])
