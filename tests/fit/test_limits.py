"""ICH Q2 detection and quantitation limits, against statsmodels and a hand calculation.

ICH Q2(R2) (2023), limits based on the standard deviation of the response and the slope:
LOD = 3.3·σ/S and LOQ = 10·σ/S, σ the residual standard deviation and S the slope.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm

from calib.fit.curve import fit_curve
from calib.fit.design import design_matrix
from calib.fit.limits import ich_limits
from calib.options import Model


def invented_run() -> tuple[np.ndarray, np.ndarray]:
    """6 levels 0.5–10 mg/L, 3 replicates (invented, in the spirit of SPEC §11)."""
    rng = np.random.default_rng(11)
    x = np.repeat([0.5, 1.0, 2.0, 4.0, 7.0, 10.0], 3)
    y = 0.02 + 0.513 * x - 0.002 * x**2 + rng.normal(0.0, 0.004 + 0.01 * x)
    return x, y


X_DATA, Y_DATA = invented_run()
RAW_WEIGHTS = {"none": np.ones_like(X_DATA), "1/x": 1.0 / X_DATA, "1/x2": 1.0 / X_DATA**2}


@pytest.mark.parametrize("weighting", ["none", "1/x", "1/x2"])
@pytest.mark.parametrize("model", ["linear", "origin", "quadratic"])
def test_ich_limits_against_statsmodels(model: str, weighting: str) -> None:
    # σ and S computed independently from statsmodels' WLS on the same points.  With weights,
    # σ is the SD of one reading at the lowest standard, scale/w_raw(x_low) from statsmodels'
    # unscaled raw weights, so it does not depend on how calib scales the weights (issue 15);
    # for the quadratic S is the linear term, the slope at concentration 0.
    X = design_matrix(X_DATA, Model(model))
    w = RAW_WEIGHTS[weighting]
    ref = sm.WLS(Y_DATA, X, weights=w).fit(method="qr")
    low = int(np.argmin(X_DATA))
    sigma = math.sqrt(ref.scale / w[low])
    slope = abs(ref.params[1 if model != "origin" else 0])
    lod, loq = ich_limits(fit_curve(X_DATA, Y_DATA, model=model, weighting=weighting))
    assert lod.value == pytest.approx(3.3 * sigma / slope, rel=1e-10)
    assert loq.value == pytest.approx(10 * sigma / slope, rel=1e-10)
    assert lod.method.startswith("ICH Q2: 3.3·σ/S")
    if weighting != "none":
        assert f"σ = residual SD at the lowest standard (x = 0.5; σ̂/√w(x), weighting {weighting})" \
            in lod.method
    assert loq.method.startswith("ICH Q2: 10·σ/S")


def test_ich_limits_unweighted_line_by_hand() -> None:
    # Unweighted line through x = 1..5, y = 2.1, 3.9, 6.1, 8.0, 9.9 (invented, derived by hand):
    # x̄ = 3, ȳ = 6, Sxx = 10, Sxy = 19.7 → b = 1.97, a = 0.09; fitted 2.06, 4.03, 6.00, 7.97,
    # 9.94; residuals 0.04, −0.13, 0.10, 0.03, −0.04 → SS = 0.031 on ν = 3,
    # σ̂ = √(0.031/3) = 0.101653…; LOD = 3.3·σ̂/b = 0.170282…, LOQ = 10·σ̂/b = 0.516005….
    fit = fit_curve([1, 2, 3, 4, 5], [2.1, 3.9, 6.1, 8.0, 9.9])
    assert fit.coefficients["slope"] == pytest.approx(1.97, rel=1e-13)
    assert fit.coefficients["intercept"] == pytest.approx(0.09, rel=1e-12)
    lod, loq = ich_limits(fit)
    sigma = math.sqrt(0.031 / 3)
    assert lod.value == pytest.approx(3.3 * sigma / 1.97, rel=1e-12)
    assert loq.value == pytest.approx(10 * sigma / 1.97, rel=1e-12)
    assert round(lod.value, 6) == 0.170282
    assert round(loq.value, 6) == 0.516005


def test_ich_limits_ignore_slope_sign() -> None:
    # A falling response (e.g. a quenching signal) gives the same limits as its mirror image.
    x = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    y = np.array([2.1, 3.9, 6.1, 8.0, 9.9])
    up = ich_limits(fit_curve(x, y))
    down = ich_limits(fit_curve(x, 20.0 - y))
    assert down[0].value == pytest.approx(up[0].value, rel=1e-12)
    assert down[1].value == pytest.approx(up[1].value, rel=1e-12)
