"""Command line: ``specmap grid|map|distance|perturb|report|explore|demo``.

The CLI only loads, calls and writes. User mistakes become one line on
standard error and exit status 2; Ctrl-C exits 130 and keeps finished files.
"""

from __future__ import annotations

import argparse
import os
import signal
import sys
import warnings
from collections import Counter
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

from specmap import __version__
from specmap.errors import SpecmapInputError, StudyError
from specmap.io import read_json
from specmap.report.fmt import fmt_distance, fmt_pct, fmt_point, plural, round_values

if TYPE_CHECKING:
    from specmap.study import Study

REACHED = {
    "slope-one": "reached on the slope-one line a = 1/2",
    "special": "reached on the special set",
    "both": "reached on the slope-one line and on the special set alike (equal within the tolerance)",
    "dense": "found by the dense sweep",
}
"""What distance.json's ``reached_on`` means, in words."""

EXIT_USER = 2
EXIT_INTERRUPT = 130
EXIT_TERMINATED = 143  # 128 + SIGTERM, the shell's convention


class Terminated(KeyboardInterrupt):
    """SIGTERM, handled like Ctrl-C: the same clean-up paths run (workers ended, files kept)."""


def _on_sigterm(signum: int, frame: object) -> None:
    raise Terminated()


def _degrees(text: str) -> tuple[int, ...]:
    try:
        vals = tuple(sorted({int(x) for x in text.split(",") if x.strip()}))
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a list like 0,1,2") from None
    if not vals or any(v not in (0, 1, 2) for v in vals):
        raise argparse.ArgumentTypeError("degrees must be among 0,1,2")
    return vals


