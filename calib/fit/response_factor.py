"""Response factors RFᵢ = yᵢ/xᵢ of the calibration standards and their spread.

The ``mean-rf`` model calibrates with the average response factor; its
acceptability is judged by the relative standard deviation of the factors
(US EPA SW-846 Method 8000D §11.5.1, from memory: the mean RF may be used
when the %RSD of the factors is at most 20 %).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from calib.fit.distributions import t_ppf

__all__ = ["ResponseFactors", "response_factors"]


@dataclass(frozen=True, eq=False)
class ResponseFactors:
    """The response factors of the non-zero standards.

    Attributes
    ----------
    concentrations : ndarray
        xᵢ of the standards with a concentration above zero.
    factors : ndarray
        RFᵢ = yᵢ/xᵢ, in the same order.
    """

    concentrations: np.ndarray
    factors: np.ndarray

    @property
    def n(self) -> int:
        """Number of factors."""
        return int(self.factors.size)

    @functools.cached_property
    def mean(self) -> float:
        """RF̄ = Σ RFᵢ / n (``nan`` for no factor)."""
        return float(self.factors.mean()) if self.n else math.nan

    @functools.cached_property
    def sd(self) -> float:
        """s(RF) = √(Σ (RFᵢ − RF̄)² / (n − 1)); ``nan`` below two factors."""
        return float(self.factors.std(ddof=1)) if self.n > 1 else math.nan

    @property
    def rsd_pct(self) -> float:
        """%RSD = 100·s(RF)/RF̄ (``nan`` when RF̄ is 0)."""
        mean = self.mean
        return 100 * self.sd / abs(mean) if mean else math.nan

    @property
    def std_error(self) -> float:
        """SE(RF̄) = s(RF)/√n."""
        return self.sd / math.sqrt(self.n) if self.n > 1 else math.nan

    @property
    def df(self) -> int:
        """Degrees of freedom of s(RF): n − 1."""
        return self.n - 1

    def confidence_interval(self, confidence: float = 0.95) -> tuple[float, float]:
        """RF̄ ± t(1 − α/2, n − 1)·SE(RF̄).

        Examples
        --------
        >>> rf = response_factors([1, 2, 4], [2.0, 4.2, 7.8])
        >>> low, high = rf.confidence_interval()
        >>> bool(low < rf.mean < high)
        True
        """
        if self.n < 2:
            return math.nan, math.nan
        half = t_ppf(0.5 + confidence / 2, self.df) * self.std_error
        return self.mean - half, self.mean + half


def response_factors(x: np.ndarray | list[float], y: np.ndarray | list[float]) -> ResponseFactors:
    """Response factors RFᵢ = yᵢ/xᵢ of the standards with xᵢ > 0.

    Parameters
    ----------
    x, y : array_like
        Concentrations and responses; standards at concentration 0 (or below)
        have no response factor and are left out.

    Returns
    -------
    ResponseFactors

    Notes
    -----
    RF̄ = Σ RFᵢ / n, s(RF) = √(Σ (RFᵢ − RF̄)²/(n − 1)), %RSD = 100·s(RF)/RF̄,
    SE(RF̄) = s(RF)/√n with n − 1 degrees of freedom.

    References
    ----------
    US EPA SW-846 Method 8000D (2018), §11.5.1 (calibration by the average
    response factor; from memory).

    Examples
    --------
    Factors 2.0, 2.1 and 1.95 (derived by hand): mean 2.016667, s = 0.076376, %RSD 3.787:

    >>> rf = response_factors([0, 1, 2, 4], [0.01, 2.0, 4.2, 7.8])
    >>> rf.n, round(rf.mean, 6), round(rf.sd, 6), round(rf.rsd_pct, 3)
    (3, 2.016667, 0.076376, 3.787)
    """
    xs = np.asarray(x, dtype=float).ravel()
    ys = np.asarray(y, dtype=float).ravel()
    if xs.shape != ys.shape:
        raise ValueError(f"x and y must have the same length; got {xs.size} and {ys.size}")
    keep = xs > 0
    return ResponseFactors(concentrations=xs[keep], factors=ys[keep] / xs[keep])
