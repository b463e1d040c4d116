"""Each shipped profile on invented runs built to sit just inside and just outside its limits.

The runs come from :mod:`tests.checks.runs`: replicate standards placed
symmetrically about a designed line, so each standard's back-calculated
deviation is known exactly (numpy's weighted fit confirms the line).  The
limits are the guidance figures of SPEC §5 (from memory there): ICH M10 for
``bioanalytical``, US EPA SW-846 8000D for ``environmental``, ICH Q2(R2) and
common practice for ``assay-linearity``, ISO 8466-1 for ``iso-8466``.
"""

from __future__ import annotations

import math
import re
import tomllib

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import optimize, stats

from calib.checks import CurveVerdict, Verdict, evaluate_run, load_profile, parse_profile
from calib.checks.exclusions import Exclusion
from calib.checks.narrowing import RangeError, WorkingRange
from calib.checks.profile import shipped_profiles
from calib.options import SampleType
from calib.record import build_record
from calib.run import Point
from tests.checks.runs import (
    BIO_LEVELS,
    EPA_LEVELS,
    assert_fit_is_designed,
    curve_points,
    make_run,
    qc_points,
    spread,
)

SHIPPED = ("default", "bioanalytical", "environmental", "assay-linearity", "iso-8466",
           "plasma-spectrometry")


def by_id(curve):
    return {c.id: c for c in curve.checks}


def judge(points, profile, **options):
    return evaluate_run(make_run(points), profile=load_profile(profile), **options).curves[0]


# -- every shipped profile ------------------------------------------------------------------


def test_the_five_profiles_are_shipped_and_load():
    assert set(shipped_profiles()) == set(SHIPPED)
    for name in SHIPPED:
        profile = load_profile(name)
        # A shipped profile's version goes up whenever its judgement changes (records cite it).
        want = "2" if name in ("default", "plasma-spectrometry") else "1"
        assert profile.name == name and profile.version == want and len(profile.sha256) == 64


@pytest.mark.parametrize("name", SHIPPED)
def test_every_limit_names_its_source_and_the_lab_must_confirm(name):
    text = shipped_profiles()[name]
    header = text.split("\nname = ")[0].lower()
    assert "confirm" in header, "the opening note tells the lab to confirm the limits"
    assert "from memory" in text.lower()
    data = tomllib.loads(text)
    assert data["sources"], "the profile lists its sources"
    blocks = re.split(r"^\[\[rules\]\]\s*$", text, flags=re.MULTILINE)[1:]
    assert len(blocks) == len(data["rules"])
    for block, rule in zip(blocks, data["rules"]):
        limits = [k for k in rule if k not in ("id", "severity", "source", "note")]
        if not limits:
            continue
        said = (rule.get("source", "") + " ".join(re.findall(r"#(.*)", block))).lower()
        assert said.strip(), f"{name}: rule {rule['id']} gives no source for its limits"
        named = any(word in said for word in
                    ("from memory", "common practice", "nist/sematech", "calib's own",
                     "our own", "ich", "epa", "iso"))
        assert named, f"{name}: rule {rule['id']}: source {said!r} names no document or practice"


def test_profiles_that_use_r_also_use_a_relative_error_or_lack_of_fit_rule():
    # AMC Technical Brief No. 3; Van Loco et al., Accred. Qual. Assur. 2002 (SPEC §5).
    for name in SHIPPED:
        ids = {r.id for r in load_profile(name).rules}
        if "correlation" in ids:
            assert ids & {"back-calculation", "rse", "lack-of-fit"}


# -- bioanalytical (ICH M10) ----------------------------------------------------------------


def bio(deviations=None, *, levels=BIO_LEVELS, extra=(), qcs=(3, 80, 800), **options):
    points = curve_points(levels, deviations=deviations) + qc_points(qcs) + list(extra)
    assert_fit_is_designed(points, weighting="1/x2")
    return judge(points, "bioanalytical", **options)


