"""What a test could have detected: the effect found with a given power.

A test that passes says only that no effect larger than the test can see was present.
These functions give that size: the smallest true value of a coefficient, or the
smallest departure of a known shape, that a test at level α would detect with the
stated power on this curve's design and scatter (noncentral t and F distributions,
e.g. Cohen, *Statistical Power Analysis for the Behavioral Sciences*, 2nd ed. 1988;
the noncentrality follows from the design, σ̂ standing in for σ).
"""

from __future__ import annotations

import functools
import math

import numpy as np
from scipy import special  # the noncentral F, which calib.fit.distributions lacks

from calib.fit.distributions import f_ppf, nct_cdf, norm_cdf, norm_ppf, t_ppf
from calib.fit.wls import solve_wls

__all__ = ["detectable_bend_pct", "detectable_f_noncentrality", "detectable_t_noncentrality"]


@functools.lru_cache(maxsize=256)
def detectable_t_noncentrality(df: int, alpha: float = 0.05, power: float = 0.80) -> float:
    """Noncentrality δ at which a two-sided t-test on ``df`` degrees of freedom has ``power``.

    The effect detectable with that power is δ times the estimate's standard error.
    Remembered per (df, alpha, power): the curves of a run share their degrees of
    freedom, and the root is found once for all of them.

    Examples
    --------
    Large df tends to the normal-theory figure z(1 − α/2) + z(power) = 1.96 + 0.8416:

    >>> round(detectable_t_noncentrality(100000), 2)
    2.8
    """
    if df < 1 or not 0 < alpha < 1 or not 0 < power < 1:
        raise ValueError(f"need df ≥ 1 and 0 < alpha, power < 1; got {df}, {alpha}, {power}")
    if df > 2000:
        # scipy's noncentral t loses accuracy at huge df, where it is the normal anyway.
        crit = norm_ppf(1 - alpha / 2)

        def short(delta: float) -> float:
            return float(norm_cdf(delta - crit) + norm_cdf(-crit - delta)) - power
    else:
        crit = t_ppf(1 - alpha / 2, df)

        def short(delta: float) -> float:
            # The far tail is negligible where it matters, and may come back NaN at a
            # large δ: count it as 0 then.
            far = float(nct_cdf(-crit, df, delta))
            near = 1.0 - float(nct_cdf(crit, df, delta))
            return near + (far if math.isfinite(far) else 0.0) - power

    # The power at δ = crit + z(power)·(a bit) already exceeds ``power``; bracket from there.
    high = float(crit) + 10.0
    return _root(short, 0.0, high, xtol=1e-10)


@functools.lru_cache(maxsize=256)
def detectable_f_noncentrality(dfn: int, dfd: int, alpha: float = 0.05,
                               power: float = 0.80) -> float:
    """Noncentrality λ at which an F-test on (dfn, dfd) degrees of freedom has ``power``.

    Remembered per (dfn, dfd, alpha, power), as :func:`detectable_t_noncentrality`.

    λ = Σ wᵢ·dᵢ²/σ² for a departure dᵢ of the true means from the fitted model.

    Examples
    --------
    For dfn = 1 and large dfd, λ = δ² of the two-sided normal test, 2.8016² = 7.849:

    >>> abs(detectable_f_noncentrality(1, 100000) - 2.8016**2) < 0.02
    True
    """
    if dfn < 1 or dfd < 1 or not 0 < alpha < 1 or not 0 < power < 1:
        raise ValueError(f"need dfn, dfd ≥ 1 and 0 < alpha, power < 1; got {dfn}, {dfd}, "
                         f"{alpha}, {power}")
    dfd = min(dfd, 2000)  # beyond, F(dfn, dfd) is χ²(dfn)/dfn to many digits
    crit = f_ppf(1 - alpha, dfn, dfd)

    def short(lam: float) -> float:
        return 1.0 - float(special.ncfdtr(dfn, dfd, lam, crit)) - power

    high = 10.0
    while short(high) < 0:
        high *= 2
    return _root(short, 1e-9, high, xtol=1e-8)


def _root(f, low: float, high: float, *, xtol: float) -> float:
    """The root of an increasing ``f`` between ``low`` (f < 0) and ``high`` (f ≥ 0), by
    bisection to ``xtol``: a power curve is monotone, so halving never fails (and needs no
    scipy.optimize on the checking path)."""
    while high - low > xtol:
        mid = 0.5 * (low + high)
        if f(mid) < 0:
            low = mid
        else:
            high = mid
    return 0.5 * (low + high)


def detectable_bend_pct(x: np.ndarray, weights: np.ndarray, fitted: np.ndarray, sigma2: float,
                        lam: float) -> float:
    """The quadratic bend a test with noncentrality ``lam`` at 80 % power would detect.

    The bend is c·x² beyond the straight line; its part the line cannot absorb is
    q⊥ = c·(x² − its weighted projection on [1, x]), and the test's noncentrality is
    Σ wᵢ·q⊥ᵢ²/σ².  Returned: the departure q⊥ at the highest standard for that λ, as %
    of the fitted response there (NaN when it cannot be worked out).

    Examples
    --------
    Three equally weighted levels 0, 1, 2: x² − (2x − 1/3) gives q⊥ = 1/3, −2/3, 1/3,
    Σq⊥² = 2/3; with σ² = 1 and λ = 6, c = 3, so the bend at x = 2 is 1 on a fitted 10,
    i.e. 10 %:

    >>> round(detectable_bend_pct(np.array([0., 1, 2]), np.ones(3), np.array([0., 5, 10]),
    ...                           1.0, 6.0), 6)
    10.0
    """
    try:
        # x² regressed on [1, x] with the fit's weights: q⊥ are the residuals.
        sol = solve_wls(np.column_stack([np.ones_like(x), x]), x * x, weights)
    except ValueError:  # a single concentration: no straight line to compare with
        return math.nan
    perp = sol.residuals
    energy = sol.weighted_ss
    top = int(np.argmax(x))
    if energy <= 0 or sigma2 <= 0 or fitted[top] == 0:
        return math.nan
    c = math.sqrt(lam * sigma2 / energy)
    return float(100 * abs(c * perp[top]) / abs(fitted[top]))
