"""A small progress bar on standard error (no dependency).

On a terminal it redraws one line; otherwise it prints a line every 10%, and at least one every
:data:`HEARTBEAT` seconds while work goes on. A stage whose total grows while it runs (the reduced
search plans its lines batch by batch, after the dense sweep reached 100%) is therefore not silent;
its lines say that the total grows.
"""

from __future__ import annotations

import sys
import time
from typing import TextIO

HEARTBEAT = 10.0
"""Most seconds between two lines when the stream is not a terminal."""


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
        self._last_line = self.start
        self._last_done = -1
        self._full_total = 0

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
            now = time.perf_counter()
            beat = done != self._last_done and now - self._last_line >= HEARTBEAT
            if decile > self._last_decile or beat:
                if decile >= 10 and not self._full_total:
                    self._full_total = total
                grown = self._full_total and total > self._full_total
                self._last_decile, self._last_line, self._last_done = decile, now, done
                more = "; the total grows as the stage plans more" if grown else ""
                self.stream.write(f"{self.label}: {done}/{total} ({frac:.0%}, {elapsed:.1f}s{more})\n")
                self.stream.flush()


def quiet(done: int, total: int) -> None:
    """A progress callback that draws nothing."""
