"""Number parsing and formatting shared by the figures, the findings and the PDF.

Result files store non-finite numbers as the strings ``"inf"``, ``"-inf"`` and
``"nan"`` (JSON has no infinity); :func:`num` reads them back.

The rule for a number that carries an uncertainty (a distance with its tolerance or its
certified interval) is :func:`fmt_to`: it is printed to the decimal place of the leading digit
of the uncertainty, so ``0.2702`` with tolerance ``0.004`` reads ``0.270``; an interval
(:func:`fmt_bounds`) is rounded outward at the place of its own width, so the printed interval
contains the computed one. Every value of D, D_k and h printed by the terminal, the PDF and the
explorer goes through these two functions (the explorer receives the decimals,
:func:`decimals_for`, for what it computes at the pointer). Numbers without an uncertainty keep
:func:`fmt` (4 significant digits).
"""

from __future__ import annotations

import math
from decimal import ROUND_CEILING, ROUND_FLOOR, ROUND_HALF_UP, Decimal
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

    Below a million no exponent is written (a length of 1580.3 reads ``1580``, not ``1.58e+03``):

    >>> fmt(1580.3, 3), fmt(12446.0), fmt(-2.5e5, 2), fmt(1.264e10)
    ('1580', '12450', '-250000', '1.264e+10')
    """
    if x is None:
        return "n/a"
    v = num(x)
    if math.isnan(v):
        return "nan"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    text = f"{v:.{digits}g}"
    if "e+" in text and abs(v) < 1e6:
        text = f"{float(text):.0f}"
    return text


MAX_DIGITS = 6
"""At most this many significant digits, however small the uncertainty (readability cap)."""


def resolved_place(u: Any) -> int | None:
    """The power of ten of the leading digit of an uncertainty ``u > 0``; ``None`` when unknown.

    Examples
    --------
    >>> resolved_place(0.004), resolved_place(0.00415), resolved_place(20.0), resolved_place(0)
    (-3, -3, 1, None)
    """
    v = num(u)
    if not math.isfinite(v) or v <= 0.0:
        return None
    place = math.floor(math.log10(v))
    # log10 of an exact power of ten can land just below the integer (1e-3 -> -2.9999...)
    if 10.0 ** (place + 1) <= v:
        place += 1
    return place


def _at_place(x: float, place: int, rounding: str = ROUND_HALF_UP) -> str:
    """``x`` rounded at the decimal place ``10**place``, written without an exponent."""
    if x != 0.0:
        place = max(place, math.floor(math.log10(abs(x))) - MAX_DIGITS + 1)
    q = Decimal(repr(x)).quantize(Decimal(1).scaleb(place), rounding=rounding)
    text = f"{q:f}"
    if place > 0:  # quantize keeps the exponent: 1.2E+2 -> write 120
        text = f"{int(q):d}"
    if text.startswith("-") and Decimal(text) == 0:
        text = text[1:]
    return text


def uncertainty(tolerance: Any = None, interval: Any = None) -> float:
    """How far a computed value may be from the true one: the width of its interval, else the tolerance.

    A certified interval ``[lo, hi]`` of finite positive width is the stronger statement and is
    used; a degenerate or half-open interval leaves the tolerance. ``nan`` when neither is known.

    Examples
    --------
    >>> round(uncertainty(0.004, [0.27022, 0.27437]), 6), uncertainty(0.004, [0.1, "inf"]), uncertainty()
    (0.00415, 0.004, nan)
    """
    if interval is not None and len(interval) >= 2:
        w = num(interval[1]) - num(interval[0])
        if math.isfinite(w) and w > 0.0:
            return w
    t = num(tolerance)
    return t if math.isfinite(t) and t > 0.0 else math.nan


def fmt_to(x: Any, tolerance: Any = None, interval: Any = None) -> str:
    """A value printed to the digits its uncertainty (:func:`uncertainty`) resolves.

    Rounded to nearest (half up) at the place of the uncertainty's leading digit; a value whose
    interval has a positive lower end keeps at least one significant digit (``0.0467`` in
    ``[0.0467, 0.195]`` reads ``0.05``, not ``0.0``); without an uncertainty, :func:`fmt`
    (4 significant digits).

    Examples
    --------
    >>> fmt_to(0.2702, 0.004), fmt_to(0.27022, 0.004, [0.27022, 0.27437]), fmt_to(123.4, 20.0)
    ('0.270', '0.270', '120')
    >>> fmt_to(-0.0001, 0.004), fmt_to("inf", 0.004), fmt_to(0.41234)
    ('0.000', 'inf', '0.4123')
    """
    v = num(x)
    place = resolved_place(uncertainty(tolerance, interval))
    if place is None or not math.isfinite(v):
        return fmt(x)
    if interval is not None and len(interval) >= 2 and num(interval[0]) > 0.0 and v > 0.0:
        # known to be positive: at least one significant digit, never "0.0"
        place = min(place, math.floor(math.log10(v)))
    return _at_place(v, place)


def fmt_bounds(iv: Any, tolerance: Any = None) -> str:
    """An interval ``[lo, hi]`` rounded outward at the place of its width (else of ``tolerance``).

    The printed interval contains the computed one: ``lo`` is rounded down and ``hi`` up; a
    positive ``lo`` keeps its first significant digit (so it never reads 0).

    Examples
    --------
    >>> fmt_bounds([0.27022, 0.27437]), fmt_bounds([0.10234, "inf"], 1e-3), fmt_bounds([0.3, 0.3])
    ('[0.270, 0.275]', '[0.102, inf]', '[0.3, 0.3]')
    """
    if iv is None or len(iv) < 2:
        return "n/a"
    lo, hi = num(iv[0]), num(iv[1])
    place = resolved_place(uncertainty(tolerance, [lo, hi]))
    if place is None:
        return f"[{fmt(lo)}, {fmt(hi)}]"
    if math.isfinite(lo) and lo > 0.0:  # a positive lower end keeps its first significant digit
        place = min(place, math.floor(math.log10(lo)))
    a = _at_place(lo, place, ROUND_FLOOR) if math.isfinite(lo) else fmt(lo)
    b = _at_place(hi, place, ROUND_CEILING) if math.isfinite(hi) else fmt(hi)
    return f"[{a}, {b}]"


def decimals_for(tolerance: Any = None, interval: Any = None) -> int | None:
    """Decimals after the point that :func:`fmt_to` prints (for the explorer's script); ``None`` if unknown.

    Examples
    --------
    >>> decimals_for(0.004), decimals_for(20.0), decimals_for(None)
    (3, 0, None)
    """
    place = resolved_place(uncertainty(tolerance, interval))
    return None if place is None else max(0, -place)


def distance_entry(d: Any, degree: Any = None) -> tuple[float, float, tuple[float, float] | None]:
    """``(value, tolerance, interval)`` of D (``degree`` None) or of D_k from a ``distance.json`` dict.

    The top-level D takes the interval of the degree it is reached in (the largest D_k).
    """
    d = d or {}
    tol = num(d.get("tolerance"))
    by = d.get("by_degree") or {}
    if degree is None:
        entry: Any = d
        if by:
            best = max(by.values(), key=lambda v: num((v or {}).get("value")), default=None)
            if best is not None and num(best.get("value")) == num(d.get("value")):
                entry = {**best, "value": d.get("value")}
    else:
        entry = by.get(str(degree)) or {}
    b = entry.get("bounds")
    iv = (num(b[0]), num(b[1])) if isinstance(b, (list, tuple)) and len(b) == 2 else None
    return num(entry.get("value")), tol, iv


def fmt_distance(d: Any, degree: Any = None) -> str:
    """D (or D_k) of a ``distance.json`` dict printed to the digits its interval or tolerance resolves.

    Examples
    --------
    >>> fmt_distance({"value": 0.2702, "tolerance": 0.004})
    '0.270'
    >>> fmt_distance({"value": 0.1, "tolerance": 1e-3, "by_degree": {"1": {"value": 0.1, "bounds": [0.1, 0.3]}}}, 1)
    '0.1'
    """
    v, tol, iv = distance_entry(d, degree)
    return fmt_to(v, tol, iv)


_VALUE_AFTER = (
    r"(\b(?:by|best|best value|(?<!error )bound|(?<!error )bound is|D|D_\d+|h|h_\d+) (?:= )?)"
    r"(-?\d+\.\d+(?:e[+-]?\d+)?)\b"
)


def round_values(text: str, tolerance: Any) -> str:
    """The distance values written inside a sentence of a result file, to the digits ``tolerance`` resolves.

    Only numbers after ``by``, ``best``, ``bound``, ``D =``, ``D_k =`` or ``h =`` are values of h
    (settings such as ``a < 0.02``, a line count or an error bound are left as written).

    Examples
    --------
    >>> round_values("bound 0.05857 against best 0.01272; a < 0.02; D = 0.02508 + tolerance", 0.00268)
    'bound 0.059 against best 0.013; a < 0.02; D = 0.025 + tolerance'
    >>> round_values("it by 1.25 only (cell error bound 1.2); cell error bound is 0.485", 0.006)
    'it by 1.250 only (cell error bound 1.2); cell error bound is 0.485'
    """
    import re

    if resolved_place(tolerance) is None:
        return text
    return re.sub(_VALUE_AFTER, lambda m: m.group(1) + fmt_to(float(m.group(2)), tolerance), text)


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
