"""h_k(a, b) on many lines: a memo, a line counter, optional joblib workers and progress reports.

h_k(a, b) = d_B(Dgm_k F*_f(a, b), Dgm_k F*_g(a, b)) [CDFFL13], the bottleneck
distance of the slice diagrams [DFL10].
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from specmap.shapes.model import require_mesh
from specmap.slices import DEGREES, SliceEngine, bottleneck

Progress = Callable[[int, int], None]

_WORKER_ENGINES: dict[tuple, tuple[SliceEngine, SliceEngine]] = {}


def _mesh_parts(source) -> tuple[np.ndarray, np.ndarray]:
    if isinstance(source, SliceEngine):
        return source.triangles, source.values
    shape = require_mesh(source, "slice diagrams")
    return np.asarray(shape.triangles), np.asarray(shape.values, dtype=float)


def _h_lines(
    engine_f: SliceEngine, engine_g: SliceEngine, lines: np.ndarray, degrees: Sequence[int]
) -> np.ndarray:
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

    def __init__(
        self,
        source_f,
        source_g,
        degrees: Sequence[int] = DEGREES,
        *,
        jobs: int = 1,
        progress: Progress | None = None,
    ) -> None:
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
        self._pool: Any = None  # joblib.Parallel, built on first parallel call

    def plan(self, n: int) -> None:
        """Announce n more lines (for the progress total)."""
        self.total += int(n)

    def _report(self) -> None:
        if self.progress is not None:
            self.total = max(self.total, self.done)
            self.progress(self.done, self.total)

    def _compute_here(self, lines: np.ndarray) -> np.ndarray:
        if self._engines is None:
            self._engines = (SliceEngine(self.tri_f, self.val_f), SliceEngine(self.tri_g, self.val_g))
        out = np.empty((len(lines), len(self.degrees)))
        step = max(1, len(lines) // 50)
        for i in range(0, len(lines), step):
            out[i : i + step] = _h_lines(*self._engines, lines[i : i + step], self.degrees)
            self.done += len(lines[i : i + step])
            self._report()
        return out

    def _compute_parallel(self, lines: np.ndarray) -> np.ndarray:
        from joblib import Parallel, delayed

        from specmap.floatwarn import Counted, unwrap

        if self._pool is None:
            self._pool = Parallel(n_jobs=self.jobs, return_as="generator")
        n_chunks = min(len(lines), 4 * self.jobs)
        chunks = np.array_split(lines, n_chunks)
        parts = []
        for part, chunk in zip(
            self._pool(
                delayed(Counted(_h_chunk))(  # float warnings of the workers join the CLI's one line
                    self._key, self.tri_f, self.val_f, self.tri_g, self.val_g, c, self.degrees
                )
                for c in chunks
            ),
            chunks,
            strict=True,
        ):
            parts.append(unwrap(part))
            self.done += len(chunk)
            self._report()
        return np.concatenate(parts)

    def _compute(self, lines: np.ndarray) -> np.ndarray:
        if self.jobs == 1 or len(lines) < 2 * self.jobs:
            return self._compute_here(lines)
        return self._compute_parallel(lines)

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


def h_values(
    source_f,
    source_g,
    A,
    B,
    degrees: Sequence[int] = DEGREES,
    *,
    jobs: int = 1,
    progress: Progress | None = None,
) -> np.ndarray:
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
