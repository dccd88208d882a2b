"""The matching distance: dense sweep, reduced search on the special set, and audits.

For meshed maps f, g: M -> R^2 the matching distance in degree k is

    D_k(f, g) = sup over lines (a, b) of h_k(a, b),
    h_k(a, b) = d_B(Dgm_k F*_f(a, b), Dgm_k F*_g(a, b))                    [CDFFL13]

specmap computes it two ways and compares them:

- **dense**: h_k on a node grid of the window, the best node refined by a
  pattern search, with a rigorous sampling-error bound (:func:`lipschitz_constants`);
- **reduced**: by the main theorem [EFQT23, FMQT] D_k is reached on the
  slope-one line a = 1/2 or at a special value, so h_k is evaluated only on
  a = 1/2 and along the special set of an atlas (:mod:`specmap.special`),
  skipping ties whose tied cost cannot be the maximum (math.md section 5).

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in
   multidimensional persistent homology are stable functions", Math. Methods
   Appl. Sci. 36 (2013).
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching
   distance for 2D filtering functions", J. Appl. Comput. Topol. (2023).
.. [FMQT] Frosini, Mosig Garcia, Quercioli, Tombari, "Matching distance via the
   extended Pareto grid", arXiv:2312.04201.
.. [CEF19] Cerri, Ethier, Frosini, J. Appl. Comput. Topol. 3 (2019): position
   of diagram points on the extended Pareto grid.
.. [DFL10] d'Amico, Frosini, Landi, Acta Appl. Math. 109 (2010): matching cost.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from specmap.errors import StudyError
from specmap.slices import DEGREES, SliceEngine, bottleneck
from specmap.strip import Window, default_window, line_parameter, push_scale

Progress = Callable[[int, int], None]
METHODS = ("both", "dense", "reduced")
TOLERANCE_FRACTION = 1e-3
"""Default tolerance: this fraction of the largest value range of f and g."""


# ----------------------------------------------------------------------------------------------
# bounds
# ----------------------------------------------------------------------------------------------

def lipschitz_constants(bounds_f: Sequence[float], bounds_g: Sequence[float],
                        window: Window) -> tuple[float, float]:
    """Constants (L_a, L_b) with ||F*(a, b) - F*(a', b')||_inf <= L_a |a - a'| + L_b |b - b'|.

    Derivation (math.md section 2, explicit forms). For a <= 1/2,
    F* = max(f1 - b, t (f2 + b)) with t = a / (1 - a) in [0, 1]:
    |d/db| <= max(1, t) = 1 and |d/da| <= |f2 + b| / (1 - a)^2 <= 4 |f2 + b|.
    For a >= 1/2, F* = max((1 - a)/a (f1 - b), f2 + b): |d/db| <= 1 and
    |d/da| = |f1 - b| / a^2 <= 4 |f1 - b|. A max of Lipschitz functions keeps
    the largest constant, so L_b = 1 and L_a = 4 M with
    M = max over both maps and b in the window of max(|f1 - b|, |f2 + b|).

    Since d_B is 1-Lipschitz in the sup norm of the filtration (stability,
    also for lower-star filtrations of one mesh) and both F*_f and F*_g move,
    |h_k(a, b) - h_k(a', b')| <= 2 (L_a |a - a'| + L_b |b - b'|).

    Parameters
    ----------
    bounds_f, bounds_g : (min f1, min f2, max f1, max f2)
    window : Window

    Returns
    -------
    (L_a, L_b) : tuple of float

    References
    ----------
    .. [CDFFL13] Cerri et al. (2013): stability of d_B under sup-norm perturbations.
    """
    b_lo, b_hi = window.b
    m = 0.0
    for lo1, lo2, hi1, hi2 in (bounds_f, bounds_g):
        m = max(m, abs(hi1 - b_lo), abs(lo1 - b_hi), abs(hi2 + b_hi), abs(lo2 + b_lo),
                abs(hi1 - b_hi), abs(lo1 - b_lo), abs(hi2 + b_lo), abs(lo2 + b_hi))
    return 4.0 * m, 1.0


def distance_upper_bound(shape_f, shape_g) -> tuple[float, str]:
    """An upper bound U >= D_k(f, g) for every k, and how it was obtained.

    - Same triangles (so the same simplicial complex): U = ||f - g||_inf over the
      vertices [CDFFL13] (|F*_f - F*_g| <= max(|f1 - g1|, |f2 - g2|) vertex-wise).
    - Otherwise, from the value ranges [D]: on a line with a <= 1/2,
      F* = max(f1 - b, t (f2 + b)), t in [0, 1], so
      max F*_f - min F*_g <= max(max f1 - min g1, t (max f2 - min g2)); every
      bottleneck cost (|u - u'|, or a half persistence) is at most the largest of
      max f1 - min g1, max g1 - min f1, max f2 - min g2, max g2 - min f2
      (the same for a >= 1/2 with the roles of f1, f2 exchanged).
    """
    vf, vg = shape_f.values, shape_g.values
    same = (vf.shape == vg.shape and shape_f.triangles is not None and shape_g.triangles is not None
            and np.array_equal(shape_f.triangles, shape_g.triangles))
    if same:
        return float(np.abs(vf - vg).max()), "sup_norm"
    f1lo, f2lo, f1hi, f2hi = shape_f.value_bounds()
    g1lo, g2lo, g1hi, g2hi = shape_g.value_bounds()
    return float(max(f1hi - g1lo, g1hi - f1lo, f2hi - g2lo, g2hi - f2lo, 0.0)), "value_ranges"


def value_range(shape_f, shape_g) -> float:
    """Largest extent of f1, f2, g1, g2 (value units); scales default tolerances."""
    f1lo, f2lo, f1hi, f2hi = shape_f.value_bounds()
    g1lo, g2lo, g1hi, g2hi = shape_g.value_bounds()
    return float(max(f1hi - f1lo, f2hi - f2lo, g1hi - g1lo, g2hi - g2lo, 1e-12))


# ----------------------------------------------------------------------------------------------
# h on many lines, in parallel
# ----------------------------------------------------------------------------------------------

_WORKER_ENGINES: dict[tuple, tuple[SliceEngine, SliceEngine]] = {}


def _mesh_parts(source) -> tuple[np.ndarray, np.ndarray]:
    if isinstance(source, SliceEngine):
        return source.triangles, source.values
    if not getattr(source, "has_mesh", False):
        label = getattr(source, "label", "a shape")
        raise StudyError(f"{label} has no mesh, so no slice diagrams", fix="give a surface or mesh for f and g")
    return np.asarray(source.triangles), np.asarray(source.values, dtype=float)


def _h_lines(engine_f: SliceEngine, engine_g: SliceEngine, lines: np.ndarray,
             degrees: Sequence[int]) -> np.ndarray:
    out = np.empty((len(lines), len(degrees)))
    for i, (a, b) in enumerate(lines):
        df = engine_f.diagrams(a, b, degrees)
        dg = engine_g.diagrams(a, b, degrees)
        out[i] = [bottleneck(df[k], dg[k]) for k in degrees]
    return out


def _h_chunk(key: tuple, tri_f, val_f, tri_g, val_g, lines, degrees) -> np.ndarray:
    # Runs in a worker: engines are built once per worker process and kept for later chunks.
    engines = _WORKER_ENGINES.get(key)
    if engines is None:
        _WORKER_ENGINES.clear()
        engines = (SliceEngine(tri_f, val_f), SliceEngine(tri_g, val_g))
        _WORKER_ENGINES[key] = engines
    return _h_lines(engines[0], engines[1], lines, degrees)


def _content_key(*arrays: np.ndarray) -> tuple:
    return tuple((a.shape, a.dtype.str, hash(np.ascontiguousarray(a).tobytes())) for a in arrays)


class LineEvaluator:
    """h_k on lines, with a memo, a line counter, optional joblib workers and progress reports.

    Parameters
    ----------
    source_f, source_g : Shape or SliceEngine
    degrees : sequence of int
    jobs : int
        Worker processes (joblib); 1 evaluates in this process.
    progress : callable(done, total), optional
    """

    def __init__(self, source_f, source_g, degrees: Sequence[int] = DEGREES, *, jobs: int = 1,
                 progress: Progress | None = None) -> None:
        self.degrees = tuple(int(k) for k in degrees)
        self.tri_f, self.val_f = _mesh_parts(source_f)
        self.tri_g, self.val_g = _mesh_parts(source_g)
        self.jobs = max(1, int(jobs))
        self.progress = progress
        self.done = 0
        self.total = 0
        self.memo: dict[tuple[float, float], np.ndarray] = {}
        self.infinite: list[dict[str, Any]] = []
        self._engines: tuple[SliceEngine, SliceEngine] | None = None
        if isinstance(source_f, SliceEngine) and isinstance(source_g, SliceEngine):
            self._engines = (source_f, source_g)
        self._key = _content_key(self.tri_f, self.val_f, self.tri_g, self.val_g)
        self._pool = None

    def plan(self, n: int) -> None:
        """Announce n more lines (for the progress total)."""
        self.total += int(n)

    def _report(self) -> None:
        if self.progress is not None:
            self.total = max(self.total, self.done)
            self.progress(self.done, self.total)

    def _compute(self, lines: np.ndarray) -> np.ndarray:
        if self.jobs == 1 or len(lines) < 2 * self.jobs:
            if self._engines is None:
                self._engines = (SliceEngine(self.tri_f, self.val_f), SliceEngine(self.tri_g, self.val_g))
            out = np.empty((len(lines), len(self.degrees)))
            step = max(1, len(lines) // 50)
            for i in range(0, len(lines), step):
                out[i:i + step] = _h_lines(*self._engines, lines[i:i + step], self.degrees)
                self.done += len(lines[i:i + step])
                self._report()
            return out
        from joblib import Parallel, delayed

        if self._pool is None:
            self._pool = Parallel(n_jobs=self.jobs, return_as="generator")
        n_chunks = min(len(lines), 4 * self.jobs)
        chunks = np.array_split(lines, n_chunks)
        parts = []
        for part, chunk in zip(self._pool(delayed(_h_chunk)(self._key, self.tri_f, self.val_f, self.tri_g,
                                                           self.val_g, c, self.degrees) for c in chunks),
                               chunks, strict=True):
            parts.append(part)
            self.done += len(chunk)
            self._report()
        return np.concatenate(parts)

    def __call__(self, a, b) -> np.ndarray:
        """h for lines (a, b) (broadcast): shape (len(degrees), *shape)."""
        a, b = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
        shape = a.shape
        flat = [(float(x), float(y)) for x, y in zip(a.ravel(), b.ravel(), strict=True)]
        todo = list(dict.fromkeys(p for p in flat if p not in self.memo))
        if todo:
            lines = np.array(todo, dtype=float)
            self.total = max(self.total, self.done + len(todo))
            vals = self._compute(lines)
            for p, v in zip(todo, vals, strict=True):
                self.memo[p] = v
                for k, x in zip(self.degrees, v, strict=True):
                    if math.isinf(x) and len(self.infinite) < 50:
                        self.infinite.append({"degree": k, "at": [p[0], p[1]]})
        out = np.array([self.memo[p] for p in flat]).reshape(*shape, len(self.degrees))
        return np.moveaxis(out, -1, 0)

    @property
    def lines(self) -> int:
        """Distinct lines evaluated so far."""
        return len(self.memo)


def h_values(source_f, source_g, A, B, degrees: Sequence[int] = DEGREES, *, jobs: int = 1,
             progress: Progress | None = None) -> np.ndarray:
    """Bottleneck distances h_k(a, b) between slice diagrams on many lines.

    Parameters
    ----------
    source_f, source_g : Shape or SliceEngine
        Meshed maps. With ``jobs > 1`` only their triangles and values travel to the
        workers, each of which builds its engines once.
    A, B : array_like
        Line parameters, broadcast together.
    degrees : sequence of int
    jobs : int
    progress : callable(done, total), optional

    Returns
    -------
    ndarray of shape (len(degrees), *broadcast shape); ``inf`` where the numbers of
    points at infinity differ.

    References
    ----------
    .. [CDFFL13] Cerri et al. (2013); [DFL10] d'Amico, Frosini, Landi (2010).

    Examples
    --------
    >>> from specmap.shapes.surfaces import Ellipsoid
    >>> V, T = Ellipsoid((2.0, 1.0, 1.0)).mesh(300)
    >>> f, g = SliceEngine(T, V[:, :2]), SliceEngine(T, V[:, :2] + 0.1)
    >>> round(float(h_values(f, g, 0.5, 0.0, (0,))[0]), 6)
    0.1
    """
    return LineEvaluator(source_f, source_g, degrees, jobs=jobs, progress=progress)(A, B)


# ----------------------------------------------------------------------------------------------
# local refinement
# ----------------------------------------------------------------------------------------------

@dataclass
class _Best:
    value: float = -math.inf
    at: tuple[float, float] = (math.nan, math.nan)
    where: str = ""
    component: str | None = None
    tag: tuple[int, int] | None = None  # (sample set, sample index) of the best special sample

    def offer(self, value: float, at: tuple[float, float], where: str) -> bool:
        if value > self.value:
            self.value, self.at, self.where = float(value), (float(at[0]), float(at[1])), where
            return True
        return False


def _pattern_search(ev: LineEvaluator, j: int, start: tuple[float, float], step: tuple[float, float],
                    window: Window, levels: int = 5, max_batches: int = 40) -> tuple[float, tuple[float, float]]:
    """Compass search (8 directions) maximising h_{degrees[j]} from ``start``; halves the step ``levels`` times."""
    (a_lo, a_hi), (b_lo, b_hi) = window.a, window.b
    x = start
    fx = float(ev(*x)[j])
    da, db = step
    dirs = [(1, 0), (-1, 0), (0, 1), (0, -1), (1, 1), (1, -1), (-1, 1), (-1, -1)]
    level = 0
    for _ in range(max_batches):
        cand = [(min(max(x[0] + u * da, a_lo), a_hi), min(max(x[1] + v * db, b_lo), b_hi)) for u, v in dirs]
        cand = [c for c in dict.fromkeys(cand) if c != x]
        if cand:
            vals = ev(np.array([c[0] for c in cand]), np.array([c[1] for c in cand]))[j]
            i = int(np.argmax(vals))
            if vals[i] > fx:
                x, fx = cand[i], float(vals[i])
                continue
        level += 1
        if level > levels:
            break
        da, db = da / 2, db / 2
    return fx, x


def _golden_max(fun: Callable[[float], float], lo: float, hi: float, iters: int) -> tuple[float, float]:
    """Golden-section search for a max of ``fun`` on [lo, hi]; returns the best (value, t) seen."""
    g = (math.sqrt(5.0) - 1) / 2
    best = (-math.inf, lo)
    x1, x2 = hi - g * (hi - lo), lo + g * (hi - lo)
    f1, f2 = fun(x1), fun(x2)
    best = max(best, (f1, x1), (f2, x2))
    for _ in range(iters):
        if f1 >= f2:
            hi, x2, f2 = x2, x1, f1
            x1 = hi - g * (hi - lo)
            f1 = fun(x1)
            best = max(best, (f1, x1))
        else:
            lo, x1, f1 = x1, x2, f2
            x2 = lo + g * (hi - lo)
            f2 = fun(x2)
            best = max(best, (f2, x2))
    return best


# ----------------------------------------------------------------------------------------------
# dense sweep
# ----------------------------------------------------------------------------------------------

def cell_error_bound(H: np.ndarray, av: np.ndarray, bv: np.ndarray, bounds_f: Sequence[float],
                     bounds_g: Sequence[float]) -> float:
    """Sampling error of a node grid: sup of h over the window minus max of h over the nodes (upper bound).

    Cell by cell, with the local constants of :func:`lipschitz_constants`
    (|dF*/da| <= |f2 + b| / (1 - a)^2 for a <= 1/2 and |f1 - b| / a^2 for
    a >= 1/2, maximised over the cell; |dF*/db| <= 1): a line of the cell is within
    (h_a/2, h_b/2) of a corner, so h there is at most
    max over corners of h + 2 (L_a h_a/2 + L_b h_b/2).

    Returns
    -------
    float
        max over cells of that quantity, minus the node maximum (>= 0); ``inf`` if
        any node value is infinite.
    """
    Hm = np.where(np.isnan(H), -math.inf, H)
    if not np.all(np.isfinite(Hm)):
        return math.inf
    lo1, lo2 = min(bounds_f[0], bounds_g[0]), min(bounds_f[1], bounds_g[1])
    hi1, hi2 = max(bounds_f[2], bounds_g[2]), max(bounds_f[3], bounds_g[3])
    a0, a1 = av[:-1], av[1:]
    b0, b1 = bv[:-1], bv[1:]
    m2 = np.maximum.reduce([np.abs(hi2 + b0), np.abs(hi2 + b1), np.abs(lo2 + b0), np.abs(lo2 + b1)])
    m1 = np.maximum.reduce([np.abs(hi1 - b0), np.abs(hi1 - b1), np.abs(lo1 - b0), np.abs(lo1 - b1)])
    left = np.where(a0 <= 0.5, 1.0 / (1.0 - np.minimum(a1, 0.5)) ** 2, 0.0)  # (n_a - 1,)
    right = np.where(a1 >= 0.5, 1.0 / np.maximum(a0, 0.5) ** 2, 0.0)
    La = np.maximum(left[None, :] * m2[:, None], right[None, :] * m1[:, None])  # (n_b - 1, n_a - 1)
    ha, hb = np.diff(av)[None, :], np.diff(bv)[:, None]
    corner = np.maximum.reduce([Hm[..., :-1, :-1], Hm[..., 1:, :-1], Hm[..., :-1, 1:], Hm[..., 1:, 1:]])
    top = corner + (La * ha + 1.0 * hb)
    return float(max(0.0, top.max() - Hm.max()))


def dense_sweep(ev: LineEvaluator, window: Window, *, resolution: int = 41, refine: bool = True,
                bounds: tuple[Sequence[float], Sequence[float]] | None = None) -> dict[str, Any]:
    """h_k on a ``resolution`` x ``resolution`` node grid, maxima refined by pattern search.

    The sampling-error bound (:func:`cell_error_bound`, per degree, the largest
    reported): D_k <= max over nodes of h_k + error_bound, rigorously for the
    meshed maps, by stability [CDFFL13] and the Lipschitz constants of
    :func:`lipschitz_constants` taken cell by cell.

    Returns
    -------
    dict with ``grid`` (ndarray (n_deg, n_b, n_a)), ``a``, ``b`` (axes), ``best``
    (per degree index: (value, (a, b))), ``node_best``, ``error_bound``, ``lines``, ``seconds``.
    """
    t0 = time.perf_counter()
    n0 = ev.lines
    n = max(2, int(resolution))
    A, B = window.mesh(n, n)
    ev.plan(A.size)
    H = ev(A, B)
    av, bv = A[0], B[:, 0]
    ha, hb = (window.a[1] - window.a[0]) / (n - 1), (window.b[1] - window.b[0]) / (n - 1)
    best = []
    node_best = []
    for j in range(len(ev.degrees)):
        Hj = np.where(np.isnan(H[j]), -math.inf, H[j])
        r, c = np.unravel_index(int(np.argmax(Hj)), Hj.shape)
        start = (float(av[c]), float(bv[r]))
        val = float(Hj[r, c])
        node_best.append((val, start))
        if refine and math.isfinite(val):
            ev.plan(60)
            val, start = _pattern_search(ev, j, start, (ha / 2, hb / 2), window)
        best.append((val, start))
    err = math.inf
    if bounds is not None:
        err = max(cell_error_bound(H[j], av, bv, *bounds) for j in range(len(ev.degrees)))
    return {"grid": H, "a": av, "b": bv, "best": best, "node_best": node_best,
            "error_bound": err, "lines": ev.lines - n0, "seconds": time.perf_counter() - t0}


# ----------------------------------------------------------------------------------------------
# reduced search: tied costs, candidates on the special set, a bound per line
# ----------------------------------------------------------------------------------------------

# How the two differences d_P, d_Q of a tie give its candidate costs (see tie_costs).
_EQUAL_CROSS, _EQUAL_SAME, _HALF_P, _HALF_Q, _ANY_EQUAL, _ANY_HALF = range(6)
_LOCAL_MAX, _END, _CROSSING = range(3)
ORIGINS = ("local_max", "end", "crossing")
"""Where a candidate comes from: a local maximum of the tied cost along a curve, a curve end, a crossing."""


def _grid_of(cid: str) -> str | None:
    return cid.split(":", 1)[0] if ":" in cid else None


def _tie_code(tie, *, roles: bool = True) -> int | None:
    """How the tied cost of ``tie`` follows from its differences; ``None`` for a tie of no two costs.

    With roles known (ids ``"<grid>:..."`` and ``roles=True``): equal ties of
    two cross pairs or two same-grid pairs; half ties of a same-grid pair (the
    larger difference) against a cross pair; any other tie compares costs of
    different kinds and gives ``None`` (math.md section 5, role-aware refinement).
    """
    (p1, p2), (q1, q2) = tie.pairs
    gp, gq = (_grid_of(p1), _grid_of(p2)), (_grid_of(q1), _grid_of(q2))
    if not roles or None in gp + gq:
        return _ANY_EQUAL if tie.condition == "equal" else _ANY_HALF
    cross_p, cross_q = gp[0] != gp[1], gq[0] != gq[1]
    if tie.condition == "equal":
        if cross_p == cross_q:
            return _EQUAL_CROSS if cross_p else _EQUAL_SAME
        return None
    if cross_p != cross_q:
        return _HALF_Q if cross_p else _HALF_P
    return None


def _costs_from_differences(code, dp, dq) -> tuple[np.ndarray, np.ndarray]:
    """(lo, hi) of :func:`tie_costs` from the codes of :func:`_tie_code` and the differences (value units)."""
    code, dp, dq = np.broadcast_arrays(np.asarray(code), np.asarray(dp, float), np.asarray(dq, float))
    with np.errstate(invalid="ignore"):
        lo_d, hi_d = np.minimum(dp, dq), np.maximum(dp, dq)
        half_lo, half_hi = np.minimum(hi_d / 2, lo_d), np.maximum(hi_d / 2, lo_d)
        conds = [code == _EQUAL_CROSS, code == _EQUAL_SAME, code == _ANY_EQUAL]
        lo = np.select(conds, [lo_d, lo_d / 2, lo_d / 2], half_lo)
        hi = np.select(conds, [hi_d, hi_d / 2, hi_d], half_hi)
        bad = ((code == _HALF_P) & ~(dp >= dq)) | ((code == _HALF_Q) & ~(dq >= dp))
    return np.where(bad, np.nan, lo), np.where(bad, np.nan, hi)


def tie_costs(tie, contours_by_id: dict, a, b, *, roles: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper candidate bottleneck cost of a tie at lines (a, b), in value units.

    With the differences d_P = |c_a - c_b|, d_Q = |c_c - c_d| of push
    coordinates (value units, min(a, 1-a) times the line-parameter difference):

    - ``equal`` (d_P = d_Q = d): two matching costs tie at d when both pairs are
      cross pairs (one contour of each grid), two diagonal costs tie at d/2
      when both are same-grid pairs; a mixed equal tie compares d with d/2 and is
      no tie of costs (math.md, role-aware refinement [D]).
    - ``half`` (d_big = 2 d_small): the diagonal cost d_big/2 of a same-grid pair
      ties with the matching cost d_small of a cross pair: the tied cost is the
      smaller difference, d_small [EFQT23].

    Off the curve the two sides differ; ``lo`` and ``hi`` bracket both sides
    (min and max); on the curve both equal the tied cost t. Where the roles make
    the tie impossible, or a contour is not met, both are NaN. Without role
    information (ids without a grid prefix, or ``roles=False``) an equal tie
    brackets [d/2, d].

    Returns
    -------
    lo, hi : ndarray of the broadcast shape of a and b.
    """
    (p1, p2), (q1, q2) = tie.pairs
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    m = push_scale(a)
    s = [line_parameter(contours_by_id[c], a, b) for c in (p1, p2, q1, q2)]
    code = _tie_code(tie, roles=roles)
    if code is None:
        return np.full(a.shape, np.nan), np.full(a.shape, np.nan)
    return _costs_from_differences(code, np.abs(s[0] - s[1]) * m, np.abs(s[2] - s[3]) * m)


def _star(values: np.ndarray, a, b) -> np.ndarray:
    """F*(a, b)(v) = max(r1 (f1(v) - b), r2 (f2(v) + b)) with r1 = 1, r2 = a/(1-a) for a <= 1/2 and
    r1 = (1-a)/a, r2 = 1 otherwise (math.md section 2); ``a`` and ``b`` broadcast against values[..., 0]."""
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    r1 = np.where(a <= 0.5, 1.0, (1.0 - a) / a)
    r2 = np.where(a <= 0.5, a / (1.0 - a), 1.0)
    return np.maximum(r1 * (values[..., 0] - b), r2 * (values[..., 1] + b))


def line_upper_bound(values_f: np.ndarray, values_g: np.ndarray, a, b, *, chunk: int = 256) -> np.ndarray:
    """||F*_f(a, b) - F*_g(a, b)||_inf over the vertices, per line: h_k(a, b) <= it for every k.

    For two maps on the same triangulation the lower-star filtrations of one
    line differ on every simplex by at most their largest vertex difference, so
    by stability of persistence (points at infinity included)
    h_k(a, b) <= max_v |F*_f(a, b)(v) - F*_g(a, b)(v)| [CDFFL13]. No diagram is
    needed: O(n) per line (math.md section 2, explicit forms of F*).

    Parameters
    ----------
    values_f, values_g : ndarray (n, 2)
        Values at the same vertices (same triangles).
    a, b : array_like
        Lines, broadcast together.
    chunk : int
        Lines per vectorised block.

    Returns
    -------
    ndarray of the broadcast shape of a and b.

    Examples
    --------
    >>> v = np.array([[0.0, 1.0], [2.0, -1.0]])
    >>> round(float(line_upper_bound(v, v + [0.3, 0.1], 0.5, 0.0)), 12)
    0.3
    """
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    af, bf = a.ravel(), b.ravel()
    vf, vg = np.asarray(values_f, float), np.asarray(values_g, float)
    out = np.empty(af.shape)
    for i in range(0, len(af), chunk):
        aa, bb = af[i:i + chunk], bf[i:i + chunk]
        out[i:i + chunk] = np.abs(_star(vf[:, None, :], aa, bb) - _star(vg[:, None, :], aa, bb)).max(axis=0)
    return out.reshape(a.shape)


def _paths(geom) -> list[np.ndarray]:
    """Coordinate arrays (n, 2) of the 1-d parts of a shapely geometry (polygons: their rings)."""
    if geom is None or geom.is_empty:
        return []
    t = geom.geom_type
    if t in ("LineString", "LinearRing"):
        return [np.asarray(geom.coords, float)[:, :2]]
    if t == "Point":
        return [np.asarray(geom.coords, float)[:, :2]]
    if t == "Polygon":
        return [np.asarray(r.coords, float)[:, :2] for r in (geom.exterior, *geom.interiors)]
    if hasattr(geom, "geoms"):
        return [p for g in geom.geoms for p in _paths(g)]
    return []


def _normalise(pts: np.ndarray, window: Window) -> np.ndarray:
    wa = window.a[1] - window.a[0]
    wb = window.b[1] - window.b[0]
    return (np.asarray(pts, float) - [window.a[0], window.b[0]]) / [wa, wb]


def _denormalise(pts: np.ndarray, window: Window) -> np.ndarray:
    wa = window.a[1] - window.a[0]
    wb = window.b[1] - window.b[0]
    return np.asarray(pts, float) * [wa, wb] + [window.a[0], window.b[0]]


def _sample_path(norm: np.ndarray, spacing: float) -> np.ndarray:
    """Samples of a (normalised) path: its vertices and a point every ``spacing`` of arc length."""
    if len(norm) == 1:
        return norm.copy()
    seg = np.sqrt(np.add.reduce(np.diff(norm, axis=0) ** 2, axis=1))
    cum = np.empty(len(norm))
    cum[0] = 0.0
    np.cumsum(seg, out=cum[1:])
    t = np.union1d(cum, np.linspace(0.0, cum[-1], max(2, math.ceil(cum[-1] / spacing) + 1)))
    out = np.empty((len(t), 2))
    out[:, 0] = np.interp(t, cum, norm[:, 0])
    out[:, 1] = np.interp(t, cum, norm[:, 1])
    return out


def _costs_at(codes: np.ndarray, quads: np.ndarray, columns: dict, contours_by_id: dict,
              a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Tie costs (lo, hi) at many lines at once: line i for the tie (codes[i], quads[i] (column indices)).

    Each contour is met only by the lines of the ties that use it (line parameters are
    computed line by line, so this equals evaluating every contour on every line).
    """
    ids = list(columns)
    a, b = np.asarray(a, float), np.asarray(b, float)
    quads = np.asarray(quads, dtype=np.int64).reshape(-1, 4)
    s = np.full((4, len(a)), np.nan)
    for col in np.unique(quads):
        slots = quads == col
        rows = slots.any(axis=1)
        vals = np.empty(len(a))
        vals[rows] = line_parameter(contours_by_id[ids[int(col)]], a[rows], b[rows])
        for k in range(4):
            s[k, slots[:, k]] = vals[slots[:, k]]
    m = push_scale(a)
    return _costs_from_differences(codes, np.abs(s[0] - s[1]) * m, np.abs(s[2] - s[3]) * m)


def special_candidates(atlas, contours_by_id: dict, window: Window, *, spacing: float = 1 / 200,
                       roles: bool = True, floor: float = -math.inf,
                       tolerance: float = 0.0) -> dict[str, Any]:
    """The finite candidate set of the reduced search, built without any diagram.

    For every tie piece of ``atlas`` whose tie is a tie of two costs
    (:func:`tie_costs`), each path of its geometry inside ``window`` (patches:
    their rings) is resampled every ``spacing`` of the normalised window; the
    candidates are the local maxima of the tie cost ``hi`` along each path and
    the path ends inside the window (a tie starts or stops), plus the crossings
    of two curves whose ties share a pair (where an active tie can stop being
    active: one of its costs ties with a third one).

    ``floor`` (with ``tolerance``) is a value of D already reached, e.g. on the
    slope-one line: a candidate with ``hi <= floor + tolerance`` could only be
    pruned ``below_best`` by :func:`reduced_search`, so it is dropped here and
    counted in ``below_floor``. Crossings of two ties are not computed when the
    sampled cost of each tie stays <= ``floor + tolerance`` (sampled max plus the
    largest step between consecutive samples, a margin for the cost between
    samples): a crossing's cost is one of the two tie costs there. Those pairs
    are counted in ``pruned["crossing_pairs_below_floor"]``.

    Returns
    -------
    dict with arrays ``a``, ``b``, ``lo``, ``hi`` (cost bracket), ``piece``
    (index into ``atlas.pieces``), ``origin`` (index into :data:`ORIGINS`); ``paths``
    (normalised coordinates) and ``paths_of`` (piece -> path indices) for the polish;
    ``pruned`` (ties: ``roles``, ``unknown_contour``, ``not_met``, ``outside_window``;
    ``crossing_pairs_below_floor``), ``below_floor`` (candidates dropped under ``floor``),
    ``crossings``, ``live`` (pieces with candidates), ``seconds``.
    """
    from shapely import box, intersection, intersects

    t0 = time.perf_counter()
    pieces = tuple(getattr(atlas, "pieces", ()) or ())
    pruned = {"roles": 0, "unknown_contour": 0, "not_met": 0, "outside_window": 0}
    columns = {c: i for i, c in enumerate(contours_by_id)}
    wbox = box(*window.bounds())
    wa0, wb0, wa1, wb1 = window.bounds()
    cut = floor + tolerance
    codes, quads, geoms, live_ids = [], [], [], []
    paths: list[np.ndarray] = []
    paths_of: dict[int, list[int]] = {}
    samp_pts: list[np.ndarray] = []
    for ip, piece in enumerate(pieces):
        ids = [c for pair in piece.tie.pairs for c in pair]
        if any(c not in columns for c in ids):
            pruned["unknown_contour"] += 1
            continue
        code = _tie_code(piece.tie, roles=roles)
        if code is None:
            pruned["roles"] += 1
            continue
        geom = piece.geometry
        if geom is None or geom.is_empty:
            pruned["outside_window"] += 1
            continue
        ga0, gb0, ga1, gb1 = geom.bounds
        if not (wa0 < ga0 and ga1 < wa1 and wb0 < gb0 and gb1 < wb1):  # not strictly inside: shapely decides
            if not geom.intersects(wbox):
                pruned["outside_window"] += 1
                continue
            geom = geom if wbox.contains(geom) else geom.intersection(wbox)
        live_ids.append(ip)
        codes.append(code)
        quads.append([columns[c] for c in ids])
        geoms.append(geom.boundary if geom.geom_type in ("Polygon", "MultiPolygon") else geom)
        paths_of[ip] = []
        for path in _paths(geom):
            norm = _normalise(path, window)
            paths_of[ip].append(len(paths))
            samp_pts.append(_sample_path(norm, spacing))
            paths.append(norm)
    path_live = np.array([i for i, ip in enumerate(live_ids) for _ in paths_of[ip]], dtype=np.int64)
    codes_a = np.asarray(codes, dtype=np.int64)
    quads_a = np.asarray(quads, dtype=np.int64).reshape(-1, 4)
    if paths:
        pid = np.repeat(np.arange(len(paths)), [len(q) for q in samp_pts])
        norm_pts = np.concatenate(samp_pts)
    else:
        pid = np.zeros(0, dtype=np.int64)
        norm_pts = np.zeros((0, 2))
    raw = _denormalise(norm_pts, window)
    li = path_live[pid] if len(pid) else np.zeros(0, dtype=np.int64)
    lo, hi = _costs_at(codes_a[li], quads_a[li], columns, contours_by_id, raw[:, 0], raw[:, 1])
    h = np.where(np.isnan(hi), -np.inf, hi)
    n = len(h)
    same_prev = np.zeros(n, dtype=bool)
    same_next = np.zeros(n, dtype=bool)
    same_prev[1:] = pid[1:] == pid[:-1]
    same_next[:-1] = pid[:-1] == pid[1:]
    prev_h = np.r_[-np.inf, h[:-1]] if n else h
    next_h = np.r_[h[1:], -np.inf] if n else h
    finite = np.isfinite(h)
    local_max = same_prev & same_next & (h >= prev_h) & (h > next_h) & finite
    edge = 1e-9
    inside = np.all((norm_pts > edge) & (norm_pts < 1 - edge), axis=1)
    end = (~same_prev | ~same_next) & finite & inside
    keep = local_max | end
    # pieces with no finite cost anywhere: their contours are never met together (or the roles fail)
    has = np.zeros(len(live_ids), dtype=bool)
    has[li[finite]] = True
    pruned["not_met"] = int((~has).sum())
    # sampled cost bound per live tie: max of the samples plus the largest step between neighbours
    tie_top = np.full(len(live_ids), -np.inf)
    if n:
        np.maximum.at(tie_top, li[finite], h[finite])
        step = np.zeros(n)
        both = same_prev & finite & np.r_[False, finite[:-1]]
        step[both] = np.abs(h[both] - prev_h[both])
        tie_step = np.zeros(len(live_ids))
        np.maximum.at(tie_step, li, step)
        tie_top = tie_top + tie_step
    low = keep & (hi <= cut)  # NaN compares False: such samples are not kept anyway
    below_floor = int(low.sum())
    keep &= ~low
    cand = {"a": [raw[keep, 0]], "b": [raw[keep, 1]], "lo": [lo[keep]], "hi": [hi[keep]],
            "live": [li[keep]], "origin": [np.where(local_max[keep], _LOCAL_MAX, _END)]}
    pruned["crossing_pairs_below_floor"] = 0
    # crossings of ties that share a pair
    n_crossings = 0
    alive = np.nonzero(has)[0]
    if len(alive) > 1:
        by_pair: dict[tuple, list[int]] = {}
        for i in alive:
            for pair in pieces[live_ids[i]].tie.pairs:
                by_pair.setdefault(pair, []).append(int(i))
        us, vs = [], []
        for members in by_pair.values():
            m = np.asarray(members)
            if len(m) > 1:
                u, v = np.triu_indices(len(m), 1)
                us.append(m[u])
                vs.append(m[v])
        if us:
            uv = np.unique(np.c_[np.concatenate(us), np.concatenate(vs)], axis=0)
            over = (tie_top[uv[:, 0]] > cut) | (tie_top[uv[:, 1]] > cut)
            pruned["crossing_pairs_below_floor"] = int((~over).sum())
            uv = uv[over]
            garr = np.asarray(geoms, dtype=object)
            hit = intersects(garr[uv[:, 0]], garr[uv[:, 1]]) if len(uv) else np.zeros(0, bool)
            uv = uv[hit]
            pa_a, pb_a, pl_a = _crossing_points(intersection(garr[uv[:, 0]], garr[uv[:, 1]]), uv)
            n_crossings = len(pa_a) // 2
            if len(pa_a):
                clo, chi = _costs_at(codes_a[pl_a], quads_a[pl_a], columns, contours_by_id, pa_a, pb_a)
                low = np.isfinite(chi) & (chi <= cut)
                below_floor += int(low.sum())
                ok = np.isfinite(chi) & ~low
                cand["a"].append(pa_a[ok])
                cand["b"].append(pb_a[ok])
                cand["lo"].append(clo[ok])
                cand["hi"].append(chi[ok])
                cand["live"].append(pl_a[ok])
                cand["origin"].append(np.full(int(ok.sum()), _CROSSING))
    out = {k: np.concatenate(v) for k, v in cand.items()}
    live_arr = np.asarray(live_ids, dtype=np.int64)
    out["piece"] = live_arr[out.pop("live")] if len(live_arr) else np.zeros(0, dtype=np.int64)
    out["origin"] = out["origin"].astype(np.int64)
    out.update(paths=paths, paths_of=paths_of, pruned=pruned, crossings=n_crossings, below_floor=below_floor,
               live=[live_ids[i] for i in alive], seconds=time.perf_counter() - t0)
    return out


def _crossing_points(inter: np.ndarray, uv: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Points of the intersections ``inter`` of tie pairs ``uv`` (points; ends of overlaps), twice each.

    Same points and order as :func:`_paths` (a point, or the two ends of a path) per
    intersection; returns (a, b, live index), one entry for each tie of the pair.
    """
    from shapely import get_coordinates, get_parts, get_type_id

    empty = (np.zeros(0), np.zeros(0), np.zeros(0, dtype=np.int64))
    if not len(uv):
        return empty
    parts, owner = get_parts(inter, return_index=True)
    kinds = get_type_id(parts)
    if np.isin(kinds, (3, 4, 5, 6, 7)).any():  # nested collections or polygons: the general walk
        xs, ys, us = [], [], []
        for k, g in enumerate(inter):
            for path in _paths(g):
                for x, y in (path if len(path) == 1 else path[[0, -1]]):
                    xs.append(x)
                    ys.append(y)
                    us.append(k)
        P = np.c_[np.asarray(xs, float), np.asarray(ys, float)].reshape(-1, 2)
        pair = np.asarray(us, dtype=np.int64)
    else:
        coords, cidx = get_coordinates(parts, return_index=True)
        cnt = np.bincount(cidx, minlength=len(parts))
        first = np.cumsum(cnt) - cnt
        # per part, in order: a single point itself, a path its two ends (start first), an empty part nothing
        ends = np.c_[first, first + cnt - 1]
        idx = ends[np.c_[cnt >= 1, cnt > 1]]
        P = coords[idx]
        pair = owner[cidx[idx]]
    if not len(P):
        return empty
    u, v = uv[pair, 0], uv[pair, 1]
    return np.repeat(P[:, 0], 2), np.repeat(P[:, 1], 2), np.c_[u, v].ravel()


def _star_values(values: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """F*(a, b) at every vertex for many lines: shape (len(a), n) (math.md section 2)."""
    return _star(values[None, :, :], np.asarray(a, float)[:, None], np.asarray(b, float)[:, None])


class _LocalBound:
    """h at a line from h at evaluated lines: h(p) <= h(q) + ||F*_f(p) - F*_f(q)|| + ||F*_g(p) - F*_g(q)||.

    Stability [CDFFL13] applied to each map between the lines p and q (both
    filtrations on one mesh), plus the triangle inequality for d_B. Exact
    vertex-wise sup norms, no Lipschitz constant; only the ``near`` evaluated
    lines closest to p (normalised window distance) are used, which keeps it an
    upper bound.
    """

    def __init__(self, values_f: np.ndarray, values_g: np.ndarray, window: Window, near: int = 16) -> None:
        self.vf, self.vg = values_f, values_g
        self.window = window
        self.near = near
        self.pts: list[np.ndarray] = []
        self.h: list[np.ndarray] = []
        self.Ff: list[np.ndarray] = []
        self.Fg: list[np.ndarray] = []

    def add(self, a: np.ndarray, b: np.ndarray, H: np.ndarray) -> None:
        """Record lines (a, b) with h values H (n_lines, n_groups)."""
        a, b = np.atleast_1d(a).astype(float), np.atleast_1d(b).astype(float)
        self.pts.append(_normalise(np.c_[a, b], self.window))
        self.h.append(np.asarray(H, float).reshape(len(a), -1))
        self.Ff.append(_star_values(self.vf, a, b))
        self.Fg.append(_star_values(self.vg, a, b))
        self.pts, self.h = [np.concatenate(self.pts)], [np.concatenate(self.h)]
        self.Ff, self.Fg = [np.concatenate(self.Ff)], [np.concatenate(self.Fg)]

    def __call__(self, a: float, b: float) -> np.ndarray:
        """Upper bound of h (per group) at the line (a, b); ``inf`` before any line is recorded."""
        if not self.pts:
            return np.array([math.inf])
        P, H = self.pts[0], self.h[0]
        d = np.linalg.norm(P - _normalise(np.array([a, b]), self.window), axis=1)
        idx = np.argsort(d)[:self.near]
        ff = _star_values(self.vf, np.array([a]), np.array([b]))[0]
        fg = _star_values(self.vg, np.array([a]), np.array([b]))[0]
        move = np.abs(self.Ff[0][idx] - ff).max(axis=1) + np.abs(self.Fg[0][idx] - fg).max(axis=1)
        return (H[idx] + move[:, None]).min(axis=0)


def _polish_along(ev: LineEvaluator, j_group: Sequence[int], path: np.ndarray, point: tuple[float, float],
                  window: Window, spacing: float, iters: int) -> tuple[float, tuple[float, float]]:
    """Golden-section search of max over ``j_group`` of h along a (normalised) path, within 2 spacings of ``point``."""
    from shapely.geometry import LineString, Point

    if len(path) < 2:
        return -math.inf, point
    line = LineString(path)
    d0 = line.project(Point(_normalise(np.array(point), window)))
    lo, hi = max(0.0, d0 - 2 * spacing), min(line.length, d0 + 2 * spacing)

    def fun(d: float) -> float:
        a, b = _denormalise(np.asarray(line.interpolate(d).coords[0]), window)
        return float(ev(float(a), float(b))[list(j_group)].max())

    v, d = _golden_max(fun, lo, hi, iters)
    a, b = _denormalise(np.asarray(line.interpolate(d).coords[0]), window)
    return v, (float(a), float(b))


def _component_of(piece, point: tuple[float, float], components: Sequence) -> str | None:
    if not components:
        return None
    from shapely.geometry import Point

    p = Point(point)
    same = [c for c in components if piece.tie in tuple(getattr(c, "ties", ()))]
    pool = [c for c in (same or list(components)) if c.geometry is not None]
    if not pool:
        return None
    return str(min(pool, key=lambda c: c.geometry.distance(p)).id)


SLOPE_ONE_LIPSCHITZ = 2.0
"""|h_k(1/2, b) - h_k(1/2, b')| <= 2 |b - b'| for every k (:func:`lipschitz_constants`, L_b = 1 per map)."""


def slope_one_sup_norm_max(values_f: np.ndarray, values_g: np.ndarray, lo: float, hi: float) -> float:
    """max over b in [lo, hi] of ||F*_f(1/2, b) - F*_g(1/2, b)||_inf, exactly (maps on one mesh).

    On a = 1/2, F*(v) = max(v1 - b, v2 + b), so d_v(b) = F*_f(v) - F*_g(v) is
    piecewise linear in b with breakpoints only at the creases (f1 - f2)(v) / 2
    and (g1 - g2)(v) / 2; |d_v| on [lo, hi] is largest at lo, hi or a crease
    inside. By stability (:func:`line_upper_bound`) the result bounds h_k(1/2, b)
    for every k and every b in [lo, hi].
    """
    vf, vg = np.asarray(values_f, float), np.asarray(values_g, float)

    def d(b):  # per vertex; b a scalar or one value per vertex
        return np.abs(_star(vf, 0.5, b) - _star(vg, 0.5, b))

    m = max(float(d(lo).max(initial=0.0)), float(d(hi).max(initial=0.0)))
    for crease in ((vf[:, 0] - vf[:, 1]) / 2, (vg[:, 0] - vg[:, 1]) / 2):
        inside = (crease > lo) & (crease < hi)
        if inside.any():
            m = max(m, float(d(crease)[inside].max()))
    return m


def slope_one_search(ev: LineEvaluator, window: Window, groups: Sequence[Sequence[int]], *, tolerance: float,
                     samples: int = 17, max_lines: int = 200, batch: int = 1,
                     lipschitz: float = SLOPE_ONE_LIPSCHITZ,
                     values: tuple[np.ndarray, np.ndarray] | None = None) -> dict[str, Any]:
    """max over b of h on the slope-one line a = 1/2, by branch and bound, certified to ``tolerance``.

    Bound. On a = 1/2, F* = max(f1 - b, f2 + b) moves by at most |b - b'| at every
    vertex, so by stability for each map and the triangle inequality for d_B,
    G(b) = max over a group of degrees of h_k(1/2, b) is L-Lipschitz in b with
    L = 2 (the L_b = 1 of :func:`lipschitz_constants`, doubled as in the dense
    sweep's error bound). Between two evaluated lines l < r,
    G <= min(G(l) + L (x - l), G(r) + L (r - x)), whose largest value is

        UB(l, r) = (G(l) + G(r)) / 2 + L (r - l) / 2,

    reached at x* = (l + r) / 2 + (G(r) - G(l)) / (2 L). For two maps on one mesh
    (``values``) the interval bound is min(UB, S(l, r)) with S the exact max over
    [l, r] of ||F*_f - F*_g||_inf (:func:`slope_one_sup_norm_max`, no diagram):
    stability closes intervals where h cannot exceed best + tolerance whatever
    its slope, e.g. the flat h = |c| of g = f + (c, c).

    Search (Piyavskii-Shubert). ``samples`` equally spaced values of b over the
    window, then repeatedly: the interval with the largest UB - best is split
    at its x* (kept at least 5% of the interval away from its ends), ``batch``
    intervals per round (one slice each); an interval is dropped for good once
    UB <= best + tolerance for every group. Every line is evaluated once
    (:class:`LineEvaluator` keeps a memo by (a, b)). When no interval is left,
    max_b G <= best + tolerance: the slope-one part of D is certified. The
    search stops uncertified after ``max_lines`` lines (``certified`` False,
    ``bound`` still a valid upper bound).

    Parameters
    ----------
    ev : LineEvaluator
    window : Window
        Its b range is searched.
    groups : sequence of sequences of int
        Degree indices whose max is bounded together (one group per certified value).
    tolerance : float
    samples, max_lines, batch : int
    lipschitz : float
        L above; only a larger value keeps the bound valid.
    values : (ndarray (n, 2), ndarray (n, 2)), optional
        Vertex values of f and g on one mesh (same triangles), for the sup-norm bound.

    Returns
    -------
    dict with ``best`` (per group), ``bound`` (per group: best + the largest remaining
    UB - best, an upper bound of max_b G over the window), ``certified``, ``lines``
    (distinct lines evaluated here), ``rounds``.

    References
    ----------
    .. [CDFFL13] Cerri et al. (2013): stability; Piyavskii (1972), Shubert (1972):
       sequential search for the global maximum of a Lipschitz function.
    """
    b_lo, b_hi = (float(x) for x in window.b)
    n0 = ev.lines
    ng = len(groups)

    def group_values(b: np.ndarray) -> np.ndarray:
        H = ev(np.full(b.shape, 0.5), b)  # (n_deg, n)
        return np.array([[float(np.max(H[list(g), i])) for g in groups] for i in range(len(b))]).reshape(-1, ng)

    xs = np.linspace(b_lo, b_hi, max(2, int(samples)))
    ev.plan(len(xs))
    G = group_values(xs)
    best = np.where(np.isnan(G), -np.inf, G).max(axis=0)
    min_len = 1e-12 * max(1.0, b_hi - b_lo)
    sup_cache: dict[tuple[float, float], float] = {}

    def sup_bound(lo: float, hi: float) -> float:
        key = (lo, hi)
        if key not in sup_cache:
            sup_cache[key] = slope_one_sup_norm_max(values[0], values[1], lo, hi)
        return sup_cache[key]

    rounds = 0
    certified = False
    ub_top = best.copy()
    while True:
        length = np.diff(xs)
        ub = (G[:-1] + G[1:]) / 2 + lipschitz * length[:, None] / 2  # (n - 1, ng)
        if values is not None:
            cap = np.array([sup_bound(float(lo), float(hi)) for lo, hi in zip(xs[:-1], xs[1:], strict=True)])
            ub = np.minimum(ub, cap[:, None])
        with np.errstate(invalid="ignore"):
            gap = ub - (best + tolerance)[None, :]
            score = np.where(np.isnan(gap), -np.inf, gap).max(axis=1)
        ub_top = np.maximum(best, np.where(np.isnan(ub), -np.inf, ub).max(axis=0)) if len(ub) else best
        live = (score > 0) & (length > min_len)
        if not live.any():
            # a NaN value bounds nothing, an open interval below min_len is not closed: no certificate then
            certified = not (score > 0).any() and not np.isnan(G).any()
            break
        if ev.lines - n0 >= max_lines:
            break
        idx = np.nonzero(live)[0]
        idx = idx[np.argsort(-score[idx], kind="stable")][:max(1, int(batch))]
        new = []
        for i in idx:
            g = int(np.argmax(np.where(np.isnan(gap[i]), -np.inf, gap[i])))
            lo, hi = xs[i], xs[i + 1]
            x = (lo + hi) / 2 + (G[i + 1, g] - G[i, g]) / (2 * lipschitz)
            x = min(max(x, lo + 0.05 * (hi - lo)), hi - 0.05 * (hi - lo))
            new.append(x)
        new = np.array(new)
        ev.plan(len(new))
        Gn = group_values(new)
        best = np.maximum(best, np.where(np.isnan(Gn), -np.inf, Gn).max(axis=0))
        at = np.searchsorted(xs, new)
        xs = np.insert(xs, at, new)
        G = np.insert(G, at, Gn, axis=0)
        order = np.argsort(xs, kind="stable")  # several splits in one round: keep xs sorted
        xs, G = xs[order], G[order]
        rounds += 1
    ub_top = np.where(np.isnan(G).any(axis=0), math.inf, ub_top)
    return {"best": best.tolist(), "bound": ub_top.tolist(), "certified": certified,
            "lines": ev.lines - n0, "rounds": rounds}


def reduced_search(ev: LineEvaluator, window: Window, atlas, contours_by_id: dict, *, tolerance: float,
                   upper: float, slope_samples: int = 17, slope_max_lines: int = 200, spacing: float = 1 / 200,
                   roles: bool = True,
                   certify: str = "max", polish: bool = True, batch: int | None = None,
                   local_bound: bool = True, polish_iters: int = 6) -> dict[str, Any]:
    """D_k = max(max_b h_k(1/2, b), sup of h_k over the special set) [EFQT23, FMQT].

    Write t(p) for the tied cost of a tie at p (value units, :func:`tie_costs`):
    |d| for an equal tie of two cross pairs (matching costs), |d|/2 for one of
    two same-grid pairs (diagonal costs), the smaller difference for a half tie
    of a same-grid pair (larger difference) against a cross pair. Other ties
    compare costs of different kinds and carry no maximum (math.md 5,
    role-aware refinement): they are skipped (``pruned["roles"]``).

    Why a short list suffices. If D is not reached on a = 1/2 it is reached at
    a special point p* where the active cost ties with another, so
    h(p*) = t(p*) = D for a tie through p*; along that curve h = t while the
    tie stays active, so p* is a local maximum of t along the curve, an end of
    the active arc (a crossing with a tie sharing a pair) or an end of the curve
    (:func:`special_candidates`). Every candidate c has h(c) <= D, so a
    candidate with t(c) > D has h(c) < t(c).

    1. Slope-one line: :func:`slope_one_search`, a branch and bound in b with
       the Lipschitz constant 2 of h along a = 1/2, from ``slope_samples``
       equally spaced lines until max_b h <= best + tolerance / 2 is certified
       (at most ``slope_max_lines`` lines); ``best`` is its value.
    2. Candidates in descending order of t (sort key ``hi``, the larger side
       off the curve); a candidate is dropped when
       - ``below_best``: t <= best + tol (then so is every later one);
       - ``above_bound``: ``lo`` > U + tol, U an upper bound of D (``upper``);
       - ``line_bound``: ``lo`` > ||F*_f - F*_g||_inf on its line + tol
         (:func:`line_upper_bound`, same mesh only): then h(c) < t(c);
       - ``local_bound``: ``lo`` > h(q) + ||F*_f(c) - F*_f(q)|| + ||F*_g(c) - F*_g(q)|| + tol
         for an evaluated line q (stability between lines, same mesh only).
       The others are evaluated in batches (``batch``, default 1 for one job,
       else 2 jobs) and ``best`` grows. **Early stop**: the first evaluated c
       with h(c) >= t(c) - tol gives D = max(best, h(c)) up to tol: any
       candidate with t > D has h < t, so the first one with h = t has t = D,
       and every later one has t <= t(c) <= h(c) + tol (it is then
       ``below_best``).
    3. Polish: the best special candidate of each certified degree is refined by
       a golden-section search of h along its curve (``polish_iters``).

    On meshes the grid, hence the special set, is approximate; nothing above is
    used to *hide* a larger value: :func:`matching_distance` audits the result
    against the dense sweep (``theorem_gap``).

    ``certify="max"`` works with the max over degrees (the max over degrees is
    certified; single degrees below it are lower bounds), ``"each"`` with each
    degree on its own.

    Returns
    -------
    dict with ``slope`` and ``special`` (per degree), ``lines``, ``seconds``,
    ``pruned`` (ties: ``roles``, ``unknown_contour``, ``not_met``,
    ``outside_window``; candidates: ``below_best``, ``above_bound``,
    ``line_bound``, ``local_bound``; ``candidates_total``, ``candidates_evaluated``,
    ``crossings``, ``early_stop``), ``stop`` (the stopping candidate or None),
    ``candidate_seconds``, ``slope_search`` (:func:`slope_one_search`; None when
    the window leaves out a = 1/2).
    """
    if certify not in ("max", "each"):
        raise ValueError("certify must be 'max' or 'each'")
    t0 = time.perf_counter()
    n0 = ev.lines
    nd = len(ev.degrees)
    slope = [_Best() for _ in range(nd)]
    special = [_Best() for _ in range(nd)]
    groups = [[j] for j in range(nd)] if certify == "each" else [list(range(nd))]
    step = batch or (1 if ev.jobs == 1 else 2 * ev.jobs)
    same_mesh = ev.val_f.shape == ev.val_g.shape and np.array_equal(ev.tri_f, ev.tri_g)
    # 1. slope-one line: branch and bound with the Lipschitz constant 2 in b, to tolerance / 2
    slope_info = None
    if window.a[0] <= 0.5 <= window.a[1]:
        slope_info = slope_one_search(ev, window, groups, tolerance=tolerance / 2, samples=slope_samples,
                                      max_lines=slope_max_lines, batch=step,
                                      values=(ev.val_f, ev.val_g) if same_mesh else None)
        for (a, b), v in list(ev.memo.items()):
            if a == 0.5:
                for j in range(nd):
                    slope[j].offer(v[j], (a, b), "slope-one")
    best = np.array([max(slope[j].value for j in g) for g in groups])

    # 2. candidates, then the descending pass
    t1 = time.perf_counter()
    # every threshold of the descending pass is >= min(best): candidates under it are below_best anyway
    floor = float(best.min()) if len(best) and np.isfinite(best).all() else -math.inf
    cand = special_candidates(atlas, contours_by_id, window, spacing=spacing, roles=roles, floor=floor,
                              tolerance=tolerance)
    cand_seconds = time.perf_counter() - t1
    pieces = tuple(getattr(atlas, "pieces", ()) or ())
    components = tuple(getattr(atlas, "components", ()) or ())
    ca, cb, clo, chi = cand["a"], cand["b"], cand["lo"], cand["hi"]
    n = len(ca)
    local = _LocalBound(ev.val_f, ev.val_g, window) if (same_mesh and local_bound) else None
    if local is not None:
        known = [(p, v) for p, v in ev.memo.items()]
        if known:
            P = np.array([p for p, _ in known])
            V = np.array([[np.max(v[g]) for g in groups] for _, v in known])
            local.add(P[:, 0], P[:, 1], V)
    counts = {"below_best": int(cand["below_floor"]), "above_bound": 0, "line_bound": 0, "local_bound": 0}
    order = np.argsort(-chi, kind="stable")
    line_b = np.full(n, np.nan)
    evaluated: list[int] = []
    stop = None
    open_g = np.ones(len(groups), dtype=bool)
    pos = 0
    while pos < n and open_g.any():
        thr = float(best[open_g].min())
        take: list[int] = []
        while pos < n and len(take) < step:
            i = int(order[pos])
            if not chi[i] > thr + tolerance:
                counts["below_best"] += n - pos
                pos = n
                break
            pos += 1
            if clo[i] > upper + tolerance:
                counts["above_bound"] += 1
                continue
            if same_mesh:
                if math.isnan(line_b[i]):
                    chunk = order[pos - 1:pos - 1 + 256]
                    line_b[chunk] = line_upper_bound(ev.val_f, ev.val_g, ca[chunk], cb[chunk])
                if clo[i] > line_b[i] + tolerance:
                    counts["line_bound"] += 1
                    continue
            if local is not None and clo[i] > float(local(ca[i], cb[i]).max()) + tolerance:
                counts["local_bound"] += 1
                continue
            take.append(i)
        if not take:
            continue
        ev.plan(len(take))
        H = ev(ca[take], cb[take])
        evaluated.extend(take)
        G = np.array([[np.max(H[g, c]) for g in groups] for c in range(len(take))])
        if local is not None:
            local.add(ca[take], cb[take], G)
        for c, i in enumerate(take):
            for j in range(nd):
                if special[j].offer(H[j, c], (ca[i], cb[i]), "special"):
                    special[j].tag = (int(cand["piece"][i]), i)
            best = np.maximum(best, G[c])
            hit = open_g & (G[c] >= chi[i] - tolerance)
            if hit.any() and stop is None:
                stop = {"a": float(ca[i]), "b": float(cb[i]), "t": float(chi[i]), "h": float(G[c].max()),
                        "origin": ORIGINS[int(cand["origin"][i])], "rank": len(evaluated) - len(take) + c + 1}
            open_g &= ~hit
    counts["below_best"] += n - pos  # after an early stop every later t is <= best + tol
    # 3. polish the best special candidates along their curves
    top = max(max(s.value, p.value) for s, p in zip(slope, special, strict=True))
    for j in range(nd):
        rec = special[j]
        if not (polish and rec.tag is not None and math.isfinite(rec.value)):
            continue
        if rec.value < slope[j].value - tolerance or (certify == "max" and rec.value < top - tolerance):
            continue
        ip, i = rec.tag
        paths = cand["paths_of"].get(ip, [])
        if not paths:
            continue
        norm = _normalise(np.array(rec.at), window)
        k = min(paths, key=lambda p: float(np.min(np.linalg.norm(cand["paths"][p] - norm, axis=1))))
        ev.plan(polish_iters + 2)
        v, at = _polish_along(ev, [j], cand["paths"][k], rec.at, window, spacing, polish_iters)
        if v > rec.value:
            rec.offer(v, at, "special")
    for j in range(nd):
        if special[j].tag is not None:
            special[j].component = _component_of(pieces[special[j].tag[0]], special[j].at, components) \
                or f"piece:{special[j].tag[0]}"
    pruned = {**cand["pruned"], **counts, "ties_total": len(pieces), "ties_live": len(cand["live"]),
              "ties_evaluated": len({int(cand["piece"][i]) for i in evaluated}),
              "candidates_total": n + int(cand["below_floor"]),
              "candidates_evaluated": len(evaluated), "crossings": cand["crossings"],
              "early_stop": stop is not None}
    return {"slope": slope, "special": special, "lines": ev.lines - n0, "seconds": time.perf_counter() - t0,
            "certify": certify, "pruned": pruned, "stop": stop, "candidate_seconds": cand_seconds,
            "slope_search": slope_info}


# ----------------------------------------------------------------------------------------------
# audits
# ----------------------------------------------------------------------------------------------

def position_audit(shape_f, shape_g, grids, window: Window, *, tolerance: float, lines: int = 20,
                   seed: int = 0) -> dict[str, Any]:
    """How many finite diagram coordinates sit at push coordinates of the grid [CEF19].

    For ``lines`` lines drawn uniformly in the window (fixed seed), every finite
    coordinate (birth, finite death) of Dgm_k F*_f is compared with the push
    coordinates min(a, 1-a) s of the contours of Γ(f) met by the line (the same
    for g); the deviation is the distance to the nearest one.

    Returns
    -------
    dict ``{"fraction_explained", "max_deviation", "lines", "coordinates", "tolerance"}``
    """
    rng = np.random.default_rng(seed)
    A = rng.uniform(*window.a, lines)
    B = rng.uniform(*window.b, lines)
    devs = []
    for shape, grid in zip((shape_f, shape_g), grids, strict=True):
        eng = SliceEngine.from_shape(shape)
        for a, b in zip(A, B, strict=True):
            push = np.array([line_parameter(c, a, b) for c in grid.contours], dtype=float) * float(push_scale(a))
            push = push[np.isfinite(push)]
            d = eng.diagrams(a, b)
            coords = np.concatenate([v.ravel() for v in d.values()])
            coords = coords[np.isfinite(coords)]
            if not len(coords):
                continue
            if not len(push):
                devs.extend([math.inf] * len(coords))
                continue
            devs.extend(np.abs(coords[:, None] - push[None, :]).min(axis=1).tolist())
    devs_a = np.asarray(devs, dtype=float)
    return {"fraction_explained": float(np.mean(devs_a <= tolerance)) if len(devs_a) else 1.0,
            "max_deviation": float(devs_a.max()) if len(devs_a) else 0.0,
            "lines": int(lines), "coordinates": int(len(devs_a)), "tolerance": float(tolerance)}


# ----------------------------------------------------------------------------------------------
# result and entry point
# ----------------------------------------------------------------------------------------------

def _pt(at: tuple[float, float]) -> list[float]:
    return [float(at[0]), float(at[1])]


@dataclass(frozen=True)
class DistanceResult:
    """The matching distance of a pair, where it is reached, and how it was checked.

    Attributes
    ----------
    value : float
        max over degrees of D_k (the reduced value when available, else the dense one).
    at : (a, b)
    reached_on : str
        ``"slope-one"``, ``"special"`` (see ``component``), ``"both"`` or ``"dense"``.
    component : str or None
        Atlas component id when reached on the special set.
    by_degree : dict
        ``{k: {"value", "at", "reached_on", "component"}}``.
    dense, reduced : dict or None
    audit : dict
    tolerance : float
    infinite : list
        ``{"degree", "at"}`` of lines whose diagrams have different numbers of points at infinity.
    landscape : dict or None
        ``{"a", "b", "h" (n_b x n_a, max over degrees), "by_degree"}`` from the dense sweep.
    window : Window
    """

    value: float
    at: tuple[float, float]
    reached_on: str
    component: str | None
    by_degree: dict[int, dict[str, Any]]
    dense: dict[str, Any] | None
    reduced: dict[str, Any] | None
    audit: dict[str, Any]
    tolerance: float
    infinite: list[dict[str, Any]]
    landscape: dict[str, Any] | None
    window: Window
    meta: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        from specmap.io import to_plain

        return to_plain({
            "value": self.value, "at": _pt(self.at), "reached_on": self.reached_on,
            "component": self.component,
            "by_degree": {str(k): {**v, "at": _pt(v["at"])} for k, v in self.by_degree.items()},
            "dense": self.dense, "reduced": self.reduced, "audit": self.audit,
            "tolerance": self.tolerance, "infinite": self.infinite, "landscape": self.landscape,
            "window": self.window.to_json(), "meta": self.meta,
        })


def _grids_pair(grids) -> tuple | None:
    if grids is None:
        return None
    if isinstance(grids, dict):
        return (grids["f"], grids["g"])
    g = tuple(grids)
    if len(g) != 2:
        raise ValueError("grids must be (grid_f, grid_g)")
    return g


def matching_distance(shape_f, shape_g, *, method: str = "both", degrees: Iterable[int] = DEGREES,
                      window: Window | None = None, atlas=None, grids=None, jobs: int = 1,
                      dense_resolution: int = 41, progress: Progress | None = None,
                      tolerance: float | None = None, slope_samples: int = 17,
                      spacing: float = 1 / 200, roles: bool = True, certify: str = "max",
                      position_lines: int = 20) -> DistanceResult:
    """Matching distance D_k(f, g) of two meshed maps, dense, reduced or both.

    Parameters
    ----------
    shape_f, shape_g : Shape
        Must carry a mesh (vertices, triangles, values).
    method : {"both", "dense", "reduced"}
    degrees : iterable of int
    window : Window, optional
        Default: :func:`specmap.strip.default_window` of the value bounds.
    atlas : object, optional
        Special-set atlas with ``pieces`` (tie, kind, geometry) and ``components``;
        computed with :func:`specmap.special.special_set` from ``grids`` when omitted.
    grids : (Grid, Grid), optional
        Extended Pareto grids of f and g; needed by the reduced search and the position audit.
    jobs : int
        Worker processes for the slices.
    dense_resolution : int
        Nodes per side of the dense sweep.
    progress : callable(done, total), optional
    tolerance : float, optional
        Default: 1e-3 times the largest value range of f and g.
    slope_samples, spacing, roles, certify
        Reduced search settings (:func:`reduced_search`). With ``certify="max"`` the
        max over degrees is certified and ``by_degree`` values below it are lower
        bounds (``"certified": false``); ``"each"`` certifies every degree.
    position_lines : int
        Lines of the position audit (0 to skip).

    Returns
    -------
    DistanceResult

    Raises
    ------
    StudyError
        A shape without a mesh; the reduced search without grids.

    Warns
    -----
    UserWarning
        When the dense sweep exceeds the reduced search by more than the tolerance
        (``audit.theorem_gap``).

    References
    ----------
    .. [CDFFL13] Cerri et al. (2013); [EFQT23] Ethier et al. (2023); [FMQT] arXiv:2312.04201.
    """
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, not {method!r}")
    for s in (shape_f, shape_g):
        if not getattr(s, "has_mesh", False):
            raise StudyError(f"{getattr(s, 'label', 'a shape')} has no mesh, so no slice diagrams",
                             fix="give a surface or mesh for f and g")
    degrees = tuple(int(k) for k in degrees)
    bf, bg = shape_f.value_bounds(), shape_g.value_bounds()
    window = window or default_window(bf, bg)
    pair = _grids_pair(grids)
    tol = tolerance
    if tol is None:
        tol = TOLERANCE_FRACTION * value_range(shape_f, shape_g)
    lip = lipschitz_constants(bf, bg, window)
    upper, upper_kind = distance_upper_bound(shape_f, shape_g)
    ev = LineEvaluator(shape_f, shape_g, degrees, jobs=jobs, progress=progress)

    dense = red = None
    if method in ("dense", "both"):
        dense = dense_sweep(ev, window, resolution=dense_resolution, bounds=(bf, bg))
    if method in ("reduced", "both"):
        if pair is None:
            raise StudyError("the reduced search needs the extended Pareto grids of f and g",
                             field="grids", fix="pass grids=(grid_f, grid_g) or use method='dense'")
        if atlas is None:
            from specmap.special import special_set

            atlas = special_set(pair[0], pair[1], window)
        contours = {c.id: c for g in pair for c in g.contours}
        before = ev.lines
        red = reduced_search(ev, window, atlas, contours, tolerance=tol, upper=upper,
                             slope_samples=slope_samples, spacing=spacing, roles=roles, certify=certify)
        red["lines_shared_with_dense"] = red["lines"] - (ev.lines - before)

    by_degree: dict[int, dict[str, Any]] = {}
    for j, k in enumerate(degrees):
        if red is not None:
            s, p = red["slope"][j], red["special"][j]
            if p.value > s.value + tol:
                entry = {"value": p.value, "at": p.at, "reached_on": "special", "component": p.component}
            elif s.value > p.value + tol or not math.isfinite(p.value):
                entry = {"value": s.value, "at": s.at, "reached_on": "slope-one", "component": None}
            else:
                top = p if p.value > s.value else s
                entry = {"value": top.value, "at": top.at, "reached_on": "both", "component": p.component}
        else:
            v, at = dense["best"][j]
            entry = {"value": v, "at": at, "reached_on": "dense", "component": None}
        by_degree[k] = entry
    vmax = max(by_degree[k]["value"] for k in degrees)
    for k in degrees:
        by_degree[k]["certified"] = bool(red is None or certify == "each" or by_degree[k]["value"] >= vmax - tol)
    kmax = max(degrees, key=lambda k: by_degree[k]["value"])
    top = by_degree[kmax]

    # audits
    # theorem_gap / gap stay None ("not run") unless both computations ran
    audit: dict[str, Any] = {"theorem_gap": None, "gap": None, "line": None, "degree": None,
                             "position": None, "upper_bound": upper, "upper_bound_kind": upper_kind}
    if dense is not None and red is not None:
        audit.update(theorem_gap=False, gap=0.0)
        # certified degrees against their dense values, and the max over degrees
        gaps = [(dense["best"][j][0] - by_degree[k]["value"], dense["best"][j][1], k)
                for j, k in enumerate(degrees) if by_degree[k]["certified"]]
        dbest = max(range(len(degrees)), key=lambda j: dense["best"][j][0])
        gaps.append((dense["best"][dbest][0] - vmax, dense["best"][dbest][1], degrees[dbest]))
        gaps = [g for g in gaps if not math.isnan(g[0])]  # inf: the reduced search found nothing
        if gaps:
            gap, line, k = max(gaps, key=lambda g: g[0])
            audit.update(gap=float(gap), degree=k, line=_pt(line))
            if gap > tol:
                audit["theorem_gap"] = True
                warnings.warn(f"dense sweep exceeds the reduced search by {gap:.4g} > tolerance {tol:.3g} "
                              f"in degree {k} at (a, b) = ({line[0]:.4g}, {line[1]:.4g})", stacklevel=2)
    if pair is not None and position_lines > 0:
        audit["position"] = position_audit(shape_f, shape_g, pair, window, tolerance=tol, lines=position_lines)

    landscape = None
    dense_js = red_js = None
    if dense is not None:
        H = dense["grid"]
        with np.errstate(invalid="ignore"):
            landscape = {"a": dense["a"].tolist(), "b": dense["b"].tolist(), "h": H.max(axis=0).tolist(),
                         "by_degree": {str(k): H[j].tolist() for j, k in enumerate(degrees)}}
        jbest = int(np.argmax([v for v, _ in dense["best"]]))
        dense_js = {"value": dense["best"][jbest][0], "at": _pt(dense["best"][jbest][1]),
                    "degree": degrees[jbest], "lines": dense["lines"], "seconds": dense["seconds"],
                    "error_bound": dense["error_bound"], "resolution": int(dense_resolution),
                    "node_value": max(v for v, _ in dense["node_best"]),
                    "by_degree": {str(k): {"value": dense["best"][j][0], "at": _pt(dense["best"][j][1])}
                                  for j, k in enumerate(degrees)}}
    if red is not None:
        jbest = degrees.index(kmax)
        red_js = {"value": top["value"], "at": _pt(top["at"]), "lines": red["lines"],
                  "seconds": red["seconds"], "pruned": red["pruned"], "stop": red["stop"],
                  "candidate_seconds": red["candidate_seconds"],
                  "slope_one": {str(k): {"value": red["slope"][j].value, "at": _pt(red["slope"][j].at)}
                                for j, k in enumerate(degrees)},
                  "special": {str(k): {"value": red["special"][j].value, "at": _pt(red["special"][j].at),
                                       "component": red["special"][j].component}
                              for j, k in enumerate(degrees)},
                  "slope_search": red["slope_search"],
                  "settings": {"slope_samples": slope_samples, "spacing": spacing, "roles": roles,
                               "certify": certify},
                  "degree": degrees[jbest]}
    return DistanceResult(
        value=float(top["value"]), at=top["at"], reached_on=top["reached_on"], component=top["component"],
        by_degree=by_degree, dense=dense_js, reduced=red_js, audit=audit, tolerance=float(tol),
        infinite=list(ev.infinite), landscape=landscape, window=window,
        meta={"degrees": list(degrees), "lines_total": ev.lines, "jobs": int(jobs),
              "lipschitz": {"a": lip[0], "b": lip[1]}},
    )
