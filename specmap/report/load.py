"""Read a result folder back into plain dicts (the report never recomputes).

A result folder (default ``results/<study name>/``) holds ``study.json`` and,
for each stage that was run, its result files:

==========  ===========================================
stage       files
==========  ===========================================
grids       ``grid_f.json``, ``grid_g.json``
special     ``special.json`` (+ ``special.geojson``)
distance    ``distance.json``
perturb     ``perturb/summary.json`` (+ ``perturb/runs.jsonl``)
==========  ===========================================

Every file is checked against its schema (the keys the report needs), its ``format_version``
and, across files, its fingerprint (:mod:`specmap.fingerprint`): files of one folder made with
different settings or inputs (e.g. ``distance.json`` from before the map was changed) are
refused in one line naming both and the stale one: the one whose settings differ from the study
file as it is now (a command-line flag such as ``map --pairs``, or an edited file), else the older;
rerunning its stage without overriding flags makes the folder consistent. A file from a newer specmap
(``format_version`` above :data:`~specmap.fingerprint.FORMAT_VERSION`) is refused. Files without
``format_version`` (written before it existed) are read as version 1 with a one-line note and
without the fingerprint check: their layout is that of version 1 and the schema check still
holds, while refusing them would throw away finished runs that cost hours.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from specmap import __version__
from specmap.errors import ResultsError
from specmap.fingerprint import FORMAT_VERSION, PARTS, inconsistency
from specmap.io import read_json, read_jsonl

STAGES = ("grids", "special", "distance", "perturb")
STAGE_VERB = {"grids": "grid", "special": "map", "distance": "distance", "perturb": "perturb"}


def _read(path: Path, *, required: bool = False, verb: str = "grid") -> Any:
    """Parse one JSON file; ``None`` if absent (unless ``required``)."""
    if not path.is_file():
        if required:
            raise ResultsError(
                f"{path.name} not found in the result folder",
                file=str(path),
                field=path.name,
                fix=f"run specmap {verb} first (it writes {path.name})",
            )
        return None
    try:
        return _checked(read_json(path), path, verb)
    except PermissionError:
        raise ResultsError(
            "file cannot be read (permission denied)",
            file=str(path),
            field="(root)",
            fix="make the file readable",
        ) from None
    except (RecursionError, MemoryError):
        raise ResultsError(
            "JSON is nested too deeply",
            file=str(path),
            field="(root)",
            fix=f"rerun specmap {verb} to rewrite the file",
        ) from None
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise ResultsError(
            f"not valid JSON ({getattr(exc, 'msg', exc)})",
            file=str(path),
            field="(root)",
            fix=f"rerun specmap {verb} to rewrite the file",
        ) from None


REQUIRED: dict[str, tuple[tuple[str, type | tuple[type, ...] | None], ...]] = {
    "grid_f.json": (("contours", list),),
    "grid_g.json": (("contours", list),),
    "special.json": (("counts", dict), ("components", list), ("total_area", None)),
    "special.geojson": (("features", list),),
    "distance.json": (("value", None), ("tolerance", None)),
    "summary.json": (("runs", None),),
}
"""Keys the report needs in each result file (``None``: any JSON value)."""


def _kind(value: Any) -> str:
    return {dict: "object", list: "list", str: "string", type(None): "null"}.get(
        type(value), type(value).__name__
    )


def _checked(data: Any, path: Path, verb: str) -> Any:
    """Refuse a result file that is not an object or lacks a key the report needs."""
    if data is None:
        return None
    fix = f"rerun specmap {verb} to rewrite {path.name}"
    if not isinstance(data, dict):
        raise ResultsError(
            f"{path.name} is a JSON {_kind(data)}, not an object", file=str(path), field="(root)", fix=fix
        )
    for key, typ in REQUIRED.get(path.name, ()):
        if key not in data:
            raise ResultsError(f"missing field '{key}'", file=str(path), field=key, fix=fix)
        if typ is not None and not isinstance(data[key], typ):
            raise ResultsError(
                f"field '{key}' is a {_kind(data[key])}, not a {_kind(typ())}",
                file=str(path),
                field=key,
                fix=fix,
            )
    return data


FILE_VERB = {
    "study.json": "grid",
    "grid_f.json": "grid",
    "grid_g.json": "grid",
    "special.json": "map",
    "special.geojson": "map",
    "distance.json": "distance",
    "summary.json": "perturb",
}
"""The command that rewrites each result file."""


def _version(data: dict[str, Any], path: Path, study_file: str) -> int | None:
    """``format_version`` of a result file (None: written before versions); refuse unknown ones."""
    if "format_version" not in data:
        return None
    v = data["format_version"]
    fix = f"rerun `specmap {FILE_VERB.get(path.name, 'grid')} {study_file}` to rewrite it"
    if isinstance(v, bool) or not isinstance(v, int) or v < 1:
        raise ResultsError(
            f"format_version {v!r} is not a result-file version",
            file=str(path),
            field="format_version",
            fix=fix,
        )
    if v > FORMAT_VERSION:
        raise ResultsError(
            f"written by a newer specmap (result format {v}; specmap {__version__} reads up to {FORMAT_VERSION})",
            file=str(path),
            field="format_version",
            fix="upgrade specmap to read it, or " + fix[0].lower() + fix[1:] + " with this version",
        )
    parts = data.get("fingerprint_parts")
    if not isinstance(parts, dict) or not all(k in PARTS and isinstance(x, str) for k, x in parts.items()):
        raise ResultsError(
            "fingerprint_parts is missing or not an object of part -> hash",
            file=str(path),
            field="fingerprint_parts",
            fix=fix,
        )
    return v


def check_consistency(root: Path, files: dict[str, dict[str, Any]]) -> list[str]:
    """Refuse result files of one folder that come from different runs; notes for unversioned files.

    Parameters
    ----------
    root : Path
        The result folder (``perturb/summary.json`` is given as ``summary.json``).
    files : dict
        File name -> parsed object, for the files present.

    Returns
    -------
    list of str
        Notes (one line each) about files written before ``format_version`` existed.

    Raises
    ------
    ResultsError
        A file of a newer or unknown version, or two files whose fingerprints disagree on a part
        they share: names both, and the older (stale) one as the file to rerun or remove.
    """
    study_file = str((files.get("study.json") or {}).get("study_file") or "<study file>")
    stamps, old = {}, []
    for name, data in files.items():
        path = root / ("perturb/" + name if name == "summary.json" else name)
        if _version(data, path, study_file) is None:
            old.append(name)
        else:
            stamps[name] = data["fingerprint_parts"]
    clash = inconsistency(stamps)
    if clash is not None:
        a, b, part = clash
        pa, pb = (root / ("perturb/" + n if n == "summary.json" else n) for n in (a, b))
        stale, other = (pa, pb) if _mtime(pa) <= _mtime(pb) else (pb, pa)
        why = f"{stale.name} is the older"
        current = study_parts(study_file, root).get(part)
        matching = [n for n in (a, b) if current is not None and stamps[n][part] == current]
        if len(matching) == 1:  # the file that disagrees with the study file as it is now is stale
            stale = pb if matching == [a] else pa
            why = (
                f"{stale.name} was made with {part} settings other than those of {study_file} now "
                "(a command-line flag such as --pairs or --resolution, or an earlier version of the file)"
            )
        verb = FILE_VERB.get(stale.name, "grid")
        raise ResultsError(
            f"{a} and {b} come from different runs (their {part} fingerprints differ: "
            f"{stamps[a][part]} vs {stamps[b][part]}); {why}",
            file=str(stale),
            field="fingerprint",
            fix=f"rerun `specmap {verb} {study_file}` without overriding flags (and the stages after it) "
            f"or remove the stale file {stale}; to keep flag values, write them into the study file first",
        )
    if not old:
        return []
    return [
        f"specmap: note: {root}: {', '.join(old)} {'has' if len(old) == 1 else 'have'} no format_version "
        "(written before result-file versions): read as version 1 without the fingerprint check; rerun "
        "their stages to check them"
    ]


def study_parts(study_file: str, root: Path) -> dict[str, str]:
    """The fingerprint parts the study file gives *now*, for the parts it decides alone.

    ``inputs``, ``map`` and ``distance`` always; ``window`` when the study sets one (an automatic
    window needs the shapes). Empty when the study file is gone or no longer valid: the caller then
    falls back on the files' ages.

    Parameters
    ----------
    study_file : str
        As recorded in ``study.json`` (absolute, relative to the working folder, or to the folder
        above ``root``).
    root : Path
        The result folder.
    """
    from specmap.errors import SpecmapInputError
    from specmap.fingerprint import distance_part, inputs_part, map_part, window_part
    from specmap.study import load_study

    for cand in (Path(study_file), root.parent / study_file):
        if cand.is_file():
            break
    else:
        return {}
    try:
        study = load_study(cand)
        parts = {
            "inputs": inputs_part(study),
            "map": map_part(study.map),
            "distance": distance_part(study.distance),
        }
    except (SpecmapInputError, OSError):
        return {}
    if study.window is not None:
        parts["window"] = window_part(study.window)
    return parts


_NOTES: list[str] = []


def take_notes() -> list[str]:
    """The notes of the folders loaded since the last call (the CLI prints them after a success)."""
    notes = list(_NOTES)
    _NOTES.clear()
    return notes


def _mtime(path: Path) -> float:
    try:
        return path.stat().st_mtime
    except OSError:
        return 0.0


def _runs(path: Path) -> list[dict[str, Any]]:
    """The records of ``runs.jsonl``; every line must be a JSON object."""
    runs = []
    for n, rec in enumerate(read_jsonl(path), start=1):
        if not isinstance(rec, dict):
            raise ResultsError(
                f"record {n} is a JSON {_kind(rec)}, not an object",
                file=str(path),
                field=f"line {n}",
                fix="rerun specmap perturb to rewrite runs.jsonl",
            )
        runs.append(rec)
    return runs


def load_results(result_dir: str | Path) -> dict[str, Any]:
    """Load every result file of a study folder.

    Parameters
    ----------
    result_dir : str or Path
        The folder written by the pipeline (``results/<study name>/``).

    Returns
    -------
    dict
        Keys ``dir`` (Path), ``study``, ``grid_f``, ``grid_g``, ``special``,
        ``geojson``, ``distance`` (parsed JSON or ``None`` when the file is
        absent), ``perturb`` (``{"summary": dict, "runs": list}`` or ``None``),
        ``caveats`` (the sentences of the files' ``caveats``, each once), ``notes`` (one line
        each, e.g. files written before result-file versions; also kept for :func:`take_notes`)
        and ``stages`` (stage name -> bool, was it run).

    Raises
    ------
    ResultsError
        If the folder or its ``study.json`` is missing, a file is not JSON, lacks a key, comes
        from a newer specmap, or the files come from different runs (:func:`check_consistency`).

    Examples
    --------
    >>> res = load_results("results/demo")          # doctest: +SKIP
    >>> res["stages"]["distance"]                   # doctest: +SKIP
    True
    """
    root = Path(result_dir)
    if not root.is_dir():
        raise ResultsError(
            "result folder not found",
            file=str(root),
            field="result_dir",
            fix="run specmap grid/map/distance/perturb first, or pass the folder they wrote",
        )
    study = _read(root / "study.json", required=True, verb="grid/map/distance")
    if not isinstance(study, dict):
        raise ResultsError(
            "study.json is not a JSON object",
            file=str(root / "study.json"),
            field="(root)",
            fix="rerun specmap grid to rewrite it",
        )
    out: dict[str, Any] = {
        "dir": root,
        "study": study,
        "grid_f": _read(root / "grid_f.json", verb="grid"),
        "grid_g": _read(root / "grid_g.json", verb="grid"),
        "special": _read(root / "special.json", verb="map"),
        "geojson": _read(root / "special.geojson", verb="map"),
        "distance": _read(root / "distance.json", verb="distance"),
        "perturb": None,
    }
    summary = _read(root / "perturb" / "summary.json", verb="perturb")
    if summary is not None:
        out["perturb"] = {"summary": summary, "runs": _runs(root / "perturb" / "runs.jsonl")}
    present = {
        name: data
        for name, data in (
            ("study.json", study),
            ("grid_f.json", out["grid_f"]),
            ("grid_g.json", out["grid_g"]),
            ("special.json", out["special"]),
            ("special.geojson", out["geojson"]),
            ("distance.json", out["distance"]),
            ("summary.json", summary),
        )
        if isinstance(data, dict)
    }
    out["notes"] = check_consistency(root, present)
    _NOTES.extend(n for n in out["notes"] if n not in _NOTES)
    out["caveats"] = list(
        dict.fromkeys(
            c
            for d in present.values()
            if isinstance(d.get("caveats"), list)
            for c in d["caveats"]
            if isinstance(c, str)
        )
    )
    out["stages"] = {
        "grids": out["grid_f"] is not None or out["grid_g"] is not None,
        "special": out["special"] is not None,
        "distance": out["distance"] is not None,
        "perturb": out["perturb"] is not None,
    }
    return out
