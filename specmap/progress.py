"""A small progress bar on standard error (no dependency).

On a terminal it redraws one line; otherwise it prints a line every 10%.
"""

from __future__ import annotations

import sys
import time
from typing import TextIO


class Progress:
    """Callable ``progress(done, total)`` that draws a bar labelled ``label``."""

    def __init__(self, label: str, *, stream: TextIO | None = None, enabled: bool = True) -> None:
        self.label = label
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.start = time.perf_counter()
        self._last_decile = -1
        self._last_draw = 0.0

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled or total <= 0:
            return
        frac = min(max(done / total, 0.0), 1.0)
        elapsed = time.perf_counter() - self.start
        if self.tty:
            now = time.perf_counter()
            if done < total and now - self._last_draw < 0.1:
                return
            self._last_draw = now
            width = 30
            fill = int(round(frac * width))
            bar = "#" * fill + "-" * (width - fill)
            self.stream.write(f"\r{self.label:<10} [{bar}] {done}/{total} {elapsed:6.1f}s")
            if done >= total:
                self.stream.write("\n")
            self.stream.flush()
        else:
            decile = int(frac * 10)
            if decile > self._last_decile:
                self._last_decile = decile
                self.stream.write(f"{self.label}: {done}/{total} ({frac:.0%}, {elapsed:.1f}s)\n")
                self.stream.flush()


def quiet(done: int, total: int) -> None:
    """A progress callback that draws nothing."""
