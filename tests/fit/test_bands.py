"""Confidence and prediction bands against statsmodels, and redrawn from a stored record.

statsmodels: ``WLS(...).fit().get_prediction(exog, weights=w_new).summary_frame(alpha)`` gives
``mean_ci_*`` (the confidence band of the mean) and ``obs_ci_*`` (the prediction interval of one
new reading, variance scale/w_new).  It gets the raw weights and, for the new readings, the raw
weight at each x: 1/x, 1/x², 1/ŷ(x), 1/ŷ(x)², or 1/s²(x) of the fitted variance function at the level.  calib's half-widths must
equal (upper − lower)/2 to 1e-10 relative.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import statsmodels.api as sm

from calib.checks import evaluate_run
from calib.fit.bands import band_figures, prediction_band, weight_at
from calib.fit.curve import fit_curve
from calib.fit.design import design_matrix
from calib.options import Model
from calib.record.record import Record, build_record
from tests.conftest import make_run
from tests.fit.variance_fn import smoothed_s2

RTOL = 1e-10


def invented_run() -> tuple[np.ndarray, np.ndarray]:
    """6 levels 1–200 in triplicate, noise growing with the response (invented)."""
    rng = np.random.default_rng(99)
    x = np.repeat([1.0, 5.0, 10.0, 50.0, 100.0, 200.0], 3)
    mean = 0.4 + 1.5 * x - 5e-4 * x**2
    return x, mean + rng.normal(0.0, 0.01 + 0.02 * mean)


X_DATA, Y_DATA = invented_run()
GRID = np.array([1.0, 2.5, 10.0, 42.0, 150.0, 200.0])


def level_s2() -> dict[float, float]:
    """The fitted 1/s2 variance function at each level (tests/fit/variance_fn.py)."""
    return smoothed_s2(X_DATA, Y_DATA)


def raw(weighting: str, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Raw weights computed here, independently of calib (y = responses, or ŷ for new x)."""
    if weighting == "1/s2":
        s2 = level_s2()
        return np.array([1.0 / s2[c] for c in x])
    return {"none": np.ones_like(x), "1/x": 1 / x, "1/x2": 1 / x**2, "1/y": 1 / y,
            "1/y2": 1 / y**2}[weighting]


@pytest.mark.parametrize("weighting", ["none", "1/x", "1/x2", "1/y", "1/y2", "1/s2"])
@pytest.mark.parametrize("model", ["linear", "origin", "quadratic"])
def test_bands_against_statsmodels(model: str, weighting: str) -> None:
    fit = fit_curve(X_DATA, Y_DATA, model=model, weighting=weighting)
    ref = sm.WLS(Y_DATA, design_matrix(X_DATA, Model(model)),
                 weights=raw(weighting, X_DATA, Y_DATA)).fit(method="qr")
    # 1/s2 weights are known at the levels only: compare there (interpolation is tested below).
    grid = np.unique(X_DATA) if weighting == "1/s2" else GRID
    exog = design_matrix(grid, Model(model))
    yhat = exog @ ref.params
    pred = ref.get_prediction(exog, weights=raw(weighting, grid, yhat))
    for confidence in (0.95, 0.99):
        table = pred.summary_frame(alpha=1 - confidence)
        np.testing.assert_allclose(
            fit.prediction_band(grid, confidence),
            (table["obs_ci_upper"] - table["obs_ci_lower"]).to_numpy() / 2, rtol=RTOL)
        np.testing.assert_allclose(
            fit.confidence_band(grid, confidence),
            (table["mean_ci_upper"] - table["mean_ci_lower"]).to_numpy() / 2, rtol=RTOL)
    np.testing.assert_allclose(fit.predict(grid), table["mean"], rtol=RTOL)


def test_mean_rf_prediction_band_is_the_origin_line_weighted_1_over_x2() -> None:
    fit = fit_curve(X_DATA, Y_DATA, model="mean-rf")
    ref = sm.WLS(Y_DATA, X_DATA[:, None], weights=1 / X_DATA**2).fit(method="qr")
    table = ref.get_prediction(GRID[:, None], weights=1 / GRID**2).summary_frame(alpha=0.05)
    np.testing.assert_allclose(fit.prediction_band(GRID),
                               (table["obs_ci_upper"] - table["obs_ci_lower"]).to_numpy() / 2,
                               rtol=RTOL)


