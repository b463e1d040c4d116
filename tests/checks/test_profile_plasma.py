"""The shipped plasma-spectrometry profile on invented ICP runs just inside and outside each limit.

The runs are invented (Fernbrook Water Laboratory, fictional; Cu 324.754 on
ICP-OES-2).  Standards sit symmetrically about a designed line, so under the
profile's 1/x weighting each standard reads back at exactly its designed
deviation (numpy's weighted fit confirms the line, :func:`assert_fit_is_designed`).
The limits are those of the open US EPA plasma methods as the profile cites
them (200.7, 200.8, SW-846 6010D and 6020B; all from memory): calibration
verification within ±10 %, ±30 % at the reporting limit, every standard read
back within ±10 % (±30 % at the lowest), r ≥ 0.998, a blank below the lowest
standard, and the slope within 10 % of the recent accepted slopes (common practice).
"""

from __future__ import annotations

import numpy as np
import pytest

from calib.checks import CurveVerdict, Verdict, evaluate_run, load_profile
from calib.checks.history import SlopeHistory
from calib.options import SampleType
from calib.run import Point
from tests.checks.runs import assert_fit_is_designed, curve_points, make_run, spread

CU = "Cu 324.754"
LEVELS = (0.01, 0.05, 0.1, 0.5, 1.0, 5.0)   # mg/L; the lowest is the reporting limit
A, B = 120.0, 48_000.0                       # counts and counts per mg/L (invented)


def standards(deviations=None, *, b=B):
    # Replicate scatter with a variance proportional to the signal (counting statistics),
    # the case 1/x weighting is made for: ±0.2/√x % about the line.
    scatter = {x: spread(0.2 / np.sqrt(x), 3) for x in LEVELS}
    points = curve_points(LEVELS, deviations={**scatter, **(deviations or {})}, replicates=3,
                          a=A, b=b, analyte=CU)
    assert_fit_is_designed(points, weighting="1/x", a=A, b=b)
    return points


def verification(nominal, deviation_pct, cell, *, b=B):
    """An ICV/CCV (a QC sample) reading back ``deviation_pct`` off its nominal."""
    return Point(CU, float(nominal), A + b * nominal * (1 + deviation_pct / 100), cell,
                 sample_type=SampleType.QC)


def blank(share_of_lowest_pct, cell="Run!D80"):
    lowest = A + B * LEVELS[0]  # the lowest standards average onto the line
    return Point(CU, 0.0, share_of_lowest_pct / 100 * lowest, cell, sample_type=SampleType.BLANK)


CLEAN_QC = (verification(1.0, 2.0, "Run!D90"), verification(1.0, -3.0, "Run!D91"),
            verification(0.01, 12.0, "Run!D92"))


def judge(points, **options):
    run = make_run(points, file="fernbrook_cu_icp-oes-2.csv")
    return evaluate_run(run, profile=load_profile("plasma-spectrometry"), **options).curves[0]


def by_id(curve):
    return {c.id: c for c in curve.checks}


def test_a_clean_icp_run_is_accepted_with_1_over_x_and_the_blank_not_fitted():
    curve = judge(standards() + [blank(20)] + list(CLEAN_QC))
    assert curve.verdict is CurveVerdict.ACCEPTED, [c for c in curve.checks
                                                    if c.verdict is Verdict.FAIL]
    assert curve.fit.weighting.value == "1/x"
    assert all(s.point.concentration != 0 for s in curve.standards if s.used)
    checks = by_id(curve)
    assert checks["qc"].verdict is Verdict.PASS and checks["blank"].verdict is Verdict.PASS
    # No archive was searched: the slope comparison says so and does not hold the curve.
    assert checks["slope-reference"].verdict is Verdict.NOT_EVALUATED
    assert "no archive was searched" in checks["slope-reference"].detail


@pytest.mark.parametrize(("pct", "verdict"), [(9.9, Verdict.PASS), (10.1, Verdict.FAIL)])
def test_calibration_verification_within_10_pct(pct, verdict):
    # 6010D / 6020B / 200.8: ICV and CCV within ±10 % (from memory); every one must pass.
    qcs = [verification(1.0, 2.0, "Run!D90"), verification(1.0, -pct, "Run!D91")]
    curve = judge(standards() + [blank(20)] + qcs)
    check = by_id(curve)["qc"]
    assert check.verdict is verdict
    assert (curve.verdict is CurveVerdict.REJECTED) is (verdict is Verdict.FAIL)


def test_environmental_verification_is_not_judged_at_the_bioanalytical_15_pct():
    # A CCV 12 % off passes ICH M10's ±15 % (from memory) but not the plasma methods' ±10 %.
    qcs = [verification(1.0, 12.0, "Run!D90"), verification(0.5, 1.0, "Run!D91")]
    curve = judge(standards() + [blank(20)] + qcs)
    assert by_id(curve)["qc"].verdict is Verdict.FAIL
    assert curve.verdict is CurveVerdict.REJECTED
    # ICH M10's QC design (low, medium, high, in duplicate; from memory) for the comparison.
    bio_qcs = qcs + [verification(0.5, -2.0, "Run!D92"), verification(1.0, 3.0, "Run!D93"),
                     verification(2.0, 1.0, "Run!D94"), verification(2.0, -1.0, "Run!D95")]
    bio = evaluate_run(make_run(standards() + bio_qcs), profile=load_profile("bioanalytical"))
    check = by_id(bio.curves[0])["qc"]
    assert check.verdict is Verdict.PASS and "within ±15 % of nominal" in check.detail


