"""Control limits and run rules, and an instrument losing sensitivity seen before a curve fails."""

from __future__ import annotations

import json
import math
import statistics

import numpy as np
import pytest

from calib.archive import (
    Archive,
    ArchivedCurve,
    ControlLimits,
    CurveFigures,
    analyte_trend,
    control_chart,
    control_limits,
    run_rules,
    trend_document,
)
from calib.checks.profile import load_profile
from tests.archive.helpers import make_record, pdf_for

UNIT = ControlLimits(0.0, 1.0, 10)  # values are then z-scores

# The Fernbrook nitrate method (fictional) enforces its expected slope: within ±15 %.
METHOD_PROFILE = """\
name = "fernbrook-nitrate"
version = "3"
description = "Nitrate-N by IC: the default rules with the method's expected slope enforced."
sources = ["Fernbrook method FWL-IC-03 (fictional): expected slope 0.25 µS·min per mg/L ± 15 %"]

[defaults]
model = "linear"
weighting = "none"
confidence = 0.95

[[rules]]
id = "min-levels"
severity = "reject"
min_levels = 5

[[rules]]
id = "intercept-zero"
severity = "review"
alpha = 0.05

[[rules]]
id = "slope-reference"
severity = "reject"
expected = 0.25
tolerance_pct = 15

[[rules]]
id = "back-calculation"
severity = "reject"
tolerance_pct = 15
lowest_level_tolerance_pct = 20
min_pass_pct = 75
"""


def only(rule, values):
    return [(h.index, h.side, h.points) for h in run_rules(values, UNIT, rules=(rule,))]


def test_limits_equal_mean_plus_k_sd_computed_independently():
    rng = np.random.default_rng(11)
    values = list(0.25 + rng.normal(0, 0.002, 25))
    chart = control_chart(values, quantity="slope", baseline=10)
    base = np.array(values[:10])
    # numpy (ddof=1) and the statistics module agree on the sample SD of the baseline.
    mean, sd = base.mean(), base.std(ddof=1)
    assert sd == pytest.approx(statistics.stdev(values[:10]), rel=1e-12)
    lim = chart.limits
    assert lim.baseline == 10
    assert lim.mean == pytest.approx(mean, rel=1e-14) and lim.sd == pytest.approx(sd, rel=1e-12)
    assert lim.warning == pytest.approx((mean - 2 * sd, mean + 2 * sd), rel=1e-12)
    assert lim.action == pytest.approx((mean - 3 * sd, mean + 3 * sd), rel=1e-12)
    # z beyond ±3 exactly where numpy says the value lies outside the action limits.
    outside = [i for i, v in enumerate(values) if abs(v - mean) > 3 * sd]
    assert [h.index for h in chart.hits if h.rule == "beyond-3s"] == outside


def test_baseline_takes_all_when_fewer_and_needs_three():
    assert control_limits([1.0, 2.0, 4.0], baseline=10).baseline == 3
    assert control_limits([1.0, 2.0, 4.0, 9.0], baseline=None).mean == 4.0
    # Missing values are left out of the baseline, not counted as zero.
    assert control_limits([1.0, math.nan, 2.0, 3.0], baseline=4).mean == 2.0
    chart = control_chart([0.25, 0.26], quantity="slope")
    assert not chart.evaluated and not chart.flagged
    assert chart.reason == "a control chart needs at least 3 values in its baseline; there are 2"
    flat = control_chart([0.25] * 5, quantity="slope")
    assert flat.reason == "the baseline values do not vary (SD 0), so no limits can be drawn"
    with pytest.raises(ValueError, match="at least 3 values in its baseline; there is 1"):
        control_limits([1.0])
    with pytest.raises(ValueError, match="baseline must be a whole number of at least 3 values; "
                                         "got 2"):
        control_chart([1.0, 2.0, 3.0], baseline=2)


def test_rule_beyond_3s_is_strict():
    # Western Electric rule 1: a single point outside the 3-sigma limits (from memory).
    assert only("beyond-3s", [0.0, 3.0, 3.01, -3.5]) == [(2, "above", (2,)), (3, "below", (3,))]


def test_rule_2_of_3_beyond_2s_same_side():
    # Rule 2: two of three successive points beyond 2 sigma on the same side (from memory).
    assert only("2-of-3-beyond-2s", [2.5, 0.0, 2.5]) == [(2, "above", (0, 2))]
    assert only("2-of-3-beyond-2s", [2.5, -2.5, 0.0]) == []
    assert only("2-of-3-beyond-2s", [2.0, 2.0, 2.0]) == []       # on the limit is inside
    assert only("2-of-3-beyond-2s", [2.5, 0.0, 0.0, 2.5]) == []  # not within three
    assert only("2-of-3-beyond-2s", [-2.1, -2.2, 0.0]) == [(1, "below", (0, 1))]


def test_rule_4_of_5_beyond_1s_same_side():
    # Rule 3: four of five successive points beyond 1 sigma on the same side (from memory).
    assert only("4-of-5-beyond-1s", [1.5, 1.5, 0.0, 1.5, 1.5]) == [(4, "above", (0, 1, 3, 4))]
    assert only("4-of-5-beyond-1s", [1.5, 1.5, 0.0, 0.0, 1.5, 1.5]) == []
    assert only("4-of-5-beyond-1s", [1.5, 1.5, -1.5, 1.5, 0.5]) == []


