"""Points that stand out: studentized residuals, leverage, Cook's distance, Grubbs' test.

These measures only *suggest* outliers.  calib never removes a point: the
analyst decides, and an exclusion always carries the analyst's reason.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from calib.fit.batch_wls import solve_wls_columns
from calib.fit.curve import CurveFit
from calib.fit.design import design_matrix
from calib.fit.diagnostics_core import case_figures, check_alpha, influence_reason
from calib.fit.distributions import f_ppf, t_isf

__all__ = ["GrubbsResult", "Influence", "grubbs", "grubbs_critical", "influence"]

@dataclass(frozen=True, eq=False)
class Influence:
    """Case diagnostics of a least-squares fit, one value per point in the fit's order.

    Attributes
    ----------
    leverage : ndarray
        hᵢᵢ, the diagonal of the weighted hat matrix W½X(XᵀWX)⁻¹XᵀW½.
    weighted_residuals : ndarray
        eᵢ = √wᵢ·rᵢ.
    standardized : ndarray
        Internally studentized residuals eᵢ / (σ̂·√(1 − hᵢᵢ)).
    studentized : ndarray
        Externally studentized residuals eᵢ / (s₍ᵢ₎·√(1 − hᵢᵢ)), s₍ᵢ₎ the residual
        SD with point i left out; Student's t on ν − 1 degrees of freedom.
    cooks_distance : ndarray
        Dᵢ = eᵢ²·hᵢᵢ / (p·σ̂²·(1 − hᵢᵢ)²).
    n_params, residual_df : int
        p and ν = N − p of the fit.

    Points with hᵢᵢ = 1 (the fit passes through them whatever their response)
    have ``nan`` residual diagnostics.
    """

    leverage: np.ndarray
    weighted_residuals: np.ndarray
    standardized: np.ndarray
    studentized: np.ndarray
    cooks_distance: np.ndarray
    n_params: int
    residual_df: int

    @property
    def n_points(self) -> int:
        """N."""
        return int(self.leverage.size)

    def bonferroni_critical(self, alpha: float = 0.05) -> float:
        """t(1 − α/(2N), ν − 1): the two-sided critical value for the largest of N residuals.

        Examples
        --------
        >>> from scipy import stats
        >>> from calib.fit.curve import fit_curve
        >>> fit = fit_curve([1, 2, 3, 4, 5, 6, 7, 8], [1.1, 2.0, 2.9, 4.2, 5.0, 5.9, 7.1, 8.0])
        >>> crit = influence(fit).bonferroni_critical(0.05)
        >>> bool(abs(crit - float(stats.t.ppf(1 - 0.05 / 16, 5))) < 1e-12)
        True
        """
        return t_isf(check_alpha(alpha) / (2 * self.n_points), self.residual_df - 1)

    def suggested(self, alpha: float = 0.05) -> np.ndarray:
        """Indices whose |studentized residual| exceeds :meth:`bonferroni_critical`."""
        crit = self.bonferroni_critical(alpha)
        with np.errstate(invalid="ignore"):
            return np.flatnonzero(np.abs(self.studentized) > crit)

    @functools.cached_property
    def cooks_reference(self) -> float:
        """F(0.5; p, ν), the median of the F distribution: Dᵢ above it marks a point
        that moves the whole curve (Cook and Weisberg's rule of thumb)."""
        return f_ppf(0.5, self.n_params, self.residual_df)

    def influential(self) -> np.ndarray:
        """Indices whose Cook's distance exceeds :attr:`cooks_reference`."""
        with np.errstate(invalid="ignore"):
            return np.flatnonzero(self.cooks_distance > self.cooks_reference)


def influence(fit: CurveFit) -> Influence:
    """Leverage, studentized residuals and Cook's distance of every point.

    Parameters
    ----------
    fit : CurveFit
        A fit with at least 2 residual degrees of freedom.  Every calib model is
        the weighted least-squares fit of its design matrix (``mean-rf`` is
        y = RF·x with weights 1/x²), so the measures are exact for all of them.

    Returns
    -------
    Influence

    Raises
    ------
    ValueError
        For fewer than 2 residual degrees of freedom, or a fit that passes
        through every point (no scatter to judge against).

    Notes
    -----
    With eᵢ = √wᵢ·rᵢ and hᵢᵢ = wᵢ‖xᵢᵀL‖², L the fit's factor of (XᵀWX)⁻¹ = L Lᵀ,
    s₍ᵢ₎² = (Σe² − eᵢ²/(1 − hᵢᵢ)) / (ν − 1) is the residual variance with point i
    deleted, so tᵢ = eᵢ / (s₍ᵢ₎√(1 − hᵢᵢ)) needs no refit.  Scaling the weights
    leaves all of these unchanged.  The figures are those of
    :func:`calib.fit.batch_diagnostics.batch_influence` for a batch of this one curve
    (the same code, :func:`calib.fit.diagnostics_core.case_figures`).

    References
    ----------
    Cook, R. D. and Weisberg, S. (1982), Residuals and Influence in Regression,
    chapters 2 and 3 (from memory); Belsley, Kuh and Welsch (1980), Regression
    Diagnostics (from memory).

    Examples
    --------
    The last standard reads 30 % high; its studentized residual stands out:

    >>> from calib.fit.curve import fit_curve
    >>> x = [1, 2, 3, 4, 5, 6, 7, 8]
    >>> fit = fit_curve(x, [1.02, 1.98, 3.01, 3.99, 5.02, 5.97, 7.01, 10.4])
    >>> infl = influence(fit)
    >>> int(np.argmax(np.abs(infl.studentized))), infl.suggested(0.05).tolist()
    (7, [7])
    """
    n, nu = fit.n_points, fit.residual_df
    p = n - nu
    if nu < 2:
        raise ValueError(influence_reason(None, True, nu))
    root = fit.covariance_root
    if root is None:
        root = _factor_root(fit)
    column = (n, 1)
    block = case_figures(fit.x.reshape(column), fit.y.reshape(column),
                         fit.weights.reshape(column), fit.residuals.reshape(column),
                         np.ones(column, dtype=bool), root[None], np.array([float(nu)]),
                         fit.model)
    if block.scatterless[0]:
        raise ValueError(influence_reason(None, False, nu))
    h, e, standardized, studentized, cooks = block.figures[:, :, 0]
    return Influence(h, e, standardized, studentized, cooks, p, nu)


def _factor_root(fit: CurveFit) -> np.ndarray:
    """L with (XᵀWX)⁻¹ = L Lᵀ for a fit that does not carry it (built by other means)."""
    X = design_matrix(fit.x, fit.model)
    used = np.ones((fit.n_points, 1), dtype=bool)
    sol = solve_wls_columns([X[:, [j]] for j in range(X.shape[1])], fit.y[:, None],
                            fit.weights[:, None], mask=used)
    if sol.problems[0] is not None:
        raise ValueError(f"the curve's design cannot be factored: {sol.problems[0]}")
    return sol.covariance_root[0]


def grubbs_critical(n: int, alpha: float = 0.05) -> float:
    """Two-sided critical value of Grubbs' statistic for ``n`` values.

    Parameters
    ----------
    n : int
        Number of values, at least 3.
    alpha : float
        Significance level, default 0.05.

    Returns
    -------
    float

    Notes
    -----
    G_crit = ((n − 1)/√n)·√(t² / (n − 2 + t²)), t the upper α/(2n) quantile of
    Student's t on n − 2 degrees of freedom.

    References
    ----------
    Grubbs, F. E. (1969), Technometrics 11, 1–21; NIST/SEMATECH e-Handbook of
    Statistical Methods, §1.3.5.17 (Grubbs' test).

    Examples
    --------
    >>> round(grubbs_critical(10, 0.05), 3)   # 2.290 in published tables
    2.29
    """
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 3:
        raise ValueError(f"Grubbs' test needs a whole number of at least 3 values; got {n!r}")
    return _grubbs_critical(int(n), check_alpha(alpha))


@functools.lru_cache(maxsize=512)
def _grubbs_critical(n: int, alpha: float) -> float:
    # Every level of every curve in a run asks for the same few (n, α): work each out once.
    t = t_isf(alpha / (2 * n), n - 2)
    return (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))


