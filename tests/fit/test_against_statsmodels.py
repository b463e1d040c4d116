"""The fitter against statsmodels' WLS on the same invented calibration data.

What is compared, for every model × weighting, with relative tolerance 1e-10:
estimates (``params``), standard errors (``bse``), t values (``tvalues``), two-sided p-values
(``pvalues``), confidence intervals (``conf_int(alpha)``), R² (``rsquared``: centred and weighted
for the models with intercept; statsmodels' uncentred R² for ``origin``, which it reports when
the design has no constant), fitted values and residuals, the residual degrees of freedom,
t tests against a non-zero reference (``t_test``) and the confidence band of the mean response
(``get_prediction().conf_int``).  The ICH limits are checked against the same fits in
``test_limits.py``.

statsmodels gets the raw weights 1/x or 1/x²; calib scales them to a mean of 1, so only its
σ̂² differs, by exactly that factor (checked too).  statsmodels is asked for its QR solver:
its default pseudo-inverse keeps only about 10–11 digits on the quadratic design over 1–1000.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm

from calib.fit.curve import CurveFit, fit_curve
from calib.fit.design import design_matrix
from calib.fit.wls import solve_wls
from calib.options import Model

RTOL = 1e-10
MODELS = ["linear", "origin", "quadratic"]
WEIGHTINGS = ["none", "1/x", "1/x2"]


def invented_run() -> tuple[np.ndarray, np.ndarray]:
    """8 levels 1–1000, 3 replicates each, noise SD growing with the response (invented)."""
    rng = np.random.default_rng(20240611)
    levels = np.array([1.0, 2.0, 5.0, 10.0, 50.0, 100.0, 500.0, 1000.0])
    x = np.repeat(levels, 3)
    mean = 0.8 + 2.5 * x - 4e-4 * x**2
    y = mean + rng.normal(0.0, 0.02 * mean + 0.1)
    return x, y


X_DATA, Y_DATA = invented_run()


def raw_weights(x: np.ndarray, weighting: str) -> np.ndarray:
    return {"none": np.ones_like(x), "1/x": 1.0 / x, "1/x2": 1.0 / x**2}[weighting]


def reference_fit(
    x: np.ndarray, y: np.ndarray, model: str, weighting: str
) -> sm.regression.linear_model.RegressionResults:
    X = design_matrix(x, Model(model))
    return sm.WLS(y, X, weights=raw_weights(x, weighting)).fit(method="qr")


def as_arrays(fit: CurveFit) -> dict[str, np.ndarray]:
    rows = fit.coefficient_table()
    return {
        "params": np.array([r.estimate for r in rows]),
        "bse": np.array([r.std_error for r in rows]),
        "tvalues": np.array([r.t_value for r in rows]),
        "pvalues": np.array([r.p_value for r in rows]),
        "conf_int": np.array([[r.ci_low, r.ci_high] for r in rows]),
    }


@pytest.fixture(
    scope="module",
    params=[(m, w) for m in MODELS for w in WEIGHTINGS],
    ids=lambda mw: f"{mw[0]}-{mw[1]}",
)
def pair(request: pytest.FixtureRequest) -> tuple[CurveFit, object, str, str]:
    model, weighting = request.param
    fit = fit_curve(X_DATA, Y_DATA, model=model, weighting=weighting)
    return fit, reference_fit(X_DATA, Y_DATA, model, weighting), model, weighting


def test_coefficient_inference(pair: tuple[CurveFit, object, str, str]) -> None:
    fit, ref, _, _ = pair
    ours = as_arrays(fit)
    np.testing.assert_allclose(ours["params"], ref.params, rtol=RTOL)
    np.testing.assert_allclose(ours["bse"], ref.bse, rtol=RTOL)
    np.testing.assert_allclose(ours["tvalues"], ref.tvalues, rtol=RTOL)
    np.testing.assert_allclose(ours["pvalues"], ref.pvalues, rtol=RTOL)
    np.testing.assert_allclose(ours["conf_int"], ref.conf_int(alpha=0.05), rtol=RTOL)


def test_accessors_agree_with_table(pair: tuple[CurveFit, object, str, str]) -> None:
    fit, ref, _, _ = pair
    for j, name in enumerate(fit.names):
        assert fit.coefficients[name] == pytest.approx(ref.params[j], rel=RTOL)
        assert fit.std_error(name) == pytest.approx(ref.bse[j], rel=RTOL)
        assert fit.t_value(name) == pytest.approx(ref.tvalues[j], rel=RTOL)
        assert fit.p_value(name) == pytest.approx(ref.pvalues[j], rel=RTOL)
        np.testing.assert_allclose(fit.confidence_interval(name), ref.conf_int(0.05)[j], rtol=RTOL)
    np.testing.assert_allclose(fit.covariance, ref.cov_params(), rtol=RTOL)


def test_other_confidence_level(pair: tuple[CurveFit, object, str, str]) -> None:
    fit, ref, model, weighting = pair
    at_99 = fit_curve(X_DATA, Y_DATA, model=model, weighting=weighting, confidence=0.99)
    ours = np.array([[r.ci_low, r.ci_high] for r in at_99.coefficient_table()])
    np.testing.assert_allclose(ours, ref.conf_int(alpha=0.01), rtol=RTOL)
    # An explicit level on the 95 % fit gives the same interval.
    for j, name in enumerate(fit.names):
        np.testing.assert_allclose(
            fit.confidence_interval(name, 0.90), ref.conf_int(alpha=0.10)[j], rtol=RTOL
        )


def test_goodness_of_fit(pair: tuple[CurveFit, object, str, str]) -> None:
    fit, ref, model, weighting = pair
    assert fit.residual_df == int(ref.df_resid)
    # statsmodels uses the uncentred R² exactly when there is no constant (origin).
    assert (ref.k_constant == 0) == (model == "origin")
    assert fit.r_squared == pytest.approx(ref.rsquared, rel=RTOL)
    np.testing.assert_allclose(fit.fitted, ref.fittedvalues, rtol=RTOL)
    np.testing.assert_allclose(fit.residuals, ref.resid, rtol=RTOL)
    # σ̂² differs from statsmodels' scale only by the mean of the raw weights.
    w = raw_weights(X_DATA, weighting)
    assert fit.residual_sd**2 == pytest.approx(ref.scale / w.mean(), rel=RTOL)
    np.testing.assert_allclose(fit.weights, w / w.mean(), rtol=1e-14)


def test_r_is_signed_root(pair: tuple[CurveFit, object, str, str]) -> None:
    fit, ref, model, _ = pair
    assert fit.r == pytest.approx(math.sqrt(ref.rsquared), rel=RTOL)
    if model != "quadratic":
        assert math.copysign(1.0, fit.r) == math.copysign(1.0, ref.params[-1])


def test_t_against_reference(pair: tuple[CurveFit, object, str, str]) -> None:
    fit, ref, _, _ = pair
    j = fit.names.index("slope")
    reference = 2.45
    restriction = np.zeros((1, len(fit.names)))
    restriction[0, j] = 1.0
    test = ref.t_test((restriction, np.array([reference])))
    assert fit.t_value("slope", reference) == pytest.approx(float(test.tvalue[0, 0]), rel=RTOL)
    assert fit.p_value("slope", reference) == pytest.approx(float(test.pvalue), rel=RTOL)


def test_confidence_band_and_predict(pair: tuple[CurveFit, object, str, str]) -> None:
    fit, ref, model, _ = pair
    grid = np.array([1.0, 3.0, 20.0, 250.0, 777.0, 1000.0])
    pred = ref.get_prediction(design_matrix(grid, Model(model)))
    np.testing.assert_allclose(fit.predict(grid), pred.predicted_mean, rtol=RTOL)
    low, high = pred.conf_int(alpha=0.05).T
    np.testing.assert_allclose(fit.confidence_band(grid), (high - low) / 2, rtol=RTOL)


@pytest.mark.parametrize("weighting", WEIGHTINGS)
@pytest.mark.parametrize("model", MODELS)
def test_constant_factor_on_weights_changes_nothing(model: str, weighting: str) -> None:
    # statsmodels with the raw weights times 1e6 gives the same inference as calib.
    fit = fit_curve(X_DATA, Y_DATA, model=model, weighting=weighting)
    X = design_matrix(X_DATA, Model(model))
    big = sm.WLS(Y_DATA, X, weights=1e6 * raw_weights(X_DATA, weighting)).fit(method="qr")
    ours = as_arrays(fit)
    np.testing.assert_allclose(ours["params"], big.params, rtol=RTOL)
    np.testing.assert_allclose(ours["bse"], big.bse, rtol=RTOL)
    np.testing.assert_allclose(ours["pvalues"], big.pvalues, rtol=RTOL)
    assert fit.r_squared == pytest.approx(big.rsquared, rel=RTOL)
    # And the general solver: β and σ̂²·C do not depend on the scale of w.
    w = raw_weights(X_DATA, weighting)
    nu = X_DATA.size - X.shape[1]
    sols = [solve_wls(X, Y_DATA, k * w) for k in (1.0, 1e-4, 37.0)]
    covs = [s.weighted_ss / nu * s.unscaled_covariance for s in sols]
    for sol, cov in zip(sols[1:], covs[1:], strict=True):
        np.testing.assert_allclose(sol.beta, sols[0].beta, rtol=RTOL)
        np.testing.assert_allclose(cov, covs[0], rtol=RTOL)
        np.testing.assert_allclose(sol.residuals, sols[0].residuals, rtol=RTOL)


@pytest.mark.parametrize("weighting", WEIGHTINGS)
@pytest.mark.parametrize("model", MODELS)
def test_row_order_does_not_matter(model: str, weighting: str) -> None:
    order = np.random.default_rng(7).permutation(X_DATA.size)
    fit = fit_curve(X_DATA, Y_DATA, model=model, weighting=weighting)
    shuffled = fit_curve(X_DATA[order], Y_DATA[order], model=model, weighting=weighting)
    a, b = as_arrays(fit), as_arrays(shuffled)
    for key in a:
        np.testing.assert_allclose(b[key], a[key], rtol=RTOL, err_msg=key)
    assert shuffled.residual_sd == pytest.approx(fit.residual_sd, rel=RTOL)
    assert shuffled.r_squared == pytest.approx(fit.r_squared, rel=RTOL)
    # Per-point results follow their points.
    np.testing.assert_allclose(shuffled.fitted, fit.fitted[order], rtol=RTOL)
    np.testing.assert_allclose(shuffled.residuals, fit.residuals[order], rtol=RTOL)
    np.testing.assert_allclose(shuffled.weights, fit.weights[order], rtol=RTOL)
