"""Lines of the parameter strip and where they meet contours.

Expected values are the closed forms of math.md sections 2 and 5 ("exact small
cases"), re-derived here from x = a s + b, y = (1 - a) s - b.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from specmap.grids.model import Contour
from specmap.strip import line_parameter, line_point, push_scale

A = st.floats(0.03, 0.97)
B = st.floats(-3, 3)
X = st.floats(-3, 3)


@given(A, B, X)
def test_vertical_half_line_closed_form(a: float, b: float, x0: float) -> None:
    # math.md 5: a vertical half-line x = x0 is met at abscissa x0, ordinate (1-a)/a (x0 - b) - b,
    # when that ordinate is >= its start.
    y_hit = (1 - a) / a * (x0 - b) - b
    for y0, met in ((y_hit - 0.5, True), (y_hit + 0.5, False)):
        s = line_parameter(Contour("v", "vertical", [[x0, y0]]), a, b)
        if met:
            x, y = line_point(a, b, s)
            assert np.isclose(x, x0) and np.isclose(y, y_hit)
        else:
            assert np.isnan(s)


@given(A, B, X)
def test_horizontal_half_line_closed_form(a: float, b: float, y0: float) -> None:
    # math.md 5: a horizontal half-line y = y0 is met at ordinate y0, abscissa b + a/(1-a) (y0 + b).
    x_hit = b + a / (1 - a) * (y0 + b)
    s = line_parameter(Contour("h", "horizontal", [[x_hit - 0.1, y0]]), a, b)
    x, y = line_point(a, b, s)
    assert np.isclose(x, x_hit) and np.isclose(y, y0)
    assert np.isnan(line_parameter(Contour("h", "horizontal", [[x_hit + 0.1, y0]]), a, b))


@settings(max_examples=200)
@given(A, B, st.lists(st.tuples(st.floats(0, 1), st.floats(0, 1)), min_size=2, max_size=40))
def test_polyline_meeting_point_is_on_both(a: float, b: float, steps) -> None:
    # A non-increasing polyline meets a line of positive slope at most once (math.md 4).
    d = np.array(steps)
    pts = np.cumsum(np.c_[d[:, 0], -d[:, 1]], axis=0) - np.array([1.0, -1.0])
    c = Contour("p", "proper", pts)
    s = line_parameter(c, a, b)
    # independent check: sign of (1-a)(x-b) - a(y+b) at the ends decides whether the line meets it
    g = (1 - a) * (pts[:, 0] - b) - a * (pts[:, 1] + b)
    if g[0] > 1e-12 or g[-1] < -1e-12:
        assert np.isnan(s)
        return
    if np.isnan(s):
        assert min(abs(g[0]), abs(g[-1])) < 1e-9
        return
    x, y = line_point(a, b, s)
    # the point lies on some segment of the polyline
    dist = []
    for p, q in zip(pts[:-1], pts[1:], strict=True):
        v = q - p
        t = 0.0 if not v.any() else np.clip(np.dot([x, y] - p, v) / np.dot(v, v), 0, 1)
        dist.append(np.hypot(*(p + t * v - [x, y])))
    assert min(dist) < 1e-9


def test_push_coordinate_is_filtration_value() -> None:
    # math.md 2: c = x - b for a <= 1/2 and c = y + b for a >= 1/2 (both agree at a = 1/2).
    for a in (0.2, 0.5, 0.8):
        s = 1.7
        x, y = line_point(a, 0.3, s)
        c = push_scale(a) * s
        if a <= 0.5:
            assert np.isclose(c, x - 0.3)
        if a >= 0.5:
            assert np.isclose(c, y + 0.3)