@dataclass(frozen=True)
class GrubbsResult:
    """Grubbs' two-sided test for one outlying value in a group.

    Attributes
    ----------
    n : int
        Values in the group.
    mean, sd : float
        Their mean and sample standard deviation (n − 1).
    statistic : float
        G = max |yᵢ − ȳ| / s; ``nan`` when all values are equal (to rounding).
    index : int
        Position of the value farthest from the mean (the suspect).
    alpha : float
        Significance level.
    critical : float
        Two-sided critical value at ``alpha`` (:func:`grubbs_critical`).
    """

    n: int
    mean: float
    sd: float
    statistic: float
    index: int
    alpha: float
    critical: float

    @property
    def outlier(self) -> bool:
        """True when G exceeds the critical value."""
        return bool(self.statistic > self.critical)


def grubbs(values: Sequence[float] | np.ndarray, *, alpha: float = 0.05) -> GrubbsResult:
    """Grubbs' test: is the value farthest from the mean an outlier?

    Parameters
    ----------
    values : sequence of numbers
        At least 3 finite values (e.g. the replicate responses at one level).
    alpha : float
        Two-sided significance level, default 0.05.

    Returns
    -------
    GrubbsResult

    Raises
    ------
    ValueError
        For fewer than 3 values or non-finite ones.

    Examples
    --------
    >>> result = grubbs([10.0, 10.2, 10.1, 9.9, 12.0])
    >>> result.index, round(result.statistic, 3), bool(result.outlier)
    (4, 1.774, True)
    """
    y = np.asarray(values, dtype=float).ravel()
    if not np.isfinite(y).all():
        raise ValueError("Grubbs' test needs finite values")
    critical = grubbs_critical(int(y.size), alpha)
    # Array methods rather than np.mean, np.std...: the same sums, less call overhead,
    # for a test made at every level of every curve.
    mean = float(y.mean())
    deviations = y - mean
    sd = math.sqrt(float((deviations * deviations).sum()) / (y.size - 1))
    spread = np.abs(deviations)
    index = int(spread.argmax())
    # Values equal to rounding have no spread to judge a suspect by.
    spread_ok = sd > 1e-12 * float(np.abs(y).max())
    statistic = float(spread[index] / sd) if spread_ok else math.nan
    return GrubbsResult(int(y.size), mean, sd, statistic, index, float(alpha), critical)
