"""Settings fingerprints and the result-file format version (which run made this file?).

Every result file (``study.json``, ``grid_f.json``, ``grid_g.json``, ``special.json``,
``special.geojson``, ``distance.json``, ``perturb/summary.json``) carries a *stamp*:

``format_version``
    The layout of specmap's result files (:data:`FORMAT_VERSION`); a reader refuses a newer one.
``fingerprint_parts``
    One short hash per ingredient the file depends on (:data:`PARTS`):

    ========  ================================================================================
    part      what is hashed (canonical JSON, sha256, 16 hex digits)
    ========  ================================================================================
    inputs    f and g as the study gives them (surface, radii, map, fields, resolution,
              simplify, route), the sha256 of every mesh or grid file they read, the
              constants, the contour budget of ``simplify = "auto"``, the specmap version
    window    the window of the strip
    map       the atlas settings (pairs, resolution, method, tol, reading; costs when set)
    distance  the distance settings (all of :class:`~specmap.settings.DistanceSettings`)
    perturb   the run-set fingerprint of :mod:`specmap.perturb.store`
    ========  ================================================================================

    Grid files depend on ``inputs``; ``special.*`` on ``inputs, window, map``; ``distance.json``
    on ``inputs, window, distance`` and ``map`` when the reduced search read the atlas;
    ``summary.json`` on ``inputs, window, map, perturb``; ``study.json`` on ``inputs, window``.
``fingerprint``
    The hash of the parts: equal for two runs of the same settings on the same input files.
    (In ``summary.json`` the key keeps its older meaning, the run-set fingerprint, which is also
    its ``perturb`` part.)

Two files of one folder are consistent when every part they both carry is equal
(:func:`inconsistency`); the number of jobs is in no part, because the results do not depend
on it. The hashes are of the settings and input bytes, not of the results, so a rerun with the
same settings gives the same stamp even where a result differs in its last digits.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import asdict
from pathlib import Path
from typing import Any

from specmap import __version__
from specmap.io import to_plain

FORMAT_VERSION = 1
"""The result-file layout written by this version of specmap (bump on an incompatible change)."""

PARTS = ("inputs", "window", "map", "distance", "perturb")
"""The ingredients a result file can depend on, in the order they are listed."""

#: MapSettings fields that do not change the atlas: max_contours acts on the inputs (see inputs_part), a
#: memory budget and tiles only decide how it is computed
_NOT_ATLAS = ("max_contours", "memory", "tiles")
#: ShapeSpec JSON keys that say where a file is or how to show it, not what it holds
_NOT_CONTENT = ("path", "description")


def canonical(obj: Any) -> str:
    """Canonical JSON text: plain types, sorted keys, no spaces.

    >>> canonical({"b": (1, 2), "a": float("inf")})
    '{"a":"inf","b":[1,2]}'
    """
    return json.dumps(to_plain(obj), sort_keys=True, separators=(",", ":"))


def digest(obj: Any) -> str:
    """16 hex digits of the sha256 of :func:`canonical` ``obj`` (stable across runs and machines).

    >>> digest({"a": 1, "b": 2}) == digest({"b": 2, "a": 1}), len(digest({"a": 1}))
    (True, 16)
    """
    return hashlib.sha256(canonical(obj).encode()).hexdigest()[:16]


def file_sha256(path: str | Path) -> str:
    """The sha256 (hex) of a file's bytes, read in 1 MiB blocks."""
    h = hashlib.sha256()
    with Path(path).open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def inputs_part(study: Any) -> str:
    """The ``inputs`` part of a :class:`~specmap.study.Study`: what f and g are, byte for byte.

    Paths are not hashed (a moved folder keeps its fingerprints), the bytes of the files are.
    """
    sides = {}
    for spec in (study.f, study.g):
        js = {k: v for k, v in spec.to_json().items() if k not in _NOT_CONTENT}
        js["insist"] = bool(getattr(spec, "insist", False))
        if spec.path is not None:
            js["file_sha256"] = file_sha256(spec.path)
        sides[spec.label] = js
    auto = any(s.simplify == "auto" for s in (study.f, study.g) if s.source == "mesh")
    return digest(
        {
            "f": sides["f"],
            "g": sides["g"],
            "constants": dict(study.constants),
            "max_contours": int(study.map.max_contours) if auto else None,
            "specmap_version": __version__,
        }
    )


def window_part(window: Any) -> str:
    """The ``window`` part of a :class:`~specmap.strip.Window`."""
    return digest(window.to_json())


def map_part(settings: Any) -> str:
    """The ``map`` part of a :class:`~specmap.settings.MapSettings` (the fields the atlas reads).

    ``costs`` (a band of tied costs) enters only when set: the whole map's part is the one written
    before the setting existed, and a banded map's part differs from the whole map's.
    """
    js = {k: v for k, v in asdict(settings).items() if k not in _NOT_ATLAS}
    if js.get("costs") is None:
        js.pop("costs", None)
    return digest(js)


def distance_part(settings: Any) -> str:
    """The ``distance`` part of a :class:`~specmap.settings.DistanceSettings`.

    ``mesh_check`` enters only when set: off, the part is the one written before the setting
    existed, so those ``distance.json`` files stay current.
    """
    js = asdict(settings)
    if not js.get("mesh_check"):
        js.pop("mesh_check", None)
    return digest(js)


def stamp(parts: Mapping[str, str], caveats: list[str] | tuple[str, ...] = ()) -> dict[str, Any]:
    """The keys every result file gets: ``format_version``, ``fingerprint``, ``fingerprint_parts``.

    Parameters
    ----------
    parts : mapping
        Part name (one of :data:`PARTS`) -> its hash.
    caveats : sequence of str
        Sentences every result of this study must carry (e.g. a non-normal pair the user insisted
        on); written as ``caveats`` when not empty.

    Examples
    --------
    >>> s = stamp({"inputs": "0123456789abcdef"})
    >>> s["format_version"], sorted(s["fingerprint_parts"]), len(s["fingerprint"])
    (1, ['inputs'], 16)
    """
    unknown = set(parts) - set(PARTS)
    if unknown:
        raise ValueError(f"unknown fingerprint parts {sorted(unknown)}")
    ordered = {k: str(parts[k]) for k in PARTS if k in parts}
    out: dict[str, Any] = {
        "format_version": FORMAT_VERSION,
        "fingerprint": digest(ordered),
        "fingerprint_parts": ordered,
    }
    if caveats:
        out["caveats"] = list(caveats)
    return out


def inconsistency(stamps: Mapping[str, Mapping[str, Any]]) -> tuple[str, str, str] | None:
    """The first two files whose stamps disagree on a part they share, or None.

    Parameters
    ----------
    stamps : mapping
        File name -> its ``fingerprint_parts`` (files without parts are left out by the caller).

    Returns
    -------
    (file_a, file_b, part) or None
        ``file_a`` comes before ``file_b`` in the mapping's order.

    Examples
    --------
    >>> inconsistency({"grid_f.json": {"inputs": "1"}, "special.json": {"inputs": "1", "map": "2"}})
    >>> inconsistency({"special.json": {"map": "2"}, "distance.json": {"map": "3"}})
    ('special.json', 'distance.json', 'map')
    """
    names = list(stamps)
    for part in PARTS:
        first: tuple[str, Any] | None = None
        for name in names:
            value = stamps[name].get(part)
            if value is None:
                continue
            if first is None:
                first = (name, value)
            elif value != first[1]:
                return first[0], name, part
    return None
