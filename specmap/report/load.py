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
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from specmap.errors import ResultsError
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
        absent), ``perturb`` (``{"summary": dict, "runs": list}`` or ``None``)
        and ``stages`` (stage name -> bool, was it run).

    Raises
    ------
    ResultsError
        If the folder or its ``study.json`` is missing, or a file is not JSON.

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
    out["stages"] = {
        "grids": out["grid_f"] is not None or out["grid_g"] is not None,
        "special": out["special"] is not None,
        "distance": out["distance"] is not None,
        "perturb": out["perturb"] is not None,
    }
    return out
