"""The banded map of the real scan pair: `specmap map studies/scans.toml --costs LO,HI` per band.

Issue 11's target: the map of a real scan pair in <= 2 min and <= 4 GB on 2 cores. The whole map
of this pair (521 + 88 contours) is refused (about 1e11 crossings); this script maps bands of tied
costs around its distance (D_0 = 1.0218, tests/benchmarks/results_scans.md) through the command
line, one child process per band (so peak RSS is the map's own), and records wall time, peak RSS
(/usr/bin/time -v, or resource.getrusage of the children), the pairs kept and the components, in
tests/benchmarks/results_map_costs.md. Same-run comparison: the bands are run one after another in
this process, with the load average written beside them (the machine may be shared).

Usage: python3 tests/benchmarks/bench_map_costs.py [lo,hi ...]   (default 1.02,1.26 0.95,1.3)
The meshes must be fetched first: python3 studies/data/fetch_scans.py
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
STUDY = ROOT / "studies" / "scans.toml"
RESULTS = Path(__file__).with_name("results_map_costs.md")


def run_band(band: str, out: Path) -> dict:
    """One `specmap map --costs band` in a child process: seconds, peak RSS (GB), special.json facts."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    t0 = time.perf_counter()
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "--quiet", "map", str(STUDY), "--costs", band, "--out", str(out)],
        capture_output=True,
        text=True,
        cwd=ROOT,
    )
    seconds = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss  # KiB, the largest child so far
    row = {
        "band": band,
        "seconds": seconds,
        "peak_gb": peak * 1024 / 1e9,
        "peak_is_max_so_far": peak == before,
    }
    if proc.returncode != 0:
        row["error"] = (
            proc.stderr.strip().splitlines()[-1] if proc.stderr.strip() else f"exit {proc.returncode}"
        )
        return row
    js = json.loads((out / "special.json").read_text())
    st = js["stats"]
    row.update(
        pairs_kept=js["costs"]["pairs_kept"],
        pairs_total=js["costs"]["pairs_total"],
        counts=js["counts"],
        tie_curves=st.get("tie_curves"),
        crossings=st.get("crossings"),
        estimated=st["focus"].get("estimated_crossings"),
        map_seconds=st.get("seconds"),
        components_s=st.get("components_s"),
        json_mb=(out / "special.json").stat().st_size / 1e6,
    )
    return row


def main(bands: list[str]) -> None:
    if not (ROOT / "studies" / "data" / "scans" / "cow.ply").is_file():
        sys.exit("fetch the scans first: python3 studies/data/fetch_scans.py")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for i, band in enumerate(bands):
            load = os.getloadavg()[0]
            row = run_band(band, Path(tmp) / f"b{i}")
            row["load"] = load
            rows.append(row)
            print(json.dumps(row), flush=True)
    lines = [
        "# Banded map of the scan pair (`specmap map studies/scans.toml --costs LO,HI`)",
        "",
        "521 + 88 contours, pairs roles, 61 x 61; one child process per band, run one after another.",
        "Target (issue 11): <= 120 s and <= 4 GB on 2 cores. The machine was shared with other",
        "sessions' work (load average at the start of each band in the table); peak RSS is",
        "getrusage's largest child so far (a later, smaller band repeats the earlier peak).",
        "",
        "| band | pairs kept | est. crossings | tie curves | components (curve / point / patch) | wall s | "
        "components s | peak RSS | special.json | load | target |",
        "|---|---:|---:|---:|---|---:|---:|---:|---:|---:|---|",
    ]
    for r in rows:
        if "error" in r:
            lines.append(
                f"| [{r['band']}] | refused or failed: {r['error']} | | | | {r['seconds']:.1f} | | | | | |"
            )
            continue
        c = r["counts"]
        ok = r["seconds"] <= 120 and r["peak_gb"] <= 4
        lines.append(
            f"| [{r['band']}] | {r['pairs_kept']:,} of {r['pairs_total']:,} | {r['estimated']:,} | "
            f"{r['tie_curves']:,} | {c['curve']} / {c['point']} / {c['patch']} | {r['seconds']:.1f} | "
            f"{r['components_s']:.1f} | {r['peak_gb']:.2f} GB{' (max so far)' if r['peak_is_max_so_far'] else ''} | "
            f"{r['json_mb']:.0f} MB | {r['load']:.1f} | {'met' if ok else 'NOT met'} |"
        )
    RESULTS.write_text("\n".join(lines) + "\n")
    print(f"-> {RESULTS}")


if __name__ == "__main__":
    main(sys.argv[1:] or ["1.02,1.26", "0.95,1.3"])
