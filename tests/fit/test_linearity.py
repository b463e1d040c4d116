"""Linearity diagnostics against published figures and statsmodels/scipy on the same data."""

from __future__ import annotations

import itertools
import math
import tomllib
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.sandbox.stats.runs import Runs
from statsmodels.stats.anova import anova_lm

from calib.fit.curve import CurveFit, fit_curve
from calib.fit.design import design_matrix
from calib.fit.linearity import (
    lack_of_fit,
    mandel_test,
    quadratic_term,
    residual_drift,
    residual_runs,
    runs_test,
)
from calib.fit.wls import solve_wls
from tests.conftest import DATA, nist_xy

PUBLISHED = tomllib.loads((DATA / "diagnostics" / "published.toml").read_text(encoding="utf-8"))


def pontius() -> tuple[np.ndarray, np.ndarray]:
    x, y = nist_xy("pontius")
    return np.array(x), np.array(y)


def with_weights(fit: CurveFit, w: np.ndarray) -> CurveFit:
    """The same curve refitted with arbitrary weights (scaled to a mean of 1)."""
    w = np.asarray(w, dtype=float) / np.mean(w)
    sol = solve_wls(design_matrix(fit.x, fit.model), fit.y, w)
    s2 = sol.weighted_ss / fit.residual_df
    return replace(fit, weights=w, coefficients=dict(zip(fit.names, map(float, sol.beta))),
                   covariance=s2 * sol.unscaled_covariance, residual_sd=math.sqrt(s2),
                   fitted=fit.y - sol.residuals, residuals=sol.residuals)