def test_bioanalytical_clean_run_is_accepted():
    curve = bio()
    assert curve.verdict is CurveVerdict.ACCEPTED
    assert curve.weighting.value == "1/x2" and curve.lloq == 1 and curve.uloq == 1000
    assert by_id(curve)["qc"].verdict is Verdict.PASS


@pytest.mark.parametrize(("levels", "verdict"), [(BIO_LEVELS[:6], CurveVerdict.ACCEPTED),
                                                 (BIO_LEVELS[:5], CurveVerdict.REJECTED)])
def test_bioanalytical_six_levels(levels, verdict):
    # ICH M10: at least six non-zero levels (from memory).
    # The QCs sit inside the shorter range (ICH M10: QCs within the calibrated range).
    curve = bio(levels=levels, qcs=(3, 40, 80))
    assert by_id(curve)["min-levels"].limit == 6
    assert curve.verdict is verdict


@pytest.mark.parametrize(("pct", "share"), [(14.9, 100.0), (15.1, 87.5)])
def test_bioanalytical_tolerance_15_pct(pct, share):
    # ±15 % of nominal at the interior levels: 15.1 % puts both standards of level 10 outside,
    # 14 of 16 still pass (≥ 75 %), so the curve stays accepted.
    check = by_id(curve := bio({10: spread(pct)}))["back-calculation"]
    assert check.value == pytest.approx(share)
    assert ("Run!D8" in check.detail) is (pct > 15)
    assert curve.verdict is CurveVerdict.ACCEPTED


# The curves here scatter by ±0.5 % elsewhere, so both LLOQ replicates at ±19.9 % are gross
# outliers by the studentized residual (Bonferroni at 1 %): within M10's tolerance, but sent
# to a reviewer by the profile's outliers rule (issue 15), never rejected for it.
@pytest.mark.parametrize(("pct", "verdict"), [(19.9, CurveVerdict.NEEDS_REVIEW),
                                              (20.1, CurveVerdict.REJECTED)])
def test_bioanalytical_lloq_20_pct_and_both_replicates_failing(pct, verdict):
    # ±20 % at the LLOQ; if all replicates of the LLOQ fail, the run fails even though
    # 14 of 16 standards (87.5 %) pass.
    curve = bio({1: spread(pct)})
    check = by_id(curve)["back-calculation"]
    assert curve.verdict is verdict
    if verdict is CurveVerdict.NEEDS_REVIEW:
        assert check.verdict is Verdict.PASS
        # Only review-level reasons: the outliers rule (info-level checks may also note it).
        assert len(curve.reasons) == 1 and "(outliers, review rule: warn)" in curve.reasons[0]
    if verdict is CurveVerdict.REJECTED:
        assert check.value == pytest.approx(87.5)
        assert "the lowest level (1, LLOQ) fails: both standards outside ±20 %" in check.detail
        assert curve.reasons[0].startswith("Back-calculated standards within tolerance")


@pytest.mark.parametrize(("pct", "verdict"), [(14.9, CurveVerdict.ACCEPTED),
                                              (15.1, CurveVerdict.REJECTED)])
def test_bioanalytical_uloq_must_pass(pct, verdict):
    curve = bio({1000: spread(pct)})
    assert curve.verdict is verdict
    if verdict is CurveVerdict.REJECTED:
        assert "the highest level (1000, ULOQ) fails" in by_id(curve)["back-calculation"].detail


def test_bioanalytical_one_lloq_replicate_passing_saves_the_lloq():
    # Triplicate LLOQ at +25, −25 and 0 %: two fail, one passes, so not all replicates fail.
    curve = bio({1: spread(25, 3)})
    check = by_id(curve)["back-calculation"]
    assert check.verdict is Verdict.PASS and check.value == pytest.approx(100 * 15 / 17)
    # The two failing replicates are rejected and the curve refitted without them (ICH M10
    # 3.3.2, from memory); the passing one keeps the LLOQ, and on the refit no gross outlier
    # is left (on the first fit they were: ±25 % against a ±0.5 % scatter elsewhere).
    assert curve.verdict is CurveVerdict.ACCEPTED
    assert curve.refit is not None and len(curve.refit.rejected) == 2
    assert curve.refit.first_verdict is CurveVerdict.NEEDS_REVIEW