def _positive(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if v < 1:
        raise argparse.ArgumentTypeError("must be >= 1")
    return v


def _memory(text: str) -> float:
    from specmap.errors import InputValueError
    from specmap.special.preflight import parse_memory

    try:
        return parse_memory(text)
    except InputValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a memory size like 6GB or 512MB") from None


def _tiles(text: str) -> tuple[int, int] | str:
    if text == "auto":
        return "auto"
    parts = text.lower().replace(",", "x").split("x")
    try:
        na, nb = (int(x) for x in parts)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not tiles like 2x2 or auto") from None
    if min(na, nb) < 1:
        raise argparse.ArgumentTypeError(f"{text!r}: tile counts must be >= 1")
    return (na, nb)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="specmap",
        description="Map the special set, the matching distance and their perturbations "
        "for two R^2-valued filtering functions.",
    )
    p.add_argument("--version", action="version", version=f"specmap {__version__}")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    sub = p.add_subparsers(dest="verb", required=True, metavar="VERB")

    def add_quiet(sp: argparse.ArgumentParser) -> None:
        # accepted after the verb too; SUPPRESS keeps the global value when absent here
        sp.add_argument("--quiet", action="store_true", default=argparse.SUPPRESS, help="no progress bars")

    def study_cmd(name: str, help_: str) -> argparse.ArgumentParser:
        sp = sub.add_parser(name, help=help_, description=help_)
        add_quiet(sp)
        sp.add_argument("study", help="study file (.toml)")
        sp.add_argument("--out", help="result folder (default results/<study name>)")
        return sp

    study_cmd("grid", "compute the extended Pareto grids of f and g")
    sp = study_cmd("map", "map the special set in the parameter strip")
    sp.add_argument("--pairs", choices=["all", "roles"], help="which ties to map (default: study's)")
    sp.add_argument("--resolution", type=_positive, help="sample nodes per side of the window")
    sp.add_argument(
        "--method",
        choices=["sweep", "naive"],
        help="detection method: sweep (fast) or naive (slow reference); default: study's",
    )
    sp.add_argument(
        "--memory",
        type=_memory,
        help="memory budget of the map, e.g. 6GB (default: study's [map] memory, else half of RAM); "
        "a map over it is computed in tiles",
    )
    sp.add_argument("--tiles", type=_tiles, help="tiles along a and b, e.g. 2x2, or auto (default: study's)")
    sp.add_argument(
        "--costs",
        metavar="LO,HI",
        help="map only the ties whose tied cost lies in [LO, HI] (value units), e.g. 0.95,1.3 "
        "(default: study's [map] costs, else the whole special set)",
    )
    sp.add_argument(
        "--jobs",
        type=_positive,
        default=1,
        help="parallel tile workers of a tiled map (default 1; capped at the core count unless --cluster)",
    )
    sp.add_argument("--cluster", help="Dask scheduler address for the tiles, e.g. tcp://127.0.0.1:8786")
    sp = study_cmd("distance", "compute the matching distance and where it is reached")
    sp.add_argument(
        "--method",
        choices=["reduced", "dense", "both"],
        help="reduced (search on the special set), dense (sweep of the window, the audit) "
        "or both; default: study's",
    )
    sp.add_argument("--degrees", type=_degrees, help="homology degrees, e.g. 0,1,2")
    sp.add_argument(
        "--mesh-check",
        metavar="FACTORS",
        help="mesh-to-surface term: D_k again with both surfaces at these multiples of their "
        "resolution, e.g. 2,4 (off: turn off the study's [distance] mesh_check); default: study's",
    )
    sp.add_argument(
        "--jobs",
        type=_positive,
        default=1,
        help="parallel slice workers (default 1; capped at the core count)",
    )
    sp = study_cmd("perturb", "run a perturbation study of the special set")
    sp.add_argument(
        "--runs",
        type=_positive,
        help="number of perturbed runs (default: study's perturb.runs, within its limits)",
    )
    sp.add_argument(
        "--jobs",
        type=_positive,
        default=1,
        help="parallel run workers (default 1; capped at the core count unless --cluster)",
    )
    sp.add_argument("--cluster", help="Dask scheduler address, e.g. tcp://127.0.0.1:8786")
    sp = sub.add_parser(
        "report",
        help="build the PDF report of a result folder",
        description="build the PDF report (summary page first, then the stages run) and its "
        "PNG figures from the files of a result folder",
    )
    add_quiet(sp)
    sp.add_argument("dir", help="result folder")
    sp.add_argument("--out", help="PDF path (default DIR/report.pdf); an existing file needs --force")
    sp.add_argument("--force", action="store_true", help="overwrite an existing file given as --out")
    sp = sub.add_parser(
        "explore",
        help="write DIR/explore.html, an offline page to explore a result folder",
        description="write one self-contained HTML page (no server, no network) showing the "
        "special set, the grids and h(a, b) of a result folder",
    )
    add_quiet(sp)
    sp.add_argument(
        "dir", help="result folder (with special.json; grid files and distance.json add to the page)"
    )
    sp.add_argument("--out", help="HTML path (default DIR/explore.html)")
    sp = sub.add_parser(
        "demo",
        help="run the shipped demo study end to end",
        description="run the shipped demo study end to end (grid, map, distance, perturb, "
        "report) and print D per degree, the verdict and where the PDF went",
    )
    add_quiet(sp)
    sp.add_argument("--out", help="result folder (default results/demo)")
    sp.add_argument(
        "--pdf",
        default="reports/demo.pdf",
        help="where the report is copied (default reports/demo.pdf, the tracked copy; the demo says "
        "when it replaced it)",
    )
    sp.add_argument(
        "--jobs",
        type=_positive,
        default=2,
        help="parallel workers for the distance and perturbation stages (default 2)",
    )
    sp.add_argument("--quick", action="store_true", help="smaller settings (for CI)")
    return p


def demo_study_path() -> Path:
    """The shipped demo study (studies/demo.toml next to the package, or in the working folder)."""
    for cand in (
        Path(__file__).resolve().parents[1] / "studies" / "demo.toml",
        Path.cwd() / "studies" / "demo.toml",
    ):
        if cand.is_file():
            return cand
    raise StudyError(
        "demo study not found",
        file="studies/demo.toml",
        field="(file)",
        fix="run from a clone of the specmap repository",
    )


def check_study_path(path: str) -> None:
    """One line for a study path that is a folder or cannot be read (before the TOML is parsed)."""
    p = Path(path)
    if p.is_dir():
        raise StudyError(
            "is a folder, not a study file",
            file=str(p),
            field="(file)",
            fix="give the path of a .toml study file inside it (see studies/)",
        )
    if p.is_file():
        try:
            with p.open("rb"):
                pass
        except PermissionError:
            raise StudyError(
                "cannot be read (permission denied)",
                file=str(p),
                field="(file)",
                fix="make the file readable (chmod u+r) or copy it somewhere readable",
            ) from None


KERNEL_VERBS = ("map", "distance", "perturb", "demo")
"""Verbs that call the compiled (numba) loops of the special-set search."""


