"""Upper bounds of h over whole boxes of the window from evaluated lines (stability, no diagram).

The reduced search must refute every candidate c of the special set whose tied cost t(c) is
above the value already reached; on real scans there are millions of them, and a bound
computed candidate by candidate (:class:`specmap.distance.bounds.LocalBound`) costs one sup
norm over the vertices per candidate and evaluated line. This module bounds h once per box
of a ``side`` x ``side`` grid of the window, so one computation refutes every candidate of
the box whose cost is above it.

The argument. For lines p, q and each map on its own mesh, stability of persistence and the
triangle inequality for d_B give [CDFFL13]

    h_k(p) <= h_k(q) + ||F*_f(p) - F*_f(q)||_inf + ||F*_g(p) - F*_g(q)||_inf.

At a vertex v, F*(a, b)(v) = max(r1(a) (v1 - b), r2(a) (v2 + b)) with r1 = 1, r2 = a / (1 - a)
for a <= 1/2 and r1 = (1 - a) / a, r2 = 1 for a >= 1/2 (:func:`specmap.strip.star_values`): r1
is non-increasing and r2 non-decreasing on the whole of [0, 1] (continuous at 1/2). Over a box
[a0, a1] x [b0, b1] the pair (r_i(a), b) ranges over a rectangle whose corners are the images of
the box's corners, and each term r_i (v_i -+ b) is bilinear in (r_i, b), so its extremes are at
the four corners of the box. Hence, over the box,

    sup F*(v) = max over the corners of F*(corner)(v),
    inf F*(v) >= max(min over corners of term 1, min over corners of term 2),

and |F*(p)(v) - F*(q)(v)| <= max(sup F*(v) - F*(q)(v), F*(q)(v) - inf F*(v)) for every p in
the box. With M_f(B, q), M_g(B, q) the maxima of that over the vertices,

    h_k(p) <= min over evaluated q of h_k(q) + M_f(B, q) + M_g(B, q)   for every p in B,

so a candidate c in B whose lower tied cost exceeds the right side (plus the tolerance) has
h(c) < t(c): it is not where D is read (the rule ``local_bound`` of
:func:`specmap.distance.reduced.reduced_search`, for a whole box at once). Only the ``near``
evaluated lines closest to the box's centre are tried, which keeps it an upper bound. Checked
against the stability bound at sampled points of each box in ``tests/test_reduced_build.py``.

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in multidimensional
   persistent homology are stable functions", Math. Methods Appl. Sci. (2013).
"""

from __future__ import annotations

import math

import numpy as np

from specmap.distance.bounds import star_rows
from specmap.distance.paths import normalise
from specmap.strip import Window

WORK_VALUES = 4_000_000
"""Box-by-line-by-vertex values held at once."""


