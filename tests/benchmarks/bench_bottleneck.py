"""Cost of the exact bottleneck (specmap.bottleneck) against gudhi's approximate one, same run.

    python tests/benchmarks/bench_bottleneck.py

Writes tests/benchmarks/results_bottleneck.md: per diagram size, microseconds per call for both and
their ratio, plus how often gudhi's value differs from the exact one by more than 1e-9.
"""

from __future__ import annotations

import time
from pathlib import Path

import gudhi
import numpy as np

from specmap.bottleneck import exact_bottleneck


def diagram(rng: np.random.Generator, n: int) -> np.ndarray:
    u = rng.uniform(-1, 1, n)
    return np.c_[u, u + rng.exponential(0.5, n)]


def main() -> None:
    rng = np.random.default_rng(3)
    rows = [
        "| points per diagram | gudhi (us/call) | exact (us/call) | ratio | gudhi off by > 1e-9 |",
        "|---|---|---|---|---|",
    ]
    for n, reps in ((4, 400), (16, 200), (64, 50), (256, 10)):
        pairs = [(diagram(rng, n), diagram(rng, n)) for _ in range(reps)]
        t0 = time.perf_counter()
        g = [float(gudhi.bottleneck_distance(a, b)) for a, b in pairs]
        t1 = time.perf_counter()
        e = [exact_bottleneck(a, b, guess=v) for (a, b), v in zip(pairs, g, strict=True)]
        t2 = time.perf_counter()
        off = sum(abs(x - y) > 1e-9 for x, y in zip(g, e, strict=True))
        tg, te = (t1 - t0) / reps * 1e6, (t2 - t1) / reps * 1e6
        rows.append(f"| {n} | {tg:.0f} | {te:.0f} | {te / tg:.1f}x | {off} of {reps} |")
    text = "# Exact bottleneck vs gudhi's approximate value (same run)\n\n" + "\n".join(rows) + "\n"
    Path(__file__).with_name("results_bottleneck.md").write_text(text)
    print(text)


if __name__ == "__main__":
    main()
