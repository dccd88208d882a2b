"""The mesh-to-surface term (issue 13 item 1): how D_k moves when the surfaces are meshed finer.

Every interval specmap certifies holds D_k of the *meshed* maps: the lower-star slices of the
vertex values on the study's triangulations. The distance of the smooth maps on the surfaces
is a limit of those as the mesh is refined, and no theorem here bounds the gap at a given
mesh. This module measures it instead: the study is run again with both surfaces meshed at
m times their ``resolution`` (m in ``[distance] mesh_check``, e.g. 2 and 4), with the same
window and settings, grids and special set recomputed for each mesh as the study's own route
does, and the block ``mesh_term`` of ``distance.json`` records per degree the values and
certified intervals at every factor and the movement max_m |D_k(m) - D_k(1)|.

What the movement is, and is not: it is measured, not a bound. It says how far the
answers at the study's mesh lie from answers at finer meshes of the same surfaces; when the
steps between consecutive factors shrink (a PL interpolation's chord error is O(h^2), h the edge
length, so about halving when the vertex count doubles), the finest value is the better
estimate of the surface's D_k. It does not bound the distance from the finest mesh to the
surface, and it is not part of any certified interval.

Only surfaces given by ``surface = ...`` have a resolution to raise; a mesh file or a grid file
cannot be re-meshed (:func:`not_remeshable`). The pipeline runs the factors and keeps each one's
row on disk (:meth:`specmap.pipeline.StudyRun.mesh_term`); the functions here are pure.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from specmap.study import Study


def not_remeshable(study: Study) -> tuple[str, str] | None:
    """The first of f, g that has no resolution to raise, with a sentence why; None when both are surfaces.

    Examples
    --------
    >>> from pathlib import Path
    >>> from specmap.study import ShapeSpec
    >>> s = ShapeSpec("f", "surface", surface="ellipsoid", radii=(1.0, 1.0, 1.0), map=("x", "y"))
    >>> m = ShapeSpec("g", "mesh", path=Path("/data/g.ply"), fields=("f1", "f2"))
    >>> not_remeshable(Study("s", 0, Path("s.toml"), s, m))[0]
    'g'
    """
    for spec in (study.f, study.g):
        if spec.source != "surface":
            kind = "a mesh file" if spec.source == "mesh" else "a grid file"
            name = spec.path.name if spec.path is not None else "?"
            return spec.label, (
                f"not measured: {spec.label} is {kind} ({name}), which has no resolution to raise, so it "
                "cannot be re-meshed; the term needs both f and g given as surface = ... with a resolution"
            )
    return None


def remeshed(study: Study, factor: int, window: Any) -> Study:
    """The study with both surfaces at ``factor`` times their resolution, on the given window.

    The window is fixed to the study's own (its default follows the meshed value ranges, which
    move with the mesh), so every factor searches the same strip.
    """
    return dataclasses.replace(
        study,
        window=window,
        f=dataclasses.replace(study.f, resolution=int(factor) * study.f.resolution),
        g=dataclasses.replace(study.g, resolution=int(factor) * study.g.resolution),
    )


def _num(x: Any) -> float:
    try:
        return float(x)
    except (TypeError, ValueError):
        return math.nan


@dataclass(frozen=True)
class MeshRow:
    """D_k at one mesh factor.

    Attributes
    ----------
    factor : int
        Resolution multiple (1: the study's own mesh).
    vertices : (int, int)
        Vertex counts of f's and g's meshes.
    by_degree : dict
        ``{"k": {"value": D_k, "bounds": [lo, hi] or None, "certified": bool or None}}``
        (value units; ``inf`` where D_k is infinite).
    mesh_tolerance : float or None
        The mesh tolerance of that run (``meta.resolution_floor.mesh`` of ``distance.json``).
    seconds : float or None
        Wall time of that run's distance (None when not timed).
    reused : bool
        Read back from a finished earlier run instead of computed now.
    """

    factor: int
    vertices: tuple[int, int]
    by_degree: dict[str, dict[str, Any]]
    mesh_tolerance: float | None = None
    seconds: float | None = None
    reused: bool = False

    @classmethod
    def of(
        cls, factor: int, distance: Mapping[str, Any], vertices: tuple[int, int], seconds: float | None
    ) -> MeshRow:
        """The row of one run from its ``distance.json`` content (``DistanceResult.to_json()``)."""
        by = {}
        for k, v in (distance.get("by_degree") or {}).items():
            bounds = v.get("bounds")
            ok = isinstance(bounds, (list, tuple)) and len(bounds) == 2
            by[str(k)] = {
                "value": _num(v.get("value")),
                "bounds": [_num(bounds[0]), _num(bounds[1])] if ok else None,
                "certified": v.get("certified") if isinstance(v.get("certified"), bool) else None,
            }
        floor = ((distance.get("meta") or {}).get("resolution_floor") or {}).get("mesh")
        return cls(
            int(factor),
            (int(vertices[0]), int(vertices[1])),
            by,
            None if floor is None else _num(floor),
            None if seconds is None else float(seconds),
        )

    def to_json(self) -> dict[str, Any]:
        return {
            "factor": self.factor,
            "vertices": list(self.vertices),
            "by_degree": self.by_degree,
            "mesh_tolerance": self.mesh_tolerance,
            "seconds": self.seconds,
        }

    @classmethod
    def from_json(cls, js: Mapping[str, Any]) -> MeshRow:
        """A row written by :meth:`to_json` (marked reused); KeyError/TypeError/ValueError when malformed."""
        by = {
            str(k): {
                "value": _num(v["value"]),
                "bounds": None if v.get("bounds") is None else [_num(v["bounds"][0]), _num(v["bounds"][1])],
                "certified": v.get("certified"),
            }
            for k, v in dict(js["by_degree"]).items()
        }
        secs, mtol = js.get("seconds"), js.get("mesh_tolerance")
        return cls(
            int(js["factor"]),
            (int(js["vertices"][0]), int(js["vertices"][1])),
            by,
            None if mtol is None else _num(mtol),
            None if secs is None else _num(secs),
            reused=True,
        )


def movement(values: Sequence[float]) -> tuple[float, int]:
    """max_m |v_m - v_0| and the index m where it is reached (the first, on ties).

    Infinite values: equal infinities do not move (a degree infinite at every factor has
    movement 0); a value that is infinite at one factor and finite at another moves by inf.

    Examples
    --------
    >>> movement([0.27, 0.262, 0.247])
    (0.02300000000000002, 2)
    >>> movement([math.inf, math.inf])
    (0.0, 0)
    """
    v0 = float(values[0])
    best, at = 0.0, 0
    for i, v in enumerate(values):
        v = float(v)
        d = 0.0 if (v == v0) else abs(v - v0)  # inf == inf: no move (inf - inf is nan)
        if math.isnan(d):
            d = math.inf
        if d > best:
            best, at = d, i
    return best, at


def steps(values: Sequence[float]) -> list[float]:
    """|v_{i+1} - v_i| between consecutive factors (0 between equal infinities)."""
    out = []
    for a, b in zip(values[:-1], values[1:], strict=True):
        d = 0.0 if a == b else abs(float(b) - float(a))
        out.append(math.inf if math.isnan(d) else d)
    return out


def mesh_term_block(rows: Sequence[MeshRow], *, settings: str) -> dict[str, Any]:
    """The ``mesh_term`` block of ``distance.json`` from the rows of factor 1, m_1, m_2, ...

    Per degree: ``values`` and ``bounds`` at every factor, ``movement`` = max_m |D_k(m) - D_k(1)|,
    ``moved_most_at`` (the factor reaching it) and ``steps`` (between consecutive factors). The
    sentence is added by the caller (:func:`specmap.report.summary.mesh_term_sentence`).

    Parameters
    ----------
    rows : sequence of MeshRow
        Factor 1 first, then increasing factors.
    settings : str
        How every factor's distance was computed, in words.
    """
    if not rows or rows[0].factor != 1:
        raise ValueError("the rows start with factor 1, the study's own mesh")
    degrees = sorted(rows[0].by_degree, key=lambda s: (not s.isdigit(), int(s) if s.isdigit() else 0))
    factors = [r.factor for r in rows]
    by: dict[str, Any] = {}
    for k in degrees:
        vals = [_num(r.by_degree.get(k, {}).get("value")) for r in rows]
        move, at = movement(vals)
        by[k] = {
            "values": vals,
            "bounds": [r.by_degree.get(k, {}).get("bounds") for r in rows],
            "certified": [r.by_degree.get(k, {}).get("certified") for r in rows],
            "movement": move,
            "moved_most_at": factors[at],
            "steps": steps(vals),
        }
    return {
        "factors": factors,
        "vertices": {"f": [r.vertices[0] for r in rows], "g": [r.vertices[1] for r in rows]},
        "mesh_tolerance": [r.mesh_tolerance for r in rows],
        "seconds": [r.seconds for r in rows],
        "reused": [r.reused for r in rows],
        "by_degree": by,
        "settings": settings,
        "measures": (
            "how far D_k at the study's mesh lies from D_k at finer meshes of the same surfaces "
            "(same window and settings); measured, not bounded: it is not part of any certified "
            "interval and does not bound the distance from the finest mesh to the surface"
        ),
    }
