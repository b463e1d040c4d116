"""The rule catalogue one rule at a time, the profile format's new parts, exclusions and ranges."""

from __future__ import annotations

import math
from types import SimpleNamespace

import pytest

from calib.checks import CurveVerdict, Verdict, evaluate_run, parse_profile
from calib.checks.exclusions import Exclusion, apply_exclusions, parse_exclusion
from calib.checks.history import SlopeHistory, slope_history
from calib.checks.narrowing import RangeError, WorkingRange, parse_range
from calib.checks.result import CheckResult, Severity, verdict_reasons
from calib.errors import InputError, ProfileError
from calib.options import SampleType
from calib.run import Point
from tests.checks.runs import curve_points, make_run, spread

HEAD = 'name = "lab-sop"\nversion = "1"\n\n[defaults]\nweighting = "none"\n\n'


def profile(rules: str, head: str = HEAD):
    return parse_profile(head + rules, origin="sop.toml")


def check_of(points, rules, rule_id, **options):
    curve = evaluate_run(make_run(points), profile=profile(rules), **options).curves[0]
    return {c.id: c for c in curve.checks}[rule_id], curve


LEVELS = (1, 2, 4, 6, 8, 10)


# -- the profile format ---------------------------------------------------------------------


@pytest.mark.parametrize(("rules", "message"), [
    ('[[rules]]\nid = "correlation"\nseverity = "reject"\nmin_r = 0.995\n',
     ("sop.toml, line 7: rule 'correlation' needs a relative-error or lack-of-fit rule beside it "
     "(back-calculation, rse, lack-of-fit with severity reject or review): r or r² alone never "
     "shows that a curve is linear (AMC Technical Brief No. 3; Van Loco et al., Accred. Qual. "
     "Assur. 2002)")),
    (('[[rules]]\nid = "rse"\nseverity = "info"\n\n'
     '[[rules]]\nid = "correlation"\nseverity = "review"\nmin_r = 0.995\n'),
     "sop.toml, line 11: rule 'correlation' needs a relative-error or lack-of-fit rule"),
    ('[[rules]]\nid = "correlation"\nseverity = "review"\n',
     "sop.toml, line 7: rule 'correlation': give min_r, min_r_squared or both"),
    ('[[rules]]\nid = "slope-reference"\nseverity = "review"\nexpected = 2.0\nrecent_curves = 5\n',
     "line 7: rule 'slope-reference': give either expected or recent_curves, not both"),
    ('[[rules]]\nid = "slope-reference"\nseverity = "review"\nrecent_curves = 5\n',
     "line 7: rule 'slope-reference': recent_curves needs tolerance_pct"),
    ('[[rules]]\nid = "intercept-fraction"\nseverity = "review"\nlevel = 2\nconcentration = 5.0\n',
     "line 7: rule 'intercept-fraction': give either concentration or level, not both"),
    ('[[rules]]\nid = "back-calculation"\nseverity = "reject"\nmin_level_pass_pct = 50\n',
     "line 7: rule 'back-calculation': min_level_pass_pct needs min_passing_levels beside it"),
    ('[[rules]]\nid = "back-calculation"\nseverity = "reject"\nends_must_pass = "yes"\n',
     "line 7: rule 'back-calculation' parameter 'ends_must_pass' must be true or false, got 'yes'"),
    ('[[rules]]\nid = "back-calculation"\nseverity = "reject"\ntolerance_pct = 150\n',
     "line 7: rule 'back-calculation' parameter 'tolerance_pct' must be at most 100, got 150"),
    ('[[rules]]\nid = "blank"\nseverity = "review"\nmax_pct_of_lloq = 0\n',
     "line 7: rule 'blank' parameter 'max_pct_of_lloq' must be above 0, got 0"),
    ('[[rules]]\nid = "blank"\nseverity = "review"\nsource = 20\n',
     "line 7: rule 'blank' 'source' must be a text"),
])
def test_profile_errors_name_the_line(rules, message):
    with pytest.raises(ProfileError) as info:
        profile(rules)
    assert message in str(info.value)


