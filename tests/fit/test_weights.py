"""Weightings 1/y, 1/y2 and 1/s2: statsmodels' WLS with the same raw weights, and the refusals.

statsmodels gets the raw weights (1/yᵢ, 1/yᵢ², 1/s²(xᵢ) with s²(x) the variance function
fitted to numpy's level variances, tests/fit/variance_fn.py); calib scales them to a mean of 1, which changes only σ̂² (by the mean raw weight).
Compared with relative tolerance 1e-10: estimates, standard errors, p-values, intervals, R²,
fitted values and σ̂².
"""

from __future__ import annotations

import re

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.special import digamma

from calib.checks import evaluate_run
from calib.fit.curve import fit_curve
from calib.fit.design import (
    design_matrix,
    fit_weights,
    level_variances,
    raw_weights,
    weighting_refuses,
)
from calib.options import Model, Weighting
from tests.conftest import make_run
from tests.fit.variance_fn import smoothed_s2

RTOL = 1e-10


def invented_run() -> tuple[np.ndarray, np.ndarray]:
    """7 levels 1–500, 4 replicates, noise SD growing with the response (invented)."""
    rng = np.random.default_rng(31)
    x = np.repeat([1.0, 2.0, 5.0, 20.0, 50.0, 200.0, 500.0], 4)
    mean = 0.5 + 1.8 * x - 2e-4 * x**2
    return x, mean + rng.normal(0.0, 0.03 * mean)


X_DATA, Y_DATA = invented_run()


def reference_raw(weighting: str) -> np.ndarray:
    """The raw weights computed here, independently of calib.fit.design."""
    if weighting == "1/y":
        return 1.0 / Y_DATA
    if weighting == "1/y2":
        return 1.0 / Y_DATA**2
    s2 = smoothed_s2(X_DATA, Y_DATA)
    return np.array([1.0 / s2[c] for c in X_DATA])


@pytest.mark.parametrize("weighting", ["1/y", "1/y2", "1/s2"])
@pytest.mark.parametrize("model", ["linear", "origin", "quadratic"])
def test_response_and_variance_weights_against_statsmodels(model: str, weighting: str) -> None:
    w = reference_raw(weighting)
    ref = sm.WLS(Y_DATA, design_matrix(X_DATA, Model(model)), weights=w).fit(method="qr")
    fit = fit_curve(X_DATA, Y_DATA, model=model, weighting=weighting)
    rows = fit.coefficient_table()
    np.testing.assert_allclose([r.estimate for r in rows], ref.params, rtol=RTOL)
    np.testing.assert_allclose([r.std_error for r in rows], ref.bse, rtol=RTOL)
    np.testing.assert_allclose([r.p_value for r in rows], ref.pvalues, rtol=RTOL)
    np.testing.assert_allclose([[r.ci_low, r.ci_high] for r in rows], ref.conf_int(0.05),
                               rtol=RTOL)
    np.testing.assert_allclose(fit.fitted, ref.fittedvalues, rtol=RTOL)
    assert fit.r_squared == pytest.approx(ref.rsquared, rel=RTOL)
    assert fit.residual_sd**2 == pytest.approx(ref.scale / w.mean(), rel=RTOL)
    np.testing.assert_allclose(fit.weights, w / w.mean(), rtol=1e-13)
    assert fit.weight_scale == pytest.approx(w.mean(), rel=1e-13)


