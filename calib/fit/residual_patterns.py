"""Patterns in the residuals: runs of signs along the range, drift with injection order.

Each function takes a fitted :class:`~calib.fit.curve.CurveFit` (``runs_test`` a sequence
of signs) and returns a frozen result with the inference as properties and methods; when
the data cannot answer the question the result carries a ``reason`` and its statistics
are ``nan``.  :mod:`calib.fit.linearity` re-exports these names beside the tests of the
curve's shape.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from calib.fit.curve import CurveFit, scatter_negligible, weighted_ss
from calib.fit.diagnostics_core import check_alpha
from calib.fit.distributions import norm_cdf, t_sf
from calib.fit.wls import solve_wls

__all__ = ["DriftTest", "RunsTest", "residual_drift", "residual_runs", "runs_test"]

#: Up to this many signed residuals the runs test uses the exact distribution.
_EXACT_RUNS_LIMIT = 200


# ---------------------------------------------------------------------------------------------
# Runs of residual signs


@dataclass(frozen=True)
class RunsTest:
    """Wald–Wolfowitz runs test on a sequence of signs, against too few runs.

    Attributes
    ----------
    n_positive, n_negative : int
        Signs of each kind.
    runs : int
        Number of runs (maximal blocks of equal sign).
    n_dropped : int
        Zero residuals left out (they carry no sign).
    reason : str or None
        Why the test cannot be evaluated, None when it can.
    """

    n_positive: int
    n_negative: int
    runs: int
    n_dropped: int = 0
    reason: str | None = None

    @property
    def n(self) -> int:
        """Signs counted."""
        return self.n_positive + self.n_negative

    @property
    def method(self) -> str:
        """``"exact"`` (combinatorial distribution) up to 200 signs, ``"normal"`` above."""
        return "exact" if self.n <= _EXACT_RUNS_LIMIT else "normal"

    @property
    def expected_runs(self) -> float:
        """E(R) = 2·n₊·n₋/n + 1 for signs in random order."""
        if self.n == 0:
            return math.nan
        return 2 * self.n_positive * self.n_negative / self.n + 1

    @property
    def p_value(self) -> float:
        """P(R ≤ runs) for signs in random order: small when the signs cluster.

        Exact from the combinatorial distribution up to 200 signs; beyond, the
        normal approximation without continuity correction.
        """
        if self.reason is not None:
            return math.nan
        if self.method == "exact":
            return _runs_cdf(self.runs, self.n_positive, self.n_negative)
        n1, n2, n = self.n_positive, self.n_negative, self.n
        var = 2 * n1 * n2 * (2 * n1 * n2 - n) / (n * n * (n - 1))
        return norm_cdf((self.runs - self.expected_runs) / math.sqrt(var))

    @property
    def smallest_p(self) -> float:
        """The p-value of the strongest pattern possible here (two runs).

        When it is above α the test cannot find a pattern with this few signs.
        """
        if self.reason is not None:
            return math.nan
        return _runs_cdf(2, self.n_positive, self.n_negative)

    def patterned(self, alpha: float = 0.05) -> bool:
        """True when p < α: fewer runs than chance explains."""
        return self.reason is None and self.p_value < check_alpha(alpha)


@functools.lru_cache(maxsize=4096)
def _runs_cdf(r: int, n1: int, n2: int) -> float:
    """P(R ≤ r) for n1 and n2 signs in random order, exact in integers (remembered: the
    curves of a run share their few sign counts)."""
    total = math.comb(n1 + n2, n1)
    count = 0
    for runs in range(2, r + 1):
        k, odd = divmod(runs, 2)
        if odd:
            count += (math.comb(n1 - 1, k) * math.comb(n2 - 1, k - 1)
                      + math.comb(n1 - 1, k - 1) * math.comb(n2 - 1, k))
        else:
            count += 2 * math.comb(n1 - 1, k - 1) * math.comb(n2 - 1, k - 1)
    return min(count / total, 1.0)


def runs_test(signs: Sequence[float] | np.ndarray) -> RunsTest:
    """Count the runs in a sequence of signs and test them against random order.

    Parameters
    ----------
    signs : sequence of numbers
        Values whose sign is taken, in their order; zeros are dropped.

    Returns
    -------
    RunsTest
        With a ``reason`` when fewer than one sign of each kind remains.

    Notes
    -----
    With n₁ signs of one kind and n₂ of the other in random order, the number
    of runs R has P(R = 2k) = 2·C(n₁−1, k−1)·C(n₂−1, k−1) / C(n, n₁) and
    P(R = 2k+1) = [C(n₁−1, k)·C(n₂−1, k−1) + C(n₁−1, k−1)·C(n₂−1, k)] / C(n, n₁).
    Only too few runs (clustered signs) counts against a calibration curve.

    References
    ----------
    Wald, A. and Wolfowitz, J. (1940), Ann. Math. Statist. 11, 147–162;
    NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.5.13 (runs test).

    Examples
    --------
    Three positive then three negative signs: 2 runs, the least possible, with
    probability 2/C(6, 3) = 0.1.

    >>> test = runs_test([1, 1, 1, -1, -1, -1])
    >>> test.runs, test.method, round(test.p_value, 12)
    (2, 'exact', 0.1)
    """
    values = np.asarray(signs, dtype=float).ravel()
    if not np.all(np.isfinite(values)):
        raise ValueError("signs must be finite numbers")
    kept = np.sign(values[values != 0])
    dropped = int(values.size - kept.size)
    n_pos = int(np.sum(kept > 0))
    n_neg = int(kept.size - n_pos)
    runs = int(1 + np.sum(kept[1:] != kept[:-1])) if kept.size else 0
    reason = None
    if n_pos == 0 or n_neg == 0:
        reason = (f"all {kept.size} residuals have the same sign" if kept.size
                  else "no residual has a sign")
    return RunsTest(n_pos, n_neg, runs, dropped, reason)


def residual_runs(fit: CurveFit) -> RunsTest:
    """Runs test on the signs of the level-mean residuals ordered by concentration.

    Replicates at one concentration have no order along it, and any order chosen for
    them (by residual, as read) changes the count of runs the p-value assumes random:
    sorted within a level, 10 replicates leave almost no sign changes and a sound curve
    "fails" nearly always.  So each level contributes one sign, that of its weighted
    mean residual Σwᵢrᵢ/Σwᵢ, and the runs are counted over the levels; with single
    standards this is the usual runs test on the residuals.  Level means that are zero
    to rounding are dropped (they carry no sign).  The test is one-sided: only too few
    runs (signs clustered along the range, as a bend makes them) count against the curve.

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> fit = fit_curve([1, 2, 3, 4, 5, 6, 7, 8], [1.9, 4.3, 6.1, 7.4, 8.8, 9.6, 10.5, 11.0])
    >>> residual_runs(fit).runs
    3
    """
    levels, index = np.unique(fit.x, return_inverse=True)
    w = fit.weights
    sums = np.bincount(index, weights=w, minlength=levels.size)
    means = np.bincount(index, weights=w * fit.residuals, minlength=levels.size) / sums
    if scatter_negligible(weighted_ss(fit), fit):
        return RunsTest(0, 0, 0, int(means.size),
                        "the curve passes through every standard, so the residuals have no sign")
    scale = float(np.max(np.abs(fit.y)))
    return runs_test(np.where(np.abs(means) <= 1e-12 * scale, 0.0, means))


# ---------------------------------------------------------------------------------------------
# Drift with injection order


@dataclass(frozen=True)
class DriftTest:
    """Straight-line regression of residuals on injection order, and the t-test of its slope.

    Attributes
    ----------
    slope, std_error : float
        Change of the (weighted) residual per injection, and its SE.
    df : int
        n − 2.
    weighted : bool
        True when the residuals regressed are √wᵢ·rᵢ.
    order_correlation : float
        Correlation of injection order with concentration; near ±1 a drift
        cannot be told apart from the curve's shape.
    reason : str or None
        Why the test cannot be evaluated, None when it can.
    """

    slope: float
    std_error: float
    df: int
    weighted: bool
    order_correlation: float
    reason: str | None = None

    @property
    def t_value(self) -> float:
        """t = slope / SE(slope)."""
        if self.reason is not None:
            return math.nan
        return self.slope / self.std_error

    @property
    def p_value(self) -> float:
        """Two-sided p-value of H₀: no trend, Student's t on :attr:`df` degrees of freedom."""
        if self.reason is not None:
            return math.nan
        return 2 * t_sf(abs(self.t_value), self.df)

    def drifting(self, alpha: float = 0.05) -> bool:
        """True when p < α: the residuals trend with injection order."""
        return self.reason is None and self.p_value < check_alpha(alpha)