def test_unweighted_line_by_the_textbook_formula() -> None:
    # Straight line: half-width t·σ̂·√(1 + 1/N + (x − x̄)²/Sxx) (any regression textbook).
    x = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    y = np.array([2.1, 3.9, 6.1, 8.0, 9.9])
    fit = fit_curve(x, y)
    sxx = np.sum((x - x.mean()) ** 2)
    grid = np.array([0.0, 3.0, 6.0])
    expected = fit.t_critical() * fit.residual_sd * np.sqrt(1 + 1 / 5 + (grid - 3) ** 2 / sxx)
    np.testing.assert_allclose(fit.prediction_band(grid), expected, rtol=1e-12)


def test_weight_at_follows_the_fit_scale() -> None:
    fit = fit_curve(X_DATA, Y_DATA, weighting="1/x")
    # At the standards' own concentrations w(x) is the fit's weight.
    np.testing.assert_allclose(fit.weight_at(X_DATA), fit.weights, rtol=1e-13)
    fit_y = fit_curve(X_DATA, Y_DATA, weighting="1/y")
    np.testing.assert_allclose(fit_y.weight_at(X_DATA),
                               (1 / fit_y.fitted) / np.mean(1 / Y_DATA), rtol=1e-13)
    # 1/s2 between levels: s² interpolated linearly, by hand between 1 (s² = a) and 5 (s² = b).
    fit_s = fit_curve(X_DATA, Y_DATA, weighting="1/s2")
    s2 = level_s2()
    expected = 1 / (0.75 * s2[1.0] + 0.25 * s2[5.0]) / fit_s.weight_scale
    assert fit_s.weight_at(np.array([2.0]))[0] == pytest.approx(expected, rel=1e-12)
    assert np.isnan(weight_at(np.array([0.0]), "1/x2", weight_scale=1.0)[0])


def test_bands_from_a_stored_record_match_the_fit() -> None:
    # The record keeps what the prediction band needs; redrawing from the JSON alone (after a
    # round trip through its canonical bytes) gives the same band as the live fit.
    rng = np.random.default_rng(7)
    x10 = np.repeat([1.0, 5.0, 10.0, 50.0, 100.0, 200.0], 10)  # 1/s2 needs ~6+ replicates
    y10 = 1.5 * x10 * (1 + 0.02 * rng.standard_normal(x10.size))
    for model, weighting in (("linear", "none"), ("linear", "1/x2"), ("linear", "1/y"),
                             ("linear", "1/s2"), ("mean-rf", None)):
        xs, ys = (x10, y10) if weighting == "1/s2" else (X_DATA, Y_DATA)
        assessment = evaluate_run(make_run(xs, ys), model=model, weighting=weighting)
        fit = assessment.curves[0].fit
        body = Record.from_json(build_record(assessment).canonical).body
        (details,) = body["fit_details"]
        coefficients = body["check"]["curves"][0]["coefficients"]
        beta = [coefficients[n]["estimate"] for n in details["coefficient_names"]]
        grid = np.linspace(details["x_min"], details["x_max"], 7)
        _, half = prediction_band(
            body["check"]["curves"][0]["model"], beta, details["covariance"],
            details["t_critical"], grid, residual_sd=details["residual_sd"],
            # calib.record/2 states the fit's weighting once, as the curve's weighting
            weight_function=body["check"]["curves"][0]["weighting"],
            weight_scale=details["weight_scale"],
            level_variances=details["level_variances"])
        np.testing.assert_allclose(half, fit.prediction_band(grid), rtol=1e-12)
        assert details["residual_df"] == fit.residual_df
        assert json.dumps(band_figures(fit), allow_nan=False)


def test_band_figures_for_mean_rf_name_the_implied_weighting() -> None:
    figures = band_figures(fit_curve([1, 2, 4, 8], [2.0, 4.2, 7.8, 16.4], model="mean-rf"))
    assert figures["weight_function"] == "1/x2" and figures["level_variances"] == []
    assert figures["weight_scale"] == pytest.approx(np.mean(1 / np.array([1, 2, 4, 8.0]) ** 2))


def test_missing_figures_are_refused() -> None:
    with pytest.raises(ValueError, match=r"^weight_function 1/s2 needs the level variances$"):
        weight_at(np.array([1.0]), "1/s2")
    with pytest.raises(ValueError, match=r"^weight_function 1/y needs the fitted responses$"):
        weight_at(np.array([1.0]), "1/y")
