"""Peak memory of ``specmap map`` end to end against the atlas alone, same run (issue 14 item 3).

    python tests/benchmarks/bench_map_cli.py [N ...]

For each N (default 20 30 40) a random generic pair of N contours together (tests/gridgen.py,
``random_pair(100 + N, N)``, the pair of ``bench_special.py``) is written as two grid files and
mapped twice, each in a fresh subprocess whose peak RSS is read from ``resource.getrusage``:

- ``atlas``: the library call ``special_set(f, g, window)`` at the default 121 x 121 lattice;
- ``cli``: ``specmap map STUDY --out DIR`` on the same files (the atlas, then ``special.json``,
  ``special_pieces.json``, the streamed ``special.geojson`` and the figure).

The ratio cli / atlas is the cost of writing the results. Writes
tests/benchmarks/results_map_cli.md.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent

ATLAS = r"""
import json, resource, sys, time
sys.path.insert(0, {tests!r})
from gridgen import random_pair
from specmap.special import special_set
from specmap.strip import default_window
f, g = random_pair(100 + {n}, {n})
w = default_window(f.bbox(), g.bbox())
t = time.perf_counter()
at = special_set(f, g, w)
print(json.dumps({{"seconds": time.perf_counter() - t,
    "peak_rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
    "crossings": at.stats["crossings"], "tie_curves": at.stats["tie_curves"]}}))
"""

CLI = r"""
import json, resource, sys, time
from specmap.cli import main
t = time.perf_counter()
try:
    main(["--quiet", "map", {study!r}, "--out", {out!r}])
except SystemExit as e:
    if e.code:
        raise
print(json.dumps({{"seconds": time.perf_counter() - t,
    "peak_rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024}}))
"""


def _child(code: str) -> dict:
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    if out.returncode:
        return {"error": (out.stderr.strip().splitlines() or ["?"])[-1]}
    return json.loads(out.stdout.strip().splitlines()[-1])


def run_n(n: int, tmp: Path) -> tuple[dict, dict, dict[str, int]]:
    sys.path.insert(0, str(HERE.parent))
    from gridgen import random_pair

    from specmap.io import write_json

    f, g = random_pair(100 + n, n)
    write_json(tmp / f"f{n}.json", f.to_json())
    write_json(tmp / f"g{n}.json", g.to_json())
    study = tmp / f"s{n}.toml"
    # the window is left out, so the study takes the default window of the two grids, as the atlas call does
    study.write_text(
        f'[study]\nname = "random{n}"\n[f]\ngrid = "f{n}.json"\n[g]\ngrid = "g{n}.json"\n'
        '[map]\nresolution = 121\nmemory = "20GB"\n'
    )
    atlas = _child(ATLAS.format(tests=str(HERE.parent), n=n))
    out = tmp / f"out{n}"
    cli = _child(CLI.format(study=str(study), out=str(out)))
    sizes = {p.name: p.stat().st_size for p in sorted(out.glob("special*"))} if out.exists() else {}
    if (out / "special.json").exists():  # the same map as the library call?
        st = json.loads((out / "special.json").read_text())["stats"]
        cli["same"] = (st["crossings"], st["tie_curves"]) == (atlas.get("crossings"), atlas.get("tie_curves"))
    return atlas, cli, sizes


def main(argv: list[str]) -> None:
    ns = [int(x) for x in argv] or [20, 30, 40]
    lines = [
        "# `specmap map` end to end vs the atlas alone (tests/benchmarks/bench_map_cli.py)",
        "",
        "Random pairs `random_pair(100 + N, N)` (tests/gridgen.py), default window, 121 x 121 lattice, "
        f"pairs all; each row two fresh subprocesses in the same run; {os.cpu_count()} cores.",
        "",
        "| N | atlas s | atlas peak RSS (GB) | map CLI s | map CLI peak RSS (GB) | memory ratio | crossings | "
        "tie curves | same map | special.json / special_pieces.json / special.geojson (MB) |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    with tempfile.TemporaryDirectory() as d:
        for n in ns:
            atlas, cli, sizes = run_n(n, Path(d))
            print(n, atlas, cli, sizes, flush=True)
            if "error" in atlas or "error" in cli:
                lines.append(f"| {n} | {atlas.get('error', '')} | | {cli.get('error', '')} | | | | | | |")
                continue
            mb = " / ".join(
                f"{sizes.get(k, 0) / 1e6:.0f}"
                for k in ("special.json", "special_pieces.json", "special.geojson")
            )
            lines.append(
                f"| {n} | {atlas['seconds']:.1f} | {atlas['peak_rss'] / 1e9:.2f} | {cli['seconds']:.1f} | "
                f"{cli['peak_rss'] / 1e9:.2f} | {cli['peak_rss'] / atlas['peak_rss']:.2f} | "
                f"{atlas['crossings']:,} | {atlas['tie_curves']:,} | {cli.get('same')} | {mb} |"
            )
    load = os.getloadavg()
    lines += ["", f"load average at the end: {load[0]:.2f} (the machine was shared with other work)."]
    (HERE / "results_map_cli.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))


if __name__ == "__main__":
    main(sys.argv[1:])