def test_bioanalytical_75_pct_boundary():
    # Two interior levels 16 % off: 12 of 16 pass, exactly 75 %: accepted.
    two = {10: spread(16), 50: spread(16)}
    curve = bio({**two, 100: spread(0)})
    assert by_id(curve)["back-calculation"].value == pytest.approx(75.0)
    assert curve.verdict is CurveVerdict.ACCEPTED
    # The same with one exact standard excluded: it counts as failing, 11 of 16 (68.75 %);
    # the four rejected standards left the fit before (ICH M10 3.3.2) and count too.
    run = make_run(curve_points(BIO_LEVELS, deviations={**two, 100: spread(0)}) + qc_points())
    assessment = evaluate_run(run, profile=load_profile("bioanalytical"),
                              exclusions=[Exclusion("Run!D12", "injection error")])
    curve = assessment.curves[0]
    check = by_id(curve)["back-calculation"]
    assert check.value == pytest.approx(68.75)
    assert "5 left out of the fit counted as failing" in check.detail
    assert curve.verdict is CurveVerdict.REJECTED


def test_bioanalytical_blank_20_pct_of_lloq():
    # ICH M10 (from memory): blank response at most 20 % of the LLOQ response.
    lloq_response = 0.002 + 0.0123 * 1  # both LLOQ replicates average to the line
    for share, verdict in ((19.9, Verdict.PASS), (20.1, Verdict.FAIL)):
        blank = Point("KX-214", 0.0, share / 100 * lloq_response, "Run!D90",
                      sample_type=SampleType.BLANK)
        curve = bio(extra=[blank])
        check = by_id(curve)["blank"]
        assert check.verdict is verdict and check.value == pytest.approx(share)
        assert curve.verdict is (CurveVerdict.ACCEPTED if verdict is Verdict.PASS
                                 else CurveVerdict.NEEDS_REVIEW)


def test_bioanalytical_zero_standard_is_analysed_not_fitted():
    zero = Point("KX-214", 0.0, 0.0021, "Run!D91")
    curve = bio(extra=[zero])
    standard = next(s for s in curve.standards if s.point.source_cell == "Run!D91")
    assert not standard.used
    assert "leaves zero-concentration standards out of the fit" in standard.exclusion_reason
    assert "Run!D91 (zero standard)" in by_id(curve)["blank"].detail


def test_bioanalytical_proposes_a_new_lloq_and_applies_it_only_when_asked():
    curve = bio({1: spread(20.1)})
    assert curve.verdict is CurveVerdict.REJECTED and curve.working_range is None
    proposal = curve.proposal
    assert (proposal.lloq, proposal.uloq, proposal.dropped) == (2, 1000, (1,))
    assert proposal.assessment.verdict is CurveVerdict.ACCEPTED
    assert "Dropping the lowest level (1)" in proposal.reason and "new LLOQ 2" in proposal.reason
    # Applied exactly as proposed: no reason needed, calib's is recorded.
    applied = bio({1: spread(20.1)}, ranges=[WorkingRange(2, 1000, analyte="KX-214")])
    assert applied.verdict is CurveVerdict.ACCEPTED and applied.lloq == 2
    assert applied.working_range.proposed
    assert applied.working_range.reason.startswith("as calib proposed: Dropping the lowest")
    assert applied.working_range.left_out == ("Run!D2", "Run!D3")
    assert applied.original.verdict is CurveVerdict.REJECTED
    # Another range needs the analyst's reason.
    with pytest.raises(RangeError, match=r"range 5\.\.1000 for KX-214 needs a reason "
                                         r"\(calib proposed 2\.\.1000\)"):
        bio({1: spread(20.1)}, ranges=[WorkingRange(5, 1000)])
    own = bio({1: spread(20.1)}, ranges=[WorkingRange(5, 1000, "SOP BIO-07 §4: range 5-1000")])
    assert own.working_range.reason == "SOP BIO-07 §4: range 5-1000"
    assert not own.working_range.proposed and own.lloq == 5