def residual_drift(fit: CurveFit, order: Sequence[float] | np.ndarray) -> DriftTest:
    """Test the residuals for a trend along the injection sequence.

    Parameters
    ----------
    fit : CurveFit
        The fitted curve.
    order : sequence of numbers
        Injection order of each point, in the order of ``fit.x``.

    Returns
    -------
    DriftTest

    Raises
    ------
    ValueError
        If ``order`` does not have one finite number per point.

    Notes
    -----
    eᵢ = √wᵢ·rᵢ is regressed on the injection order by ordinary least squares
    and the slope's t = b/SE(b) taken on n − 2 degrees of freedom.  Residuals
    of a fit are slightly correlated with each other, so the test is an
    approximate screen for drift, not an exact one.

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> fit = fit_curve([1, 2, 3, 1, 2, 3], [1.0, 2.0, 3.0, 1.1, 2.1, 3.1])
    >>> test = residual_drift(fit, [1, 2, 3, 4, 5, 6])
    >>> test.df, test.slope > 0
    (4, True)
    """
    t = np.asarray(order, dtype=float).ravel()
    if t.size != fit.n_points or not np.all(np.isfinite(t)):
        raise ValueError(f"order must give one finite number per point ({fit.n_points}); "
                         f"got {t.size} values")
    weighted = bool(np.ptp(fit.weights) > 0)
    e = np.sqrt(fit.weights) * fit.residuals
    correlation = math.nan
    spread = np.ptp(t)
    if spread > 0 and np.ptp(fit.x) > 0:
        correlation = float(np.corrcoef(t, fit.x)[0, 1])
    if t.size < 3:
        return DriftTest(math.nan, math.nan, t.size - 2, weighted, correlation,
                         f"a trend needs at least 3 injections; {t.size} in the fit")
    if spread == 0:
        return DriftTest(math.nan, math.nan, t.size - 2, weighted, correlation,
                         "every standard has the same injection order")
    if scatter_negligible(weighted_ss(fit), fit):
        return DriftTest(math.nan, math.nan, t.size - 2, weighted, correlation,
                         "the curve passes through every standard, so there are no residuals "
                         "to trend")
    sol = solve_wls(np.column_stack([np.ones_like(t), t]), e)
    df = t.size - 2
    sigma2 = sol.weighted_ss / df
    se = math.sqrt(sigma2 * sol.unscaled_covariance[1, 1])
    if se == 0:
        return DriftTest(float(sol.beta[1]), 0.0, df, weighted, correlation,
                         "the residuals lie exactly on a line in injection order")
    return DriftTest(float(sol.beta[1]), se, df, weighted, correlation)
