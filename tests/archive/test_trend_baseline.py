"""Trends that see drift: the screened baseline, and a frozen, reviewed baseline (Phase I / II)."""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
from scipy import stats

from calib.archive import (
    Archive,
    ArchivedCurve,
    BaselineError,
    CurveFigures,
    analyte_trend,
    control_chart,
    control_limits,
    establish_baseline,
    load_baseline,
    screened_limits,
    trend_document,
)
from calib.archive.baseline import (
    baseline_document,
    latest_baseline_file,
    next_baseline_file,
    parse_exclusion,
)
from tests.archive.cu_series import (
    ANALYTE,
    BAD_DAY,
    INSTRUMENT,
    REVIEW_DAYS,
    cu_record,
    cu_slopes,
    fill_cu_archive,
)
from tests.archive.helpers import pdf_for

STAMP = "2026-12-02T07:00:00Z"


def grubbs_critical(n, alpha=0.05):
    """Two-sided Grubbs critical value G (Grubbs 1969; NIST/SEMATECH e-Handbook 1.3.5.17)."""
    t = stats.t.ppf(1 - alpha / (2 * n), n - 2)
    return (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))


@pytest.fixture
def cu_archive(tmp_path):
    path = tmp_path / "records.sqlite"
    verdicts = fill_cu_archive(path)
    return path, verdicts


# -- the screening ------------------------------------------------------------------------


def test_a_bad_value_cannot_hide_inside_its_own_unscreened_limits():
    # Samuelson's inequality (1968): no value of n lies more than (n − 1)/√n sample SDs
    # from their mean; for n = 9 that is 2.67 < 3, so an unscreened beyond-3s never fires.
    rng = np.random.default_rng(5)
    values = list(rng.normal(0, 1, 8)) + [-1e6]
    lim = control_limits(values, baseline=None)
    assert abs(lim.z(values[-1])) <= 8 / 3 + 1e-12
    one = ("beyond-3s",)
    assert control_chart(values, baseline=9, rules=one).flagged_points() == ()
    assert control_chart(values, baseline=9, rules=one, screen=True).flagged_points() == (8,)


def test_screening_sets_aside_exactly_what_grubbs_test_rejects():
    # The leave-one-out deviation against the Bonferroni t and Grubbs' G at 5 % are the same
    # test; compare with the closed form of Grubbs' critical value on random baselines.
    rng = np.random.default_rng(8)
    agree = 0
    for trial in range(300):
        n = int(rng.integers(5, 13))
        x = rng.normal(0, 1, n)
        x[int(rng.integers(n))] += rng.choice([-1, 1]) * rng.uniform(0, 6)
        g = np.max(np.abs(x - x.mean())) / x.std(ddof=1)
        limit = max(grubbs_critical(n), 0)
        _, out = screened_limits(list(x), baseline=None)
        first = out[0] if out else None
        # Our screening also needs the value beyond 3 SDs of the others (a chart's action limit).
        expected = g > limit and (first is None or abs(first.z) > 3)
        if (first is not None) == expected:
            agree += 1
        if first is not None:
            assert first.index == int(np.argmax(np.abs(x - x.mean())))
    assert agree == 300


def test_screened_limits_are_the_mean_and_sd_of_the_values_kept():
    slopes = cu_slopes()
    lim, out = screened_limits(slopes, baseline=10)
    assert [o.index for o in out] == [BAD_DAY]
    kept = np.array([s for i, s in enumerate(slopes[:10]) if i != BAD_DAY])
    assert lim.baseline == 9
    assert lim.mean == pytest.approx(kept.mean(), rel=1e-13)
    assert lim.sd == pytest.approx(kept.std(ddof=1), rel=1e-12)
    others = np.delete(np.array(slopes[:10]), BAD_DAY)
    z = (slopes[BAD_DAY] - others.mean()) / others.std(ddof=1)
    assert out[0].z == pytest.approx(z, rel=1e-12)
    assert out[0].critical == pytest.approx(stats.t.ppf(1 - 0.05 / 20, 8) * math.sqrt(1 + 1 / 9),
                                            rel=1e-12)
    assert out[0].reason.endswith(f"SDs below the other baseline curves (set aside beyond "
                                  f"{out[0].critical:.2f})")


def test_an_in_control_baseline_loses_a_value_in_about_5_percent_of_charts():
    # The stated family false-alarm rate: 1000 normal baselines of 10, binomial 99.9 % band.
    rng = np.random.default_rng(13)
    hit = sum(bool(screened_limits(list(rng.normal(0, 1, 10)), baseline=10)[1])
              for _ in range(1000))
    low, high = stats.binom.ppf([0.0005, 0.9995], 1000, 0.05)
    assert low <= hit <= high