def kernels_cached() -> bool:
    """Whether numba's cache holds an index for every compiled module (so nothing compiles now)."""
    from specmap.special import compiled

    pkg = Path(compiled.__file__).resolve().parent
    modules = [p.stem for p in pkg.glob("*.py") if p.stem != "__init__"]
    roots = [pkg / "__pycache__"]
    if os.environ.get("NUMBA_CACHE_DIR"):
        roots.append(Path(os.environ["NUMBA_CACHE_DIR"]))
    found = {p.name.split(".", 1)[0] for r in roots if r.is_dir() for p in r.rglob("*.nbi")}
    return all(m in found for m in modules)


def compile_notice(verb: str, show: bool) -> None:
    """One line before the first compilation of the kernels, which is otherwise a silent pause."""
    if show and verb in KERNEL_VERBS and not kernels_cached():
        print("specmap: compiling the numba kernels (about 10 s, once; cached afterwards)", file=sys.stderr)


def command_line(argv: list[str] | None) -> str:
    """The command as typed, for study.json (``specmap demo --quick --jobs 2``)."""
    import shlex

    return " ".join(shlex.quote(a) for a in ["specmap", *(sys.argv[1:] if argv is None else argv)])


def print_load_notes() -> None:
    """The result reader's notes (e.g. files written before result-file versions), after a success."""
    from specmap.report.load import take_notes

    for note in take_notes():
        print(note, file=sys.stderr)


def special_line(js: dict, path: Path | str) -> str:
    """What ``specmap map`` prints: the connected components by kind, the tie curves, the patch share.

    The words are the report's (:func:`specmap.report.summary.component_counts`): a curve
    component may hold many tie curves, so the two counts are said separately.

    >>> special_line({"counts": {"curve": 1, "patch": 1, "point": 0}, "area_fraction": 0.60312,
    ...     "stats": {"tie_curves": 3}}, "out/special.json")
    'special set: 1 patch, 1 curve component and 0 point components (connected components); 3 tie curves; patches cover 60.3% of the window -> out/special.json'
    """
    from specmap.report.summary import component_counts, tie_curve_count

    band = (js.get("costs") or {}).get("band")
    what = (
        f"special set restricted to tied costs in [{band[0]:.4g}, {band[1]:.4g}]" if band else "special set"
    )
    return (
        f"{what}: {component_counts(js)} (connected components); "
        f"{plural(tie_curve_count(js), 'tie curve')}; "
        f"patches cover {fmt_pct(js['area_fraction'])} of the window -> {path}"
    )


def remap_note(out: Path, method: str) -> str | None:
    """Why ``distance`` maps the special set again although ``special.json`` exists (None if it does not).

    Called when the written map cannot be read back (``StudyRun.reads_stored_map``): a folder
    mapped before ``special_pieces.json`` existed, or one whose map has other settings or inputs.
    """
    path = Path(out) / "special.json"
    if method not in ("reduced", "both") or not path.is_file():
        return None
    try:
        band = ((read_json(path).get("costs") or {}).get("band")) if path.stat().st_size < 50e6 else None
    except (OSError, ValueError, AttributeError):
        band = None
    if band:
        return (
            f"specmap: note: the map in this folder is restricted to tied costs in [{band[0]:.4g}, "
            f"{band[1]:.4g}], so the reduced search does not read it: it maps its own focused special set"
        )
    return (
        "specmap: note: the reduced search maps the special set again (the map in this folder "
        "has other inputs or settings, or no special_pieces.json: run specmap map to refresh it)"
    )


def costs_flag(text: str | None, study: Study) -> tuple[float, float] | None:
    """``--costs LO,HI`` checked like ``[map] costs`` (one line naming the study and the flag); None when not given."""
    from specmap.errors import InputValueError
    from specmap.settings import check_costs

    if text is None:
        return None
    parts = text.split(",")
    try:
        if len(parts) != 2:
            raise ValueError(text)
        return check_costs([float(x) for x in parts])
    except (ValueError, InputValueError):
        raise StudyError(
            f"{text!r} is not a band LO,HI of two finite numbers with LO < HI and HI > 0",
            file=str(study.path),
            field="--costs (map.costs)",
            fix="give --costs lo,hi in value units, like --costs 0.95,1.3, or drop it for the whole map",
        ) from None


