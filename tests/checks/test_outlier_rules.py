"""The outliers check: suggested points named with the reason, never removed."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from calib.checks import CurveVerdict, Verdict, evaluate_run, parse_profile
from tests.conftest import make_run, nist_xy

RULE = 'name = "outlier-test"\nversion = "1"\n\n[[rules]]\nid = "outliers"\nseverity = "review"\n'


def outliers(run, extra: str = "", **options):
    curve = evaluate_run(run, profile=parse_profile(RULE + extra), **options).curves[0]
    return curve, curve.checks[0]


def test_clean_curve_passes_with_the_figures():
    # Value and limit checked against statsmodels OLSInfluence and scipy's t on the same data.
    x, y = nist_xy("norris")
    curve, check = outliers(make_run(x, y))
    reference = sm.OLS(y, sm.add_constant(x)).fit().get_influence()
    assert check.verdict is Verdict.PASS
    assert check.value == pytest.approx(np.max(np.abs(reference.resid_studentized_external)),
                                        rel=1e-9)
    assert check.limit == pytest.approx(stats.t.isf(0.05 / 72, 33), rel=1e-12)
    assert check.detail.startswith("No standard stands out: largest |studentized residual| ")
    assert "(Bonferroni, α = 0.05, Bonferroni p = " in check.detail
    assert ("; Grubbs' test not evaluated: no level has 4 or more replicates (with 3, G reaches "
            "its critical value whenever two replicates nearly agree); largest leverage "
            in check.detail)
    # One test decides: its p-value is statsmodels' Bonferroni outlier test on the same fit.
    bonf = sm.OLS(y, sm.add_constant(x)).fit().outlier_test(method="bonf")
    assert check.statistic is not None and check.p_value == pytest.approx(
        float(np.min(np.asarray(bonf)[:, 2])), rel=1e-9)
    assert check.alpha == 0.05 and check.critical_value == check.limit
    assert ". Largest Cook's distance " in check.detail
    assert curve.verdict is CurveVerdict.ACCEPTED


def test_a_stray_standard_is_named_and_left_in():
    # Invented: ten standards on y = 2x, the seventh (row 8) reading 0.6 high.
    x = np.arange(1.0, 11.0)
    y = 2.0 * x + np.array([0.03, -0.05, 0.02, 0.04, -0.03, 0.01, 0.6, -0.02, 0.05, -0.04])
    curve, check = outliers(make_run(x, y))
    assert check.verdict is Verdict.WARN
    assert check.limit == pytest.approx(stats.t.isf(0.05 / 20, 7), rel=1e-12)
    assert check.detail.startswith("Suggested outlier: Run!C8: studentized residual +")
    assert f"beyond ±{check.limit:.2f} (Bonferroni, α = 0.05; Bonferroni p = " in check.detail
    assert check.detail.endswith("calib does not remove points: the analyst decides, and any "
                                 "exclusion needs a reason.")
    assert all(s.used for s in curve.standards)
    assert curve.verdict is CurveVerdict.NEEDS_REVIEW


def test_grubbs_finds_a_stray_replicate_within_a_level():
    # Invented: 4 levels × 5 replicates; one replicate at level 3 reads 4 % high.
    x = np.repeat([1.0, 2.0, 5.0, 10.0], 5)
    scatter = np.tile([0.004, -0.003, 0.002, -0.004, 0.001], 4)
    y = 100 * x * (1 + scatter)
    y[12] = 500 * 1.04
    _, check = outliers(make_run(x, y))
    assert check.verdict is Verdict.WARN
    # Four levels share α = 0.05: each is tested at 0.0125.
    assert "Run!C14: " in check.detail
    assert "at level 3 (α = 0.0125 per level; for information)" in check.detail
    g = (y[10:15] - y[10:15].mean()) / y[10:15].std(ddof=1)
    assert f"Grubbs G = {np.max(np.abs(g)):.4f} > " in check.detail


def test_grubbs_alpha_sets_each_level_on_its_own():
    x = np.repeat([1.0, 2.0, 5.0, 10.0], 5)
    y = 100 * x * (1 + np.tile([0.004, -0.003, 0.002, -0.004, 0.001], 4))
    _, check = outliers(make_run(x, y), extra="grubbs_alpha = 0.05\n")
    assert check.verdict is Verdict.PASS
    assert "Grubbs' test, for information, at 4 levels with 4 or more replicates (α = 0.05 per " \
           "level) finds no outlier;" in check.detail


def test_an_influential_standard_is_reported_but_not_called_an_outlier():
    # Invented: 1, 2, 5, 10, 100 — the top standard fixes the slope (leverage near 1) and has a
    # large Cook's distance while reading true; the check says so and still passes.
    x = np.array([1.0, 2.0, 5.0, 10.0, 100.0])
    y = 100 * x * (1 + np.array([0.010, -0.008, 0.006, -0.012, 0.002]))
    _, check = outliers(make_run(x, y))
    assert check.verdict is Verdict.PASS
    assert "Cook's distance above " in check.detail and "Run!C6 (" in check.detail
    assert check.detail.endswith("; such points move the whole curve.")


def test_too_few_degrees_of_freedom_is_not_evaluated():
    _, check = outliers(make_run([1, 2, 3], [1.0, 2.1, 2.9]))
    assert check.verdict is Verdict.NOT_EVALUATED
    assert check.detail == ("Studentized residuals not evaluated: studentized residuals need at "
                            "least 2 residual degrees of freedom; the fit has 1; Grubbs' test not "
                            "evaluated: no level has 4 or more replicates (with 3, G reaches its "
                            "critical value whenever two replicates nearly agree).")
    _, check = outliers(make_run([1, 1, 1], [1.0, 1.1, 0.9]))
    assert check.detail == "the linear model needs at least 2 concentration levels; 1 available"


def test_grubbs_with_three_replicates_is_not_evaluated_and_decides_nothing():
    # Two replicates equal, the third apart: with n = 3, G takes its largest value
    # (n − 1)/√n = 1.1547, above the critical value 1.1543 at α = 0.05 (Grubbs 1969 tables,
    # from memory), whatever the third replicate reads — the test is degenerate, so calib
    # does not run it, and the studentized residual (one test for the curve) decides.
    x = np.repeat([1.0, 2.0, 5.0, 10.0], 3)
    y = 100 * x * (1 + np.tile([0.004, -0.003, 0.001], 4))
    y[6:9] = [500.0, 500.0, 500.9]
    _, check = outliers(make_run(x, y), weighting="1/x2")  # the scatter is proportional
    assert check.verdict is Verdict.PASS
    assert "Grubbs' test not evaluated: no level has 4 or more replicates" in check.detail
    assert "Grubbs G" not in check.detail


def test_flagged_cells_are_given_as_data():
    """The outliers and back-calculation checks list the cells they single out.

    The outlier is the point whose externally studentized residual (statsmodels
    OLSInfluence) exceeds scipy's Bonferroni t; the standards outside ±15 % are those
    whose concentration read back from numpy's least-squares line is outside it.
    """
    from calib.checks import load_profile

    x = np.arange(1.0, 11.0)
    y = 2.0 * x + np.array([0.03, -0.05, 0.02, 0.04, -0.03, 0.01, 0.6, -0.02, 0.05, -0.04])
    y[1] = 2.0 * 2 * 1.4  # the second standard reads 40 % high (invented)
    curve = evaluate_run(make_run(x, y), profile=load_profile("default")).curves[0]
    checks = {c.id: c for c in curve.checks}
    cells = [s.point.source_cell for s in curve.standards]
    t_ext = sm.OLS(y, sm.add_constant(x)).fit().get_influence().resid_studentized_external
    beyond = np.abs(t_ext) > stats.t.isf(0.05 / 20, 7)
    assert checks["outliers"].cells == tuple(c for c, b in zip(cells, beyond) if b)
    slope, intercept = np.polyfit(x, y, 1)
    outside = np.abs(((y - intercept) / slope - x) / x) > np.where(x == 1.0, 0.20, 0.15)
    assert checks["back-calculation"].cells == tuple(c for c, o in zip(cells, outside) if o)
    assert checks["back-calculation"].cells  # the run is built to have one
    assert all(c.cells == () for c in curve.checks if c.id not in ("outliers",
                                                                    "back-calculation"))