def test_bioanalytical_failing_uloq_proposes_dropping_the_top():
    # The QCs lie inside the narrowed range too (ICH M10: QCs within the calibrated range).
    curve = bio({1000: spread(15.1)}, qcs=(3, 80, 400))
    assert curve.proposal.uloq == 500 and curve.proposal.lloq == 1
    assert "the highest level (1000)" in curve.proposal.reason


def test_a_copied_profile_with_a_changed_limit_changes_verdict_and_record():
    # "A lab can copy a profile, change a limit, and see the change in the verdict and the record."
    points = curve_points(BIO_LEVELS, deviations={1: spread(22)}) + qc_points()
    shipped = shipped_profiles()["bioanalytical"]
    edited = (shipped.replace('name = "bioanalytical"', 'name = "kestrel-bio-07"')
              .replace("lowest_level_tolerance_pct = 20", "lowest_level_tolerance_pct = 25"))
    assert edited != shipped
    before = evaluate_run(make_run(points), profile=load_profile("bioanalytical"))
    after = evaluate_run(make_run(points), profile=parse_profile(edited, origin="sop.toml"))
    # After the edit the LLOQ passes; the ±22 % pair stands out from the ±0.5 % scatter
    # elsewhere, so the edited profile's outliers rule sends the curve to review.
    assert before.verdict is CurveVerdict.REJECTED and after.verdict is CurveVerdict.NEEDS_REVIEW
    assert by_id(after.curves[0])["back-calculation"].verdict is Verdict.PASS
    record = build_record(after).body
    assert record["profile"]["name"] == "kestrel-bio-07"
    assert "lowest_level_tolerance_pct = 25" in record["profile"]["text"]
    assert record["profile"]["sha256"] != build_record(before).body["profile"]["sha256"]
    assert "±25 % at the lowest level" in {c["id"]: c for c in
                                          record["check"]["curves"][0]["checks"]}[
        "back-calculation"]["detail"]


# -- environmental (US EPA SW-846 8000D) -------------------------------------------------------


def epa(deviations=None, *, levels=EPA_LEVELS, extra=(), **options):
    points = curve_points(levels, deviations=deviations, analyte="Nitrate-N", a=0.0004,
                          b=0.084) + list(extra)
    assert_fit_is_designed(points, weighting="none", a=0.0004, b=0.084)
    return judge(points, "environmental", **options)


def test_environmental_clean_run_is_accepted():
    curve = epa()
    assert curve.verdict is CurveVerdict.ACCEPTED
    assert by_id(curve)["correlation"].verdict is Verdict.PASS


@pytest.mark.parametrize(("levels", "model", "verdict"), [
    (EPA_LEVELS, "linear", CurveVerdict.ACCEPTED),
    (EPA_LEVELS[1:], "linear", CurveVerdict.REJECTED),
    ((*EPA_LEVELS, 20), "quadratic", CurveVerdict.ACCEPTED),
    (EPA_LEVELS, "quadratic", CurveVerdict.REJECTED),
])
def test_environmental_five_levels_six_for_a_quadratic(levels, model, verdict):
    check = by_id(curve := epa(levels=levels, model=model))["min-levels"]
    assert check.limit == (6 if model == "quadratic" else 5)
    assert (curve.verdict is CurveVerdict.REJECTED) is (verdict is CurveVerdict.REJECTED)


