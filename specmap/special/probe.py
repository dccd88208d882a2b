"""A perturbation probe for a patch's unexplained tie: the smallest contour move that breaks it.

A tie |c_P| = k |c_Q| with no closed-form reason (:func:`specmap.special.reasons.tie_reason`:
``"unexplained"``) still holds identically on its patch. The probe measures how robust that is.
Lines are drawn inside the tie's patch polygon (in (a, b), seeded) and kept where the tie holds
within the atlas tolerance; then, for each of its (distinct) contours in turn, the contour is
translated by (eps, eps) in value coordinates -- a change of the grid of sup norm eps -- and the tie
is re-evaluated at those lines, exactly as the atlas evaluates it
(:func:`specmap.special.evaluate._tie_differences`: extended line parameters, push units). The
identity is broken at eps when the moved tie holds at none of the kept lines (the patch is gone
there). eps runs over a geometric ladder from the tolerance up to the size of the grids; the
smallest breaking eps over the contours is ``breaks_at`` (value units, an upper bound of the
smallest breaking move within one ladder step, a factor :data:`STEP`). A tie not broken by any
size of the ladder gets ``breaks_at`` None and says so.

The move by (eps, eps) changes a vertical half-line's parameter by eps / a and a horizontal one's by
eps / (1 - a) (math.md section 5), so a tie whose other three contours stay put changes by at
least min(a, 1 - a) eps / max(a, 1 - a) in push units: above the tolerance for eps a small multiple
of it, unless the four contours move together (which a single-contour move never is).
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import shapely

from specmap.grids.model import Contour
from specmap.special.evaluate import _tie_differences
from specmap.special.pairs import Tie

STEP = 10**0.25
"""Ratio of two sizes of the ladder."""
LINES = 12
"""Lines drawn inside the patch."""


def _lines_in(geometry, n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Up to n lines (a, b) inside a polygon: its representative point and seeded uniform draws."""
    p = geometry.representative_point()
    a0, b0, a1, b1 = geometry.bounds
    rng = np.random.default_rng(seed)
    A = rng.uniform(a0, a1, 40 * n)
    B = rng.uniform(b0, b1, 40 * n)
    inside = shapely.contains_xy(geometry, A, B)
    A, B = A[inside][: n - 1], B[inside][: n - 1]
    return np.r_[p.x, A], np.r_[p.y, B]


def _holds(tie: Tie, contours: dict[str, Contour], a: np.ndarray, b: np.ndarray, tol: float) -> np.ndarray:
    dp, dq, ok = _tie_differences(tie, contours, a, b)
    k = 2.0 if tie.condition == "half" else 1.0
    with np.errstate(invalid="ignore"):
        return ok & (np.abs(dp - k * dq) <= tol) & (np.minimum(dp, dq) > tol)


def break_probe(
    tie: Tie,
    contours: dict[str, Contour],
    geometry,
    tol: float,
    *,
    scale: float,
    lines: int = LINES,
    seed: int = 0,
) -> dict[str, Any]:
    """``{"breaks_at", "moved", "lines", "sizes", "method"}`` of a tie held on the patch ``geometry``.

    Parameters
    ----------
    tie : Tie
    contours : dict of id to Contour
    geometry : shapely geometry
        The tie's patch in (a, b).
    tol : float
        Residual tolerance of the atlas (push units).
    scale : float
        Largest size tried (value units; e.g. the diagonal of the grids' bounding box).
    lines, seed : int
        Lines drawn inside the patch, and their seed.

    Returns
    -------
    dict
        ``breaks_at``: the smallest size of the ladder whose move of one contour breaks the tie at
        every kept line (None if none up to ``scale`` does, or no drawn line holds it); ``moved``: that
        contour; ``lines``: the lines where the unmoved tie holds; ``sizes``: [first, last, count] of
        the ladder.
    """
    out: dict[str, Any] = {
        "method": "one contour moved by (eps, eps), tie re-evaluated at lines of the patch",
        "breaks_at": None,
        "moved": None,
        "lines": 0,
        "sizes": None,
    }
    if geometry is None or geometry.is_empty:
        return out
    a, b = _lines_in(geometry, max(1, int(lines)), seed)
    keep = _holds(tie, contours, a, b, tol)
    a, b = a[keep], b[keep]
    out["lines"] = int(len(a))
    if not len(a):
        return out
    lo = max(float(tol), 1e-300)
    hi = max(float(scale), lo)
    n = int(math.ceil(math.log(hi / lo) / math.log(STEP))) + 1
    sizes = lo * STEP ** np.arange(n)
    out["sizes"] = [float(sizes[0]), float(sizes[-1]), int(n)]
    ids = list(dict.fromkeys(c for pair in tie.pairs for c in pair))
    best: tuple[float, str] | None = None
    for cid in ids:
        c = contours[cid]
        for eps in sizes:
            if best is not None and eps >= best[0]:
                break
            moved = dict(contours)
            moved[cid] = dataclasses.replace(c, points=np.asarray(c.points) + eps)
            if not _holds(tie, moved, a, b, tol).any():
                best = (float(eps), cid)
                break
    if best is not None:
        out["breaks_at"], out["moved"] = best
    return out
