"""Monte Carlo: the 95 % interval of an inverse prediction covers the true concentration ~95 % of the time.

Thousands of calibrations are simulated with a fixed seed and fitted at once
(:func:`calib.fit.fit_batch`); each predicts the concentration of m new readings
of a sample of known concentration, and the share of intervals that hold the
true value is compared with 95 %.  With 4000 simulations the standard error of
that share is √(0.95·0.05/4000) ≈ 0.0034; the accepted band 0.935–0.965 is
about ±4.4 standard errors, so the test fails by chance about once in 10⁵ runs
(the seed is fixed anyway).  The delta method is a first-order approximation,
so the curves are made precise enough for it to apply (t·SE(b)/b ≪ 1), as any
usable calibration is.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

from calib.fit import fit_batch
from calib.fit.design import raw_weights
from calib.fit.inverse import quadratic_root
from calib.options import Weighting
from calib.quantify.inverse import cg4_std_error, delta_std_error

K = 4000
LEVELS = np.repeat([1.0, 2.0, 5.0, 10.0, 20.0, 50.0], 2)


def _coverage(low: np.ndarray, high: np.ndarray, truth: float) -> float:
    return float(np.mean((low <= truth) & (truth <= high)))


def test_unweighted_line_interval_covers_95_percent():
    rng = np.random.default_rng(20261201)
    a, b, sigma, x_true, m = 0.4, 2.0, 0.6, 14.0, 2
    x = np.tile(LEVELS, (K, 1))
    y = a + b * x + rng.normal(0, sigma, x.shape)
    batch = fit_batch(x, y, model="linear")
    y0 = (a + b * x_true) + rng.normal(0, sigma, (K, m)).mean(axis=1)
    beta = batch.coefficients
    x0 = (y0 - beta[:, 0]) / beta[:, 1]
    s = delta_std_error("linear", beta, batch.covariance, x0, m=m, residual_sd=batch.residual_sd)
    t = stats.t.ppf(0.975, LEVELS.size - 2)
    assert 0.935 <= _coverage(x0 - t * s, x0 + t * s, x_true) <= 0.965
    # And the CG 4 closed form gives the same intervals, curve by curve.
    sxx = np.sum((LEVELS - LEVELS.mean()) ** 2)
    closed = cg4_std_error(residual_sd=batch.residual_sd, slope=beta[:, 1], m=m, n=LEVELS.size,
                           response=y0, response_mean=y.mean(axis=1), sxx=sxx)
    np.testing.assert_allclose(s, closed, rtol=1e-10)


def test_weighted_line_interval_covers_95_percent():
    # Noise proportional to concentration (constant CV), fitted with 1/x² weights.
    rng = np.random.default_rng(7)
    a, b, cv, x_true, m = 0.02, 1.5, 0.04, 3.0, 3
    x = np.tile(LEVELS, (K, 1))
    y = a + b * x + rng.normal(0, 1, x.shape) * cv * b * x
    batch = fit_batch(x, y, model="linear", weighting="1/x2")
    y0 = (a + b * x_true) + (rng.normal(0, 1, (K, m)) * cv * b * x_true).mean(axis=1)
    beta = batch.coefficients
    x0 = (y0 - beta[:, 0]) / beta[:, 1]
    scale = raw_weights(LEVELS, Weighting.INV_X2).mean()
    w0 = (1 / x0**2) / scale
    s = delta_std_error("linear", beta, batch.covariance, x0, m=m, residual_sd=batch.residual_sd,
                        weight=w0)
    t = stats.t.ppf(0.975, LEVELS.size - 2)
    assert 0.935 <= _coverage(x0 - t * s, x0 + t * s, x_true) <= 0.965


def test_quadratic_interval_covers_95_percent():
    rng = np.random.default_rng(11)
    a, b, c, sigma, x_true, m = 0.1, 2.0, -0.012, 0.25, 30.0, 2
    x = np.tile(LEVELS, (K, 1))
    y = a + b * x + c * x**2 + rng.normal(0, sigma, x.shape)
    batch = fit_batch(x, y, model="quadratic")
    y0 = (a + b * x_true + c * x_true**2) + rng.normal(0, sigma, (K, m)).mean(axis=1)
    beta = batch.coefficients
    x0 = quadratic_root(beta[:, 0], beta[:, 1], beta[:, 2], y0, 1.0, 50.0)
    s = delta_std_error("quadratic", beta, batch.covariance, x0, m=m,
                        residual_sd=batch.residual_sd)
    t = stats.t.ppf(0.975, LEVELS.size - 3)
    assert 0.935 <= _coverage(x0 - t * s, x0 + t * s, x_true) <= 0.965
