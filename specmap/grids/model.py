"""Extended Pareto grid values: :class:`Contour`, :class:`Grid`, and their JSON form.

A grid is a finite set of contours in the plane of values (f1, f2):

- ``proper``: a non-increasing polyline (x grows, y falls) -- a piece of the
  image of the Pareto critical set;
- ``vertical``: the half-line {x0} x [y0, +inf) from a critical point of f1;
- ``horizontal``: the half-line [x0, +inf) x {y0} from a critical point of f2.

References
----------
.. [CEF19] Cerri, Ethier, Frosini, "On the geometrical properties of the
   coherent matching distance in 2D persistent homology", J. Appl. Comput.
   Topol. 3 (2019). Definition of the extended Pareto grid.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np

from specmap.errors import GridFileError

GRID_FORMAT = "specmap-grid/1"
KINDS = ("proper", "vertical", "horizontal")
COORD_LIMIT = 1e12
"""Largest accepted |coordinate| (and tolerance) in a grid file: keeps tolerances finite."""
ContourKind = Literal["proper", "vertical", "horizontal"]


@dataclass(frozen=True, eq=False)
class Contour:
    """One contour of an extended Pareto grid.

    Attributes
    ----------
    id : str
        Unique name, by convention ``"<grid>:<letter><n>"`` e.g. ``"f:p0"``.
    kind : {"proper", "vertical", "horizontal"}
    points : ndarray of shape (n, 2)
        Vertices of the polyline (proper, n >= 1) or the start point of a
        half-line (n == 1), in value coordinates (f1, f2).
    """

    id: str
    kind: ContourKind
    points: np.ndarray

    def __post_init__(self) -> None:
        pts = np.asarray(self.points, dtype=float).reshape(-1, 2)
        pts.setflags(write=False)
        object.__setattr__(self, "points", pts)

    @property
    def start(self) -> np.ndarray:
        """First point (the start of a half-line)."""
        return self.points[0]

    @property
    def is_half_line(self) -> bool:
        return self.kind != "proper"

    def length(self) -> float:
        """Euclidean length of a proper contour (inf for half-lines)."""
        if self.is_half_line:
            return math.inf
        return float(np.linalg.norm(np.diff(self.points, axis=0), axis=1).sum())

    def translated(self, dx: float, dy: float, new_id: str | None = None) -> Contour:
        return Contour(new_id or self.id, self.kind, self.points + np.array([dx, dy]))

    def swapped(self, new_id: str | None = None) -> Contour:
        """The contour after exchanging the coordinates (f1, f2) -> (f2, f1)."""
        swap: dict[str, ContourKind] = {
            "proper": "proper",
            "vertical": "horizontal",
            "horizontal": "vertical",
        }
        kind = swap[self.kind]
        pts = self.points[:, ::-1]
        if self.kind == "proper":
            pts = pts[::-1]
        return Contour(new_id or self.id, kind, pts)

    def to_json(self) -> dict[str, Any]:
        if self.kind == "proper":
            return {"id": self.id, "kind": "proper", "points": self.points.tolist()}
        return {"id": self.id, "kind": self.kind, "start": self.points[0].tolist()}


@dataclass(frozen=True, eq=False)
class Grid:
    """An extended Pareto grid: contours plus how they were obtained.

    Attributes
    ----------
    contours : tuple of Contour
    route : str
        ``"exact"``, ``"smooth"``, ``"piecewise"``, ``"file"`` or ``"perturbed"``.
    tolerance : float
        Accuracy of the contour positions, in value units.
    meta : dict
        Free-form provenance (resolution, simplification, ...), JSON-ready.
    """

    contours: tuple[Contour, ...]
    route: str = "file"
    tolerance: float = 0.0
    meta: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "contours", tuple(self.contours))

    def __len__(self) -> int:
        return len(self.contours)

    def by_kind(self, kind: str) -> list[Contour]:
        return [c for c in self.contours if c.kind == kind]

    def bbox(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of all contour points (half-line starts included)."""
        pts = np.concatenate([c.points for c in self.contours])
        return (
            float(pts[:, 0].min()),
            float(pts[:, 1].min()),
            float(pts[:, 0].max()),
            float(pts[:, 1].max()),
        )

    def relabelled(self, prefix: str) -> Grid:
        """Same grid with ids re-prefixed, e.g. ``"f:p0"`` -> ``"g:p0"``."""
        out = []
        for c in self.contours:
            tail = c.id.split(":", 1)[-1]
            out.append(Contour(f"{prefix}:{tail}", c.kind, c.points))
        return Grid(tuple(out), self.route, self.tolerance, dict(self.meta))

    def swapped(self) -> Grid:
        """The grid of (f2, f1): coordinates exchanged, vertical <-> horizontal."""
        return Grid(tuple(c.swapped() for c in self.contours), self.route, self.tolerance, dict(self.meta))

    def to_json(self) -> dict[str, Any]:
        return {
            "format": GRID_FORMAT,
            "route": self.route,
            "tolerance": float(self.tolerance),
            "meta": self.meta,
            "contours": [c.to_json() for c in self.contours],
        }


