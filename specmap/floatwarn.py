"""numpy's floating-point warnings raised in worker processes, counted like the main process's.

The CLI counts numpy's RuntimeWarnings ("overflow encountered in multiply", ...) into one line
(:func:`specmap.cli.counted_float_warnings`). A joblib or Dask worker is another process: its
warnings are printed there, two lines each, and the main process's counter never sees them. A task
wrapped in :class:`Counted` catches them where it runs and returns them with its value; the driver
passes each result through :func:`unwrap`, which adds the counts to this process's tally, read once
by the CLI with :func:`take_worker_counts`. A task run in the main process (one job) is counted the
same way, exactly once.
"""

from __future__ import annotations

import warnings
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

_MARK = " encountered in "
_TALLY: Counter[str] = Counter()


def float_warning_kind(message: object, category: type) -> str | None:
    """The kind of a numpy floating-point warning ("overflow", "invalid value", ...), else None.

    >>> float_warning_kind("overflow encountered in multiply", RuntimeWarning)
    'overflow'
    >>> float_warning_kind("overflow encountered in multiply", UserWarning) is None
    True
    """
    text = str(message)
    if issubclass(category, RuntimeWarning) and _MARK in text:
        return text.split(_MARK)[0]
    return None


@dataclass(frozen=True)
class CountedResult:
    """A task's value and the floating-point warnings it raised, by kind."""

    value: Any
    counts: dict[str, int]


@dataclass(frozen=True)
class Counted:
    """A picklable wrapper of a task function: call it, count its float warnings, return both.

    Other warnings are shown as usual (in the process that runs the task).

    Examples
    --------
    >>> import numpy as np
    >>> res = Counted(lambda x: np.array([x]) * x)(1e300)
    >>> res.counts, float(res.value[0])
    ({'overflow': 1}, inf)
    """

    fn: Callable[..., Any]

    def __call__(self, *args: Any, **kwargs: Any) -> CountedResult:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            value = self.fn(*args, **kwargs)
        counts: Counter[str] = Counter()
        for w in caught:
            kind = float_warning_kind(w.message, w.category)
            if kind is None:
                warnings.showwarning(w.message, w.category, w.filename, w.lineno)
            else:
                counts[kind] += 1
        return CountedResult(value, dict(counts))


def unwrap(result: CountedResult) -> Any:
    """The value of a :class:`Counted` task; its warning counts go to this process's tally."""
    _TALLY.update(result.counts)
    return result.value


def take_worker_counts() -> Counter[str]:
    """The counts gathered by :func:`unwrap` since the last call (the tally is emptied)."""
    out = Counter(_TALLY)
    _TALLY.clear()
    return out