def test_weights_have_mean_one_and_follow_the_definition() -> None:
    x = np.array([1.0, 1.0, 2.0, 2.0, 4.0, 4.0])
    y = np.array([1.0, 1.2, 2.0, 2.4, 3.8, 4.6])
    for weighting in Weighting:
        w = fit_weights(x, weighting, y=y)
        assert w.mean() == pytest.approx(1.0, rel=1e-14), weighting
    # 1/s2 by hand: level variances 0.02, 0.08, 0.32 = 0.02·x² exactly, so the fitted
    # variance function follows them, lifted by the log-variance bias of 1 df:
    # E ln χ²₁ = ψ(1/2) + ln 2 = −1.2703628 (closed form, from memory) → raw weights
    # 50, 12.5, 3.125 divided by e^1.2703628 = 3.5621448 (ψ(1/2) = −γ − 2 ln 2).
    bias = float(np.exp(-(digamma(0.5) + np.log(2.0))))
    assert bias == pytest.approx(np.exp(np.euler_gamma + np.log(2.0)), rel=1e-12)
    np.testing.assert_allclose(raw_weights(x, Weighting.INV_S2, y=y),
                               np.array([50, 50, 12.5, 12.5, 3.125, 3.125]) / bias, rtol=1e-12)
    levels, s2, n = level_variances(x, y)
    np.testing.assert_allclose(s2, [0.02, 0.08, 0.32], rtol=1e-12)
    assert levels.tolist() == [1.0, 2.0, 4.0] and n.tolist() == [2, 2, 2]


def test_a_stack_of_curves_gets_one_row_of_weights_each() -> None:
    # The batched engine passes one curve per row; each row is scaled on its own.
    x = np.array([[1.0, 2.0, 4.0], [2.0, 4.0, 8.0]])
    y = np.array([[1.0, 2.0, 4.0], [3.0, 6.0, 12.0]])
    for weighting in (Weighting.INV_X, Weighting.INV_Y2):
        w = fit_weights(x, weighting, y=y)
        for row in range(2):
            np.testing.assert_allclose(w[row], fit_weights(x[row], weighting, y=y[row]))
    xs = np.array([[1.0, 1.0, 2.0, 2.0, 4.0, 4.0], [1.0, 1.0, 3.0, 3.0, 5.0, 5.0]])
    ys = np.array([[1.0, 1.2, 2.0, 2.4, 4.0, 4.3], [1.0, 1.4, 3.0, 3.2, 5.0, 5.5]])
    w = fit_weights(xs, Weighting.INV_S2, y=ys)
    np.testing.assert_allclose(w[1], fit_weights(xs[1], Weighting.INV_S2, y=ys[1]))


@pytest.mark.parametrize(
    ("weighting", "x", "y", "message"),
    [
        ("1/y", [1, 2, 3], [0.5, -0.1, 2.0], "weighting 1/y needs positive responses"),
        ("1/y2", [1, 2, 3], [0.0, 1.0, 2.0], "weighting 1/y2 needs positive responses"),
        ("1/s2", [1, 1, 2, 3, 3], [1.0, 1.1, 2.0, 3.0, 3.2],
         "weighting 1/s2 needs at least 2 replicates at each level; concentration 2 has 1"),
        ("1/s2", [1, 1, 2, 2, 3, 3], [1.0, 1.1, 2.0, 2.0, 3.0, 3.2],
         "weighting 1/s2 cannot use concentration 2: its 2 replicates have zero variance"),
        ("1/x", [0, 1, 2], [0.1, 1.0, 2.0], "weighting 1/x needs positive concentrations"),
    ],
)
def test_fit_refuses_data_the_weighting_cannot_use(weighting, x, y, message) -> None:
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit_curve(x, y, weighting=weighting)


def test_raw_weights_need_the_responses() -> None:
    with pytest.raises(ValueError, match=r"^weighting 1/s2 needs the responses y$"):
        raw_weights(np.array([1.0, 2.0]), Weighting.INV_S2)


def test_weighting_refuses_points_with_the_reason() -> None:
    assert weighting_refuses(2.0, Weighting.INV_Y, response=-0.3) == (
        "weighting 1/y divides by the response, which is -0.3 here")
    assert weighting_refuses(2.0, Weighting.INV_Y, response=0.3) is None
    # Without the response a 1/y weighting has nothing to judge on (fit_weights decides).
    assert weighting_refuses(2.0, Weighting.INV_Y) is None
    assert weighting_refuses(0.0, Weighting.INV_Y2, response=0.02) is None
    assert weighting_refuses(5.0, Weighting.INV_S2, replicates=[3.0, 3.0, 3.0]) == (
        "weighting 1/s2 cannot use concentration 5: its 3 replicates have zero variance")
    assert weighting_refuses(5.0, Weighting.INV_S2, replicates=[3.0, 3.1]) is None