def validate_grid(grid: Grid, *, tol: float | None = None, file: str | None = None) -> Grid:
    """Check a grid: finite numbers, non-increasing proper contours, unique ids.

    Parameters
    ----------
    grid : Grid
    tol : float, optional
        Allowed increase along a proper contour (value units). Default:
        1e-9 times the bounding-box diagonal (finite: coordinates are at most
        ``COORD_LIMIT`` in size; the largest |coordinate| for a one-point grid).
    file : str, optional
        Named in the error.

    Raises
    ------
    GridFileError
        With the offending contour named and the fix.
    """
    if not grid.contours:
        raise GridFileError(
            "the grid has no contours", file=file, field="contours", fix="give at least one contour"
        )
    seen: set[str] = set()
    for i, c in enumerate(grid.contours):
        where = f"contours[{i}] ({c.id})"
        if c.id in seen:
            raise GridFileError(
                f"duplicate id '{c.id}'", file=file, field=where, fix="give every contour a unique id"
            )
        seen.add(c.id)
        if not np.all(np.isfinite(c.points)):
            raise GridFileError(
                "non-finite coordinate (NaN or inf)",
                file=file,
                field=where,
                fix="use finite numbers; half-lines are given by their start",
            )
        if c.kind == "proper" and len(c.points) < 1:
            raise GridFileError(
                "a proper contour needs points", file=file, field=where, fix="list at least one [x, y] point"
            )
    x0, y0, x1, y1 = grid.bbox()
    # the scale of the finite data (its bounding-box diagonal, else its largest |coordinate|, else 1),
    # so that the tolerance is relative at every scale: 1e-9 of 1e-8 is not 1e-9
    scale = math.hypot(x1 - x0, y1 - y0) or max(abs(x0), abs(y0), abs(x1), abs(y1)) or 1.0
    t = 1e-9 * scale if tol is None else tol
    if not math.isfinite(t):
        raise GridFileError(
            f"coordinates too large for a finite tolerance (bounding box {x0:g}..{x1:g}, {y0:g}..{y1:g})",
            file=file,
            field="contours",
            fix=f"rescale the values so that every coordinate has |x| <= {COORD_LIMIT:g}",
        )
    for i, c in enumerate(grid.contours):
        if c.kind != "proper" or len(c.points) < 2:
            continue
        d = np.diff(c.points, axis=0)
        bad = np.nonzero((d[:, 0] < -t) | (d[:, 1] > t))[0]
        if bad.size:
            k = int(bad[0])
            raise GridFileError(
                f"proper contour is not non-increasing between points {k} and {k + 1}",
                file=file,
                field=f"contours[{i}] ({c.id}).points",
                fix="order points by increasing x with y not increasing, or split the contour",
            )
    return grid