def test_screening_keeps_at_least_two_thirds_of_the_baseline():
    # Four values off, each far beyond the others once the larger ones are gone (1.1 would
    # be 7 SDs from the six in control): only 10 − ceil(2·10/3) = 3 may go.
    values = [1.0, 1.01, 0.99, 1.0, 1.02, 0.98, 1.1, 1.2, 1.5, 3.0]
    lim, out = screened_limits(values, baseline=None)
    assert [o.index for o in out] == [9, 8, 7] and lim.baseline == 7
    assert lim.mean == pytest.approx(np.mean(values[:7]), rel=1e-13)
    lim, out = screened_limits([1.0, 1.1, 40.0], baseline=None)
    assert out == () and lim.baseline == 3  # never below 3 values


# -- the 12-day copper case -----------------------------------------------------------------


def test_the_twelve_day_copper_case_is_flagged_without_being_told_the_baseline(cu_archive):
    path, verdicts = cu_archive
    assert [i for i, v in enumerate(verdicts) if v != "accepted"] == list(REVIEW_DAYS)
    assert verdicts[BAD_DAY] == "accepted"  # the bad curve passes its own checks
    with Archive(path) as archive:
        trend = archive.trend("cu 324.754", instrument="icp-oes-2")
        plain = archive.trend("cu 324.754", instrument="icp-oes-2", screen=False)
    assert len(trend.points) == 9 and len(trend.left_out) == 3
    bad = next(i for i, p in enumerate(trend.points) if p.run_date == "2026-09-07")
    # As the issue found it: limits from all 9 including the bad one flag nothing.
    assert not plain.flagged
    assert trend.flagged_points() == (bad,)
    assert trend.chart("slope").rules_at(bad) == ("beyond-3s",)
    assert trend.phase(bad) == "set aside"
    assert trend.points[bad].record_id in trend.limits_text()
    doc = trend_document(trend)
    json.dumps(doc, allow_nan=False)
    assert doc["limits_from"]["method"] == "first curves, screened"
    assert doc["charts"][0]["set_aside"][0]["index"] == bad
    assert doc["points"][bad]["phase"] == "set aside" and doc["flagged_points"] == [bad]


# -- Phase I: establishing and freezing ----------------------------------------------------


def _history(path):
    with Archive(path) as archive:
        return archive.curve_history(ANALYTE, instrument=INSTRUMENT)


def test_freezing_refuses_an_out_of_control_curve_until_it_is_excluded(cu_archive):
    path, _ = cu_archive
    history = _history(path)
    bad = next(c for c in history if c.run_date == "2026-09-07")
    with pytest.raises(BaselineError, match=rf"^the baseline is not in control: {bad.record_id} "
                                            r"\(2026-09-07\) slope [\d.]+ SDs below the other "
                                            r"baseline curves .*Exclude such a curve with a "
                                            r"reason \(--exclude RECORD_ID=REASON\)"):
        establish_baseline(history, analyte=ANALYTE, count=8, reviewed_by="M. Castellanos",
                           established_at=STAMP, instrument=INSTRUMENT)
    frozen = establish_baseline(
        history, analyte=ANALYTE, count=8, reviewed_by="M. Castellanos", established_at=STAMP,
        exclude={bad.record_id.lower(): "nebuliser partly blocked"}, instrument=INSTRUMENT)
    accepted = [c for c in history if c.accepted][:8]
    kept = np.array([c.figures.slope for c in accepted if c is not bad])
    assert len(frozen.curves) == 7 and frozen.excluded[0].reason == "nebuliser partly blocked"
    assert frozen.limits["slope"].mean == pytest.approx(kept.mean(), rel=1e-13)
    assert frozen.limits["slope"].sd == pytest.approx(kept.std(ddof=1), rel=1e-12)
    assert "the first 8 accepted curves (2026-09-01 to 2026-09-11), 1 excluded" == frozen.selection


