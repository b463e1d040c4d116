"""The calibration curve concentrations are read back from: from a fit, or from an issued record.

A :class:`CalibrationCurve` holds only what inverse prediction needs: the
coefficients and their covariance, σ̂ and ν, how the fit was weighted, and the
standards in the fit (their range, and N, ȳ, Sxx for the closed form).  It
lives in :mod:`calib.fit` because both the checks (the ``qc`` rule) and
``calib quantify`` read concentrations off a curve, and neither may import the
other.  Building one from an issued record is :mod:`calib.quantify.curve`'s
work.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np

from calib.fit.bands import mean_band, weight_at
from calib.fit.curve import CurveFit
from calib.fit.distributions import t_ppf
from calib.fit.inverse import quadratic_root
from calib.options import Model, Weighting

__all__ = ["CalibrationCurve"]


@dataclass(frozen=True, eq=False)
class CalibrationCurve:
    """One analyte's calibration, ready to read concentrations back.

    Attributes
    ----------
    analyte : str
        Analyte name.
    model, weighting : Model, Weighting
        What was fitted.
    weight_function : Weighting
        The weighting the fit's weights follow (``1/x2`` for ``mean-rf``).
    confidence : float
        The curve's interval level (the profile's).
    coefficients : dict of str to float
        Estimates in design order (intercept, slope, quadratic as present).
    covariance : ndarray, shape (p, p)
        σ̂²·(XᵀWX)⁻¹.
    residual_sd : float
        σ̂ (weights scaled to a mean of 1 over the standards).
    residual_df : int
        ν = N − p.
    weight_scale : float
        Mean raw weight of the standards (w(x) = w_raw(x)/weight_scale).
    level_variances : tuple of (concentration, s²) pairs
        For ``1/s2`` weighting only.
    x, y : ndarray
        Concentrations and responses of the standards in the fit.
    verdict : str
        The curve's verdict: ``accepted``, ``needs-review`` or ``rejected``.
    lod, loq : float or None
        Detection and quantitation limits of the curve, when known.
    lod_method : str or None
        How the LOD was worked out.
    unit : str or None
        Concentration unit.
    response_basis : str or None
        ``raw`` (the standards' own responses) or ``ratio`` (ratios to an
        internal standard); None for a record issued before calib stated it.

    The range ends and means of the standards are worked out once and kept
    (the curve is frozen), since every sample read back asks for them.
    """

    analyte: str
    model: Model
    weighting: Weighting
    weight_function: Weighting
    confidence: float
    coefficients: dict[str, float]
    covariance: np.ndarray
    residual_sd: float
    residual_df: int
    weight_scale: float
    level_variances: tuple[tuple[float, float], ...]
    x: np.ndarray
    y: np.ndarray
    verdict: str = "accepted"
    lod: float | None = None
    loq: float | None = None
    lod_method: str | None = None
    unit: str | None = field(default=None)
    response_basis: str | None = None

    # -- construction --------------------------------------------------------------------------
    @classmethod
    def from_fit(cls, fit: CurveFit, *, analyte: str, verdict: str = "accepted",
                 lod: float | None = None, loq: float | None = None,
                 lod_method: str | None = None, unit: str | None = None,
                 response_basis: str | None = None) -> CalibrationCurve:
        """The curve of a live fit.

        Examples
        --------
        >>> from calib.fit import fit_curve
        >>> curve = CalibrationCurve.from_fit(fit_curve([1, 2, 4, 8], [2.0, 4.1, 7.9, 16.2]),
        ...                                   analyte="Nitrate-N", unit="mg/L")
        >>> curve.lloq, curve.uloq, curve.n_points
        (1.0, 8.0, 4)
        """
        levels: tuple[tuple[float, float], ...] = ()
        if fit.weight_basis is Weighting.INV_S2:
            c, s2, _ = fit.level_variances
            levels = tuple((float(a), float(b)) for a, b in zip(c, s2))
        return cls(
            analyte=analyte, model=fit.model, weighting=fit.weighting,
            weight_function=fit.weight_basis, confidence=fit.confidence,
            coefficients=dict(fit.coefficients), covariance=np.array(fit.covariance, dtype=float),
            residual_sd=float(fit.residual_sd), residual_df=int(fit.residual_df),
            weight_scale=float(fit.weight_scale), level_variances=levels,
            x=np.array(fit.x, dtype=float), y=np.array(fit.y, dtype=float), verdict=verdict,
            lod=_finite(lod), loq=_finite(loq), lod_method=lod_method, unit=unit,
            response_basis=response_basis,
        )

    # -- figures -------------------------------------------------------------------------------
    @property
    def beta(self) -> np.ndarray:
        """Coefficients as an array, in design order."""
        return np.array(list(self.coefficients.values()), dtype=float)

    @property
    def unweighted(self) -> bool:
        """True when every standard had the same weight."""
        return self.weight_function is Weighting.NONE

    @property
    def n_points(self) -> int:
        """N, the standards in the fit."""
        return int(self.x.size)

    @cached_property
    def x_min(self) -> float:
        """Lowest concentration in the fit (the bottom of the calibrated range)."""
        return float(self.x.min())

    @cached_property
    def x_max(self) -> float:
        """Highest concentration in the fit (the top of the calibrated range)."""
        return float(self.x.max())

    @cached_property
    def lloq(self) -> float:
        """Lower limit of quantitation: the lowest non-zero standard in the fit (ICH M10)."""
        positive = self.x[self.x > 0]
        return float(positive.min()) if positive.size else self.x_min

    @property
    def uloq(self) -> float:
        """Upper limit of quantitation: the highest standard in the fit."""
        return self.x_max

    @cached_property
    def x_mean(self) -> float:
        """x̄ of the standards (unweighted)."""
        return float(self.x.mean())

    @cached_property
    def y_mean(self) -> float:
        """ȳ of the standards (unweighted)."""
        return float(self.y.mean())

    @cached_property
    def sxx(self) -> float:
        """Sxx = Σ(xᵢ − x̄)²."""
        return float(np.sum((self.x - self.x.mean()) ** 2))

    def t_critical(self, confidence: float | None = None) -> float:
        """t(1 − α/2, ν) at ``confidence`` (the curve's own by default)."""
        level = self.confidence if confidence is None else confidence
        if isinstance(level, bool) or not 0.5 <= level < 1:
            raise ValueError(f"confidence must be a number from 0.5 to below 1; got {level!r}")
        return float(t_ppf(0.5 + level / 2, self.residual_df))

    def predict(self, x: np.ndarray | float) -> np.ndarray:
        """Fitted response at concentrations ``x``."""
        return mean_band(self.model, self.beta, self.covariance, 0.0, x)[0]

    def weight_at(self, x: np.ndarray | float) -> np.ndarray:
        """w(x) of a new reading at ``x``, on the scale of the fit's weights."""
        return weight_at(x, self.weight_function, weight_scale=self.weight_scale,
                         fitted=self.predict(x),
                         level_variances=[list(pair) for pair in self.level_variances])

    def concentration_at(self, response: np.ndarray | float) -> np.ndarray:
        """x with ŷ(x) = response: the straight lines inverted, the quadratic's root in range.

        Examples
        --------
        >>> from calib.fit import fit_curve
        >>> fit = fit_curve([1, 2, 3, 4, 5], [1.0, 4.0, 9.0, 16.0, 25.0], model="quadratic")
        >>> CalibrationCurve.from_fit(fit, analyte="A").concentration_at([6.25]).round(9)
        array([2.5])
        """
        y = np.atleast_1d(np.asarray(response, dtype=float))
        c = self.coefficients
        a = c.get("intercept", 0.0)
        b = c["slope"]
        q = c.get("quadratic", 0.0)
        if q == 0:
            with np.errstate(divide="ignore", invalid="ignore"):
                return (y - a) / b if b != 0 else np.full_like(y, np.nan)
        return np.atleast_1d(quadratic_root(a, b, q, y, self.x_min, self.x_max))


def _finite(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return float(value) if math.isfinite(value) else None