def grid_from_json(data: Any, *, file: str | None = None, prefix: str | None = None) -> Grid:
    """Build and validate a :class:`Grid` from the ``specmap-grid/1`` JSON contract.

    Parameters
    ----------
    data : dict
        Parsed JSON.
    file : str, optional
        Named in errors.
    prefix : str, optional
        If given, ids are re-prefixed (``"f"`` or ``"g"``) so that the two grids of
        a pair never share ids.
    """
    if not isinstance(data, dict):
        raise GridFileError(
            "top level is not a JSON object",
            file=file,
            field="(root)",
            fix='write {"format": "specmap-grid/1", "contours": [...]}',
        )
    fmt = data.get("format")
    if fmt != GRID_FORMAT:
        raise GridFileError(
            f"format is {fmt!r}", file=file, field="format", fix=f'set "format": "{GRID_FORMAT}"'
        )
    raw = data.get("contours")
    if not isinstance(raw, list):
        raise GridFileError(
            "missing or non-list 'contours'",
            file=file,
            field="contours",
            fix="give a list of contour objects",
        )
    contours = []
    for i, item in enumerate(raw):
        where = f"contours[{i}]"
        if not isinstance(item, dict):
            raise GridFileError(
                "contour is not an object", file=file, field=where, fix='write {"id": ..., "kind": ..., ...}'
            )
        cid = item.get("id", f"c{i}")
        kind = item.get("kind")
        if kind not in KINDS:
            raise GridFileError(
                f"unknown kind {kind!r}",
                file=file,
                field=f"{where}.kind",
                fix="use 'proper', 'vertical' or 'horizontal'",
            )
        key = "points" if kind == "proper" else "start"
        val = item.get(key)
        try:
            arr = np.asarray(val, dtype=float)
        except OverflowError:
            raise GridFileError(
                "a coordinate is too large to be a float",
                file=file,
                field=f"{where}.{key}",
                fix=f"use coordinates with |x| <= {COORD_LIMIT:g}",
            ) from None
        except (TypeError, ValueError, RecursionError):
            arr = np.empty(0)
        ok = arr.ndim == 2 and arr.shape[1] == 2 and len(arr) >= 1 if kind == "proper" else arr.shape == (2,)
        if not ok:
            shape = "a list of [x, y] pairs" if kind == "proper" else "one [x, y] pair"
            raise GridFileError(
                f"'{key}' is not {shape}",
                file=file,
                field=f"{where}.{key}",
                fix=f"give '{key}' as {shape} of numbers",
            )
        finite = np.isfinite(arr)
        if np.any(finite & (np.abs(np.where(finite, arr, 0.0)) > COORD_LIMIT)):
            raise GridFileError(
                f"a coordinate is outside the supported range |x| <= {COORD_LIMIT:g}",
                file=file,
                field=f"{where}.{key}",
                fix=f"rescale the values so that every coordinate has |x| <= {COORD_LIMIT:g}",
            )
        cid = str(cid)
        if prefix is not None:
            cid = f"{prefix}:{cid.split(':', 1)[-1]}"
        contours.append(Contour(cid, kind, arr))
    grid = Grid(
        tuple(contours),
        route=str(data.get("route", "file")),
        tolerance=_file_tolerance(data.get("tolerance"), file),
        meta=_file_meta(data.get("meta"), file),
    )
    return validate_grid(grid, file=file)


def _file_tolerance(value: Any, file: str | None) -> float:
    """The optional ``tolerance`` of a grid file: a finite number in [0, COORD_LIMIT]."""
    if value is None:
        return 0.0
    fix = f"give 'tolerance' as a number between 0 and {COORD_LIMIT:g}, or leave it out"
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise GridFileError(
            f"tolerance is a {type(value).__name__}, not a number", file=file, field="tolerance", fix=fix
        )
    try:
        number = float(value)
    except OverflowError:
        number = math.inf
    if not (math.isfinite(number) and 0.0 <= number <= COORD_LIMIT):
        raise GridFileError(
            "tolerance is negative, too large or not finite", file=file, field="tolerance", fix=fix
        )
    return number


def _file_meta(value: Any, file: str | None) -> dict[str, Any]:
    """The optional ``meta`` of a grid file: a JSON object."""
    if value is None:
        return {}
    if not isinstance(value, dict):
        raise GridFileError(
            f"meta is a {type(value).__name__}, not an object",
            file=file,
            field="meta",
            fix="give 'meta' as a JSON object {...}, or leave it out",
        )
    return dict(value)


def read_grid(path: str | Path, *, prefix: str | None = None) -> Grid:
    """Read a grid JSON file (see :func:`grid_from_json`)."""
    p = Path(path)
    if not p.is_file():
        raise GridFileError(
            "file not found",
            file=str(p),
            field="grid",
            fix="check the path (relative paths resolve against the study file)",
        )
    try:
        data = json.loads(p.read_text())
    except PermissionError:
        raise GridFileError(
            "file cannot be read (permission denied)",
            file=str(p),
            field="grid",
            fix="make the file readable or copy it somewhere readable",
        ) from None
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise GridFileError(
            f"not valid JSON ({exc.msg if hasattr(exc, 'msg') else exc})",
            file=str(p),
            field="(root)",
            fix="write valid JSON",
        ) from None
    except (RecursionError, MemoryError):
        raise GridFileError(
            "JSON is nested too deeply",
            file=str(p),
            field="(root)",
            fix="write contours as flat lists of [x, y] pairs",
        ) from None
    except ValueError as exc:  # e.g. an integer literal longer than Python's digit limit
        raise GridFileError(
            f"not readable JSON ({str(exc):.80})",
            file=str(p),
            field="(root)",
            fix=f"write numbers as ordinary floats with |x| <= {COORD_LIMIT:g}",
        ) from None
    return grid_from_json(data, file=str(p), prefix=prefix)