def test_rule_8_on_one_side():
    # Rule 4: eight successive points on the same side of the centre line (from memory).
    assert only("8-one-side", [0.1] * 7) == []
    assert only("8-one-side", [-0.1] * 8) == [(7, "below", tuple(range(8)))]
    assert [i for i, *_ in only("8-one-side", [0.1] * 9)] == [7, 8]
    assert only("8-one-side", [0.1] * 4 + [0.0] + [0.1] * 4) == []  # on the mean breaks the run
    assert only("8-one-side", [0.1] * 4 + [math.nan] + [0.1] * 4) == []


def test_rule_6_trend():
    # Six points in a row steadily increasing or decreasing (Nelson 1984, from memory).
    assert only("6-trend", [0.1, 0.2, 0.3, 0.4, 0.5, 0.6]) == [(5, "rising", tuple(range(6)))]
    assert only("6-trend", [0.6, 0.5, 0.4, 0.3, 0.2]) == []
    assert only("6-trend", [0.6, 0.5, 0.4, 0.4, 0.2, 0.1, 0.0]) == []  # a tie breaks it
    assert only("6-trend", [0.6, 0.5, 0.4, 0.3, 0.2, 0.1])[0][:2] == (5, "falling")


def test_unknown_rule_is_refused():
    with pytest.raises(ValueError, match="rules: unknown rule 'nine-in-a-row'; choose from "
                                         "beyond-3s, "):
        run_rules([0.0], UNIT, rules=("nine-in-a-row",))


def _curve(i, slope, *, date=None, instrument="IC-2", model="linear", verdict="accepted"):
    figures = CurveFigures(0, "Nitrate-N", model, "none", verdict, slope, 0.001, 0.002)
    return ArchivedCurve(f"CR-{i:012d}", i, date or f"2026-10-{i:02d}", instrument,
                         ("prepared",), figures)


def test_points_are_charted_in_run_date_order_with_notes():
    # A run filed late (seq 9) but run first comes first on the chart.
    curves = [_curve(i, 0.25 + 0.001 * (i % 3)) for i in range(1, 9)]
    curves.append(_curve(9, 0.2, date="2026-09-30", instrument="IC-3", model="quadratic"))
    trend = analyte_trend(curves, analyte="Nitrate-N", baseline=5)
    assert [p.seq for p in trend.points][:2] == [9, 1]
    assert any("mixes instruments (IC-2 ×8, IC-3 ×1)" in n for n in trend.notes)
    assert any("mixes models or weightings (linear/none ×8, quadratic/none ×1)" in n
               for n in trend.notes)
    short = analyte_trend(curves[:4], analyte="Nitrate-N")
    assert any("only 4 accepted curves (fewer than the 10 asked for)" in n for n in short.notes)
    doc = trend_document(trend)
    json.dumps(doc, allow_nan=False)
    assert doc["points"][0]["seq"] == 9 and doc["charts"][0]["quantity"] == "slope"
    assert doc["charts"][0]["action_limits"] == list(trend.chart("slope").limits.action)


def test_sensitivity_loss_is_flagged_before_a_curve_fails(tmp_path):
    # Invented Fernbrook series: ten runs in control (slope 0.25 with 0.6 % run-to-run
    # scatter), then the detector loses 1.5 % of its sensitivity per run.  The method
    # rejects a curve whose slope is more than 15 % below 0.25.
    path = tmp_path / "method.toml"
    path.write_text(METHOD_PROFILE, encoding="utf-8")
    profile = load_profile(path)
    rng = np.random.default_rng(3)
    with Archive(tmp_path / "records.sqlite") as archive:
        verdicts = []
        for run in range(24):
            slope = 0.25 * (1 + rng.normal(0, 0.006)) * 0.985 ** max(0, run - 9)
            record = make_record(slope=slope, seed=300 + run, run=run, profile=profile)
            archive.append(record, pdf_for(record), kind="issued")
            verdicts.append(record.body["check"]["verdict"])
        trend = archive.trend("Nitrate-N")
    first_failure = verdicts.index("rejected")
    assert set(verdicts[:first_failure]) == {"accepted"} and first_failure == 20
    chart = trend.chart("slope")
    assert chart.limits.baseline == 10
    first_flag = chart.flagged_points()[0]
    # Point i of the chart is run i here: every run before the first failure was accepted.
    assert [p.run_date for p in trend.points] == [f"2026-09-{d:02d}" for d in range(1, 21)]
    assert first_flag < first_failure - 5
    assert set(chart.rules_at(first_flag)) <= {"beyond-3s", "2-of-3-beyond-2s"}
    assert first_flag >= 10  # nothing is flagged while the instrument is in control
    # The drift shows on the other run rules too, still before any curve fails.
    fired = {h.rule for h in chart.hits}
    assert {"beyond-3s", "2-of-3-beyond-2s", "4-of-5-beyond-1s", "8-one-side"} <= fired
    assert len(trend.left_out) == 4 and trend.flagged
