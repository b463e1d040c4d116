"""The QC acceptance rule at its boundaries, and as the ``qc`` check of ``calib check``.

Rule (ICH M10, 2022, section 4.4, from memory): at least 2/3 of all QCs within
±15 % of nominal (±20 % at the LLOQ) and at least 50 % at each level.
"""

from __future__ import annotations

import math
import re

import pytest

from calib.checks import evaluate_run, parse_profile
from calib.errors import ProfileError
from calib.options import SampleType
from calib.quantify.qc import QcRule, judge_qcs
from calib.run import Point, Run, SourceInfo
from tests.quantify.helpers import response_at, standards

IN, OUT = 1.05, 1.30  # found/nominal of a QC within and outside ±15 %


def qcs(pattern: dict[float, str]) -> list[tuple[str, float, float | None]]:
    """QCs per nominal level: 'y' within tolerance, 'n' outside, '-' not read back."""
    out = []
    for nominal, marks in pattern.items():
        for i, mark in enumerate(marks):
            found = None if mark == "-" else nominal * (IN if mark == "y" else OUT)
            out.append((f"QC-{nominal:g}-{i + 1}", nominal, found))
    return out


def test_four_of_six_is_two_thirds_and_passes():
    summary = judge_qcs(qcs({3: "yn", 40: "yn", 80: "yy"}), lloq=1.0)
    assert (summary.n, summary.n_within) == (6, 4)
    assert summary.share_pct == pytest.approx(200 / 3)
    assert summary.verdict == "pass"


def test_three_of_six_fails():
    summary = judge_qcs(qcs({3: "yn", 40: "yn", 80: "yn"}), lloq=1.0)
    assert summary.verdict == "fail"
    assert summary.detail.startswith("3 of 6 QCs (50.0 %) within ±15 % of nominal")


def test_six_of_nine_passes_and_five_of_nine_fails():
    assert judge_qcs(qcs({3: "yyn", 40: "yyn", 80: "yyn"}), lloq=1.0).verdict == "pass"
    assert judge_qcs(qcs({3: "yyn", 40: "ynn", 80: "yyn"}), lloq=1.0).verdict == "fail"


def test_half_at_a_level_is_enough():
    summary = judge_qcs(qcs({3: "yn", 40: "yy", 80: "yy"}), lloq=1.0)
    assert [lv.ok for lv in summary.levels] == [True, True, True]
    assert summary.levels[0].share_pct == 50.0 and summary.verdict == "pass"


def test_less_than_half_at_one_level_fails_however_good_the_rest():
    # 7 of 9 overall (77.8 %) but 1 of 3 at 3 ng/mL (33.3 %).
    summary = judge_qcs(qcs({3: "ynn", 40: "yyy", 80: "yyy"}), lloq=1.0, unit="ng/mL")
    assert summary.share_pct == pytest.approx(700 / 9)
    assert [lv.ok for lv in summary.levels] == [False, True, True]
    assert summary.verdict == "fail"
    assert "too few at 3 ng/mL (1 of 3)" in summary.detail


def test_none_at_a_level_fails():
    summary = judge_qcs(qcs({3: "nn", 40: "yy", 80: "yy"}), lloq=1.0)
    assert summary.verdict == "fail" and summary.levels[0].n_within == 0


def test_the_lloq_qc_has_the_wider_tolerance():
    # Found 18 % high at the LLOQ is within ±20 %; 16 % high at 3 ng/mL is outside ±15 %.
    summary = judge_qcs([("QC-LLOQ", 1.0, 1.18), ("QC-LLOQ2", 1.0, 1.21), ("QC-L", 3.0, 3.48)],
                        lloq=1.0)
    within = {o.sample_id: (o.at_lloq, o.allowed_pct, o.within) for o in summary.outcomes}
    assert within == {"QC-LLOQ": (True, 20.0, True), "QC-LLOQ2": (True, 20.0, False),
                      "QC-L": (False, 15.0, False)}


def test_exactly_at_the_tolerance_is_within():
    summary = judge_qcs([("QC-M", 100.0, 115.0), ("QC-M2", 100.0, 85.0)], lloq=1.0)
    assert [o.deviation_pct for o in summary.outcomes] == [15.0, -15.0]
    assert all(o.within for o in summary.outcomes)


def test_a_qc_not_read_back_counts_as_outside():
    summary = judge_qcs(qcs({3: "y-", 40: "yy", 80: "yy"}), lloq=1.0)
    assert summary.n_within == 5 and summary.verdict == "pass"
    assert "QC-3-2 (not read back)" in summary.detail