@pytest.mark.parametrize(("pct", "verdict"), [(29.9, CurveVerdict.ACCEPTED),
                                              (30.1, CurveVerdict.REJECTED)])
def test_environmental_every_standard_within_30_pct(pct, verdict):
    curve = epa({1: spread(pct)})
    assert curve.verdict is verdict
    assert by_id(curve)["rse"].verdict is Verdict.PASS  # RSE ≈ 15 %: only the refit decides


@pytest.mark.parametrize(("pct", "verdict"), [(49.9, Verdict.PASS), (50.1, Verdict.FAIL)])
def test_environmental_lowest_level_within_50_pct(pct, verdict):
    levels = (0.5, 1, 2, 5, 10, 20, 50, 100)  # eight levels keep the RSE below 20 %
    curve = epa({0.5: spread(pct)}, levels=levels)
    assert by_id(curve)["rse"].verdict is Verdict.PASS
    assert by_id(curve)["back-calculation"].verdict is verdict
    # Inside the limit the curve is not rejected (the outlier rule may still ask for a review).
    assert (curve.verdict is CurveVerdict.REJECTED) is (verdict is Verdict.FAIL)


@pytest.mark.parametrize(("pct", "rse"), [(28.0, 19.80), (28.6, 20.22)])
def test_environmental_rse_20_pct(pct, rse):
    # RSE = 100·√(Σ((x̂ − x)/x)² / (N − p)) (US EPA 8000D §11.5.4.2, SPEC §4): two levels at ±pct,
    # three at ±0.5 %, N = 10, p = 2 -- worked by hand here.
    expected = 100 * math.sqrt((4 * (pct / 100) ** 2 + 6 * 0.005**2) / 8)
    assert expected == pytest.approx(rse, abs=0.01)
    curve = epa({0.5: spread(pct), 1: spread(pct)})
    check = by_id(curve)["rse"]
    assert check.value == pytest.approx(expected, rel=1e-9)
    assert check.verdict is (Verdict.PASS if rse <= 20 else Verdict.FAIL)
    assert by_id(curve)["back-calculation"].verdict is Verdict.PASS


def _top_pair_for_r(target: float) -> float:
    """% spread of the top level pair that gives Pearson r = target (numpy, outside calib)."""
    def r_minus(pct):
        pts = curve_points(EPA_LEVELS, deviations={10: spread(pct)}, a=0.0004, b=0.084)
        return np.corrcoef([p.concentration for p in pts], [p.response for p in pts])[0, 1] - target
    return optimize.brentq(r_minus, 0.5, 29.0, xtol=1e-12)


@pytest.mark.parametrize(("target", "verdict"), [(0.9951, Verdict.PASS), (0.9949, Verdict.FAIL)])
def test_environmental_r_0995(target, verdict):
    pct = _top_pair_for_r(target)
    curve = epa({10: spread(pct)})
    check = by_id(curve)["correlation"]
    assert check.value == pytest.approx(target, abs=1e-9) and check.limit == 0.995
    assert check.verdict is verdict
    assert by_id(curve)["back-calculation"].verdict is Verdict.PASS  # r decides alone here


def test_environmental_weighted_fit_judges_r_squared():
    curve = epa(weighting="1/x")
    check = by_id(curve)["correlation"]
    assert check.limit == 0.99 and "r² =" in check.detail


def test_environmental_standards_drop_only_from_the_ends():
    interior = epa(exclusions=[Exclusion("Run!D6", "vial cracked")])
    check = by_id(interior)["exclusions"]
    assert check.verdict is Verdict.FAIL and interior.verdict is CurveVerdict.REJECTED
    assert "Run!D6 (2) left out from inside the range 0.5 to 10" in check.detail
    end = epa(exclusions=[Exclusion("Run!D2", "carry-over"), Exclusion("Run!D3", "carry-over")],
              levels=(0.5, 1, 2, 5, 10, 20))
    assert by_id(end)["exclusions"].verdict is Verdict.PASS


