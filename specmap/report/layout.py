"""Page layout for the PDF report: A4 pages with a figure on top and flowing text.

Text is placed line by line from the top; when a page is full the text flows
onto a continuation page with the same title, so nothing is clipped and
nothing overlaps. Every font is at least 8 pt.
"""

from __future__ import annotations

import textwrap
from collections.abc import Callable
from typing import Any

from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import Figure, FigureBase
from matplotlib.patches import Rectangle

A4 = (8.27, 11.69)
LEFT, TOP, BOTTOM = 0.08, 0.955, 0.055
TEXT_PT = 9.5
MONO_PT = 8.0
RED = "#b00020"
MIN_PLOT_SHARE = 0.7
"""A page's plot may shrink to this share of the height asked for, to take back a continuation page."""


class Pager:
    """Writes A4 pages: an optional figure on top, then flowing text."""

    def __init__(self, pdf: PdfPages | None, study_name: str, *, fit: dict[str, float] | None = None) -> None:
        """``pdf=None`` measures only: pages are counted and text is flowed, nothing is drawn.

        ``fit`` maps a page title to the plot height to use instead of the one asked for
        (see :func:`fit_plots`).
        """
        self.pdf = pdf
        self.study_name = study_name
        self.page_no = 0
        self.fig: Figure | None = None
        self.open = False
        self.y = TOP
        self.title = ""
        self.fit = dict(fit or {})
        self.asked: dict[str, float] = {}
        """Plot height asked for, by page title."""
        self.spill: dict[str, list[float]] = {}
        """Height used on each continuation page, by the title of the page it continues."""

    # -- pages ---------------------------------------------------------------
    def page(self, title: str, plot_height: float = 0.0) -> FigureBase | None:
        """Start a page; return a subfigure of ``plot_height`` (fraction of the page) to draw into."""
        self.close()
        self.title = title
        self.page_no += 1
        self.open = True
        self.y = TOP - 0.04
        base = title.removesuffix(" (continued)")
        if base != title:
            self.spill.setdefault(base, []).append(0.0)
        elif plot_height > 0:
            self.asked[title] = plot_height
            plot_height = self.fit.get(title, plot_height)
        if self.pdf is not None:
            self.fig = Figure(figsize=A4)
            self.fig.text(LEFT, TOP, title, fontsize=15, weight="bold", va="top", parse_math=False)
            self.fig.text(
                0.5,
                0.022,
                f"specmap report: {self.study_name}   page {self.page_no}",
                fontsize=8,
                ha="center",
                color="0.35",
                parse_math=False,
            )
        if plot_height <= 0:
            return None
        head = 1.0 - self.y + 0.005
        if self.fig is None:  # measuring: the text starts where it would below the plot
            self.y = 1.0 - head - plot_height - 0.01
            return None
        _, sub, _ = self.fig.subfigures(3, 1, height_ratios=[head, plot_height, 1.0 - head - plot_height])
        self.fig.set_layout_engine("constrained")
        self.y = 1.0 - head - plot_height - 0.01
        return sub

    def close(self) -> None:
        base = self.title.removesuffix(" (continued)")
        if self.open and base != self.title:
            self.spill[base][-1] = (TOP - 0.04) - self.y
        if self.fig is not None and self.pdf is not None:
            self.pdf.savefig(self.fig)
        self.fig = None
        self.open = False

    # -- text ------------------------------------------------------------------
    def _room(self, height: float) -> None:
        if not self.open or self.y - height < BOTTOM:
            self.page(self.title + (" (continued)" if "(continued)" not in self.title else ""))

    def _line(self, text: str, size: float, **kw: Any) -> None:
        step = size * 1.45 / 72.0 / A4[1]
        self._room(step)
        if self.fig is not None:
            self.fig.text(
                LEFT + kw.pop("indent", 0.0), self.y, text, fontsize=size, va="top", parse_math=False, **kw
            )
        self.y -= step

    def heading(self, text: str) -> None:
        self.gap(0.6)
        self._room(0.06)
        self._line(text, 11.5, weight="bold")
        self.gap(0.2)

    def gap(self, lines: float = 1.0) -> None:
        self.y -= lines * TEXT_PT * 1.45 / 72.0 / A4[1]

    def para(self, text: str, size: float = TEXT_PT, *, indent: float = 0.0, **kw: Any) -> None:
        width_pt = (1.0 - 2 * LEFT - indent) * A4[0] * 72.0
        chars = max(20, int(width_pt / (0.56 * size)))
        for i, line in enumerate(textwrap.wrap(text, chars) or [""]):
            self._line(line, size, indent=indent + (0.02 if i else 0.0), **kw)

    def room(self) -> float:
        """Height left on the current page (figure fraction); 0 without a page."""
        return max(0.0, self.y - BOTTOM) if self.open else 0.0

    def height(self, text: str, size: float = TEXT_PT, *, indent: float = 0.0) -> float:
        """Height :meth:`para` would take for ``text`` (figure fraction)."""
        return len(self._wrapped(text, size, indent)) * size * 1.45 / 72.0 / A4[1]

    def field(self, key: str, value: Any) -> None:
        self.para(f"{key}: {value}")

    def mono(self, line: str, **kw: Any) -> None:
        chars = int((1.0 - 2 * LEFT) * A4[0] * 72.0 / (0.61 * MONO_PT))
        for piece in textwrap.wrap(line, chars, drop_whitespace=False, subsequent_indent="    ") or [""]:
            self._line(piece, MONO_PT, family="DejaVu Sans Mono", **kw)

    def warn(self, text: str) -> None:
        self.para(text, color=RED, weight="bold")

    def _wrapped(self, text: str, size: float, indent: float) -> list[str]:
        width_pt = (1.0 - 2 * LEFT - indent) * A4[0] * 72.0
        return textwrap.wrap(text, max(20, int(width_pt / (0.56 * size)))) or [""]

    def box(self, title: str, texts: list[str], *, edge: str = RED, face: str = "#fdecee") -> None:
        """A framed block (title, then paragraphs), kept on one page."""
        pad = 0.012
        step = TEXT_PT * 1.45 / 72.0 / A4[1]
        lines = [self._wrapped(t, TEXT_PT, 2 * pad) for t in texts]
        height = step * (1 + sum(len(x) for x in lines)) + 2 * pad
        self._room(height + step)
        top = self.y
        if self.fig is not None:
            self.fig.add_artist(
                Rectangle(
                    (LEFT - pad, top - height),
                    1.0 - 2 * LEFT + 2 * pad,
                    height,
                    transform=self.fig.transFigure,
                    fc=face,
                    ec=edge,
                    lw=1.2,
                    zorder=0,
                )
            )
        self.y -= pad * 0.6
        self._line(title, TEXT_PT + 1, weight="bold", color=edge, indent=pad)
        for chunk in lines:
            for i, line in enumerate(chunk):
                self._line(line, TEXT_PT, indent=pad + (0.02 if i else 0.0))
        self.y = top - height - step * 0.5