def test_evaluate_leaves_out_a_negative_response_under_1_over_y() -> None:
    # A blank-corrected response can come out negative at the lowest level; 1/y cannot weight it.
    xs = [0.5, 0.5, 1, 1, 2, 2, 5, 5, 10, 10]
    ys = [-0.01, 0.52, 1.01, 0.98, 2.03, 1.97, 5.02, 4.96, 10.1, 9.9]
    curve = evaluate_run(make_run(xs, ys), weighting="1/y").curves[0]
    first = curve.standards[0]
    assert not first.used
    assert first.exclusion_reason == "weighting 1/y divides by the response, which is -0.01 here"
    assert curve.fit.n_points == 9
    assert curve.fit.weighting is Weighting.INV_Y


def _proportional(levels: list[float], n: int) -> tuple[list[float], list[float]]:
    """Invented: n replicates per level at ±2 % in a fixed pattern (s ∝ x)."""
    pattern = np.linspace(-0.02, 0.02, n)
    xs = [float(v) for v in levels for _ in range(n)]
    return xs, [v * (1 + d) for v in levels for d in pattern]


def test_evaluate_leaves_out_a_level_without_replicates_under_1_over_s2() -> None:
    xs, ys = _proportional([1, 10, 100, 1000], 8)
    xs, ys = [*xs[:8], 2.0, *xs[8:]], [*ys[:8], 2.0, *ys[8:]]
    curve = evaluate_run(make_run(xs, ys), weighting="1/s2").curves[0]
    single = curve.standards[8]
    assert not single.used
    assert single.exclusion_reason == (
        "weighting 1/s2 needs at least 2 replicates at each level; concentration 2 has 1")
    assert curve.fit is not None and curve.fit.n_points == 32
    # The left-out level is still read back from the curve.
    assert single.back_calculated == pytest.approx(2.0, rel=0.05)


def test_1_over_s2_counts_only_replicates_still_in_the_fit() -> None:
    # The analyst excluded one of the two replicates at concentration 4: the other one alone
    # has no variance, so 1/s2 must leave it out too.
    xs, ys = _proportional([1, 10, 100, 1000], 8)
    xs, ys = [*xs, 4.0, 4.0], [*ys, 4.05, 3.96]
    run = make_run(xs, ys, excluded={33: "vial cracked"})
    curve = evaluate_run(run, weighting="1/s2").curves[0]
    assert curve.standards[33].exclusion_reason == "vial cracked"
    assert curve.standards[32].exclusion_reason == (
        "weighting 1/s2 needs at least 2 replicates at each level; concentration 4 has 1")
    assert curve.fit.n_points == 32


def test_1_over_s2_is_refused_when_the_replicates_fix_the_variance_too_loosely() -> None:
    # Triplicates at 6 levels: Var ln s² = ψ′(1) = π²/6 per level (closed form), so the
    # power's SE is √(π²/6 / Σ(ln x − mean)²) ≈ 0.32 > 0.2 — weights chosen this loosely
    # cost the intervals their coverage (tests/fit/test_variance_function.py).
    xs, ys = _proportional([1, 2, 5, 10, 50, 100], 3)
    curve = evaluate_run(make_run(xs, ys), weighting="1/s2").curves[0]
    logs = np.log([1, 2, 5, 10, 50, 100])
    se = np.sqrt(np.pi**2 / 6 / np.sum((logs - logs.mean()) ** 2))
    assert curve.fit is None
    assert curve.unfitted_reason == (
        "weighting 1/s2 needs the replicate variances to fix the power of the variance "
        f"function s² = a·x^θ to within a standard error of 0.2; these 6 levels give θ = 2.00 "
        f"± {se:.2f} (more replicates or a wider range would; or use 1/x or 1/x2, chosen in "
        "validation)")
