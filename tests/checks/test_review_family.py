"""The review family (Holm across the review-level tests) and the profile rules of issue 15.

Holm's adjusted p-values are checked against statsmodels' multipletests (test_sizes.py); here the
decisions, the words, the profile table and its refusals, and the shipped profiles' cases.
"""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from calib.checks import CurveVerdict, Verdict, evaluate_run, parse_profile
from calib.checks.family import ReviewFamily, apply_family
from calib.checks.profile import load_profile
from calib.checks.result import CheckResult, Severity
from calib.errors import ProfileError
from calib.run import Point
from tests.checks.runs import make_run


def _test(check_id: str, p: float, verdict: Verdict, severity: Severity = Severity.REVIEW):
    return CheckResult(check_id, check_id, verdict, severity, p, 0.05, "figures.",
                       statistic="t", statistic_value=1.0, p_value=p, alpha=0.05,
                       passes_when="p ≥ α")


def test_holm_confirms_only_what_the_family_level_allows() -> None:
    checks = [
        _test("intercept-zero", 0.03, Verdict.FAIL),  # left out: keeps its own 5 %
        _test("lack-of-fit", 0.001, Verdict.FAIL),
        _test("drift", 0.02, Verdict.FAIL),
        _test("outliers", 0.5, Verdict.PASS),
        _test("quadratic-term", 0.004, Verdict.FAIL, Severity.INFO),  # info: not a member
    ]
    out = apply_family(checks, ReviewFamily(0.01, ("intercept-zero",)))
    adjusted = multipletests([0.001, 0.02, 0.5], method="holm")[1]  # statsmodels
    assert out[0] == checks[0] and out[4] == checks[4]
    assert out[1].verdict is Verdict.FAIL and out[1].adjusted_p == pytest.approx(adjusted[0])
    assert out[1].detail.endswith("Review family (3 diagnostics, Holm at 0.01): adjusted "
                                  "p = 0.003 < 0.01.")
    assert out[2].verdict is Verdict.PASS and out[2].adjusted_p == pytest.approx(adjusted[1])
    assert out[2].p_value == 0.02 and out[2].family_alpha == 0.01
    assert out[2].detail.endswith("adjusted p = 0.04 ≥ 0.01, so this alone does not send the "
                                  "curve to review (raw p = 0.02 < 0.05 on its own).")
    assert out[3].verdict is Verdict.PASS and out[3].adjusted_p == pytest.approx(adjusted[2])


def test_without_a_family_every_check_keeps_its_own_decision() -> None:
    checks = [_test("drift", 0.02, Verdict.FAIL)]
    assert apply_family(checks, None) == tuple(checks)


PROFILE = 'name = "f"\nversion = "1"\n{table}\n[[rules]]\nid = "outliers"\nseverity = "review"\n'


@pytest.mark.parametrize(("table", "message"), [
    ("[review_family]\nalpha = 0.7\n",
     "profile, line 3: [review_family] alpha must be a number above 0 and at most 0.5, got 0.7"),
    ("[review_family]\nalpha = true\n",
     "profile, line 3: [review_family] alpha must be a number above 0 and at most 0.5, got True"),
    ("[review_family]\nmethod = \"holm\"\n",
     "profile, line 3: unknown key 'method' in [review_family]; expected one of alpha, leave_out"),
    ("[review_family]\nleave_out = \"intercept-zero\"\n",
     "profile, line 3: [review_family] leave_out must be a list of check ids"),
    ("[review_family]\nleave_out = [\"intercept-0\"]\n",
     "profile, line 3: [review_family] leave_out names unknown rule id 'intercept-0'; known: "),
    ("review_family = 1\n", "profile, line 3: 'review_family' must be a table"),
])
def test_a_malformed_family_is_refused_with_the_line(table: str, message: str) -> None:
    with pytest.raises(ProfileError) as info:
        parse_profile(PROFILE.format(table=table))
    assert str(info.value).startswith(message)


def test_every_shipped_profile_declares_the_family() -> None:
    # default: 0.5 %, so that with its intercept t-test at 5 % outside the family at most
    # 5.5 % of sound curves go to review (issue 15: ≤ 6 %); the others: 1 %.
    assert load_profile("default").review_family == ReviewFamily(0.005, ("intercept-zero",))
    for name in ("bioanalytical", "environmental", "iso-8466", "assay-linearity",
                 "plasma-spectrometry"):
        family = load_profile(name).review_family
        assert family == ReviewFamily(0.01, ("intercept-zero",)), name


def test_bioanalytical_sends_a_gross_outlier_to_review() -> None:
    # Invented KX-214 curve: 8 levels in duplicate, fitted 1/x², 1 % CV (seeded).  The sound
    # curve passes the outlier test; the same curve with one standard 8 σ high does not.
    levels = (1, 2, 5, 10, 50, 100, 500, 1000)
    rng = np.random.default_rng(8)
    points, row = [], 2
    for x in levels:
        for _ in range(2):
            y = 0.0123 * x * (1 + 0.01 * rng.standard_normal())
            points.append(Point("KX-214", float(x), y, f"Run!D{row}", injection_order=row))
            row += 1
    sound = evaluate_run(make_run(points), profile=load_profile("bioanalytical")).curves[0]
    assert {c.id: c for c in sound.checks}["outliers"].verdict is Verdict.PASS
    # One standard 8 σ (8 % at 1 % CV) high: within M10's ±15 %, a gross outlier statistically.
    bad = list(points)
    p = bad[9]
    bad[9] = Point(p.analyte, p.concentration, p.response * 1.08, p.source_cell,
                   injection_order=p.injection_order)
    curve = evaluate_run(make_run(bad), profile=load_profile("bioanalytical")).curves[0]
    by_id = {c.id: c for c in curve.checks}
    assert by_id["back-calculation"].verdict is Verdict.PASS
    assert by_id["outliers"].verdict is Verdict.WARN
    assert by_id["outliers"].detail.startswith(f"Suggested outlier: {p.source_cell}: ")
    assert curve.verdict is CurveVerdict.NEEDS_REVIEW


def test_environmental_accepts_a_valid_average_response_factor() -> None:
    # Issue 15's example: RFs 1.18, 0.97, 1.02, 0.86, 1.05, 1.21 at 5…200 (invented). %RSD
    # 12.6 % ≤ 20 % (US EPA SW-846 8000D 11.5.1, from memory) — no correlation criterion
    # applies to an average RF, so the curve is accepted.
    levels = (5.0, 10.0, 20.0, 50.0, 100.0, 200.0)
    rfs = (1.18, 0.97, 1.02, 0.86, 1.05, 1.21)
    points = [Point("Nitrate", x, x * rf, f"Run!D{i + 2}") for i, (x, rf) in
              enumerate(zip(levels, rfs))]
    curve = evaluate_run(make_run(points), profile=load_profile("environmental"),
                         model="mean-rf").curves[0]
    by_id = {c.id: c for c in curve.checks}
    rsd = 100 * np.std(rfs, ddof=1) / np.mean(rfs)
    assert by_id["rf-rsd"].value == pytest.approx(rsd, rel=1e-9)
    assert by_id["correlation"].verdict is Verdict.PASS and by_id["correlation"].limit is None
    assert by_id["correlation"].detail.startswith("Not applied to an average response factor: "
                                                  "r² = ")
    assert "(uncentred, as the curve has no intercept" in by_id["correlation"].detail
    assert curve.verdict is CurveVerdict.ACCEPTED, curve.reasons
