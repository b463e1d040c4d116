"""Axis ticks and the way the record prints numbers."""

from __future__ import annotations

import itertools
import math

from hypothesis import given
from hypothesis import strategies as st

from calib.report.charts import (
    CurveBand,
    PlotPoint,
    calibration_chart,
    nice_ticks,
    residual_chart,
)
from calib.report.formatting import format_compact, format_number, format_p, format_percent

finite = st.floats(min_value=-1e9, max_value=1e9, allow_nan=False)


@given(finite, finite)
def test_ticks_enclose_the_range_in_round_steps(a, b):
    lo, hi = min(a, b), max(a, b)
    ticks = nice_ticks(lo, hi)
    # Enclosing up to a millionth of the axis: far below what a plot can show.
    slack = 1e-6 * (ticks[-1] - ticks[0])
    assert ticks[0] <= lo + slack and ticks[-1] >= hi - slack
    assert 2 <= len(ticks) <= 12
    # Equal steps up to the rounding of the tick values themselves (at 1e9 a double holds a
    # 0.1 step only to ~1e-7).
    steps = [t2 - t1 for t1, t2 in itertools.pairwise(ticks)]
    tolerance = 8 * math.ulp(max(abs(ticks[0]), abs(ticks[-1])))
    assert max(steps) - min(steps) <= tolerance


def test_number_formats():
    # Expected strings worked out by hand.
    assert format_number(0.24371753787950884, 6) == "0.243718"
    assert format_number(-0.000617208, 6) == "-0.000617208"
    assert format_number(1843.1838516, 4) == "1843"
    assert format_number(9.99996, 5) == "10.000"
    assert format_number(float("nan")) == "—"
    assert format_number(float("inf")) == "—"
    assert format_number(True) == "—"
    assert format_p(0.01234) == "0.0123"
    assert format_p(1.2345e-05) == "1.2e-05"
    assert format_p(0.00012) == "0.000120"
    assert format_compact(100.0) == "100"
    assert format_compact(0.995) == "0.995"
    assert format_percent(-30.84) == "-30.8"


def test_charts_cope_with_degenerate_data():
    # One point, no band; identical x; all residuals zero: still a drawing, no error.
    calibration_chart([PlotPoint(1.0, 1.0, True)], None, width=240, height=190, x_title="x",
                      y_title="y")
    calibration_chart([PlotPoint(2.0, 1.0, True), PlotPoint(2.0, 1.5, False)],
                      CurveBand((2.0, 2.0), (1.2, 1.2), (0.0, 0.0), 0.95), width=240,
                      height=190, x_title="x", y_title="y")
    residual_chart([PlotPoint(1.0, 0.0, True), PlotPoint(2.0, 0.0, True)], width=240,
                   height=190, x_title="x", y_title="r")
    residual_chart([], width=240, height=190, x_title="x", y_title="r")