def test_environmental_zero_standard_is_never_a_calibration_point():
    curve = epa(extra=[Point("Nitrate-N", 0.0, 0.0001, "Run!D40")])
    zero = next(s for s in curve.standards if s.point.concentration == 0)
    assert not zero.used and curve.fit.n_points == 10


def test_environmental_proposes_dropping_a_failing_lowest_level():
    levels = (0.5, 1, 2, 5, 10, 20)
    curve = epa({0.5: spread(55)}, levels=levels)
    assert curve.verdict is CurveVerdict.REJECTED
    assert curve.proposal.lloq == 1 and curve.proposal.assessment.verdict is CurveVerdict.ACCEPTED


@pytest.mark.parametrize(("rsd", "verdict"), [(19.9, Verdict.PASS), (20.1, Verdict.FAIL)])
def test_environmental_mean_rf_allowed_only_with_rsd_20(rsd, verdict):
    # %RSD of the response factors ≤ 20 % (US EPA 8000D §11.5.1, from memory). Pairs at ±d on
    # every level: factors 0.084·(1 ± d), %RSD = 100·d·√(10/9) (numpy below, ddof = 1).
    d = rsd / 100 / math.sqrt(10 / 9)
    points = curve_points(EPA_LEVELS, noise=100 * d, a=0.0, b=0.084, analyte="Nitrate-N")
    factors = np.array([p.response / p.concentration for p in points])
    assert 100 * factors.std(ddof=1) / factors.mean() == pytest.approx(rsd, rel=1e-9)
    check = by_id(judge(points, "environmental", model="mean-rf"))["rf-rsd"]
    assert check.value == pytest.approx(rsd, rel=1e-9) and check.limit == 20
    assert check.verdict is verdict


# -- assay linearity (ICH Q2(R2), common practice) ----------------------------------------------

ASSAY = (80, 90, 100, 110, 120)  # % of the target concentration


def assay(*, share_pct=0.0, noise=0.1, levels=ASSAY):
    """Standards on a line whose intercept is share_pct % of the response at mid-range."""
    b = 1.0
    mid = (levels[0] + levels[-1]) / 2
    a = share_pct / 100 * b * mid / (1 - share_pct / 100)
    points = curve_points(levels, noise=noise, a=a, b=b, analyte="KX-214 assay")
    return points, a, b


@pytest.mark.parametrize(("levels", "verdict"), [(ASSAY, CurveVerdict.ACCEPTED),
                                                 (ASSAY[:4], CurveVerdict.REJECTED)])
def test_assay_five_levels(levels, verdict):
    points, _, _ = assay(levels=levels)
    assert judge(points, "assay-linearity").verdict is verdict


@pytest.mark.parametrize(("share", "verdict"), [(1.9, Verdict.PASS), (2.1, Verdict.FAIL)])
def test_assay_intercept_within_2_pct_when_significant(share, verdict):
    points, a, b = assay(share_pct=share)
    x = [p.concentration for p in points]
    ols = sm.OLS([p.response for p in points], sm.add_constant(x)).fit()
    assert ols.pvalues[0] < 0.05  # statsmodels: the intercept differs significantly from zero
    curve = judge(points, "assay-linearity")
    check = by_id(curve)["intercept-fraction"]
    assert check.value == pytest.approx(100 * a / (a + b * 100), rel=1e-6)
    assert check.verdict is verdict
    assert curve.verdict is (CurveVerdict.ACCEPTED if verdict is Verdict.PASS
                             else CurveVerdict.NEEDS_REVIEW)


