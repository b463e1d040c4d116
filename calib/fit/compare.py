"""Two calibration lines compared: equal slopes, then equal intercepts, by F-tests on the pooled model.

The two curves' standards are pooled into one least-squares problem with a
group indicator g (0 for the first curve, 1 for the second) and three nested
models are fitted:

- separate lines: y = a₁(1 − g) + a₂g + b₁x(1 − g) + b₂xg;
- common slope, separate intercepts (parallel lines): y = a₁(1 − g) + a₂g + b·x;
- common line: y = a + b·x.

Equal slopes is the F-test of the parallel lines against the separate lines;
equal intercepts, asked once the slopes agree, is the F-test of the common
line against the parallel lines.  For lines through the origin (``origin``,
``mean-rf``) only the slopes are compared.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from calib.fit.curve import CurveFit
from calib.fit.distributions import f_ppf, f_sf
from calib.fit.wls import solve_wls
from calib.options import Model, Weighting

__all__ = ["CurveComparison", "FTest", "compare_curves"]


@dataclass(frozen=True)
class FTest:
    """An F-test of a smaller model against a larger one.

    Attributes
    ----------
    statistic : float
        F = ((SS_small − SS_large)/df_num) / (SS_large/df_den).
    df_num, df_den : int
        Degrees of freedom of the numerator and denominator.
    p_value : float
        P(F(df_num, df_den) ≥ statistic).
    """

    statistic: float
    df_num: int
    df_den: int
    p_value: float

    def rejects(self, alpha: float = 0.05) -> bool:
        """True when the smaller model is rejected at level ``alpha`` (p < α)."""
        return self.p_value < alpha

    def critical(self, alpha: float = 0.05) -> float:
        """F(1 − α; df_num, df_den)."""
        return f_ppf(1 - alpha, self.df_num, self.df_den)


@dataclass(frozen=True)
class CurveComparison:
    """Whether two calibration lines share a slope and an intercept.

    Attributes
    ----------
    model, weighting : Model, Weighting
        Of both curves.
    slope_a, slope_b : float
        The slopes fitted separately.
    common_slope : float
        The slope of the parallel lines (or of the common line through the origin).
    intercept_a, intercept_b : float
        The intercepts of the parallel lines (``nan`` without intercepts).
    slopes : FTest
        Parallel lines against separate lines.
    intercepts : FTest or None
        Common line against parallel lines; None for lines through the origin.
    """

    model: Model
    weighting: Weighting
    slope_a: float
    slope_b: float
    common_slope: float
    intercept_a: float
    intercept_b: float
    slopes: FTest
    intercepts: FTest | None

    def slopes_differ(self, alpha: float = 0.05) -> bool:
        """True when the slopes differ significantly."""
        return self.slopes.rejects(alpha)

    def intercepts_differ(self, alpha: float = 0.05) -> bool | None:
        """True when the intercepts of the parallel lines differ significantly; None without."""
        return None if self.intercepts is None else self.intercepts.rejects(alpha)

    def same_line(self, alpha: float = 0.05) -> bool:
        """True when neither the slopes nor (where there are any) the intercepts differ."""
        return not self.slopes_differ(alpha) and not self.intercepts_differ(alpha)


def _f_test(ss_small: float, df_small: int, ss_large: float, df_large: int) -> FTest:
    df_num = df_small - df_large
    # Rounding can leave the larger model's sum a hair above the smaller one's.
    gain = max(ss_small - ss_large, 0.0)
    if ss_large > 0:
        f = (gain / df_num) / (ss_large / df_large)
    else:
        f = math.inf if gain > 0 else math.nan
    p = f_sf(f, df_num, df_large) if math.isfinite(f) else (0.0 if f > 0 else math.nan)
    return FTest(float(f), df_num, df_large, p)


def compare_curves(fit_a: CurveFit, fit_b: CurveFit) -> CurveComparison:
    """Compare two straight calibration lines by F-tests on the pooled model.

    Parameters
    ----------
    fit_a, fit_b : CurveFit
        Two fits of the same model (``linear``, ``origin`` or ``mean-rf``) and
        weighting, e.g. the same analyte on two days or two instruments.

    Returns
    -------
    CurveComparison

    Raises
    ------
    ValueError
        For a quadratic, or two fits of different model or weighting.

    Notes
    -----
    With SS the weighted residual sum of squares of each nested model (module
    notes) and N = N_a + N_b::

        F_slopes     = (SS_parallel − SS_separate) / (SS_separate / (N − 4))   on (1, N − 4)
        F_intercepts = (SS_common − SS_parallel) / (SS_parallel / (N − 3))     on (1, N − 3)

    and for lines through the origin F_slopes = (SS_common − SS_separate) /
    (SS_separate/(N − 2)) on (1, N − 2).  The pooled fits use the raw weights
    (1/x, 1/y²..., not each curve's weights scaled to a mean of 1), so both
    curves are weighted alike; the tests assume the same residual variance
    (after weighting) in both curves.  For ``mean-rf`` the slopes test is the
    pooled two-sample t-test of the response factors, squared.

    References
    ----------
    N. R. Draper, H. Smith, Applied Regression Analysis, the extra sum of
    squares principle; D. C. Montgomery, E. A. Peck, G. G. Vining, Introduction
    to Linear Regression Analysis, indicator variables and tests of parallel
    lines (both from memory).

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> x = [1, 2, 3, 4, 5, 6]
    >>> day1 = fit_curve(x, [2.1, 4.0, 6.1, 7.9, 10.1, 12.0])
    >>> day2 = fit_curve(x, [2.6, 4.4, 6.7, 8.4, 10.5, 12.6])
    >>> cmp = compare_curves(day1, day2)
    >>> cmp.slopes_differ(), cmp.intercepts_differ()
    (False, True)
    """
    if fit_a.model is not fit_b.model or fit_a.weight_basis is not fit_b.weight_basis:
        raise ValueError(
            "compare_curves needs two fits of the same model and weighting; got "
            f"{fit_a.model.value} ({fit_a.weighting.value}) and "
            f"{fit_b.model.value} ({fit_b.weighting.value})")
    if fit_a.model is Model.QUADRATIC:
        raise ValueError("compare_curves compares straight lines; got model quadratic")
    x = np.concatenate([fit_a.x, fit_b.x])
    y = np.concatenate([fit_a.y, fit_b.y])
    w = np.concatenate([fit_a.weights * fit_a.weight_scale, fit_b.weights * fit_b.weight_scale])
    g = np.concatenate([np.zeros(fit_a.n_points), np.ones(fit_b.n_points)])
    n = x.size
    if fit_a.model is Model.LINEAR:
        separate = solve_wls(np.column_stack([1 - g, g, x * (1 - g), x * g]), y, w)
        parallel = solve_wls(np.column_stack([1 - g, g, x]), y, w)
        common = solve_wls(np.column_stack([np.ones(n), x]), y, w)
        slopes = _f_test(parallel.weighted_ss, n - 3, separate.weighted_ss, n - 4)
        intercepts: FTest | None = _f_test(common.weighted_ss, n - 2, parallel.weighted_ss, n - 3)
        b, a1, a2 = float(parallel.beta[2]), float(parallel.beta[0]), float(parallel.beta[1])
    else:
        separate = solve_wls(np.column_stack([x * (1 - g), x * g]), y, w)
        common = solve_wls(x[:, None], y, w)
        slopes = _f_test(common.weighted_ss, n - 1, separate.weighted_ss, n - 2)
        intercepts = None
        b, a1, a2 = float(common.beta[0]), math.nan, math.nan
    return CurveComparison(
        model=fit_a.model, weighting=fit_a.weighting,
        slope_a=fit_a.coefficients["slope"], slope_b=fit_b.coefficients["slope"],
        common_slope=b, intercept_a=a1, intercept_b=a2, slopes=slopes, intercepts=intercepts,
    )