def test_no_qc_is_not_evaluated():
    summary = judge_qcs([], lloq=1.0)
    assert summary.verdict == "not-evaluated" and math.isnan(summary.share_pct)
    assert summary.detail == "No QC samples of this analyte in the batch."


def test_the_rule_takes_its_figures_from_the_profile():
    rule = QcRule.from_params({"tolerance_pct": 10, "min_pass_pct": 75}, severity="reject",
                              source="profile x")
    summary = judge_qcs(qcs({3: "yy", 40: "yy"}), lloq=1.0, rule=rule)
    # Found 5 % high is within ±10 %; every QC passes.
    assert summary.verdict == "pass" and rule.lloq_tolerance_pct == 20.0
    strict = judge_qcs([("QC", 40.0, 44.4)], lloq=1.0, rule=rule)
    assert strict.outcomes[0].within is False


# -- as a check in calib check -----------------------------------------------------------------

PROFILE = """
name = "qc-test"
version = "1"

[[rules]]
id = "qc"
severity = "reject"
"""


def run_with_qcs(found: dict[str, tuple[float, float]]) -> Run:
    points = [Point("Nitrate-N", x, y, f"Run!E{i + 5}") for i, (x, y) in enumerate(standards())]
    for i, (name, (nominal, read)) in enumerate(found.items()):
        points.append(Point("Nitrate-N", nominal, response_at(read), f"Run!E{i + 40}",
                            sample_type=SampleType.QC, sample_id=name))
    return Run(SourceInfo("run.csv", "0" * 64), tuple(points))


def qc_check(run: Run):
    assessment = evaluate_run(run, profile=parse_profile(PROFILE))
    (curve,) = assessment.curves
    (check,) = curve.checks
    return curve, check


def test_qc_check_passes_with_four_of_six():
    run = run_with_qcs({"L1": (1.5, 1.5), "L2": (1.5, 2.0), "M1": (4.0, 4.1), "M2": (4.0, 5.0),
                        "H1": (8.0, 8.1), "H2": (8.0, 7.9)})
    curve, check = qc_check(run)
    assert check.id == "qc" and check.verdict.value == "pass"
    assert check.value == pytest.approx(200 / 3, rel=1e-12) and check.limit == 66.7
    assert curve.verdict.value == "accepted"


def test_qc_check_fails_and_rejects_with_three_of_six():
    run = run_with_qcs({"L1": (1.5, 1.5), "L2": (1.5, 2.0), "M1": (4.0, 4.1), "M2": (4.0, 5.0),
                        "H1": (8.0, 8.1), "H2": (8.0, 9.9)})
    curve, check = qc_check(run)
    assert check.verdict.value == "fail" and curve.verdict.value == "rejected"
    # Read back from the fitted curve, so the deviations are near +33, +25 and +24 %.
    assert re.search(r"outside: L2 \(\+3\d\.\d %\), M2 \(\+2\d\.\d %\), H2 \(\+2\d\.\d %\)\.$",
                     check.detail)


def test_qc_check_without_qcs_is_not_evaluated():
    _, check = qc_check(run_with_qcs({}))
    assert check.verdict.value == "not-evaluated"
    assert check.detail == "The run has no QC samples of this analyte."


def test_profile_qc_parameters_are_checked():
    bad = PROFILE + "min_pass_pct = 150\n"
    with pytest.raises(ProfileError, match="profile, line 5: rule 'qc' parameter 'min_pass_pct' "
                                           "must be at most 100, got 150"):
        parse_profile(bad)


def test_a_failing_qc_rule_of_the_profile_rejects_the_batch(tmp_path):
    from calib.quantify.workflow import quantify_files
    from tests.quantify.helpers import write_run_csv, write_samples_csv

    profile = tmp_path / "lab.toml"
    profile.write_text(PROFILE.replace('name = "qc-test"', 'name = "lab"') + "\n[[rules]]\n"
                       'id = "min-levels"\nseverity = "reject"\n', encoding="utf-8")
    rows = [["QC-M", "Nitrate-N", "QC", round(response_at(4.9), 5), "", 1, 4.0],
            ["QC-M", "Nitrate-N", "QC", round(response_at(5.0), 5), "", 2, 4.0]]
    samples = write_samples_csv(tmp_path / "qc.csv", rows)
    report = quantify_files(write_run_csv(tmp_path / "run.csv", samples=False), samples,
                            profile=profile)
    # The curve itself has no QCs to judge, so its qc check is not evaluated and (severity
    # reject) sends it to review; the batch's QCs read back 22 % high and reject the batch.
    (summary,) = report.batch.qc
    assert summary.verdict == "fail" and summary.rule.severity == "reject"
    assert report.batch.verdict == "rejected"
    assert "Nitrate-N: the QC rule failed" in report.batch.reasons