def test_assay_intercept_over_2_pct_fails_even_when_not_significant():
    # Common practice "intercept within 2 % of the 100 % response": the size is judged; a
    # non-significant t-test (statsmodels) is no free pass, it only says the curve is imprecise.
    points, _, _ = assay(share_pct=2.1, noise=0.5)
    ols = sm.OLS([p.response for p in points],
                 sm.add_constant([p.concentration for p in points])).fit()
    assert ols.pvalues[0] >= 0.05  # statsmodels: not significant
    curve = judge(points, "assay-linearity")
    check = by_id(curve)["intercept-fraction"]
    assert check.verdict is Verdict.FAIL
    assert f"p = {ols.pvalues[0]:.3g}" in check.detail
    assert "does not differ significantly from zero at 5 %" in check.detail
    assert "Whether or not it is significant, an intercept this large matters" in check.detail
    assert check.value > 2 and curve.verdict is CurveVerdict.NEEDS_REVIEW


def _assay_r(noise: float) -> float:
    points, _, _ = assay(noise=noise)
    return float(np.corrcoef([p.concentration for p in points],
                             [p.response for p in points])[0, 1])


@pytest.mark.parametrize(("target", "verdict"), [(0.99905, Verdict.PASS),
                                                 (0.99895, Verdict.FAIL)])
def test_assay_r_0999(target, verdict):
    # The replicate spread that gives Pearson r = target, found with numpy (outside calib).
    noise = optimize.brentq(lambda n: _assay_r(n) - target, 0.01, 2.0, xtol=1e-12)
    points, _, _ = assay(noise=noise)
    check = by_id(judge(points, "assay-linearity"))["correlation"]
    assert check.value == pytest.approx(target, abs=1e-9) and check.limit == 0.999
    assert check.verdict is verdict


def test_assay_lack_of_fit_sends_a_bent_curve_to_review():
    points = [Point("A", p.concentration, p.response + 0.004 * (p.concentration - 100) ** 2,
                    p.source_cell) for p in assay()[0]]
    curve = judge(points, "assay-linearity")
    assert by_id(curve)["lack-of-fit"].verdict is Verdict.FAIL
    assert curve.verdict is CurveVerdict.NEEDS_REVIEW


# -- ISO 8466-1 -------------------------------------------------------------------------------

ISO_LEVELS = tuple(range(1, 11))


def iso(*, low_sd=1.0, high_sd=1.0, bend=0.0, reps=10, noise=0.1):
    """ISO 8466-1 design: ten standards measured once, then replicates of the two ends.

    Each level's first injection is its calibration value: on the line y = x (+ bend·x²)
    at the ends, ±noise % alternately in between.  The lowest and highest standard are then
    measured reps − 1 times more, ±sd % of the lowest response about the line, so their
    variances are in the ratio (high_sd / low_sd)² exactly.
    """
    points, row = [], 2

    def add(x, dev_pct):
        nonlocal row
        points.append(Point("Fluoride", float(x), x * (1 + dev_pct / 100) + bend * x ** 2,
                            f"Run!D{row}", injection_order=row - 1))
        row += 1

    for k, x in enumerate(ISO_LEVELS):
        add(x, 0.0 if x in (1, 10) else noise * (-1) ** k)
    for d in spread(low_sd, reps - 1):
        add(1, d)
    for d in spread(high_sd / 10, reps - 1):
        add(10, d)
    return points


def _in_regression(points):
    """The first value of each level: what ISO 8466-1 regresses (from memory)."""
    first = {}
    for p in points:
        first.setdefault(p.concentration, p)
    return list(first.values())


@pytest.mark.parametrize(("ratio", "verdict"), [(5.30, CurveVerdict.ACCEPTED),
                                                (5.40, CurveVerdict.REJECTED)])