def test_correlation_beside_a_relative_error_rule_is_accepted():
    p = profile('[[rules]]\nid = "back-calculation"\nseverity = "reject"\n\n'
                '[[rules]]\nid = "correlation"\nseverity = "reject"\nmin_r = 0.995\n'
                'source = "US EPA 8000D (from memory)"\n')
    assert [r.id for r in p.rules] == ["back-calculation", "correlation"]
    assert p.rules[1].source == "US EPA 8000D (from memory)"
    # An info correlation judges nothing, so an info companion is enough.
    profile('[[rules]]\nid = "lack-of-fit"\nseverity = "info"\n\n'
            '[[rules]]\nid = "correlation"\nseverity = "info"\nmin_r_squared = 0.99\n')


@pytest.mark.parametrize(("table", "message"), [
    ("[narrowing]\npropose = 1\n", "sop.toml, line 7: [narrowing] propose must be true or false"),
    ("[narrowing]\nmax_dropped_levels = 0\n",
     "[narrowing] max_dropped_levels must be a whole number from 1 to 10, got 0"),
    ("[narrowing]\nlevels = 2\n",
     "unknown key 'levels' in [narrowing]; expected one of propose, max_dropped_levels"),
])
def test_narrowing_table_errors(table, message):
    rules = '[[rules]]\nid = "min-levels"\nseverity = "reject"\n'
    with pytest.raises(ProfileError) as info:
        parse_profile(HEAD + table + rules, origin="sop.toml")
    assert message in str(info.value)


def test_narrowing_defaults_to_not_proposing():
    p = profile('[[rules]]\nid = "min-levels"\nseverity = "reject"\n')
    assert not p.narrowing.propose and p.narrowing.max_dropped_levels == 1


# -- standards: back-calculation, replicates, exclusions -------------------------------------------


BACK = ('[[rules]]\nid = "back-calculation"\nseverity = "reject"\ntolerance_pct = 15\n'
        'lowest_level_tolerance_pct = 20\nmin_pass_pct = 0\nmin_passing_levels = 6\n'
        'min_level_pass_pct = 50\n')


@pytest.mark.parametrize(("pct", "good"), [(14.0, 7), (16.0, 6)])
def test_levels_pass_on_their_share(pct, good):
    # Seven levels, level 6 with four replicates at ±pct: at ±16 % none passes and the level
    # fails, leaving 6 of 7 levels: still the 6 the rule asks for.
    points = curve_points((1, 2, 4, 6, 8, 10, 12), deviations={6: spread(pct, 4)})
    check, _ = check_of(points, BACK, "back-calculation")
    assert check.verdict is Verdict.PASS
    assert f"{good} of 7 levels pass (at least 50 % of its standards within tolerance)" in check.detail


def test_half_of_a_level_passing_is_enough_but_less_is_not():
    # Quadruplicate level 6 with two at ±16 % and two at ±1 %: exactly 50 % pass.
    half = {6: (16, 1, -16, -1)}
    check, _ = check_of(curve_points(LEVELS, deviations=half), BACK, "back-calculation")
    assert "6 of 6 levels pass" in check.detail and check.verdict is Verdict.PASS
    # Triplicate at +16, −16, 0: one of three (33 %) passes: the level fails, 5 of 6 levels.
    third = {6: spread(16, 3)}
    check, _ = check_of(curve_points(LEVELS, deviations=third), BACK, "back-calculation")
    assert "5 of 6 levels pass" in check.detail and check.verdict is Verdict.FAIL
    assert "only 5 levels pass" in check.detail


def test_min_replicates_per_level_and_at_the_ends():
    rules = '[[rules]]\nid = "min-replicates"\nseverity = "review"\nmin_replicates = 3\n'
    points = curve_points(LEVELS, deviations={1: spread(1, 3), 10: spread(1, 3)})
    check, _ = check_of(points, rules, "min-replicates")
    assert check.verdict is Verdict.FAIL and check.value == 2 and check.limit == 3
    assert "too few at 2 (2), 4 (2), 6 (2), 8 (2)" in check.detail
    check, _ = check_of(points, rules + "ends_only = true\n", "min-replicates")
    assert check.verdict is Verdict.PASS and "the lowest and highest level" in check.detail


@pytest.mark.parametrize(("excluded", "verdict"), [(3, Verdict.PASS), (4, Verdict.FAIL)])
def test_exclusions_share_at_its_boundary(excluded, verdict):
    # Twelve standards, at most 25 %: 3 left out (25 %) pass, 4 (33 %) fail.
    rules = '[[rules]]\nid = "exclusions"\nseverity = "reject"\nmax_excluded_pct = 25\n'
    cells = ["Run!D2", "Run!D3", "Run!D12", "Run!D13"][:excluded]
    check, _ = check_of(curve_points(LEVELS), rules, "exclusions",
                        exclusions=[Exclusion(c, "dropped for the test") for c in cells])
    assert check.verdict is verdict and check.value == pytest.approx(100 * excluded / 12)
    assert "Run!D2 (1): dropped for the test" in check.detail


