"""Benchmark: the whole-strip certified branch and bound against the dense sweep, same run (issue 13).

Run ``python tests/benchmarks/bench_certify.py [study.toml] [--lines N]`` (default: the demo study).
For the study's pair it times, in one process:

- the dense sweep as before (41 x 41 nodes, degrees 0-2, pattern search refinement): lines,
  seconds, node maximum plus its cell error bound -- the baseline of every ratio;
- :func:`specmap.distance.branch.box_search` over the whole strip ]0, 1[ x [b-, b+] (the strip's ends
  included) to delta = 1e-3 of the value range, budget N lines (default 6000), each search on a
  fresh evaluator (no dense line is free), floors = the dense sweep's best values (values of h, so
  at most D_k: what the other stages hand the search in ``matching_distance``):
  per degree with the bound of issue 13 item 2 (sub-rectangles, shifts, polish, the top-degree
  interval for degree 2), per degree with the bound before it (``sub=0, sub_fine=0,
  polish=False``: the same-run baseline of the improvement), and the three degrees in one search.

The target (issue 13 "Performance"): certification to delta within 3 x the dense sweep's time.
Writes ``results_certify.md`` next to this file.

``--mesh`` instead measures the mesh-to-surface term (issue 13 item 1): the study's D_k (reduced
search, its grids and atlas) with both meshes at 1x, 2x and 4x the study's resolution, and
writes ``results_certify_mesh.md``.
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

import specmap.grids  # noqa: F401  (import order: grids before shapes)
from specmap.distance.bounds import distance_upper_bound, value_range
from specmap.distance.branch import _one_mesh, box_search, strip_segments, top_degree_index
from specmap.distance.dense import dense_sweep
from specmap.distance.evaluator import LineEvaluator
from specmap.pipeline import StudyRun
from specmap.study import load_study

OUT = Path(__file__).with_name("results_certify.md")
DEMO = Path(__file__).parents[2] / "studies" / "demo.toml"
DEGREES = (0, 1, 2)


def main(path: str | Path = DEMO, lines: int | None = None) -> str:
    study = load_study(str(path))
    run = StudyRun(study, show_progress=False)
    sf, sg = run.shapes
    w = run.window
    tol = 1e-3 * value_range(sf, sg)
    upper, kind = distance_upper_bound(sf, sg)
    budget = int(lines if lines is not None else 6000)
    load0 = os.getloadavg()[0]
    ev = LineEvaluator(sf, sg, DEGREES)
    t = time.perf_counter()
    dense = dense_sweep(ev, w, resolution=41, bounds=(sf.value_bounds(), sg.value_bounds()))
    dense_s = time.perf_counter() - t
    rows = [
        f"| dense 41 x 41, degrees 0-2 | {dense.lines} | {dense_s:.1f} | 1.00 | "
        + ", ".join(f"D_{k} in [{dense.best[j][0]:.5f}, {dense.upper(j):.4f}]" for j, k in enumerate(DEGREES))
        + " | no |"
    ]
    print(rows[-1], flush=True)
    dense_floor = [float(dense.best[j][0]) for j in range(len(DEGREES))]
    new_kw = {"top_degree": None}
    old_kw = {"sub": 0, "sub_fine": 0, "polish": False}
    top = top_degree_index(sf, sg, DEGREES)
    runs = [(f"degree {k}, bound of item 2", (k,), new_kw) for k in DEGREES]
    runs += [(f"degree {k}, bound before item 2", (k,), old_kw) for k in DEGREES]
    runs += [("degrees 0-2 in one search, bound of item 2", DEGREES, new_kw)]
    totals: dict[str, float] = {}
    for name, ks, kw in runs:
        js = [DEGREES.index(k) for k in ks]
        evk = LineEvaluator(sf, sg, ks)
        opts = dict(kw)
        if "top_degree" in opts:
            opts["top_degree"] = ks.index(2) if (top is not None and 2 in ks) else None
        box = box_search(
            evk,
            sf.values,
            sg.values,
            strip_segments(0.0, 1.0),
            w.b,
            [dense_floor[j] for j in js],
            tolerance=tol,
            upper=upper,
            max_lines=budget,
            one_mesh=_one_mesh(sf, sg),
            **opts,
        )
        intervals = ", ".join(
            f"D_{k} in [{box.best[i]:.5f}, {box.bound[i]:.5f}] ({'closed' if box.closed[i] else 'open'})"
            for i, k in enumerate(ks)
        )
        key = name.split(", ", 1)[1] if len(ks) == 1 else name
        totals[key + " lines"] = totals.get(key + " lines", 0) + box.lines
        totals[key + " seconds"] = totals.get(key + " seconds", 0.0) + box.seconds
        rows.append(
            f"| strip search, {name} | {box.lines} | {box.seconds:.1f} | "
            f"{box.seconds / dense_s:.2f} | {intervals} | {'yes' if all(box.closed) else 'no'} |"
        )
        print(rows[-1], flush=True)
    for key in ("bound of item 2", "bound before item 2"):
        rows.append(
            f"| sum of the three per-degree searches, {key} | {totals[key + ' lines']:.0f} | "
            f"{totals[key + ' seconds']:.1f} | {totals[key + ' seconds'] / dense_s:.2f} | | |"
        )
    text = "\n".join(
        [
            "# Certified distance: whole-strip branch and bound vs the dense sweep (same run)",
            "",
            f"Pair: study {study.name}, {len(sf.values)} + {len(sg.values)} vertices; window a in "
            f"[{w.a[0]:g}, {w.a[1]:g}], searched a in ]0, 1[ (ends included); delta = 1e-3 of the value "
            f"range = {tol:.4g}; a-priori bound {upper:.4g} ({kind}); floors = the dense sweep's best values "
            f"(values of h, so at most D_k, as the other stages hand them to the search); budget {budget} "
            "lines per search, each on a fresh evaluator (no dense line is free); "
            f"one core (jobs = 1); load average {load0:.1f} at the start, {os.getloadavg()[0]:.1f} at the end.",
            "",
            "| computation | lines | seconds | x dense time | interval | certified (width <= delta) |",
            "|---|---:|---:|---:|---|---|",
            *rows,
            "",
        ]
    )
    OUT.write_text(text)
    return text


def mesh_movement(path: str | Path = DEMO, factors: tuple[int, ...] = (1, 2, 4)) -> str:
    """D_k of the study at 1x, 2x, 4x its mesh resolution (reduced search, certify = "each").

    The runs are those of ``[distance] mesh_check`` (:meth:`specmap.pipeline.StudyRun.mesh_term`,
    the one code path), here with the audits off and nothing stored or read back.
    """
    import dataclasses

    base = load_study(str(path))
    run = StudyRun(base, show_progress=False)
    settings = dataclasses.replace(
        run.distance_settings(method="reduced"),
        certify="each",
        position_lines=0,
        strip_budget=0.0,
        mesh_check=tuple(m for m in factors if m != 1),
    )
    block, why = run.mesh_term(settings, store=False)
    if block is None:
        raise SystemExit(f"mesh term of {path}: {why}")
    ks = list(block["by_degree"])
    lines = [
        f"# Mesh-to-surface term: D_k of study {base.name} at {', '.join(f'{m}x' for m in block['factors'])} resolution",
        "",
        'Reduced search (its grids and atlas), certify = "each", no whole-strip search, the 1x window at every '
        "factor (StudyRun.mesh_term, as [distance] mesh_check runs it); movement = D_k(m x) - D_k(finest).",
        "",
        "| resolution | vertices | mesh tolerance | "
        + " | ".join(f"D_{k} [bounds] (movement)" for k in ks)
        + " | seconds |",
        "|---|---:|---:|" + "---|" * len(ks) + "---:|",
    ]
    for i, m in enumerate(block["factors"]):
        cells = []
        for k in ks:
            e = block["by_degree"][k]
            v, bnd = e["values"][i], e["bounds"][i] or [float("nan")] * 2
            cells.append(f"{v:.5f} [{bnd[0]:.5f}, {bnd[1]:.5f}] ({v - e['values'][-1]:+.5f})")
        lines.append(
            f"| {m}x | {block['vertices']['f'][i]} | {block['mesh_tolerance'][i]:.4f} | "
            + " | ".join(cells)
            + f" | {block['seconds'][i]:.1f} |"
        )
    lines += [
        "",
        "Movement max_m |D_k(m) - D_k(1)|: "
        + ", ".join(
            f"D_{k} {block['by_degree'][k]['movement']:.5f} (at {block['by_degree'][k]['moved_most_at']}x)"
            for k in ks
        )
        + ".",
    ]
    text = "\n".join(lines) + "\n"
    OUT.with_name("results_certify_mesh.md").write_text(text)
    return text


if __name__ == "__main__":
    args = sys.argv[1:]
    if "--mesh" in args:
        args.remove("--mesh")
        print(mesh_movement(args[0] if args else DEMO))
        sys.exit(0)
    n = None
    if "--lines" in args:
        i = args.index("--lines")
        n = int(args[i + 1])
        del args[i : i + 2]
    print(main(args[0] if args else DEMO, n))
