"""The cyclic garbage collector paused while a stage makes many small objects.

The atlas makes hundreds of thousands of shapely geometries, tie pieces and tuples at once;
CPython's cyclic collector runs every 700 allocations and walks the young objects each time,
and the long-lived ones again and again. None of these objects form reference cycles (they
are freed by reference counting as usual while the collector is paused), so pausing it
changes no result and only removes that work: on the N = 40 pair of
``tests/benchmarks/bench_tiles.py`` one tile maps in 17.1 s instead of 20.8 s and the merge
of the four 2 x 2 tiles takes 7.7 s instead of 15.3 s (same machine, minutes apart).
"""

from __future__ import annotations

import functools
import gc
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import ParamSpec, TypeVar

P = ParamSpec("P")
R = TypeVar("R")


@contextmanager
def collector_paused() -> Iterator[None]:
    """Pause :mod:`gc`'s automatic collection inside the block (nested blocks are fine).

    Examples
    --------
    >>> import gc
    >>> with collector_paused():
    ...     gc.isenabled()
    False
    >>> gc.isenabled()
    True
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


def paused(fn: Callable[P, R]) -> Callable[P, R]:
    """Decorator: run ``fn`` with the collector paused (:func:`collector_paused`)."""

    @functools.wraps(fn)
    def run(*args: P.args, **kwargs: P.kwargs) -> R:
        with collector_paused():
            return fn(*args, **kwargs)

    return run