def _terms(values: np.ndarray, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The two terms r1(a) (v1 - b) and r2(a) (v2 + b) of F* (shape of a (..., 1) against vertices)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        r1 = np.where(a <= 0.5, 1.0, (1.0 - a) / a)
        r2 = np.where(a <= 0.5, a / (1.0 - a), 1.0)
    return r1 * (values[:, 0] - b), r2 * (values[:, 1] + b)


def box_star_range(values: np.ndarray, a0, a1, b0, b1) -> tuple[np.ndarray, np.ndarray]:
    """(sup, a lower bound of the inf) of F*(v) over boxes: shape (boxes, vertices) (module text).

    ``a0``, ``a1``, ``b0``, ``b1`` are arrays (boxes,) in line parameters.
    """
    a0, a1, b0, b1 = (np.asarray(x, float)[:, None] for x in (a0, a1, b0, b1))
    hi = np.full((a0.shape[0], values.shape[0]), -np.inf)
    lo1 = np.full_like(hi, np.inf)
    lo2 = np.full_like(hi, np.inf)
    for a in (a0, a1):
        for b in (b0, b1):
            t1, t2 = _terms(values, a, b)
            np.maximum(hi, np.maximum(t1, t2), out=hi)
            np.minimum(lo1, t1, out=lo1)
            np.minimum(lo2, t2, out=lo2)
    return hi, np.maximum(lo1, lo2)


class BoxBound:
    """Upper bounds of h (per group) over the boxes of a ``side`` x ``side`` grid of ``window``.

    Lines are recorded with :meth:`add`; :meth:`at` gives, for many lines, the bound of the box
    holding each one (computed once per box and kept; :meth:`refresh` recomputes boxes from the
    lines recorded since). ``near`` evaluated lines (nearest to the box centre) are tried per box.
    """

    def __init__(
        self, values_f: np.ndarray, values_g: np.ndarray, window: Window, side: int = 128, near: int = 8
    ) -> None:
        self.vf, self.vg = np.asarray(values_f, float), np.asarray(values_g, float)
        self.window = window
        self.side = int(side)
        self.near = int(near)
        self.pts = np.zeros((0, 2))
        self.h = np.zeros((0, 1))
        self.Ff = np.zeros((0, self.vf.shape[0]))
        self.Fg = np.zeros((0, self.vg.shape[0]))
        n = self.side * self.side
        self.value = np.full(n, np.inf)  # max over groups of the box bound; inf until computed
        self.lines_at = np.full(n, -1)  # lines recorded when the box was computed (-1: never)
        self.computed = 0

    @property
    def lines(self) -> int:
        return len(self.pts)

    def add(self, a: np.ndarray, b: np.ndarray, H: np.ndarray) -> None:
        """Record lines (a, b) with h values H (n_lines, n_groups)."""
        a, b = np.atleast_1d(a).astype(float), np.atleast_1d(b).astype(float)
        H = np.asarray(H, float).reshape(len(a), -1)
        if not len(self.pts):
            self.h = np.zeros((0, H.shape[1]))
        self.pts = np.r_[self.pts, normalise(np.c_[a, b], self.window)]
        self.h = np.r_[self.h, H]
        self.Ff = np.r_[self.Ff, star_rows(self.vf, a, b)]
        self.Fg = np.r_[self.Fg, star_rows(self.vg, a, b)]

    def box_of(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Index of the box holding each line (row-major over b, then a; clipped to the grid)."""
        p = normalise(np.c_[np.atleast_1d(a), np.atleast_1d(b)], self.window)
        ij = np.clip(np.floor(p * self.side).astype(np.int64), 0, self.side - 1)
        return ij[:, 1] * self.side + ij[:, 0]

    def box_upper(self, boxes: np.ndarray) -> np.ndarray:
        """Upper bound of h per group over each box, from the recorded lines: (len(boxes), groups)."""
        boxes = np.asarray(boxes, dtype=np.int64)
        if not self.lines:
            return np.full((len(boxes), 1), np.inf)
        side = self.side
        i, j = boxes % side, boxes // side
        (wa0, wa1), (wb0, wb1) = self.window.a, self.window.b
        a0 = wa0 + (wa1 - wa0) * i / side
        a1 = wa0 + (wa1 - wa0) * (i + 1) / side
        b0 = wb0 + (wb1 - wb0) * j / side
        b1 = wb0 + (wb1 - wb0) * (j + 1) / side
        centre = np.c_[(i + 0.5) / side, (j + 0.5) / side]
        k = min(self.near, self.lines)
        out = np.empty((len(boxes), self.h.shape[1]))
        step = max(1, WORK_VALUES // (k * (self.vf.shape[0] + self.vg.shape[0])))
        for s in range(0, len(boxes), step):
            sl = slice(s, s + step)
            d2 = ((centre[sl, None, :] - self.pts[None, :, :]) ** 2).sum(axis=2)
            idx = (
                np.argpartition(d2, k - 1, axis=1)[:, :k]
                if k < self.lines
                else np.tile(np.arange(k), (d2.shape[0], 1))
            )
            move = np.zeros(idx.shape)
            for vals, F in ((self.vf, self.Ff), (self.vg, self.Fg)):
                hi, lo = box_star_range(vals, a0[sl], a1[sl], b0[sl], b1[sl])
                Fq = F[idx]  # (boxes, k, vertices)
                move += np.maximum(hi[:, None, :] - Fq, Fq - lo[:, None, :]).max(axis=2)
            out[sl] = (self.h[idx] + move[:, :, None]).min(axis=1)
        return out

    def refresh(self, boxes: np.ndarray) -> None:
        """Compute the boxes never computed or computed with fewer lines than recorded now."""
        boxes = np.unique(np.asarray(boxes, dtype=np.int64))
        stale = boxes[self.lines_at[boxes] < self.lines]
        if len(stale) and self.lines:
            # both bounds hold (the nearest lines change as lines are added): keep the smaller
            self.value[stale] = np.minimum(self.value[stale], self.box_upper(stale).max(axis=1))
            self.lines_at[stale] = self.lines
            self.computed += len(stale)

    def at(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Upper bound of h (max over groups) at many lines: the bound of each one's box."""
        ids = self.box_of(a, b)
        fresh = np.unique(ids)
        self.refresh(fresh[self.lines_at[fresh] < 0])
        return self.value[ids] if self.lines else np.full(len(ids), math.inf)