def test_freezing_refusals(cu_archive):
    path, _ = cu_archive
    history = _history(path)
    common = {"analyte": ANALYTE, "established_at": STAMP, "reviewed_by": "M. Castellanos"}
    with pytest.raises(BaselineError, match="^Cu 324.754: 9 accepted curves, fewer than the 12 "
                                            "asked for the baseline$"):
        establish_baseline(history, count=12, **common)
    with pytest.raises(BaselineError, match="^Cu 324.754: 2 accepted curves from 2026-09-10 on, "):
        establish_baseline(history, count=5, start="2026-09-10", **common)
    with pytest.raises(BaselineError, match="^cannot exclude CR-000000000000: not among the 4 "
                                            "curves chosen for the baseline"):
        establish_baseline(history, count=4, exclude={"CR-000000000000": "typo"}, **common)
    first = [c for c in history if c.accepted][:4]
    with pytest.raises(BaselineError, match="^2 curves left after the exclusions; a baseline "
                                            "needs at least 3$"):
        establish_baseline(history, count=4, **common,
                           exclude={c.record_id: "drift seen" for c in first[:2]})
    with pytest.raises(BaselineError, match="give the reviewer's full name"):
        establish_baseline(history, count=4, **{**common, "reviewed_by": "  "})
    other = [replace(c, instrument="ICP-OES-3") if i == 1 else c for i, c in enumerate(history)]
    with pytest.raises(BaselineError, match="^the baseline curves mix instruments"):
        establish_baseline(other, count=4, **common)
    with pytest.raises(ValueError, match="needs a reason .*got 'x'"):
        parse_exclusion("CR-0A1B2C3D4E5F=x")
    with pytest.raises(ValueError, match="an exclusion is RECORD_ID=REASON; got 'CR-1'"):
        parse_exclusion("CR-1")


# -- the baseline file -------------------------------------------------------------------------


def _frozen_file(path, tmp_path):
    history = _history(path)
    bad = next(c for c in history if c.run_date == "2026-09-07")
    frozen = establish_baseline(history, analyte=ANALYTE, count=8, reviewed_by="M. Castellanos",
                                established_at=STAMP, exclude={bad.record_id: "nebuliser"},
                                instrument=INSTRUMENT, archive={"name": path.name, "seq": 12})
    target = next_baseline_file(tmp_path / "b", ANALYTE, INSTRUMENT)
    target.parent.mkdir()
    target.write_bytes(baseline_document(frozen))
    return target, frozen, bad


def test_the_baseline_file_round_trips_and_edits_are_detected(cu_archive, tmp_path):
    path, _ = cu_archive
    target, frozen, _ = _frozen_file(path, tmp_path)
    assert target.name == "Cu 324.754@ICP-OES-2.v1.json"
    assert latest_baseline_file(tmp_path / "b", "CU 324.754", "icp-oes-2") == target
    assert next_baseline_file(tmp_path / "b", ANALYTE, INSTRUMENT).name.endswith(".v2.json")
    loaded = load_baseline(target)
    assert loaded.limits == frozen.limits and loaded.curves == frozen.curves
    assert loaded.name().startswith("Cu 324.754@ICP-OES-2.v1.json (SHA-256 ")
    data = json.loads(target.read_text(encoding="utf-8"))
    # An edited figure: the digest no longer matches.
    edited = {**data, "curves": [{**data["curves"][0], "slope": 0.3}, *data["curves"][1:]]}
    target.write_text(json.dumps(edited), encoding="utf-8")
    with pytest.raises(BaselineError, match="the baseline was edited after it was frozen"):
        load_baseline(target)
    # Edited limits with a digest recomputed: the limits no longer follow from the curves.
    import hashlib

    import rfc8785
    content = {k: v for k, v in data.items() if k != "digest"}
    content["limits"] = {**content["limits"], "slope": {**content["limits"]["slope"],
                                                        "sd": 1.0}}
    digest = hashlib.sha256(rfc8785.dumps(content)).hexdigest()
    target.write_text(json.dumps({**content, "digest": digest}), encoding="utf-8")
    with pytest.raises(BaselineError, match="the slope limits do not follow from the baseline's "
                                            "curves"):
        load_baseline(target)
    target.write_text("{not json", encoding="utf-8")
    with pytest.raises(BaselineError, match="not a readable baseline file"):
        load_baseline(target)
    target.write_text('{"schema": "calib.record/1"}', encoding="utf-8")
    with pytest.raises(BaselineError, match="not a calib.baseline/1 document"):
        load_baseline(target)


# -- Phase II: monitoring against the frozen limits ------------------------------------------