def test_interior_exclusion_refused_only_when_the_profile_says_so():
    rules = '[[rules]]\nid = "exclusions"\nseverity = "reject"\n'
    inner = [Exclusion("Run!D6", "bubble")]
    check, _ = check_of(curve_points(LEVELS), rules, "exclusions", exclusions=inner)
    assert check.verdict is Verdict.PASS
    check, curve = check_of(curve_points(LEVELS), rules + "allow_interior = false\n",
                            "exclusions", exclusions=inner)
    assert check.verdict is Verdict.FAIL and curve.verdict is CurveVerdict.REJECTED
    assert "only from the ends (narrow the range instead)" in check.detail


# -- acceptance figures: correlation, RSE, intercept share, blank -----------------------------------


def test_rse_is_the_epa_formula_and_needs_degrees_of_freedom():
    # US EPA 8000D §11.5.4.2 (SPEC §4): deviations ±10 % at level 2, ±0.5 % elsewhere, N = 12, p = 2.
    rules = '[[rules]]\nid = "rse"\nseverity = "reject"\nmax_rse_pct = 5\n'
    check, _ = check_of(curve_points(LEVELS, deviations={2: spread(10)}), rules, "rse")
    by_hand = 100 * math.sqrt((2 * 0.1**2 + 10 * 0.005**2) / 10)
    assert check.value == pytest.approx(by_hand, rel=1e-9)  # √0.002025 = 4.50 %
    assert check.verdict is Verdict.PASS and "RSE = 4.50 %" in check.detail
    check, _ = check_of(curve_points(LEVELS, deviations={2: spread(11.2)}), rules, "rse")  # 5.04 %
    assert check.verdict is Verdict.FAIL
    check, _ = check_of(curve_points((0, 1, 2), replicates=1), rules, "rse")  # zero is fitted
    assert check.verdict is Verdict.NOT_EVALUATED and "no degrees of freedom" in check.detail


def test_correlation_uses_r_squared_for_origin_fits_and_says_it_is_uncentred():
    rules = ('[[rules]]\nid = "rse"\nseverity = "reject"\n\n[[rules]]\nid = "correlation"\n'
             'severity = "reject"\nmin_r = 0.995\nmin_r_squared = 0.99\n')
    check, _ = check_of(curve_points(LEVELS, a=0.0), rules, "correlation", model="origin")
    assert check.limit == 0.99 and "r² =" in check.detail and "uncentred" in check.detail
    check, _ = check_of(curve_points(LEVELS), rules, "correlation")
    assert check.limit == 0.995 and "|r| =" in check.detail


def test_intercept_fraction_at_a_named_level_or_concentration():
    # y = 0.2 + 1·x: the intercept is 0.2 / (0.2 + 1·x) of the response at x.
    points = curve_points(LEVELS, a=0.2, b=1.0)
    rules = '[[rules]]\nid = "intercept-fraction"\nseverity = "review"\nmax_pct = 5\n'
    check, _ = check_of(points, rules + "level = 6\n", "intercept-fraction")
    assert check.value == pytest.approx(100 * 0.2 / 10.2) and check.verdict is Verdict.PASS
    assert "level 6 (10)" in check.detail
    check, _ = check_of(points, rules + "concentration = 2.0\n", "intercept-fraction")
    assert check.value == pytest.approx(100 * 0.2 / 2.2) and check.verdict is Verdict.FAIL
    check, _ = check_of(points, rules, "intercept-fraction")  # the middle of 1..10: 5.5
    assert check.value == pytest.approx(100 * 0.2 / 5.7) and "middle of the range" in check.detail
    check, _ = check_of(points, rules + "level = 7\n", "intercept-fraction")
    assert check.verdict is Verdict.NOT_EVALUATED
    assert check.detail == "the profile names level 7, but the fit has 6 non-zero levels"
    check, _ = check_of(points, rules, "intercept-fraction", model="origin")
    assert check.detail == "the origin model has no intercept"