@pytest.mark.parametrize(("pct", "verdict"), [(29.9, Verdict.PASS), (30.1, Verdict.FAIL)])
def test_low_level_check_at_the_reporting_limit_within_30_pct(pct, verdict):
    qcs = [verification(1.0, 0.0, "Run!D90"), verification(0.01, pct, "Run!D92")]
    curve = judge(standards() + [blank(20)] + qcs)
    assert by_id(curve)["qc"].verdict is verdict


@pytest.mark.parametrize(("pct", "verdict"), [(9.9, Verdict.PASS), (10.1, Verdict.FAIL)])
def test_every_standard_read_back_within_10_pct(pct, verdict):
    curve = judge(standards({0.5: spread(pct, 3)}) + [blank(20)] + list(CLEAN_QC))
    check = by_id(curve)["back-calculation"]
    assert check.verdict is verdict
    assert by_id(curve)["correlation"].verdict is Verdict.PASS  # r² alone would pass it
    assert (curve.verdict is CurveVerdict.REJECTED) is (verdict is Verdict.FAIL)


@pytest.mark.parametrize(("pct", "verdict"), [(29.9, Verdict.PASS), (30.1, Verdict.FAIL)])
def test_lowest_standard_within_30_pct(pct, verdict):
    curve = judge(standards({0.01: spread(pct, 3)}) + [blank(20)] + list(CLEAN_QC))
    assert by_id(curve)["back-calculation"].verdict is verdict


@pytest.mark.parametrize(("share", "verdict"), [(99.0, Verdict.PASS), (101.0, Verdict.FAIL)])
def test_blank_below_the_reporting_limit(share, verdict):
    curve = judge(standards() + [blank(share)] + list(CLEAN_QC))
    check = by_id(curve)["blank"]
    assert check.verdict is verdict and check.value == pytest.approx(share, rel=1e-9)
    assert curve.verdict is (CurveVerdict.ACCEPTED if verdict is Verdict.PASS
                             else CurveVerdict.NEEDS_REVIEW)


def test_r_0998_is_judged_as_r_squared_for_the_weighted_fit():
    # The weighted coefficient of determination, computed with numpy outside calib.
    points = standards({5.0: spread(6, 3)})
    curve = judge(points + [blank(20)] + list(CLEAN_QC))
    check = by_id(curve)["correlation"]
    x = np.array([p.concentration for p in points])
    y = np.array([p.response for p in points])
    w = 1 / x
    fitted = A + B * x
    ybar = np.sum(w * y) / np.sum(w)
    r2 = 1 - np.sum(w * (y - fitted) ** 2) / np.sum(w * (y - ybar) ** 2)
    assert check.limit == 0.996 and check.value == pytest.approx(r2, rel=1e-9)


def _history(n=10, mean=B):
    rng = np.random.default_rng(4)
    slopes = list(mean * (1 + rng.normal(0, 0.01, n)))
    slopes = [s - (np.mean(slopes) - mean) for s in slopes]  # mean exactly B
    return {CU: SlopeHistory(tuple(slopes), tuple(f"CR-{i:012X}" for i in range(n)),
                             "records.sqlite", "linear", "1/x")}


@pytest.mark.parametrize(("pct", "verdict"), [(-9.9, Verdict.PASS), (-10.1, Verdict.FAIL),
                                              (-15.0, Verdict.FAIL), (9.9, Verdict.PASS)])
def test_slope_against_the_recent_accepted_slopes(pct, verdict):
    # The 12-day Cu case: a curve 15 % less sensitive than the last ten accepted ones goes to a
    # reviewer even though every standard reads back on its own line.
    b = B * (1 + pct / 100)
    qcs = [verification(1.0, 0.0, "Run!D90", b=b)]
    curve = judge(standards(b=b) + qcs, slope_history=_history())
    check = by_id(curve)["slope-reference"]
    assert check.verdict is verdict and check.value == pytest.approx(pct, abs=1e-6)
    assert check.limit == 10
    assert by_id(curve)["back-calculation"].verdict is Verdict.PASS
    assert (curve.verdict is CurveVerdict.NEEDS_REVIEW) is (verdict is Verdict.FAIL)


def test_the_slope_needs_five_earlier_curves():
    curve = judge(standards() + list(CLEAN_QC), slope_history={
        CU: SlopeHistory((B, B, B, B), ("a", "b", "c", "d"), "records.sqlite", "linear", "1/x")})
    check = by_id(curve)["slope-reference"]
    assert check.verdict is Verdict.NOT_EVALUATED and "at least 5 needed" in check.detail
