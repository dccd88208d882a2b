"""Page layout of the PDF report: short overflows stay on their page, tables fit the line.

The expected heights are derived here from the font sizes (a line of s pt takes 1.45 s pt of an
A4 page 11.69 in = 841.7 pt high), not read back from the code under test.
"""

from __future__ import annotations

from pathlib import Path

from matplotlib.backends.backend_pdf import PdfPages
from pypdf import PdfReader

from specmap.report.layout import A4, BOTTOM, MIN_PLOT_SHARE, TEXT_PT, TOP, Pager, fit_plots
from specmap.report.pdf import simplification_words, stat_columns

LINE = TEXT_PT * 1.45 / (A4[1] * 72.0)  # one text line, as a fraction of the page height
PLOT = 0.44


def _room_below(plot: float) -> int:
    """Text lines that fit under a plot of height ``plot`` (page layout of layout.py's docstring)."""
    head = 1.0 - (TOP - 0.04) + 0.005
    top_of_text = 1.0 - head - plot - 0.01
    return int((top_of_text - BOTTOM) / LINE + 1e-9)


def _write(pg: Pager, lines: int) -> Pager:
    sub = pg.page("Matching distance", PLOT)
    if sub is not None:
        sub.add_subplot().plot([0, 1], [0, 1])
    for i in range(lines):
        pg.para(f"line {i}")
    pg.page("Findings")
    pg.para("next page")
    pg.close()
    return pg


def test_one_line_overflow_shrinks_the_plot_instead_of_a_continuation_page(tmp_path: Path) -> None:
    n = _room_below(PLOT) + 1  # one line more than the page holds under the full plot
    plain = _write(Pager(None, "t"), n)
    assert plain.page_no == 3 and len(plain.spill["Matching distance"]) == 1

    fit = fit_plots(lambda f: _write(Pager(None, "t", fit=f), n))
    assert set(fit) == {"Matching distance"}
    assert MIN_PLOT_SHARE * PLOT <= fit["Matching distance"] < PLOT - LINE
    fitted = _write(Pager(None, "t", fit=fit), n)
    assert fitted.page_no == 2 and not fitted.spill

    # the drawing pager lays the text out as the measuring one did: two pages in the PDF
    out = tmp_path / "r.pdf"
    with PdfPages(out) as pdf:
        _write(Pager(pdf, "t", fit=fit), n)
    pages = [p.extract_text() for p in PdfReader(out).pages]
    assert len(pages) == 2
    assert f"line {n - 1}" in pages[0] and "continued" not in "".join(pages)


def test_a_long_overflow_keeps_the_plot_and_its_continuation_page() -> None:
    # more text than MIN_PLOT_SHARE could take back: shrinking would only spoil the figure
    n = _room_below(PLOT) + int((1.0 - MIN_PLOT_SHARE) * PLOT / LINE) + 5
    fit = fit_plots(lambda f: _write(Pager(None, "t", fit=f), n))
    assert fit == {}
    assert len(_write(Pager(None, "t", fit=fit), n).spill["Matching distance"]) == 1


def test_statistics_table_in_two_columns_that_fit_the_mono_line() -> None:
    rows = [(f"counter_{i}", str(10**i)) for i in range(9)] + [("a_key_longer_than_a_column_" * 2, "7")]
    lines = stat_columns(rows)
    # 9 short rows -> 5 lines of two columns, the wide row on its own line
    assert len(lines) == 6
    text = " ".join(lines)
    for key, value in rows:
        assert text.count(key) == 1 and value in text
    # the mono line of layout.Pager.mono: page width minus margins over 0.61 em of 8 pt
    chars = int((1.0 - 2 * 0.08) * A4[0] * 72.0 / (0.61 * 8.0))
    assert max(len(x) for x in lines) <= chars
    # read down the left column, then the right
    assert lines[0].split()[:4] == ["counter_0", "1", "counter_5", "100000"]


def test_simplification_is_named_with_its_measured_change() -> None:
    joint = {
        "setting": "auto",
        "method": "joint",
        "tube": 0.002,
        "delta": 0.008,
        "sup_change": [0.0061, 0.0047],
        "contours_before": 212,
        "contours_after": 58,
        "budget": 60,
        "met": True,
    }
    words = simplification_words(joint)
    assert "delta" not in words  # the joint method's number is its bound 4 tau, named as such
    assert "jointly (tube 0.002" in words and "bound 4 tau = 0.008" in words
    assert "measured sup-norm change f1 0.0061, f2 0.0047" in words
    pers = simplification_words({**joint, "setting": 0.05, "method": "persistence", "delta": 0.05})
    assert pers.startswith("simplified by persistence at delta 0.05") and "(at most delta)" in pers
    same = simplification_words({**joint, "tube": None, "contours_after": 212, "sup_change": [0.0, 0.0]})
    assert same.startswith("not simplified") and "212" in same
