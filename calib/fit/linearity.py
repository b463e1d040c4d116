"""Is the curve the right shape?  Lack of fit, Mandel, the quadratic term, residual patterns.

The residual patterns (runs of signs, drift with injection order) live in
:mod:`calib.fit.residual_patterns` and are re-exported here.  Each function takes a fitted :class:`~calib.fit.curve.CurveFit` and returns a
frozen result with the inference as properties and methods.  When the data
cannot answer the question (no replicates, too few levels, no scatter) the
result carries a ``reason`` and its statistics are ``nan``; wrong arguments
raise ``ValueError``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from calib.fit.curve import CurveFit, once_per_fit, scatter_negligible, weighted_ss
from calib.fit.design import design_matrix
from calib.fit.diagnostics_core import check_alpha, lack_of_fit_reason, level_sums
from calib.fit.distributions import f_isf, f_ppf, f_sf, t_sf
from calib.fit.residual_patterns import (
    DriftTest,
    RunsTest,
    residual_drift,
    residual_runs,
    runs_test,
)
from calib.fit.wls import WlsSolution, solve_wls
from calib.options import Model

__all__ = [
    "DriftTest", "LackOfFit", "MandelTest", "QuadraticTerm", "RunsTest", "lack_of_fit",
    "mandel_test", "quadratic_term", "residual_drift", "residual_runs", "runs_test",
]

# ---------------------------------------------------------------------------------------------
# Lack of fit


@dataclass(frozen=True)
class LackOfFit:
    """Lack-of-fit F-test: does the curve miss the level means by more than replicate scatter?

    Attributes
    ----------
    ss_lack, df_lack : float, int
        SS_lof = SS_res − SS_pure on ν_lof = m − p degrees of freedom.
    ss_pure, df_pure : float, int
        SS_pure = Σᵢ Σⱼ wᵢⱼ(yᵢⱼ − ȳᵢ,w)² on ν_pure = N − m.
    n_levels : int
        m, the distinct concentrations.
    weighted : bool
        Whether the sums carry the fit's (unequal) weights.
    reason : str or None
        Why the test cannot be evaluated, None when it can.
    """

    ss_lack: float
    df_lack: int
    ss_pure: float
    df_pure: int
    n_levels: int
    weighted: bool
    reason: str | None = None

    @property
    def f_value(self) -> float:
        """F = (SS_lof/ν_lof) / (SS_pure/ν_pure); ``nan`` when not evaluable."""
        if self.reason is not None:
            return math.nan
        return (max(self.ss_lack, 0.0) / self.df_lack) / (self.ss_pure / self.df_pure)

    @property
    def p_value(self) -> float:
        """Upper-tail probability of F(ν_lof, ν_pure) at :attr:`f_value`."""
        if self.reason is not None:
            return math.nan
        return f_sf(self.f_value, self.df_lack, self.df_pure)

    def critical(self, alpha: float = 0.05) -> float:
        """F(1 − α; ν_lof, ν_pure)."""
        if self.reason is not None:
            return math.nan
        return f_isf(check_alpha(alpha), self.df_lack, self.df_pure)

    def significant(self, alpha: float = 0.05) -> bool:
        """True when p < α: the curve does not describe the level means."""
        return self.reason is None and self.p_value < check_alpha(alpha)


def lack_of_fit(fit: CurveFit) -> LackOfFit:
    """Split the residual sum of squares into pure error and lack of fit.

    Parameters
    ----------
    fit : CurveFit
        Any fitted curve; levels are the distinct concentrations in ``fit.x``.

    Returns
    -------
    LackOfFit
        With a ``reason`` when no level has replicates (ν_pure = 0), when there
        are no more levels than parameters (m ≤ p), or when the replicates agree
        exactly (SS_pure = 0).

    Notes
    -----
    With weighted level means ȳᵢ,w = Σⱼ wᵢⱼyᵢⱼ / Σⱼ wᵢⱼ,
    SS_pure = Σᵢ Σⱼ wᵢⱼ(yᵢⱼ − ȳᵢ,w)² on N − m degrees of freedom and
    SS_lof = Σ wr² − SS_pure on m − p; F = (SS_lof/ν_lof) / (SS_pure/ν_pure)
    follows F(ν_lof, ν_pure) when the curve is the right shape.  The same
    split holds for any curve whose fitted value depends on x only.  Weights
    taken from the replicate variances themselves (``1/s2``) make the weighted
    SS_pure equal N − m up to the weights' scale, so F then only indicates.

    References
    ----------
    NIST/SEMATECH e-Handbook of Statistical Methods, §4.6.1 (load-cell
    calibration case study, where the lack-of-fit test rejects the straight line).

    Examples
    --------
    Level means 1.1, 2.6, 3.1 miss the line by −1/6, 1/3, −1/6 (SS_lof = 1/3 on
    1 df); replicates differ by ±0.1 (SS_pure = 0.06 on 3 df); F = 50/3:

    >>> from calib.fit.curve import fit_curve
    >>> fit = fit_curve([1, 1, 2, 2, 3, 3], [1.0, 1.2, 2.5, 2.7, 3.0, 3.2])
    >>> test = lack_of_fit(fit)
    >>> test.df_lack, test.df_pure, round(test.f_value, 3)
    (1, 3, 16.667)
    >>> lack_of_fit(fit_curve([1, 2, 3], [1.0, 2.1, 2.9])).reason
    'no concentration level has replicates, so there is no pure error to test against'
    """
    n = fit.n_points
    p = n - fit.residual_df
    column = (n, 1)
    # The sums of batch_lack_of_fit for a batch of this one curve (the same code).
    sums = level_sums(fit.x.reshape(column), fit.y.reshape(column), fit.weights.reshape(column),
                      fit.residuals.reshape(column), np.ones(column, dtype=bool))
    m = int(sums.levels[0])
    ss_pure = float(sums.pure[0])
    reason = None
    if n == m or m <= p or sums.negligible_pure()[0]:
        reason = lack_of_fit_reason(None, n, m, p)
    return LackOfFit(float(sums.residual[0]) - ss_pure, m - p, ss_pure, n - m, m,
                     bool(sums.weighted[0]), reason)


# ---------------------------------------------------------------------------------------------
# Mandel's fitting test and the quadratic term


@once_per_fit
def _quadratic_refit(fit: CurveFit) -> WlsSolution | str:
    """The quadratic with the fit's own weights, or why it cannot be fitted.

    Fitted once per curve: :func:`mandel_test` and :func:`quadratic_term` share it.
    """
    if fit.n_points < 4:
        return f"fitting a quadratic for comparison needs at least 4 standards; {fit.n_points} in the fit"
    if np.unique(fit.x).size < 3:
        return "fitting a quadratic for comparison needs at least 3 concentration levels"
    try:
        return solve_wls(design_matrix(fit.x, Model.QUADRATIC), fit.y, fit.weights)
    except ValueError as exc:
        return f"the quadratic for comparison could not be fitted: {exc}"


@dataclass(frozen=True)
class MandelTest:
    """Mandel's fitting test: does a quadratic fit significantly better than the straight line?

    Attributes
    ----------
    n_points : int
        N.
    s2_linear, s2_quadratic : float
        Residual variances of the straight line (N − 2 df) and of the quadratic
        (N − 3 df), both with the fit's weights.
    weighted : bool
        Whether both fits carry (unequal) weights.
    reason : str or None
        Why the test cannot be evaluated, None when it can.
    """

    n_points: int
    s2_linear: float
    s2_quadratic: float
    weighted: bool
    reason: str | None = None

    @property
    def ds2(self) -> float:
        """DS² = (N − 2)·s²_linear − (N − 3)·s²_quadratic."""
        return (self.n_points - 2) * self.s2_linear - (self.n_points - 3) * self.s2_quadratic

    @property
    def df(self) -> tuple[int, int]:
        """Degrees of freedom (1, N − 3) of PG."""
        return 1, self.n_points - 3

    @property
    def pg(self) -> float:
        """Test value PG = DS² / s²_quadratic; ``nan`` when not evaluable."""
        if self.reason is not None:
            return math.nan
        return max(self.ds2, 0.0) / self.s2_quadratic

    @property
    def p_value(self) -> float:
        """Upper-tail probability of F(1, N − 3) at PG."""
        if self.reason is not None:
            return math.nan
        return f_sf(self.pg, *self.df)

    def critical(self, confidence: float = 0.99) -> float:
        """F(confidence; 1, N − 3); ISO 8466-1 uses 0.99."""
        if self.reason is not None:
            return math.nan
        return f_ppf(1 - check_alpha(1 - confidence), *self.df)

    def nonlinear(self, confidence: float = 0.99) -> bool:
        """True when PG exceeds the critical value: the quadratic fits significantly better."""
        return self.reason is None and self.pg > self.critical(confidence)


def mandel_test(fit: CurveFit) -> MandelTest:
    """Compare the straight line with the quadratic fitted to the same standards.

    Parameters
    ----------
    fit : CurveFit
        A straight-line fit (model ``linear``); the quadratic is fitted with its weights.

    Returns
    -------
    MandelTest

    Raises
    ------
    ValueError
        If ``fit`` is not a straight line with intercept.

    Notes
    -----
    DS² = (N − 2)·s²_linear − (N − 3)·s²_quadratic is the reduction of the
    residual sum of squares by the quadratic term, and PG = DS²/s²_quadratic
    follows F(1, N − 3) when the line is adequate.  PG equals the square of the
    t value of the quadratic coefficient, so this test and
    :func:`quadratic_term` agree; ISO 8466-1 judges it at 99 %.

    References
    ----------
    ISO 8466-1:1990, Water quality — Calibration and evaluation of analytical
    methods — Part 1: Linear calibration function; DIN 38402-51 (from memory).

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> fit = fit_curve([1, 2, 3, 4, 5, 6], [1.1, 2.3, 2.9, 4.2, 4.9, 6.1])
    >>> test = mandel_test(fit)
    >>> test.df, bool(test.nonlinear())
    ((1, 3), False)
    """
    if fit.model is not Model.LINEAR:
        raise ValueError("Mandel's test compares a straight line with a quadratic; the curve is "
                         f"fitted as {fit.model.value}")
    n = fit.n_points
    weighted = bool(np.ptp(fit.weights) > 0)
    s2_linear = weighted_ss(fit) / (n - 2)
    refit = _quadratic_refit(fit)
    if isinstance(refit, str):
        return MandelTest(n, s2_linear, math.nan, weighted, refit)
    if scatter_negligible(refit.weighted_ss, fit):
        return MandelTest(n, s2_linear, 0.0, weighted,
                          "the quadratic passes through every standard, so there is no residual "
                          "scatter to test against")
    return MandelTest(n, s2_linear, refit.weighted_ss / (n - 3), weighted)


@dataclass(frozen=True)
class QuadraticTerm:
    """t-test of the quadratic coefficient c against zero.

    Attributes
    ----------
    estimate, std_error : float
        c and SE(c).
    df : int
        Residual degrees of freedom of the quadratic (N − 3).
    refitted : bool
        True when the curve is a straight line and the quadratic was fitted to
        test it; False when the curve itself is the quadratic.
    weighted : bool
        Whether the fit carries (unequal) weights.
    reason : str or None
        Why the test cannot be evaluated, None when it can.
    """

    estimate: float
    std_error: float
    df: int
    refitted: bool
    weighted: bool
    reason: str | None = None

    @property
    def t_value(self) -> float:
        """t = c / SE(c)."""
        if self.reason is not None:
            return math.nan
        return self.estimate / self.std_error

    @property
    def p_value(self) -> float:
        """Two-sided p-value of H₀: c = 0 on :attr:`df` degrees of freedom."""
        if self.reason is not None:
            return math.nan
        return 2 * t_sf(abs(self.t_value), self.df)

    def significant(self, alpha: float = 0.05) -> bool:
        """True when p < α: the response curves."""
        return self.reason is None and self.p_value < check_alpha(alpha)


def quadratic_term(fit: CurveFit) -> QuadraticTerm:
    """Test whether a quadratic term is needed.

    Parameters
    ----------
    fit : CurveFit
        A ``quadratic`` fit (its own coefficient is tested) or a ``linear`` fit
        (the quadratic is fitted with the same weights and its c tested).

    Returns
    -------
    QuadraticTerm

    Raises
    ------
    ValueError
        For other models.

    Notes
    -----
    t = c / SE(c) with SE(c) = σ̂·√C₃₃ of the quadratic, Student's t on N − 3
    degrees of freedom.

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> x = [1, 2, 3, 4, 5, 6]
    >>> term = quadratic_term(fit_curve(x, [1.9, 4.3, 6.1, 7.4, 8.8, 9.6]))
    >>> term.refitted, term.df, bool(term.significant(0.05)), term.estimate < 0
    (True, 3, True, True)
    """
    weighted = bool(np.ptp(fit.weights) > 0)
    if fit.model is Model.QUADRATIC:
        se = fit.std_error("quadratic")
        reason = None if se > 0 else "the quadratic coefficient has no standard error (no scatter)"
        return QuadraticTerm(fit.coefficients["quadratic"], se, fit.residual_df, False, weighted,
                             reason)
    if fit.model is not Model.LINEAR:
        raise ValueError("the quadratic-term test applies to linear and quadratic curves; the curve "
                         f"is fitted as {fit.model.value}")
    refit = _quadratic_refit(fit)
    if isinstance(refit, str):
        return QuadraticTerm(math.nan, math.nan, fit.n_points - 3, True, weighted, refit)
    df = fit.n_points - 3
    estimate = float(refit.beta[2])
    if scatter_negligible(refit.weighted_ss, fit):
        return QuadraticTerm(estimate, 0.0, df, True, weighted,
                             "the quadratic passes through every standard, so there is no residual "
                             "scatter to test against")
    se = math.sqrt(refit.weighted_ss / df * refit.unscaled_covariance[2, 2])
    return QuadraticTerm(estimate, se, df, True, weighted)