def curved_and_straight(seed: int = 11) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Invented: 6 levels × 3 replicates, y = 1 + 10x − 0.4x² and y = 1 + 10x, noise SD 0.05."""
    rng = np.random.default_rng(seed)
    x = np.repeat([1.0, 2.0, 3.0, 4.0, 5.0, 6.0], 3)
    noise = rng.normal(0.0, 0.05, x.size)
    return x, 1 + 10 * x - 0.4 * x**2 + noise, 1 + 10 * x + noise


def statsmodels_lack_of_fit(x, y, formula, weights=None):
    """anova_lm of the model against the full cell-means model y ~ C(x): (F, p, df_diff)."""
    frame = pd.DataFrame({"x": x, "y": y})
    if weights is None:
        model, full = smf.ols(formula, frame).fit(), smf.ols("y ~ C(x)", frame).fit()
    else:
        model = smf.wls(formula, frame, weights=weights).fit()
        full = smf.wls("y ~ C(x)", frame, weights=weights).fit()
    row = anova_lm(model, full).iloc[1]
    return row["F"], row["Pr(>F)"], int(row["df_diff"])


# --- lack of fit ------------------------------------------------------------------------------


def test_load_cell_straight_line_lack_of_fit_is_rejected():
    # NIST/SEMATECH e-Handbook §4.6.1 (Pontius data): F ≈ 214.75 on (18, 20) df against
    # F(0.95; 18, 20) ≈ 2.15, rejected.  statsmodels anova_lm(y ~ x, y ~ C(x)) on the same data
    # compares the line with the full cell-means model: the same F to 1e-9.
    ref = PUBLISHED["load_cell"]
    x, y = pontius()
    test = lack_of_fit(fit_curve(x, y))
    assert test.reason is None and test.weighted is False
    assert [test.df_lack, test.df_pure] == ref["line_df"] and test.n_levels == 20
    assert test.f_value == pytest.approx(ref["line_f"], abs=0.005)
    assert test.critical(0.05) == pytest.approx(ref["line_f_critical_95"], abs=0.005)
    assert test.significant(0.05)
    f_sm, p_sm, df_sm = statsmodels_lack_of_fit(x, y, "y ~ x")
    assert test.f_value == pytest.approx(f_sm, rel=1e-9)
    assert test.p_value == pytest.approx(p_sm, rel=1e-6)
    assert test.df_lack == df_sm


def test_load_cell_quadratic_is_not_rejected():
    # Same source: the quadratic gives F ≈ 0.81, p ≈ 0.67; statsmodels anova_lm against y ~ C(x).
    ref = PUBLISHED["load_cell"]
    x, y = pontius()
    test = lack_of_fit(fit_curve(x, y, model="quadratic"))
    assert (test.df_lack, test.df_pure) == (17, 20)
    assert test.f_value == pytest.approx(ref["quadratic_f"], abs=0.005)
    assert test.p_value == pytest.approx(ref["quadratic_p"], abs=0.005)
    assert not test.significant(0.05)
    f_sm, p_sm, _ = statsmodels_lack_of_fit(x, y, "y ~ x + I(x**2)")
    assert test.f_value == pytest.approx(f_sm, rel=1e-9)
    assert test.p_value == pytest.approx(p_sm, rel=1e-9)


@pytest.mark.parametrize("weighting", ["1/x", "1/x2"])
def test_weighted_lack_of_fit_matches_statsmodels_wls(weighting):
    # statsmodels WLS: anova_lm(line, cell means) with the same weights on the Pontius data.
    x, y = pontius()
    fit = fit_curve(x, y, weighting=weighting)
    test = lack_of_fit(fit)
    assert test.weighted
    f_sm, p_sm, _ = statsmodels_lack_of_fit(x, y, "y ~ x", weights=fit.weights)
    assert test.f_value == pytest.approx(f_sm, rel=1e-9)
    assert test.p_value == pytest.approx(p_sm, rel=1e-6)


def test_weights_that_vary_within_a_level_use_weighted_level_means():
    # Weights 1/y² differ between the two replicates of a level; the pure error is then taken
    # about the weighted level mean, as in the statsmodels WLS cell-means model.
    x, y = pontius()
    fit = with_weights(fit_curve(x, y, model="quadratic"), 1 / y**2)
    test = lack_of_fit(fit)
    f_sm, p_sm, _ = statsmodels_lack_of_fit(x, y, "y ~ x + I(x**2)", weights=fit.weights)
    assert test.f_value == pytest.approx(f_sm, rel=1e-9)
    assert test.p_value == pytest.approx(p_sm, rel=1e-9)


def test_lack_of_fit_without_replicates_or_levels_is_not_evaluated():
    test = lack_of_fit(fit_curve([1, 2, 3, 4, 5], [1.1, 1.9, 3.2, 3.9, 5.1]))
    assert test.reason == ("no concentration level has replicates, so there is no pure error "
                           "to test against")
    assert math.isnan(test.f_value) and math.isnan(test.p_value) and not test.significant()
    two_levels = lack_of_fit(fit_curve([1, 1, 2, 2], [1.0, 1.1, 2.0, 2.1]))
    assert two_levels.reason == ("2 concentration levels for 2 fitted parameters; lack of fit "
                                 "needs more levels than parameters")
    exact = lack_of_fit(fit_curve([1, 1, 2, 2, 3, 3], [1.0, 1.0, 2.1, 2.1, 2.9, 2.9]))
    assert exact.reason == ("the replicates agree exactly at every level, so there is no pure "
                            "error to test against")


def test_lack_of_fit_rejects_a_wrong_alpha():
    test = lack_of_fit(fit_curve(*pontius()))
    with pytest.raises(ValueError, match=r"^alpha must be a number between 0 and 1; got 1\.5$"):
        test.significant(1.5)


# --- Mandel's test and the quadratic term ----------------------------------------------------


def test_mandel_pg_is_the_extra_sum_of_squares_f_of_statsmodels():
    # statsmodels anova_lm(y ~ x, y ~ x + x²) gives (SS_line − SS_quad)/(SS_quad/(N − 3)), which
    # is DS²/s²_quadratic with DS² = (N − 2)s²_line − (N − 3)s²_quadratic (ISO 8466-1).
    x, y = pontius()
    frame = pd.DataFrame({"x": x, "y": y})
    row = anova_lm(smf.ols("y ~ x", frame).fit(), smf.ols("y ~ x + I(x**2)", frame).fit()).iloc[1]
    test = mandel_test(fit_curve(x, y))
    assert test.df == (1, 37)
    assert test.pg == pytest.approx(row["F"], rel=1e-9)
    assert test.critical(0.99) == pytest.approx(stats.f.ppf(0.99, 1, 37), rel=1e-12)
    assert test.nonlinear(0.99)
    # PG is the square of the quadratic coefficient's t value.
    assert test.pg == pytest.approx(quadratic_term(fit_curve(x, y)).t_value ** 2, rel=1e-9)


def test_weighted_mandel_uses_the_same_weights_in_both_fits():
    # statsmodels WLS (weights 1/x) for the line and the quadratic, then anova_lm.
    x, y = pontius()
    fit = fit_curve(x, y, weighting="1/x")
    frame = pd.DataFrame({"x": x, "y": y})
    line = smf.wls("y ~ x", frame, weights=fit.weights).fit()
    quad = smf.wls("y ~ x + I(x**2)", frame, weights=fit.weights).fit()
    test = mandel_test(fit)
    assert test.weighted
    assert test.s2_linear == pytest.approx(line.scale, rel=1e-9)
    assert test.s2_quadratic == pytest.approx(quad.scale, rel=1e-9)
    assert test.pg == pytest.approx(anova_lm(line, quad).iloc[1]["F"], rel=1e-9)


def test_mandel_needs_a_straight_line_and_a_fittable_quadratic():
    x, y = pontius()
    with pytest.raises(ValueError, match=r"^Mandel's test compares a straight line with a "
                                         r"quadratic; the curve is fitted as quadratic$"):
        mandel_test(fit_curve(x, y, model="quadratic"))
    two_levels = mandel_test(fit_curve([1, 1, 2, 2], [1.0, 1.1, 2.0, 2.1]))
    assert two_levels.reason == "fitting a quadratic for comparison needs at least 3 concentration levels"
    assert math.isnan(two_levels.pg) and not two_levels.nonlinear()
    three = mandel_test(fit_curve([1, 2, 3], [1.0, 2.2, 2.9]))
    assert three.reason == "fitting a quadratic for comparison needs at least 4 standards; 3 in the fit"


def test_quadratic_term_of_a_line_matches_a_statsmodels_quadratic():
    # statsmodels WLS y ~ x + x² with the fit's weights: t and p of the x² coefficient.
    x, y = pontius()
    X = np.column_stack([np.ones_like(x), x, x * x])
    for weighting in ("none", "1/x2"):
        fit = fit_curve(x, y, weighting=weighting)
        ref = sm.WLS(y, X, weights=fit.weights).fit()
        term = quadratic_term(fit)
        assert term.refitted and term.df == 37
        assert term.estimate == pytest.approx(ref.params[2], rel=1e-9)
        assert term.std_error == pytest.approx(ref.bse[2], rel=1e-9)
        assert term.p_value == pytest.approx(ref.pvalues[2], rel=1e-6)


def test_quadratic_term_of_a_quadratic_is_its_own_coefficient():
    x, y = pontius()
    fit = fit_curve(x, y, model="quadratic")
    term = quadratic_term(fit)
    assert not term.refitted
    assert term.t_value == fit.t_value("quadratic") and term.p_value == fit.p_value("quadratic")
    with pytest.raises(ValueError, match=r"^the quadratic-term test applies to linear and "
                                         r"quadratic curves; the curve is fitted as origin$"):
        quadratic_term(fit_curve(x, y, model="origin"))


def test_visibly_curved_response_fails_and_straight_passes():
    # Invented: y = 1 + 10x − 0.4x² at 6 levels × 3 replicates fitted as a straight line.
    x, curved, straight = curved_and_straight()
    bent = fit_curve(x, curved)
    assert lack_of_fit(bent).significant(0.05)
    assert mandel_test(bent).nonlinear(0.99)
    assert quadratic_term(bent).significant(0.05) and quadratic_term(bent).estimate < 0
    # Six level means give one sign each: a bend leaves (+, −, −, −, −, +) or its mirror,
    # 3 runs, which six signs cannot make significant (P(R ≤ 3) = 6/15 by the exact
    # distribution, Wald and Wolfowitz 1940): the runs test is no curvature test here.
    runs = residual_runs(bent)
    assert (runs.n, runs.runs) == (6, 3) and not runs.patterned(0.05)
    line = fit_curve(x, straight)
    assert not lack_of_fit(line).significant(0.05)
    assert not mandel_test(line).nonlinear(0.99)
    assert not quadratic_term(line).significant(0.05)


# --- runs of residual signs ------------------------------------------------------------------


def test_runs_test_hand_example():
    # Worked by hand: + + + − − − has 2 runs, the fewest possible; of the C(6, 3) = 20
    # orders of three + and three −, 2 have 2 runs, so P(R ≤ 2) = 0.1.  + − + − + − has 6:
    # P(R ≤ 6) = 1.  + + − − + + − (4+, 3−): R = 4; of C(7, 4) = 35 orders, 2 have 2 runs,
    # C(3,1)·C(2,0) + C(3,0)·C(2,1) = 5 have 3 and 2·C(3,1)·C(2,1) = 12 have 4: P(R ≤ 4) = 19/35.
    test = runs_test([1, 1, 1, -1, -1, -1])
    assert (test.runs, test.n_positive, test.n_negative) == (2, 3, 3)
    assert test.p_value == pytest.approx(0.1, abs=1e-15)
    assert test.smallest_p == pytest.approx(0.1, abs=1e-15)
    assert runs_test([1, -1, 1, -1, 1, -1]).p_value == 1.0
    assert runs_test([1, 1, -1, -1, 1, 1, -1]).p_value == pytest.approx(19 / 35, abs=1e-15)
    assert runs_test([2.0, 0.0, 3.0, -1.0]).n_dropped == 1


def sequence_with_runs(runs: int, n_pos: int, n_neg: int) -> list[int]:
    """Signs in ``runs`` alternating blocks, the first block of each sign holding the extras."""
    first = 1 if (runs + 1) // 2 <= n_pos and runs // 2 <= n_neg else -1
    blocks = [[first if k % 2 == 0 else -first] for k in range(runs)]
    for sign, n in ((1, n_pos), (-1, n_neg)):
        own = [b for b in blocks if b[0] == sign]
        own[0].extend([sign] * (n - len(own)))
    return [s for b in blocks for s in b]


@pytest.mark.parametrize(("n_pos", "n_neg"), [(5, 4), (6, 6), (3, 8)])
def test_exact_runs_distribution_matches_enumeration(n_pos, n_neg):
    # Independent check: enumerate every arrangement of the signs and count runs directly.
    n = n_pos + n_neg
    counts: dict[int, int] = {}
    for positions in itertools.combinations(range(n), n_pos):
        signs = -np.ones(n)
        signs[list(positions)] = 1
        runs = int(1 + np.sum(signs[1:] != signs[:-1]))
        counts[runs] = counts.get(runs, 0) + 1
    total = sum(counts.values())
    for r in sorted(counts):
        sequence = sequence_with_runs(r, n_pos, n_neg)
        test = runs_test(sequence)
        assert test.runs == r and test.method == "exact"
        expected = sum(c for k, c in counts.items() if k <= r) / total
        assert test.p_value == pytest.approx(expected, rel=1e-12)


def test_large_runs_test_uses_the_normal_approximation_of_statsmodels():
    # statsmodels Runs(...).runs_test(correction=False): z of the runs count; our lower-tail
    # p is Φ(z).
    rng = np.random.default_rng(3)
    signs = np.where(np.cumsum(rng.normal(size=260)) > 0, 1, -1)
    test = runs_test(signs)
    assert test.method == "normal"
    z, _ = Runs((signs > 0).astype(int)).runs_test(correction=False)
    assert test.p_value == pytest.approx(stats.norm.cdf(z), rel=1e-12)


def test_residual_runs_count_one_sign_per_level_from_the_level_mean_residual():
    x = np.array([1, 1, 2, 2, 3, 3, 4, 4, 5, 5], dtype=float)
    y = np.array([1.2, 0.8, 2.1, 1.9, 3.3, 2.9, 3.8, 4.1, 5.2, 4.9])
    base = residual_runs(fit_curve(x, y))
    # Shuffling the rows, levels or replicates, changes nothing.
    order = [7, 6, 0, 1, 8, 9, 3, 2, 5, 4]
    assert residual_runs(fit_curve(x[order], y[order])) == base
    # The signs, worked out with numpy's own least squares outside calib: the mean
    # residual of each level, in order of concentration.
    slope, intercept = np.polyfit(x, y, 1)
    means = [np.mean(y[x == v] - (intercept + slope * v)) for v in np.unique(x)]
    signs = np.sign(means)
    assert base.n == 5 and base.n_positive == int(np.sum(signs > 0))
    assert base.runs == 1 + int(np.sum(signs[1:] != signs[:-1]))


def test_runs_need_both_signs():
    test = runs_test([1.0, 2.0, 3.0])
    assert test.reason == "all 3 residuals have the same sign"
    assert math.isnan(test.p_value) and not test.patterned()
    exact = residual_runs(fit_curve([1, 2, 3, 4], [3.0, 5.0, 7.0, 9.0]))
    assert exact.reason == "the curve passes through every standard, so the residuals have no sign"


# --- drift with injection order --------------------------------------------------------------


@pytest.mark.parametrize("weighting", ["none", "1/x"])
def test_drift_slope_matches_statsmodels_ols_on_the_residuals(weighting):
    # statsmodels OLS of √w·r on [1, order]: slope, its SE and two-sided p.
    x, _, y = curved_and_straight()
    order = np.array([3, 9, 15, 1, 7, 13, 5, 11, 17, 2, 8, 14, 4, 10, 16, 6, 12, 18], dtype=float)
    y = y + 0.01 * order  # a response creeping up during the run
    fit = fit_curve(x, y, weighting=weighting)
    e = np.sqrt(fit.weights) * fit.residuals
    ref = sm.OLS(e, sm.add_constant(order)).fit()
    test = residual_drift(fit, order)
    assert test.weighted is (weighting != "none") and test.df == 16
    assert test.slope == pytest.approx(ref.params[1], rel=1e-9)
    assert test.std_error == pytest.approx(ref.bse[1], rel=1e-9)
    assert test.p_value == pytest.approx(ref.pvalues[1], rel=1e-6)
    assert test.drifting(0.05)
    assert abs(test.order_correlation) < 0.9


def test_drift_bad_order_raises_and_degenerate_order_is_reported():
    fit = fit_curve([1, 2, 3, 4], [1.0, 2.1, 2.9, 4.2])
    with pytest.raises(ValueError, match=r"^order must give one finite number per point \(4\); "
                                         r"got 3 values$"):
        residual_drift(fit, [1, 2, 3])
    same = residual_drift(fit, [5, 5, 5, 5])
    assert same.reason == "every standard has the same injection order"
    assert math.isnan(same.p_value) and not same.drifting()