def test_iso_variance_ends_against_f_099_9_9(ratio, verdict):
    # F(0.99; 9, 9) ≈ 5.35 (SPEC §10): the variance at the top over the variance at the bottom,
    # of all ten replicates at each end, although nine of each are kept out of the regression.
    points = iso(high_sd=math.sqrt(ratio))
    curve = judge(points, "iso-8466")
    check = by_id(curve)["variance-ends"]
    high = [p.response for p in points if p.concentration == 10]
    low = [p.response for p in points if p.concentration == 1]
    assert len(high) == len(low) == 10
    assert check.limit == pytest.approx(5.35, abs=0.005)
    assert check.limit == pytest.approx(stats.f.ppf(0.99, 9, 9), rel=1e-9)
    assert check.value == pytest.approx(np.var(high, ddof=1) / np.var(low, ddof=1), rel=1e-9)
    assert check.value == pytest.approx(ratio, rel=1e-9)
    assert curve.verdict is verdict


def _mandel_pg(points) -> float:
    """ISO 8466-1 PG from numpy polynomial fits (outside calib), on the regression values."""
    used = _in_regression(points)
    x = np.array([p.concentration for p in used])
    y = np.array([p.response for p in used])
    rss1 = float(np.sum((y - np.polyval(np.polyfit(x, y, 1), x)) ** 2))
    rss2 = float(np.sum((y - np.polyval(np.polyfit(x, y, 2), x)) ** 2))
    return (rss1 - rss2) / (rss2 / (len(x) - 3))


@pytest.mark.parametrize(("factor", "verdict"), [(0.95, Verdict.PASS), (1.05, Verdict.FAIL)])
def test_iso_mandel_just_inside_and_outside(factor, verdict):
    # ISO 8466-1 / DIN 38402-51: PG against F(0.99; 1, N − 3) with N = 10 standards, not the
    # 28 values the end replicates would make (from memory).
    critical = stats.f.ppf(0.99, 1, 7)
    bend = optimize.brentq(lambda c: _mandel_pg(iso(bend=c)) - factor * critical, 0, 0.01,
                           xtol=1e-15)
    points = iso(bend=bend)
    curve = judge(points, "iso-8466")
    check = by_id(curve)["mandel"]
    assert check.value == pytest.approx(factor * critical, rel=1e-6)
    assert check.limit == pytest.approx(critical, rel=1e-9)
    assert check.verdict is verdict
    assert (curve.verdict is CurveVerdict.REJECTED) is (verdict is Verdict.FAIL)


def test_iso_regression_uses_one_value_per_standard():
    # ISO 8466-1 (from memory): ten standards in the regression; s_x0 = s_y / b with
    # s_y = √(Σ residual² / (N − 2)), N = 10 (numpy here).
    points = iso(noise=0.5)
    curve = judge(points, "iso-8466")
    used = [s for s in curve.standards if s.used]
    assert len(used) == 10 and curve.fit.residual_df == 8
    assert [s.point.source_cell for s in used] == [p.source_cell for p in _in_regression(points)]
    kept = [s for s in curve.standards if not s.used]
    assert len(kept) == 18 and all("variance test only" in s.exclusion_reason for s in kept)
    x = np.array([p.concentration for p in _in_regression(points)])
    y = np.array([p.response for p in _in_regression(points)])
    slope, intercept = np.polyfit(x, y, 1)
    s_y = math.sqrt(np.sum((y - intercept - slope * x) ** 2) / 8)
    check = by_id(curve)["method-sd"]
    assert f"= {s_y / slope:.4g}," in check.detail
    assert by_id(curve)["min-replicates"].value == 10


def test_iso_ten_replicates_at_the_ends():
    curve = judge(iso(reps=9), "iso-8466")
    check = by_id(curve)["min-replicates"]
    assert check.verdict is Verdict.FAIL and check.value == 9 and check.limit == 10
    assert curve.verdict is CurveVerdict.NEEDS_REVIEW
    assert by_id(judge(iso(), "iso-8466"))["min-replicates"].verdict is Verdict.PASS


def test_iso_reports_method_standard_deviation():
    check = by_id(judge(iso(), "iso-8466"))["method-sd"]
    assert "s_x0" in check.detail and check.value is not None