def blank_point(response, *, cell="Run!D80", kind=SampleType.BLANK, reason=None, **kw):
    return Point("KX-214", 0.0, response, cell, sample_type=kind,
                 included=reason is None, exclusion_reason=reason, **kw)


BLANK = '[[rules]]\nid = "blank"\nseverity = "review"\nmax_pct_of_lloq = 20\n'


def test_blank_not_detected_passes_and_excluded_blank_is_not_judged():
    lloq = 0.002 + 0.0123  # mean response of the designed LLOQ pair
    nd = blank_point(math.nan, cell="Run!D81", reason="response not detected ('ND' in the file)")
    out = blank_point(0.5 * lloq, cell="Run!D82", reason="vial mislabelled")
    ok = blank_point(0.1 * lloq, cell="Run!D83", kind=SampleType.ZERO)
    check, _ = check_of(curve_points(LEVELS) + [nd, out, ok], BLANK, "blank")
    assert check.verdict is Verdict.PASS and check.value == pytest.approx(10.0)
    assert "Run!D81 (blank): not detected" in check.detail
    assert "not judged: Run!D82 (excluded: vial mislabelled)" in check.detail
    check, _ = check_of(curve_points(LEVELS), BLANK, "blank")
    assert check.verdict is Verdict.NOT_EVALUATED
    assert check.detail == "the run has no blank or zero sample for KX-214"


def test_blank_with_internal_standard_compares_raw_responses():
    # With an internal standard the fitted response is a ratio; blanks compare raw areas, and a
    # blank without internal standard (no ratio) is still judged on its raw area.
    points = []
    for p in curve_points(LEVELS):
        area = p.response * 1e5
        points.append(Point(p.analyte, p.concentration, area / 1e5, p.source_cell,
                            analyte_response=area, is_response=1e5))
    lloq_area = 1e5 * (0.002 + 0.0123)
    blank = blank_point(math.nan, analyte_response=0.3 * lloq_area, is_response=None,
                        reason="no internal-standard response (a blank without internal "
                               "standard); the ratio cannot be formed")
    rules = BLANK + "max_is_pct_of_lloq = 5\n"
    check, _ = check_of(points + [blank], rules, "blank")
    assert check.verdict is Verdict.FAIL and check.value == pytest.approx(30.0)
    assert "Blank analyte responses" in check.detail
    leaky = blank_point(0.1 * lloq_area / 0.06e5, analyte_response=0.1 * lloq_area,
                        is_response=0.06e5)
    check, _ = check_of(points + [leaky], rules, "blank")
    assert "Run!D80 internal standard 6.0 %" in check.detail and check.verdict is Verdict.FAIL


# -- slope drift against the archive --------------------------------------------------------------


DRIFT = ('[[rules]]\nid = "slope-reference"\nseverity = "review"\nrecent_curves = 4\n'
         'tolerance_pct = 10\n')


def history(*slopes):
    return SlopeHistory(tuple(slopes), tuple(f"CR-{i:012d}" for i in range(len(slopes))),
                        "records.sqlite", "linear", "none")


@pytest.mark.parametrize(("mean_factor", "verdict"), [(1 / 1.099, Verdict.PASS),
                                                      (1 / 1.101, Verdict.FAIL)])
def test_slope_drift_against_recent_accepted_curves(mean_factor, verdict):
    # Today's slope is the designed 0.0123; the last four archived slopes average 0.0123/1.099.
    mean = 0.0123 * mean_factor
    old = history(5.0, mean * 0.98, mean * 1.02, mean * 0.99, mean * 1.01)  # 5.0 is too old
    check, _ = check_of(curve_points(LEVELS), DRIFT, "slope-reference",
                        slope_history={"KX-214": old})
    assert check.value == pytest.approx(100 * (0.0123 - mean) / mean, rel=1e-9)
    assert check.verdict is verdict and check.limit == 10
    assert "the 4 most recent accepted curves in records.sqlite" in check.detail


def test_slope_drift_needs_an_archive_and_enough_curves():
    check, _ = check_of(curve_points(LEVELS), DRIFT, "slope-reference")
    assert check.verdict is Verdict.NOT_EVALUATED and "no archive was searched" in check.detail
    check, _ = check_of(curve_points(LEVELS), DRIFT, "slope-reference",
                        slope_history={"KX-214": history(0.0123, 0.0124)})
    assert check.verdict is Verdict.NOT_EVALUATED
    assert check.detail.startswith("2 earlier accepted curves of KX-214 (linear model, "
                                   "weighting none) in records.sqlite; at least 3 needed")


