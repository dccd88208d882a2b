"""Number parsing and formatting shared by the figures, the findings and the PDF.

Result files store non-finite numbers as the strings ``"inf"``, ``"-inf"`` and
``"nan"`` (JSON has no infinity); :func:`num` reads them back.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np


def num(x: Any) -> float:
    """One number from a result file; ``None`` or unparsable -> ``nan``.

    Examples
    --------
    >>> num("inf"), num(0.5), num(None)
    (inf, 0.5, nan)
    """
    if x is None or isinstance(x, bool):
        return math.nan
    try:
        return float(x)
    except (TypeError, ValueError):
        return math.nan


def nums(xs: Any) -> np.ndarray:
    """An array of numbers (nested lists allowed) with ``"inf"``/``"nan"`` strings parsed."""
    if xs is None:
        return np.empty(0)
    return np.vectorize(num, otypes=[float])(np.asarray(xs, dtype=object)) if len(xs) else np.empty(0)


def fmt(x: Any, digits: int = 4) -> str:
    """Format a number with ``digits`` significant digits; missing -> ``"n/a"``.

    Examples
    --------
    >>> fmt(0.41234), fmt("inf"), fmt(None), fmt(0.001)
    ('0.4123', 'inf', 'n/a', '0.001')
    """
    if x is None:
        return "n/a"
    v = num(x)
    if math.isnan(v):
        return "nan"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    return f"{v:.{digits}g}"


def fmt_pct(x: Any) -> str:
    """A fraction in [0, 1] as a percentage with 3 significant digits."""
    v = num(x)
    if not math.isfinite(v):
        return fmt(v)
    return f"{100.0 * v:.3g}%"


def fmt_point(p: Any) -> str:
    """An (a, b) position as ``"(0.25, 0.13)"``; missing -> ``"n/a"``."""
    if p is None or len(p) < 2:
        return "n/a"
    return f"({fmt(p[0])}, {fmt(p[1])})"


def fmt_interval(iv: Any, digits: int = 3) -> str:
    """A two-number interval as ``"[lo, hi]"`` with ``digits`` significant digits; missing -> ``"n/a"``."""
    if iv is None or len(iv) < 2:
        return "n/a"
    return f"[{fmt(iv[0], digits)}, {fmt(iv[1], digits)}]"


def plural(n: int, word: str, many: str | None = None) -> str:
    """``plural(1, "patch", "patches") -> "1 patch"``."""
    return f"{n} {word if n == 1 else (many or word + 's')}"


def fraction_interval(ci: Any, runs: Any) -> tuple[float, float]:
    """A 95% interval for the fraction of runs, whether stored as counts or fractions.

    An upper end above 1 means the interval was written on the count scale; it
    is then divided by ``runs``.
    """
    if ci is None or len(ci) < 2:
        return (math.nan, math.nan)
    lo, hi = num(ci[0]), num(ci[1])
    n = num(runs)
    if hi > 1.0 and n > 0:
        return (lo / n, hi / n)
    return (lo, hi)
