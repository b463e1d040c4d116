"""The web trend chart shades the baseline the limits came from, as the trend PDF does."""

from __future__ import annotations

import re

from calib.web.plot import trend_svg

DATES = ["2026-11-01", "2026-11-02", "2026-11-03", "2026-11-04", "2026-11-05"]


def test_a_frozen_baseline_later_in_the_series_is_shaded_where_it_is():
    svg = trend_svg(DATES, [1.0, 1.1, 0.9, 1.0, 1.05], y_title="Slope", label="t", mean=1.0,
                    warning=(0.8, 1.2), action=(0.7, 1.3), span=(2, 4),
                    span_label="Frozen baseline period")
    assert "Frozen baseline period" in svg and "first" not in svg
    # Each date is a point's x; the shade starts 4 units before the third and ends 4 after
    # the fourth.
    xs = [float(x) for x in re.findall(r'<circle cx="([0-9.]+)"', svg)][:5]
    rect = re.search(r'<rect x="([0-9.]+)" y="[0-9.]+" width="([0-9.]+)"', svg)
    x0, width = float(rect.group(1)), float(rect.group(2))
    assert abs(x0 - (xs[2] - 4)) < 0.2 and abs(x0 + width - (xs[3] + 4)) < 0.2


def test_without_a_span_the_first_curves_are_the_baseline():
    svg = trend_svg(DATES, [1.0, 1.1, 0.9, 1.0, 1.05], y_title="Slope", label="t", mean=1.0,
                    baseline=3)
    assert "Baseline: first 3 curves" in svg
