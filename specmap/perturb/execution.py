"""Running a run set: the joblib / Dask driver around the pure :func:`~specmap.perturb.run.run_one`.

Runs are independent and seeded per run index, so results do not depend on the number of
jobs or on the backend; the parent process alone writes the store (:mod:`specmap.perturb.store`).
"""

from __future__ import annotations

import dataclasses
import json
import time
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any

from specmap.errors import StudyError
from specmap.io import append_jsonl, to_plain
from specmap.perturb.run import PerturbBase, PerturbSettings, run_one, run_seed
from specmap.perturb.store import fingerprint, locked, switch_run_set, tidy_runs, write_summary
from specmap.perturb.summary import movement_slope, summarize_runs, sweep_row


def _results(tasks: list, jobs: int, cluster: str | None) -> Iterator[dict[str, Any]]:
    """Results of joblib ``tasks`` as they finish: ``jobs`` local processes, or a Dask ``cluster``."""
    import joblib

    if cluster is None:
        yield from joblib.Parallel(n_jobs=jobs, return_as="generator_unordered")(tasks)
        return
    try:
        import distributed
    except ImportError:
        raise StudyError(
            "a cluster needs dask.distributed, which is not installed",
            field="--cluster",
            fix="pip install 'specmap[dask]' or run without --cluster",
        ) from None
    try:
        client = distributed.Client(cluster, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise StudyError(
            f"cannot reach the Dask scheduler {cluster!r} ({exc})",
            field="--cluster",
            fix="start a scheduler (dask scheduler) or check the address tcp://host:port",
        ) from None
    try:
        yield from _on_cluster(client, tasks)
    finally:
        client.close()


_PLAIN = (int, float, str, bool, type(None))


def _on_cluster(client: Any, tasks: list) -> Iterator[Any]:
    """Results of joblib ``tasks`` run on the workers of a Dask ``client``, as they finish.

    Submitted to Dask itself (not through joblib's dask backend, which runs every task in
    this process when the cluster has a single worker thread), in the order given (Dask
    starts earlier submissions first); arguments that are not plain values are scattered
    once each and shared by the tasks (the grids of a map, the base of a run set).
    """
    from distributed import as_completed

    scattered: dict[int, Any] = {}

    def ship(x: Any) -> Any:
        if isinstance(x, _PLAIN) or (isinstance(x, tuple) and all(isinstance(y, _PLAIN) for y in x)):
            return x
        if id(x) not in scattered:
            scattered[id(x)] = client.scatter(x, hash=False, broadcast=False)
        return scattered[id(x)]

    futures = [
        client.submit(fn, *[ship(a) for a in args], pure=False, **{k: ship(v) for k, v in kwargs.items()})
        for fn, args, kwargs in tasks
    ]
    for fut in as_completed(futures):
        result = fut.result()
        fut.release()
        yield result


def size_tag(size: float) -> str:
    """Folder name of one size of a sweep, e.g. ``size-0.001``."""
    return f"size-{size:.6g}"


def run_study(
    base: PerturbBase,
    settings: PerturbSettings,
    folder: str | Path,
    *,
    jobs: int = 1,
    cluster: str | None = None,
    progress: Callable[[int, int], None] | None = None,
    sizes: Sequence[float] | None = None,
) -> dict[str, Any]:
    """Run (or resume) one run set and write its records and summary into ``folder``.

    Parameters
    ----------
    base : PerturbBase
        From :func:`~specmap.perturb.run.make_base`; grid-only bases work with the "grid" model.
    settings : PerturbSettings
    folder : path
        Run-set folder, e.g. ``DIR/perturb``; gets ``runs.jsonl``, ``settings.json``,
        ``summary.json``.
    jobs : int
        joblib workers (processes); results do not depend on it.
    cluster : str, optional
        ``"tcp://host:port"`` of a Dask scheduler: run on its workers instead (tasks submitted to Dask directly).
    progress : callable(done, total), optional
    sizes : sequence of float, optional
        A sweep: every other size is its own run set under ``folder/sweep/size-<size>/`` (same
        seeds), and the summary gets one :func:`~specmap.perturb.summary.sweep_row` per size.

    Returns
    -------
    dict
        The summary: ``runs``, ``size``, ``model``, ``base`` {``total_area``, ``counts``},
        ``runs_with_patch``, ``runs_with_patch_ci95`` (Wilson), ``total_area`` and ``hausdorff``
        {``mean``, ``max``}, ``distance`` (or None), ``stability_violations``, ``verdict``,
        ``sweep`` (None without ``sizes``), ``runs_per_minute``, ``fingerprint``, ``settings``.

    Raises
    ------
    StudyError
        Bad settings, a missing Dask, an unreachable scheduler, or a folder already in use.
    """
    folder = Path(folder)
    with locked(folder):
        summary = _run_set(base, settings, folder, jobs, cluster, progress)
        if sizes:
            rows = []
            for s in sorted({float(x) for x in sizes} | {settings.size}):
                if s == settings.size:
                    rows.append(sweep_row(summary))
                    continue
                sub = run_study(
                    base,
                    dataclasses.replace(settings, size=s),
                    folder / "sweep" / size_tag(s),
                    jobs=jobs,
                    cluster=cluster,
                    progress=progress,
                )
                rows.append(sweep_row(sub))
            summary = {**summary, "sweep": rows, "curve_movement_slope": movement_slope(rows)}
        write_summary(folder, summary)
    return summary


def _run_set(
    base: PerturbBase,
    settings: PerturbSettings,
    folder: Path,
    jobs: int,
    cluster: str | None,
    progress: Callable[[int, int], None] | None,
) -> dict[str, Any]:
    """Resume the run set of ``settings`` in ``folder`` (held locked), append new runs, summarize."""
    fp = fingerprint(base, settings)
    settings_json = {
        "fingerprint": fp,
        "settings": settings.to_json(),
        "window": base.window.to_json(),
        "base": base.summary(),
    }
    runs_path = folder / "runs.jsonl"
    switch_run_set(folder, fp, settings_json)
    done = tidy_runs(runs_path, fp)
    total = settings.runs
    todo = [i for i in range(total) if i not in done]
    if progress is not None:
        progress(min(len(done), total), total)
    t0 = time.perf_counter()
    new = 0
    if todo:
        from joblib import delayed

        from specmap.floatwarn import Counted, unwrap

        # workers' numpy float warnings come back with each record and join the CLI's one-line count
        tasks = [delayed(Counted(run_one))(base, i, run_seed(settings.seed, i), settings) for i in todo]
        for rec in map(unwrap, _results(tasks, jobs, cluster)):
            idx = int(rec["run"])
            if idx in done:
                continue
            rec = {**rec, "fingerprint": fp}
            append_jsonl(runs_path, rec)
            done[idx] = json.loads(json.dumps(to_plain(rec)))
            new += 1
            if progress is not None:
                progress(sum(1 for i in done if i < total), total)
    elapsed = time.perf_counter() - t0
    records = [done[i] for i in sorted(done) if i < total]
    if new:
        rate, basis = 60.0 * new / elapsed, f"wall clock of the last invocation ({new} runs, {jobs} jobs)"
    else:
        busy = sum(float(r.get("time", 0.0)) for r in records)
        rate = 60.0 * len(records) / busy if busy > 0 else None
        basis = "sum of recorded run times (one worker)"
    summary = summarize_runs(
        records,
        base=base.summary(),
        size=settings.size,
        model=settings.model,
        window_area=base.window.area,
        runs_per_minute=rate,
        runs_per_minute_basis=basis,
    )
    summary["fingerprint"] = fp
    summary["settings"] = settings.to_json()
    summary["window"] = base.window.to_json()
    return summary
