"""N = 80 contours measured at a coarse lattice (the default 121 x 121 needs ~41 GB here).

Run: python tests/benchmarks/bench_special_n80.py [resolution] [N]   (defaults 21, 80: about 8 minutes,
10 GB; N = 40 takes about 30 s, 1.2 GB). The pair is ``random_pair(100 + N, N)``.
Prints one line; results_special.md quotes it.
"""

from __future__ import annotations

import resource
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from gridgen import random_pair  # noqa: E402

from specmap.special import special_set  # noqa: E402
from specmap.strip import default_window  # noqa: E402


def main(res: int = 21, n: int = 80) -> None:
    f, g = random_pair(100 + n, n)
    w = default_window(f.bbox(), g.bbox())
    t = time.perf_counter()
    at = special_set(f, g, w, resolution=res)
    st = at.stats
    print(
        f"N={n} res {res}: {time.perf_counter() - t:.1f} s, crossings {st['crossings']}, tie curves {st['tie_curves']}, "
        f"ties with curves {st['ties_with_curves']}, components {len(at.components)}, "
        f"peak RSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20:.1f} GB, "
        f"detect {st['detect_s']:.1f} trace {st['trace_s']:.1f} components {st['components_s']:.1f}",
        flush=True,
    )


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 21, int(sys.argv[2]) if len(sys.argv) > 2 else 80)
