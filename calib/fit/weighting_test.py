"""Does the scatter still grow (or shrink) with concentration under the fit's weighting?

Weighting advice as a test with a stated size: the Cook–Weisberg score test for a
variance that is a power of the concentration, on the fit's weighted residuals.  Under
the null hypothesis that the weighting is right, the weighted residuals eᵢ = √wᵢ·rᵢ have
one variance σ²; the alternative is Var(eᵢ) = σ²·xᵢ^γ.  The score statistic is
S = ½·(explained sum of squares of uᵢ = eᵢ²/σ̂² regressed on log xᵢ), χ²(1) under the
null (Cook and Weisberg, Biometrika 70 (1983) 1–10; the same as Breusch and Pagan's
original LM test, Econometrica 47 (1979) 1287–1294; statsmodels ``het_breuschpagan`` with
``robust=False`` computes it).  The advice changes only when the test rejects at α, so
it advises against a correct weighting at most α of the time (in small designs the χ²
approximation is conservative: simulated sizes 0.00–0.05 at α = 0.05, see
``bench/power.py``).  γ is estimated by regressing log eᵢ² on log xᵢ (E log χ²₁ is a
constant, so the slope is unbiased for γ), and the advice is the weighting among none,
1/x and 1/x² whose variance power (0, 1, 2) is nearest to the current power + γ̂, at
least one step in the direction the test found.

Standards at concentration 0 have no log concentration and take no part.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from calib.fit.distributions import chi2_sf
from calib.options import Weighting

__all__ = ["VARIANCE_POWER", "WeightingTest", "weighting_test"]

#: The power of x the variance is assumed proportional to under each weighting
#: (1/y and 1/y² count as 1/x and 1/x², which they approximate along a curve through 0).
VARIANCE_POWER = {Weighting.NONE: 0, Weighting.INV_X: 1, Weighting.INV_X2: 2,
                  Weighting.INV_Y: 1, Weighting.INV_Y2: 2}
_BY_POWER = {0: Weighting.NONE, 1: Weighting.INV_X, 2: Weighting.INV_X2}


@dataclass(frozen=True)
class WeightingTest:
    """Score test of the fit's weighting against a variance growing as a power of x.

    Attributes
    ----------
    weighting : Weighting
        The fit's weighting, the null hypothesis.
    statistic : float
        The Cook–Weisberg score S, χ²(1) under the null.
    p_value : float
        P(χ²(1) ≥ S).
    gamma : float
        Estimated extra power of x in the variance of the weighted residuals.
    n : int
        Points taking part (x > 0).
    reason : str
        Why the test could not be made ("" when it was).
    """

    weighting: Weighting
    statistic: float
    p_value: float
    gamma: float
    n: int
    reason: str = ""

    def rejects(self, alpha: float) -> bool:
        """True when the weighting is contradicted at level α."""
        return not self.reason and self.p_value < alpha

    def advised(self, alpha: float) -> Weighting:
        """The weighting advised: the fit's own unless the test rejects at α."""
        if not self.rejects(alpha):
            return self.weighting
        base = VARIANCE_POWER.get(self.weighting, 0)
        step = 1 if self.gamma > 0 else -1
        target = int(round(base + self.gamma))
        target = max(target, base + 1) if step > 0 else min(target, base - 1)
        return _BY_POWER[min(max(target, 0), 2)]


def weighting_test(x: np.ndarray, residuals: np.ndarray, weights: np.ndarray,
                   weighting: Weighting | str) -> WeightingTest:
    """Cook–Weisberg score test of the weighting on a fit's residuals.

    Parameters
    ----------
    x, residuals, weights : array_like
        Concentrations, raw residuals y − ŷ and the fit's weights.
    weighting : Weighting or str
        The fit's weighting (the null hypothesis).

    Examples
    --------
    Residuals growing with x under equal weights: the test rejects and points to 1/x².

    >>> x = np.repeat([1.0, 2, 5, 10, 20, 50], 2)
    >>> r = x * np.tile([0.02, -0.02], 6) * np.array([1, 1.3, 0.7, 1.2, 0.9, 1.1] * 2)
    >>> t = weighting_test(x, r, np.ones_like(x), "none")
    >>> t.rejects(0.05), t.advised(0.05).value
    (True, '1/x2')
    """
    weighting = Weighting(weighting)
    xs = np.asarray(x, dtype=float)
    e = np.sqrt(np.asarray(weights, dtype=float)) * np.asarray(residuals, dtype=float)
    keep = xs > 0
    xs, e = xs[keep], e[keep]
    n = int(xs.size)

    def unavailable(reason: str) -> WeightingTest:
        return WeightingTest(weighting, math.nan, math.nan, math.nan, n, reason)

    if n < 4:
        return unavailable(f"{n} standards above concentration 0; the test needs at least 4")
    z = np.log(xs)
    if np.ptp(z) <= 0:
        return unavailable("every standard is at one concentration")
    sigma2 = float(np.mean(e * e))
    if not sigma2 > 0:
        return unavailable("the residuals are all zero")
    u = e * e / sigma2
    zc = z - z.mean()
    b = float(np.sum(zc * u) / np.sum(zc * zc))
    score = 0.5 * b * b * float(np.sum(zc * zc))
    p = float(chi2_sf(score, 1))
    signed = e != 0  # an exact zero has no logarithm and says nothing of the spread
    zs = z[signed] - z[signed].mean()
    logs = np.log(e[signed] ** 2)
    gamma = (float(np.sum(zs * (logs - logs.mean())) / np.sum(zs * zs)) if np.sum(zs * zs) > 0
             else math.copysign(1.0, b))
    return WeightingTest(weighting, score, p, gamma, n)
