"""Why a tie holds on an open set: closed-form reasons for the patches of the special set.

A tie |s_α − s_β| = k |s_γ − s_δ| (k = 1 equal, k = 2 half; s the line parameter of
r(a, b), math.md section 5) holds on an open set of the strip only for special
configurations of its four contours. For half-lines the line parameter has a closed form:
a vertical half-line at abscissa x0 is met at s = (x0 − b)/a, a horizontal one at ordinate
y0 at s = (y0 + b)/(1 − a). Hence

- two vertical half-lines differ by (x1 − x0)/a and two horizontal ones by (y1 − y0)/(1 − a):
  a tie of two vertical pairs (or two horizontal pairs) holds on the whole region where the
  four are met iff |Δx| = k |Δx'| (resp. |Δy| = k |Δy'|): **equal spacing** of critical values
  of the first (resp. second) components; for two cross pairs (x_f, x_g), (x_f', x_g') the
  branch x_f − x_g = −(x_f' − x_g') says x_f + x_f' = x_g + x_g': the two critical values of f
  and the two of g have one midpoint, as the extremes of two centrally symmetric images with a
  common centre do: the reason is **central symmetry**;
- a tie whose two pairs share a contour, |x_s − x_u| = |x_s − x_w|, holds identically when
  x_u = x_w: two **equal values** (an extreme value shared by f and g, coincident half-lines) --
  or when x_s is the midpoint of x_u and x_w (equal spacing);
- a vertical pair against a horizontal pair ties only where |Δx|/a = k |Δy|/(1 − a), a line
  a = const of the strip; pairs mixing a vertical and a horizontal half-line depend on b and
  tie on curves. Neither gives a patch.

Any other patch (one involving proper contours) is reported as ``"unexplained"``: no closed
form is claimed; its ``breaks_at`` is measured instead by the perturbation probe of
:mod:`specmap.special.probe` (one contour moved by (ε, ε), the tie re-evaluated on lines of its
patch), with the probe's record under ``probe`` (None: not probed, e.g. no patch geometry). Breaking the identity: moving one critical value by ε changes the tied
difference by ε (k ε for the doubled pair), so a change above the residual tolerance of the
atlas breaks it; ``breaks_at`` is that size in value units, max(gap, tolerance) with gap the
identity's measured defect.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from specmap.grids.model import Contour
from specmap.special.pairs import Tie


def _coord(c: Contour) -> tuple[str, float] | None:
    if c.kind == "vertical":
        return "vertical", float(c.points[0][0])
    if c.kind == "horizontal":
        return "horizontal", float(c.points[0][1])
    return None


def tie_reason(
    tie: Tie, contours: dict[str, Contour], tol: float, geometry=None, scale: float | None = None
) -> dict[str, Any]:
    """The closed-form reason of a tie that holds on a patch (see the module text).

    Parameters
    ----------
    tie : Tie
    contours : dict of id to Contour
    tol : float
        Residual tolerance of the atlas (value units).
    geometry : shapely geometry, optional
        The tie's patch in (a, b): an unexplained tie is then probed
        (:func:`specmap.special.probe.break_probe`) for its ``breaks_at``.
    scale : float, optional
        Largest probe size (value units); default 1e9 times ``tol``.

    Returns
    -------
    dict
        ``{"kind": "equal_spacing" | "central_symmetry" | "equal_values" | "unexplained", "contours": [ids],
        "component": "first" | "second" | None, "breaks_at": float | None}``; an unexplained
        tie also has ``probe`` (the probe's record, or None when not probed).

    Examples
    --------
    >>> v = lambda i, x: Contour(i, "vertical", [x, -9.0])
    >>> cs = {c.id: c for c in (v("f:v0", -1.0), v("f:v1", 1.0), v("g:v0", -2.0), v("g:v1", 2.0))}
    >>> tie_reason(Tie((("f:v0", "g:v0"), ("f:v1", "g:v1")), "equal"), cs, 1e-9)["kind"]
    'central_symmetry'
    >>> cs["g:v2"] = v("g:v2", 3.0)
    >>> tie_reason(Tie((("f:v0", "f:v1"), ("f:v1", "g:v2")), "equal"), cs, 1e-9)["kind"]
    'equal_spacing'
    """
    (a, b), (c, d) = tie.pairs
    ids = [a, b, c, d]
    k = 2.0 if tie.condition == "half" else 1.0
    coords = [_coord(contours[i]) for i in ids]
    out: dict[str, Any] = {"kind": "unexplained", "contours": ids, "component": None, "breaks_at": None}
    if any(x is None for x in coords) or len({x[0] for x in coords if x is not None}) != 1:
        out["probe"] = None
        if geometry is not None:
            from specmap.special.probe import break_probe

            probe = break_probe(tie, contours, geometry, tol, scale=scale if scale else 1e9 * tol)
            out["probe"], out["breaks_at"] = probe, probe["breaks_at"]
        return out
    kind = coords[0][0]  # type: ignore[index]
    xa, xb, xc, xd = (x[1] for x in coords)  # type: ignore[index]
    gap = abs(abs(xa - xb) - k * abs(xc - xd))
    out["component"] = "first" if kind == "vertical" else "second"
    out["breaks_at"] = max(gap, tol)
    # two cross pairs (f, g) and (f', g'): xa - xb = ±(xc - xd). The "-" branch is xa + xc = xb + xd:
    # f's two values and g's two values share their midpoint (a common centre); "+" is equal spacing.
    cross = all(i.split(":")[0] != j.split(":")[0] for i, j in tie.pairs)
    mirror = abs((xa - xb) + (xc - xd)) < abs((xa - xb) - (xc - xd))
    out["kind"] = "central_symmetry" if (k == 1.0 and cross and mirror) else "equal_spacing"
    # one contour in both pairs, |x_s - x_u| = |x_s - x_w|: either x_u = x_w (two equal critical
    # values, e.g. an extreme shared by f and g: "equal_values") or x_s is their midpoint (spacing)
    shared = set(tie.pairs[0]) & set(tie.pairs[1])
    if k == 1.0 and len(shared) == 1:
        (sid,) = shared
        u = next(i for i in tie.pairs[0] if i != sid)
        w = next(i for i in tie.pairs[1] if i != sid)
        xs, xu, xw = (dict(zip(ids, (xa, xb, xc, xd), strict=True))[i] for i in (sid, u, w))
        if abs(xu - xw) <= abs(xu + xw - 2.0 * xs):
            out["kind"] = "equal_values"
    return out


def contour_scale(contours, tol: float) -> float:
    """The probe's largest size: the diagonal of the contours' points (value units), at least ``tol``."""
    pts = np.concatenate([np.asarray(c.points, float) for c in contours]) if contours else np.zeros((0, 2))
    scale = float(np.hypot(*(pts.max(axis=0) - pts.min(axis=0)))) if len(pts) else 1.0
    return max(scale, tol)


def patch_reasons(
    ties: list[Tie],
    contours: dict[str, Contour],
    tol: float,
    geometries: list | None = None,
    scale: float | None = None,
) -> list[dict[str, Any]]:
    """Reasons of the ties held on one patch component, explained kinds first (one per tie).

    ``geometries`` (one patch polygon per tie) lets the unexplained ties be probed.
    """
    geos = geometries if geometries is not None else [None] * len(ties)
    rs = [tie_reason(t, contours, tol, g, scale) for t, g in zip(ties, geos, strict=True)]
    return sorted(rs, key=lambda r: (r["kind"] == "unexplained", r["kind"], r["contours"]))