def fit_plots(measure: Callable[[dict[str, float]], Pager], rounds: int = 4) -> dict[str, float]:
    """Plot heights that keep a short overflow on its page instead of a near-empty continuation page.

    ``measure(fit)`` writes the pages on a measuring :class:`Pager` (``pdf=None``) built with
    ``fit`` and returns it. A page whose text runs onto exactly one continuation page has its
    plot lowered by the height used there (plus one line), down to :data:`MIN_PLOT_SHARE` of the
    height asked for; if that is not enough the plot keeps its full height and the text its
    continuation page. A few measuring rounds settle the heights (boxes and headings move whole).

    Returns
    -------
    dict
        Page title -> plot height (figure fraction), only for the pages that changed.
    """
    step = TEXT_PT * 1.45 / 72.0 / A4[1]
    fit: dict[str, float] = {}
    kept: set[str] = set()
    for _ in range(rounds):
        pg = measure(fit)
        changed = False
        for title, used in pg.spill.items():
            asked = pg.asked.get(title)
            if asked is None or title in kept or len(used) != 1:
                continue
            lower = fit.get(title, asked) - used[0] - step
            if lower >= MIN_PLOT_SHARE * asked:
                fit[title] = lower
            else:
                kept.add(title)
                fit.pop(title, None)
            changed = True
        if not changed:
            break
    return fit