def test_slope_history_keeps_accepted_curves_fitted_the_same_way():
    def curve(seq, slope, *, accepted=True, weighting="none", date="2026-11-0"):
        figures = SimpleNamespace(model="linear", weighting=weighting, slope=slope)
        return SimpleNamespace(record_id=f"CR-{seq}", seq=seq, run_date=f"{date}{seq}",
                               accepted=accepted, figures=figures)
    found = slope_history([curve(3, 1.3), curve(1, 1.1), curve(2, 9.0, accepted=False),
                           curve(4, 1.4, weighting="1/x"), curve(5, None)],
                          model="linear", weighting="none", source="lab.sqlite")
    assert found.slopes == (1.1, 1.3) and found.records == ("CR-1", "CR-3")


# -- exclusions and ranges ---------------------------------------------------------------------


def test_exclusions_by_cell_sheet_optional_or_by_sample_name():
    points = [Point("A", 1.0, 1.0, "Run!C2", sample_id="Cal 1"),
              Point("B", 1.0, 2.0, "Run!D2", sample_id="Cal 1"),
              Point("A", 2.0, 2.0, "'run 2.csv'!$C$3", included=False,
                    exclusion_reason="no response in the file")]
    run = make_run(points)
    new, applied = apply_exclusions(run, [parse_exclusion("run!c2=bubble"),
                                          parse_exclusion("*:cal  1 = vial cracked"),
                                          parse_exclusion("'run 2.csv'!C3=checked")])
    assert [p.included for p in new.points] == [False, False, False]
    assert new.points[0].exclusion_reason == "bubble; vial cracked"
    assert new.points[2].exclusion_reason == "no response in the file; checked"
    assert applied[1].cells == ("Run!C2", "Run!D2") and applied[1].analytes == ("A", "B")


def test_exclusion_errors():
    run = make_run([Point("A", 1.0, 1.0, "Run!C2"), Point("A", 2.0, 2.0, "Cal!C2")])
    with pytest.raises(InputError) as info:
        apply_exclusions(run, [Exclusion("C2", "x")])
    assert ("exclusion 'C2' is ambiguous: more than one sheet has that cell (Cal!C2, Run!C2); "
            "name the sheet, e.g. Run!C2") in str(info.value)
    with pytest.raises(InputError) as info:
        apply_exclusions(run, [Exclusion("Z9", "x")])
    assert str(info.value).startswith("kestrel-kx214.csv: exclusion 'Z9' matches no point")
    with pytest.raises(ValueError, match="exclusion '=reason' names no cell or sample"):
        parse_exclusion("=reason")
    with pytest.raises(ValueError, match="has no reason: write CELL=REASON"):
        parse_exclusion("Run!C2=  ")


@pytest.mark.parametrize(("text", "message"), [
    ("5..2", "working range 5 to 2: the low end must be 0 or more and below the high end"),
    ("2..5=", "range '2..5=' gives '=' but no reason after it"),
    ("two..5", "range 'two..5' is not of the form LOW..HIGH"),
])
def test_range_errors(text, message):
    with pytest.raises(ValueError) as info:
        parse_range(text)
    assert message in str(info.value)


def test_range_for_an_unknown_analyte():
    with pytest.raises(RangeError, match="range Nitrite:2..10 names no analyte of the run; its "
                                         "analytes are KX-214"):
        evaluate_run(make_run(curve_points(LEVELS)),
                     profile=profile('[[rules]]\nid = "min-levels"\nseverity = "reject"\n'),
                     ranges=[WorkingRange(2, 10, "x", analyte="Nitrite")])


def test_reasons_put_failing_reject_rules_first_and_leave_info_out():
    def c(i, sev, verdict):
        return CheckResult(i, i.title(), Verdict(verdict), Severity(sev), None, None, f"{i} why")
    reasons = verdict_reasons([c("a", "review", "fail"), c("b", "info", "fail"),
                               c("c", "reject", "not-evaluated"), c("d", "reject", "fail"),
                               c("e", "review", "warn")], unfitted_reason="")
    assert [r.split(" ")[0] for r in reasons] == ["D", "A", "C", "E"]
    assert reasons[0] == "D (d, reject rule: fail): d why"