def mesh_check_flag(text: str | None, study: Study) -> tuple[int, ...] | None:
    """``--mesh-check 2,4`` (or ``off``) checked like ``[distance] mesh_check``; None when not given.

    Asked for on the command line, the term must be measurable: a side given as a mesh or grid
    file (no resolution to raise) is a one-line error here, before any work (in the study file
    it only makes ``mesh_term`` null, with the reason).
    """
    from specmap.meshterm import not_remeshable
    from specmap.study import mesh_check_factors

    if text is None:
        return None
    if text.strip().lower() == "off":
        return ()
    items: list[int | str] = []
    for x in text.split(","):
        try:
            items.append(int(x))
        except ValueError:
            items = [text]  # not whole numbers: the check names the text
            break
    field = "--mesh-check (distance.mesh_check)"
    factors = mesh_check_factors(
        items, (study.f, study.g), file=str(study.path), field=field, form="--mesh-check 2,4"
    )
    why = not_remeshable(study) if factors else None
    if why is not None:
        label = why[0]
        spec = study.f if label == "f" else study.g
        raise StudyError(
            f"{label} is a {spec.source} file, which has no resolution to raise, so it cannot be re-meshed",
            file=str(study.path),
            field=f"{field}: {label}.{spec.source}",
            fix=f"drop --mesh-check, or give {label} as surface = ... with a resolution",
        )
    return factors