def test_later_runs_are_judged_against_the_frozen_limits(cu_archive, tmp_path):
    path, _ = cu_archive
    target, frozen, bad = _frozen_file(path, tmp_path)
    frozen = load_baseline(target)
    with Archive(path) as archive:
        # Four more days in control, then the sensitivity falls 6 %: within the spread of
        # the whole unscreened series, far outside the frozen limits.
        for day, slope in enumerate([0.251, 0.249, 0.2505, 0.2495, 0.235], start=12):
            archive.append((rec := cu_record(day, slope)), pdf_for(rec), kind="issued")
        trend = archive.trend(ANALYTE, instrument=INSTRUMENT, frozen=frozen)
    lim = trend.chart("slope").limits
    assert lim == frozen.limits["slope"]  # fixed: the new curves do not move them
    last = len(trend.points) - 1
    b = next(i for i, p in enumerate(trend.points) if p.record_id == bad.record_id)
    assert trend.phase(b) == "excluded" and trend.phase(0) == "baseline"
    assert trend.phase(last) == "monitored"
    # The excluded bad curve fires beyond-3s but was reviewed; the new drop is a flag.
    assert "beyond-3s" in trend.chart("slope").rules_at(b) and b in trend.reviewed
    assert trend.flagged_points() == (last,)
    assert trend.limits_text().startswith("Limits from the frozen baseline Cu 324.754@ICP-OES-2."
                                          "v1.json (SHA-256 ")
    doc = trend_document(trend)
    assert doc["limits_from"]["method"] == "frozen baseline"
    assert doc["limits_from"]["file"] == target.name
    assert doc["limits_from"]["excluded"] == [{"record_id": bad.record_id,
                                               "run_date": "2026-09-07", "reason": "nebuliser"}]
    hit = next(h for h in doc["charts"][0]["hits"] if h["index"] == b)
    assert hit["reviewed"] is True


def test_a_baseline_that_does_not_match_the_archive_is_refused(cu_archive, tmp_path):
    path, _ = cu_archive
    _, frozen, _ = _frozen_file(path, tmp_path)
    history = _history(path)
    changed = [replace(c, figures=replace(c.figures, slope=c.figures.slope * 1.01))
               if c.record_id == frozen.curves[0].record_id else c for c in history]
    with pytest.raises(ValueError, match=f"the baseline's slope of {frozen.curves[0].record_id} "
                                         r"\(.*\) differs from the archived record's"):
        analyte_trend(changed, analyte=ANALYTE, frozen=frozen)
    missing = [c for c in history if c.record_id != frozen.curves[1].record_id]
    with pytest.raises(ValueError, match=f"the baseline names {frozen.curves[1].record_id} "
                                         r"\(2026-09-02\), which is not among the accepted"):
        analyte_trend(missing, analyte=ANALYTE, frozen=frozen)


def test_synthetic_curves_without_an_archive():
    # The same decision on hand-made figures: one curve 15 % low among twelve.
    def curve(i, slope):
        figures = CurveFigures(0, "Cu 324.754", "linear", "1/x", "accepted", slope, 0.0, 0.01)
        return ArchivedCurve(f"CR-{i:012d}", i, f"2026-11-{i + 1:02d}", "ICP-OES-2",
                             ("prepared",), figures)

    slopes = [1.000, 1.012, 0.991, 1.004, 0.996, 1.008, 0.85, 0.995, 1.003, 1.010, 0.998, 1.001]
    trend = analyte_trend([curve(i, s) for i, s in enumerate(slopes)], analyte="Cu 324.754")
    assert trend.chart("slope").flagged_points() == (6,)
    assert [p.run_date for p in trend.points][6] == "2026-11-07"


def test_the_chart_puts_runs_at_their_dates():
    # A calendar axis: x is linear in the day number (a 5-day gap is five times a 1-day gap),
    # runs of one day share it evenly; the tick labels are dates.
    import datetime as dt

    from reportlab.graphics.shapes import String

    from calib.report.trend_pdf import _DateAxis, control_chart_drawing

    dates = ["2026-11-02", "2026-11-03", "2026-11-03", "2026-11-08", "2026-11-09"]
    axis = _DateAxis(dates, 46, 400)
    x = [axis(p) for p in axis.positions]
    day = [dt.date.fromisoformat(d).toordinal() for d in dates]
    per_day = (axis(day[0] + 1) - axis(day[0]))
    assert axis(day[3]) - axis(day[1]) == pytest.approx(5 * per_day, rel=1e-9)
    assert x[1] < x[2] and x[2] - x[1] == pytest.approx(per_day / 3, rel=1e-9)
    assert x[0] == pytest.approx(axis(day[0]), rel=1e-9)  # alone on its day: mid-day
    chart = control_chart([1.0, 1.01, 0.99, 1.0, 0.8], quantity="slope", baseline=4)
    drawing = control_chart_drawing(chart, width=480, height=180, y_title="Slope b", baseline=4,
                                    dates=dates)
    labels = {s.text for s in drawing.getContents() if isinstance(s, String)}
    assert "2026-11-02" in labels and "Run date" in labels
    with pytest.raises(ValueError, match="dates: one per point needed"):
        control_chart_drawing(chart, width=480, height=180, y_title="S", baseline=4,
                              dates=dates[:3])
