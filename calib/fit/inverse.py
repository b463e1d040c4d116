"""Inverse prediction (one rule for every caller): a concentration, its standard error and interval from a mean response.

Two formulas, which agree exactly on the unweighted straight line:

- the closed form of the EURACHEM/CITAC guide CG 4 (appendix E3) for the
  unweighted line y = a + b·x,
  s(x₀) = (σ̂/b)·√(1/m + 1/N + (ȳ₀ − ȳ)²/(b²·Sxx));
- the delta method for every model and weighting: the reading's variance
  σ̂²/(m·w(x₀)) plus the variance gᵀVg of the fitted response at x₀, divided
  by the squared slope of the curve there,
  s(x₀)² = (σ̂²/(m·w(x₀)) + g(x₀)ᵀ V g(x₀)) / (dŷ/dx at x₀)².

For the line, x₀ − x̄ = (ȳ₀ − ȳ)/b and g(x₀)ᵀVg(x₀) = σ̂²·(1/N + (x₀ − x̄)²/Sxx),
so the two are one formula written twice.  The interval is x₀ ± t(1 − α/2, ν)·s(x₀)
with ν = N − p, as SPEC §4 asks.

The functions here work elementwise over broadcast arrays (one row per curve),
so many simulated calibrations can be inverted at once.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from calib.options import Model, parse_option

if TYPE_CHECKING:
    from calib.fit.calcurve import CalibrationCurve

__all__ = [
    "CLOSED_FORM", "DELTA_METHOD", "InverseBatch", "InversePrediction", "cg4_std_error",
    "delta_std_error", "inverse_predict", "inverse_predict_many", "quadratic_root",
]

#: How the standard error was worked out, in words the outputs print.
CLOSED_FORM = "closed form for the unweighted line (EURACHEM/CITAC CG 4, appendix E3)"
DELTA_METHOD = "delta method with the full covariance matrix"


def cg4_std_error(
    *,
    residual_sd: np.ndarray | float,
    slope: np.ndarray | float,
    m: np.ndarray | int,
    n: np.ndarray | int,
    response: np.ndarray | float,
    response_mean: np.ndarray | float,
    sxx: np.ndarray | float,
) -> np.ndarray:
    """s(x₀) of the EURACHEM/CITAC CG 4 closed form, for the unweighted straight line.

    Parameters
    ----------
    residual_sd : float or array
        σ̂, the residual standard deviation of the calibration.
    slope : float or array
        b.
    m : int or array
        Number of readings averaged into ``response``.
    n : int or array
        N, the number of standards in the fit.
    response : float or array
        ȳ₀, the mean response of the sample.
    response_mean : float or array
        ȳ, the mean response of the standards.
    sxx : float or array
        Sxx = Σ(xᵢ − x̄)² of the standards.

    Returns
    -------
    ndarray
        s(x₀) = (σ̂/|b|)·√(1/m + 1/N + (ȳ₀ − ȳ)²/(b²·Sxx)).

    References
    ----------
    EURACHEM/CITAC Guide CG 4, Quantifying Uncertainty in Analytical
    Measurement, 3rd ed. (2012), appendix E.3 (from memory).

    Examples
    --------
    The cadmium calibration of the guide's example A5 (from memory): σ̂ = 0.005486,
    b = 0.241, 15 standards with Sxx = 1.2, two readings at 0.26 mg/L.

    >>> b, a = 0.241, 0.0087
    >>> y0 = a + b * 0.26
    >>> s = cg4_std_error(residual_sd=0.005486, slope=b, m=2, n=15, response=y0,
    ...                   response_mean=a + b * 0.5, sxx=1.2)
    >>> round(float(s), 4)
    0.0178
    """
    s = np.asarray(residual_sd, dtype=float)
    b = np.asarray(slope, dtype=float)
    gap = np.asarray(response, dtype=float) - np.asarray(response_mean, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        inside = 1.0 / np.asarray(m, dtype=float) + 1.0 / np.asarray(n, dtype=float) \
            + gap**2 / (b**2 * np.asarray(sxx, dtype=float))
        return s / np.abs(b) * np.sqrt(inside)


def _design_rows(model: Model, x: np.ndarray) -> np.ndarray:
    """g(x) for every x, stacked on a new last axis."""
    if model is Model.LINEAR:
        return np.stack([np.ones_like(x), x], axis=-1)
    if model in (Model.ORIGIN, Model.MEAN_RF):
        return x[..., None]
    return np.stack([np.ones_like(x), x, x * x], axis=-1)


def _derivative(model: Model, beta: np.ndarray, x: np.ndarray) -> np.ndarray:
    if model is Model.LINEAR:
        return beta[..., 1] + 0 * x
    if model in (Model.ORIGIN, Model.MEAN_RF):
        return beta[..., 0] + 0 * x
    return beta[..., 1] + 2 * beta[..., 2] * x


def delta_std_error(
    model: Model | str,
    beta: np.ndarray,
    covariance: np.ndarray,
    x0: np.ndarray | float,
    *,
    m: np.ndarray | int,
    residual_sd: np.ndarray | float,
    weight: np.ndarray | float = 1.0,
) -> np.ndarray:
    """s(x₀) by the delta method, for any model and weighting.

    Parameters
    ----------
    model : Model or str
        The calibration model.
    beta : array, shape (..., p)
        Coefficients in design order (intercept, slope, quadratic as the model has them).
    covariance : array, shape (..., p, p)
        Their covariance σ̂²·(XᵀWX)⁻¹.
    x0 : float or array, shape (...)
        The concentration read back from the mean response.
    m : int or array
        Number of readings averaged.
    residual_sd : float or array
        σ̂ (weights scaled to a mean of 1 over the standards).
    weight : float or array
        w(x₀) on the scale of the fit's weights (1 for an unweighted fit); see
        :func:`calib.fit.bands.weight_at`.

    Returns
    -------
    ndarray, shape (...)
        √(σ̂²/(m·w(x₀)) + g(x₀)ᵀ V g(x₀)) / |dŷ/dx(x₀)|; ``nan`` where the
        curve is flat at x₀ or the weight is not defined.

    Notes
    -----
    A first-order (delta-method) propagation: x₀ = f⁻¹(ȳ₀; β), with ȳ₀ and β
    independent, Var(ȳ₀) = σ̂²/(m·w(x₀)) and Var(β) = V.  Good while the
    curve's relative slope error is small (t·SE(b)/b well below 1, a condition
    every usable calibration meets).

    References
    ----------
    EURACHEM/CITAC Guide CG 4 (2012), appendix E.3 and section 8 (propagation
    by sensitivity coefficients) (from memory).

    Examples
    --------
    On an unweighted line the delta method is the CG 4 closed form:

    >>> import numpy as np
    >>> from calib.fit import fit_curve
    >>> fit = fit_curve([1, 2, 3, 4, 5], [2.1, 3.9, 6.2, 7.8, 10.1])
    >>> beta = np.array(list(fit.coefficients.values()))
    >>> x0 = float(fit.back_calculate(5.0)[0])
    >>> s = delta_std_error("linear", beta, fit.covariance, x0, m=2,
    ...                     residual_sd=fit.residual_sd)
    >>> closed = cg4_std_error(residual_sd=fit.residual_sd, slope=beta[1], m=2, n=5,
    ...                        response=5.0, response_mean=fit.y.mean(), sxx=10.0)
    >>> bool(np.isclose(s, closed, rtol=1e-13))
    True
    """
    model = parse_option(Model, model, name="model")
    b = np.asarray(beta, dtype=float)
    V = np.asarray(covariance, dtype=float)
    x = np.asarray(x0, dtype=float)
    x = np.broadcast_to(x, np.broadcast_shapes(x.shape, b.shape[:-1]))
    g = _design_rows(model, x)
    fitted_var = np.einsum("...i,...ij,...j->...", g, V, g)
    with np.errstate(divide="ignore", invalid="ignore"):
        reading_var = np.asarray(residual_sd, dtype=float) ** 2 / (
            np.asarray(m, dtype=float) * np.asarray(weight, dtype=float))
        return np.sqrt(reading_var + np.maximum(fitted_var, 0.0)) / np.abs(_derivative(model, b, x))


@dataclass(frozen=True)
class InversePrediction:
    """A concentration read back from a mean response, with its uncertainty.

    Figures are on the scale of the measured solution (before any dilution
    factor is applied).

    Attributes
    ----------
    response : float
        ȳ₀, the mean of the sample's readings.
    m : int
        Number of readings averaged.
    concentration : float
        x₀; ``nan`` where the curve never reaches the response (a quadratic
        beyond its turning point).
    std_error : float
        s(x₀).
    df : int
        ν = N − p, the degrees of freedom of t.
    t_critical : float
        t(1 − α/2, ν).
    confidence : float
        1 − α.
    method : str
        :data:`CLOSED_FORM` or :data:`DELTA_METHOD`.
    """

    response: float
    m: int
    concentration: float
    std_error: float
    df: int
    t_critical: float
    confidence: float
    method: str

    @property
    def half_width(self) -> float:
        """t(1 − α/2, ν)·s(x₀)."""
        return self.t_critical * self.std_error

    @property
    def ci_low(self) -> float:
        """x₀ − t·s(x₀)."""
        return self.concentration - self.half_width

    @property
    def ci_high(self) -> float:
        """x₀ + t·s(x₀)."""
        return self.concentration + self.half_width


def inverse_predict(
    curve: CalibrationCurve,
    response: float,
    *,
    m: int = 1,
    confidence: float | None = None,
    method: str = "auto",
) -> InversePrediction:
    """Read a concentration back from the mean of ``m`` readings, with its interval.

    Parameters
    ----------
    curve : CalibrationCurve
        The accepted calibration.
    response : float
        ȳ₀, the mean response of the readings (the ratio to the internal
        standard where the curve was fitted on ratios).
    m : int
        Number of readings averaged into ``response``.
    confidence : float, optional
        Interval level; the curve's own (the profile's) when None.
    method : {"auto", "closed-form", "delta"}
        ``auto`` takes the CG 4 closed form for the unweighted straight line
        and the delta method for everything else; ``closed-form`` refuses
        other curves.

    Returns
    -------
    InversePrediction

    Raises
    ------
    ValueError
        For m below 1, a wrong method, or ``closed-form`` on a curve it does not cover.

    Notes
    -----
    x₀ = (ȳ₀ − a)/b for the straight lines; for the quadratic the root of
    a + b·x + c·x² = ȳ₀ inside (or nearest to) the calibrated range.
    Interval x₀ ± t(1 − α/2, ν)·s(x₀).

    References
    ----------
    EURACHEM/CITAC Guide CG 4 (2012), appendix E.3; Miller & Miller,
    Statistics and Chemometrics for Analytical Chemistry, section 5.6 (from memory).

    Examples
    --------
    The fluorescence calibration of Miller & Miller (from memory): a reading of
    13.5 gives 6.21 pg/mL with s(x₀) = 0.24 and 95 % limits ± 0.62.

    >>> from calib.fit import fit_curve
    >>> from calib.fit.calcurve import CalibrationCurve
    >>> fit = fit_curve([0, 2, 4, 6, 8, 10, 12], [2.1, 5.0, 9.0, 12.6, 17.3, 21.0, 24.7])
    >>> p = inverse_predict(CalibrationCurve.from_fit(fit, analyte="F"), 13.5)
    >>> round(p.concentration, 2), round(p.std_error, 2), round(p.half_width, 2)
    (6.21, 0.24, 0.62)
    """
    if isinstance(m, bool) or not isinstance(m, (int, np.integer)) or m < 1:
        raise ValueError(f"m must be a whole number of at least 1; got {m!r}")
    many = inverse_predict_many(curve, np.array([response], dtype=float),
                                np.array([m]), confidence=confidence, method=method)
    return many.at(0)


@dataclass(frozen=True, eq=False)
class InverseBatch:
    """Many samples read back from one curve: :class:`InversePrediction` as arrays.

    Attributes
    ----------
    response : ndarray
        ȳ₀ of each sample.
    m : ndarray of int
        Readings averaged per sample.
    concentration, std_error : ndarray
        x₀ and s(x₀) per sample (``nan`` where the curve never reaches ȳ₀).
    df : int
        ν = N − p of the curve.
    t_critical : float
        t(1 − α/2, ν), one for the curve.
    confidence : float
        1 − α.
    method : str
        :data:`CLOSED_FORM` or :data:`DELTA_METHOD`.
    """

    response: np.ndarray
    m: np.ndarray
    concentration: np.ndarray
    std_error: np.ndarray
    df: int
    t_critical: float
    confidence: float
    method: str

    def __len__(self) -> int:
        return int(self.response.size)

    def at(self, i: int) -> InversePrediction:
        """Sample ``i`` as an :class:`InversePrediction`."""
        return InversePrediction(response=float(self.response[i]), m=int(self.m[i]),
                                 concentration=float(self.concentration[i]),
                                 std_error=float(self.std_error[i]), df=self.df,
                                 t_critical=self.t_critical, confidence=self.confidence,
                                 method=self.method)

    def predictions(self) -> list[InversePrediction]:
        """Every sample as an :class:`InversePrediction`, in order."""
        x0, se = self.concentration.tolist(), self.std_error.tolist()
        ys, ms = self.response.tolist(), self.m.tolist()
        return [InversePrediction(ys[i], int(ms[i]), x0[i], se[i], self.df, self.t_critical,
                                  self.confidence, self.method) for i in range(len(ys))]


def inverse_predict_many(
    curve: CalibrationCurve,
    responses: np.ndarray,
    m: np.ndarray,
    *,
    confidence: float | None = None,
    method: str = "auto",
) -> InverseBatch:
    """Read many samples back from one curve at once, with their intervals.

    The same formulas as :func:`inverse_predict` (which calls this with one
    sample), worked over arrays: Sxx, ȳ, the t quantile and the covariance are
    taken once for the curve, not once per sample.

    Parameters
    ----------
    curve : CalibrationCurve
        The accepted calibration.
    responses : array, shape (k,)
        ȳ₀ of each sample.
    m : array of int, shape (k,)
        Readings averaged per sample (each at least 1).
    confidence : float, optional
        Interval level; the curve's own when None.
    method : {"auto", "closed-form", "delta"}
        As for :func:`inverse_predict`.

    Returns
    -------
    InverseBatch

    Raises
    ------
    ValueError
        For an m below 1, a wrong method, or ``closed-form`` on a curve it does not cover.

    Examples
    --------
    Two readings of the Miller & Miller fluorescence line (from memory: 13.5
    reads back as 6.21 pg/mL with s(x₀) = 0.24):

    >>> import numpy as np
    >>> from calib.fit import fit_curve
    >>> from calib.fit.calcurve import CalibrationCurve
    >>> fit = fit_curve([0, 2, 4, 6, 8, 10, 12], [2.1, 5.0, 9.0, 12.6, 17.3, 21.0, 24.7])
    >>> many = inverse_predict_many(CalibrationCurve.from_fit(fit, analyte="F"),
    ...                             np.array([13.5, 13.5]), np.array([1, 3]))
    >>> many.concentration.round(2).tolist(), many.std_error.round(2).tolist()
    ([6.21, 6.21], [0.24, 0.15])
    """
    if method not in ("auto", "closed-form", "delta"):
        raise ValueError(f"method must be one of auto, closed-form, delta; got {method!r}")
    y0 = np.asarray(responses, dtype=float).reshape(-1)
    reps = np.asarray(m).reshape(-1)
    if reps.shape != y0.shape:
        raise ValueError(f"m has {reps.size} entries for {y0.size} responses")
    if reps.size and (reps.dtype.kind not in "iu" or int(reps.min()) < 1):
        raise ValueError("m must be whole numbers of at least 1; got "
                         f"{reps[(reps < 1) | (reps != np.round(reps))][:1].tolist()}")
    closed_ok = curve.model is Model.LINEAR and curve.unweighted
    if method == "closed-form" and not closed_ok:
        raise ValueError("the closed form covers the unweighted straight line only; this curve "
                         f"is {curve.model.value}, weighting {curve.weighting.value}")
    level = curve.confidence if confidence is None else confidence
    t = curve.t_critical(level)
    x0 = curve.concentration_at(y0) if y0.size else np.empty(0)
    if closed_ok and method != "delta":
        se = cg4_std_error(residual_sd=curve.residual_sd, slope=curve.coefficients["slope"],
                           m=reps, n=curve.n_points, response=y0,
                           response_mean=curve.y_mean, sxx=curve.sxx)
        used = CLOSED_FORM
    else:
        finite = np.isfinite(x0)
        weight = np.full(x0.shape, np.nan)
        if finite.any():
            weight[finite] = curve.weight_at(x0[finite])
        se = delta_std_error(curve.model, curve.beta, curve.covariance, x0, m=reps,
                             residual_sd=curve.residual_sd, weight=weight)
        used = DELTA_METHOD
    return InverseBatch(response=y0, m=reps.astype(int), concentration=np.asarray(x0, float),
                        std_error=np.asarray(se, dtype=float).reshape(y0.shape),
                        df=curve.residual_df, t_critical=t, confidence=float(level),
                        method=used)


def quadratic_root(a: np.ndarray | float, b: np.ndarray | float, q: np.ndarray | float,
                   y: np.ndarray | float, lo: np.ndarray | float,
                   hi: np.ndarray | float) -> np.ndarray:
    """The root x of a + b·x + q·x² = y that lies in, or nearest to, the range [lo, hi].

    Elementwise over broadcast arrays.  When both roots lie in the range, the
    one nearer its middle is taken; ``nan`` where the curve never reaches y.

    Notes
    -----
    The two roots are formed as r₁ = B/q and r₂ = (a − y)/B with
    B = −(b + sign(b)·√(b² − 4q(a − y)))/2, which avoids the cancellation of
    the textbook formula when q·x is small next to b.

    Examples
    --------
    >>> float(quadratic_root(1.0, 2.0, 0.5, 11.5, 1.0, 5.0)[()])   # roots 3 and −7
    3.0
    """
    a, b, q, y, lo, hi = (np.asarray(v, dtype=float) for v in (a, b, q, y, lo, hi))
    disc = b * b - 4 * q * (a - y)
    with np.errstate(divide="ignore", invalid="ignore"):
        root = np.sqrt(disc)
        sign = np.where(b >= 0, 1.0, -1.0)
        big = -(b + sign * root) / 2
        r1 = big / q
        r2 = np.where(big != 0, (a - y) / big, np.nan)
    mid = (lo + hi) / 2
    d1 = np.where(np.isfinite(r1), np.abs(r1 - np.clip(r1, lo, hi)), np.inf)
    d2 = np.where(np.isfinite(r2), np.abs(r2 - np.clip(r2, lo, hi)), np.inf)
    first = (d1 < d2) | ((d1 == d2) & (np.abs(r1 - mid) <= np.abs(r2 - mid)))
    return np.where(disc >= 0, np.where(first, r1, r2), np.nan)