def run(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    from specmap.pipeline import StudyRun
    from specmap.study import check_flag, load_study

    show = not args.quiet
    if args.verb == "report":
        from specmap.report.pdf import build_report

        pdf = build_report(args.dir, args.out, overwrite=args.force or args.out is None)
        print(f"report: {pdf}")
        print_load_notes()
        return 0
    if args.verb == "explore":
        from specmap.explore import build_explorer

        page = build_explorer(args.dir, args.out)
        print(f"explorer: {page} ({page.stat().st_size / 1e6:.1f} MB, opens from disk with no network)")
        print_load_notes()
        return 0
    if args.verb == "demo":
        compile_notice(args.verb, show)
        from specmap.demo import run_demo, summary_lines

        outcome = run_demo(
            demo_study_path(),
            out=args.out,
            pdf=args.pdf,
            jobs=args.jobs,
            quick=args.quick,
            show_progress=show,
            command=command_line(argv),
        )
        for line in summary_lines(outcome):
            print(line)
        return 0
    check_study_path(args.study)
    study = load_study(args.study)
    costs = None
    if args.verb == "map":
        check_flag(str(study.path), "map.resolution", "--resolution", args.resolution)
        costs = costs_flag(args.costs, study)
    if args.verb == "perturb":
        check_flag(str(study.path), "perturb.runs", "--runs", args.runs)
    mesh_check = mesh_check_flag(args.mesh_check, study) if args.verb == "distance" else None
    compile_notice(args.verb, show)  # after the checks: a mistake in the study file stays one line
    cores = os.cpu_count() or 1
    if getattr(args, "jobs", 1) > cores and not getattr(args, "cluster", None):
        print(
            f"specmap: note: --jobs {args.jobs} is more than this machine's {cores} cores; using {cores}",
            file=sys.stderr,
        )
        args.jobs = cores
    sr = StudyRun(study, args.out, show_progress=show)
    sr.check_out()
    if args.verb == "grid":
        counts = sr.write_grids()
        sr.record()
        print(f"grids: f {plural(counts['f'], 'contour')}, g {plural(counts['g'], 'contour')} -> {sr.out}")
    elif args.verb == "map":
        sr.map_jobs, sr.map_cluster = args.jobs, args.cluster
        js = sr.write_map(
            pairs=args.pairs,
            resolution=args.resolution,
            method=args.method,
            memory=args.memory,
            tiles=args.tiles,
            costs=costs,
        )
        sr.write_grids()
        sr.record()
        print(special_line(js, sr.out / "special.json"))
    elif args.verb == "distance":
        if study.grid_only:
            raise StudyError(
                "this study gives a grid file, which has no mesh, so no slice diagrams",
                file=str(study.path),
                field="[f]/[g]",
                fix="give a surface or mesh for both f and g to compute distances",
            )
        from specmap.report.summary import why_sentences

        settings = sr.distance_settings(method=args.method)
        note = None if sr.reads_stored_map(settings) else remap_note(sr.out, settings.method)
        if note and show:
            print(note, file=sys.stderr)
        js = sr.write_distance(
            method=args.method, degrees=args.degrees, mesh_check=mesh_check, jobs=args.jobs
        )
        sr.record()
        print(
            f"matching distance: D = {fmt_distance(js)} at (a, b) = {fmt_point(js['at'])}, "
            f"{REACHED.get(js['reached_on'], 'reached on ' + str(js['reached_on']))} "
            f"-> {sr.out / 'distance.json'}"
        )
        if js.get("audit", {}).get("theorem_gap"):
            print("WARNING: the theorem audit failed (see distance.json audit.theorem)", file=sys.stderr)
        tol = js.get("tolerance")
        for k, v in (js.get("by_degree") or {}).items():
            if v.get("resolved") is False:
                print(f"D_{k} not resolved: {round_values(str(v.get('resolved_why')), tol)}", file=sys.stderr)
            if v.get("certified") is False and v.get("why_not"):
                print(
                    f"D_{k} not certified. {why_sentences(round_values(v['why_not'], tol))}", file=sys.stderr
                )
        if js.get("mesh_term") is not None:
            print(js["mesh_term"]["sentence"])
        elif mesh_check if mesh_check is not None else study.distance.mesh_check:
            print(f"mesh term: {js.get('mesh_term_why_not')}", file=sys.stderr)
    elif args.verb == "perturb":
        if study.perturb is None:
            raise StudyError(
                "no [perturb] table",
                file=str(study.path),
                field="[perturb]",
                fix="add [perturb] with size = ..., runs = ...",
            )
        summary = sr.write_perturb(runs=args.runs, jobs=args.jobs, cluster=args.cluster)
        sr.record()
        print(summary.get("verdict", ""))
    return 0


@contextmanager
def counted_float_warnings() -> Iterator[Counter[str]]:
    """Count numpy's floating-point RuntimeWarnings instead of printing each (two lines apiece).

    Huge inputs (coordinates of 1e200, a map like x*x*x*x) made numpy print dozens of
    "overflow encountered in multiply" lines. Inside the block each such warning (every
    occurrence) only adds to the yielded counter, keyed by its kind ("overflow", "invalid value",
    "divide by zero", "underflow"); other warnings print as usual. :func:`main` turns the counts
    into one line, :func:`float_warning_line`.
    """
    counts: Counter[str] = Counter()
    with warnings.catch_warnings():
        warnings.filterwarnings("always", message=r".* encountered in ", category=RuntimeWarning)
        shown = warnings.showwarning

        def show(message, category, filename, lineno, file=None, line=None):  # type: ignore[no-untyped-def]
            text = str(message)
            if issubclass(category, RuntimeWarning) and " encountered in " in text:
                counts[text.split(" encountered in ")[0]] += 1
                return
            shown(message, category, filename, lineno, file, line)

        warnings.showwarning = show
        yield counts


def float_warning_line(counts: Counter[str]) -> str | None:
    """One line for the counted floating-point warnings of a finished run (None when there were none).

    >>> float_warning_line(Counter({"overflow": 7, "invalid value": 2}))[:83]
    'specmap: warning: numpy met 9 floating-point problems (overflow 7, invalid value 2)'
    """
    if not counts:
        return None
    kinds = ", ".join(f"{k} {n}" for k, n in counts.most_common())
    return (
        f"specmap: warning: numpy met {sum(counts.values())} floating-point problems ({kinds}): some "
        "values exceeded double precision and may be inf or nan in the results; rescale the inputs "
        "(coordinates, map) towards 1 and rerun"
    )


def main(argv: list[str] | None = None) -> None:
    previous = signal.signal(signal.SIGTERM, _on_sigterm)
    counts: Counter[str] = Counter()
    try:
        from specmap.floatwarn import take_worker_counts

        with counted_float_warnings() as counts:
            code = run(argv)
        counts.update(take_worker_counts())  # those of worker processes (specmap.floatwarn)
        line = float_warning_line(counts)  # on a user error the one error line says enough
        if line:
            print(line, file=sys.stderr)
    except SpecmapInputError as exc:
        print(f"specmap: error: {exc.one_line()}", file=sys.stderr)
        code = EXIT_USER
    except Terminated:
        print("specmap: terminated (SIGTERM); finished results are kept", file=sys.stderr)
        code = EXIT_TERMINATED
    except KeyboardInterrupt:
        print("specmap: interrupted; finished results are kept", file=sys.stderr)
        code = EXIT_INTERRUPT
    finally:
        signal.signal(signal.SIGTERM, previous)
    sys.exit(code)
