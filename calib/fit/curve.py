"""A fitted calibration curve with its coefficient inference."""

from __future__ import annotations

import math
from dataclasses import dataclass
from numbers import Real

import numpy as np
from scipy import stats

from calib.fit.bands import mean_band
from calib.fit.design import COEFFICIENTS, design_matrix, fit_weights
from calib.fit.wls import solve_wls
from calib.options import Model, Weighting, parse_option

__all__ = ["CoefficientRow", "CurveFit", "fit_curve"]


@dataclass(frozen=True)
class CoefficientRow:
    """Inference for one coefficient: estimate, SE, t against 0, two-sided p, interval."""

    name: str
    estimate: float
    std_error: float
    t_value: float
    p_value: float
    ci_low: float
    ci_high: float


@dataclass(frozen=True, eq=False)
class CurveFit:
    """A weighted least-squares calibration fit and the inference on it.

    Build one with :func:`fit_curve`.  Arrays hold the points used in the fit
    only, in the order given.

    Attributes
    ----------
    model, weighting : Model, Weighting
        What was fitted.
    confidence : float
        Default confidence level of intervals (e.g. 0.95).
    x, y, weights : ndarray
        Concentrations, responses and the weights (scaled to a mean of 1).
    coefficients : dict of str to float
        Estimates by name (``intercept``, ``slope``, ``quadratic``).
    covariance : ndarray
        σ̂²·(XᵀWX)⁻¹, rows and columns in the order of ``coefficients``.
    residual_df : int
        ν = N − p.
    residual_sd : float
        σ̂ = √(Σ wᵢ rᵢ² / ν).
    fitted, residuals : ndarray
        ŷᵢ and yᵢ − ŷᵢ.
    r_squared : float
        Weighted R², uncentred for ``origin``.
    """

    model: Model
    weighting: Weighting
    confidence: float
    x: np.ndarray
    y: np.ndarray
    weights: np.ndarray
    coefficients: dict[str, float]
    covariance: np.ndarray
    residual_df: int
    residual_sd: float
    fitted: np.ndarray
    residuals: np.ndarray
    r_squared: float

    @property
    def n_points(self) -> int:
        """N, the number of points in the fit."""
        return int(self.x.size)

    @property
    def names(self) -> tuple[str, ...]:
        """Coefficient names in design-matrix order."""
        return tuple(self.coefficients)

    @property
    def r(self) -> float:
        """Correlation coefficient: √R², with the sign of the slope for a straight line."""
        root = math.sqrt(max(self.r_squared, 0.0))
        if self.model is Model.QUADRATIC:
            return root
        return math.copysign(root, self.coefficients["slope"])

    def t_critical(self, confidence: float | None = None) -> float:
        """Two-sided Student's t quantile t(1 − α/2, ν).

        Examples
        --------
        >>> fit = fit_curve([1, 2, 3, 4, 5, 6, 7], [2.1, 3.9, 6.2, 7.8, 10.1, 12.2, 13.8])
        >>> round(fit.t_critical(0.95), 3)   # ν = 5: 2.571 in any handbook table
        2.571
        """
        level = self.confidence if confidence is None else _check_confidence(confidence)
        return float(stats.t.ppf(0.5 + level / 2, self.residual_df))

    def std_error(self, name: str) -> float:
        """SE(βⱼ) = σ̂·√Cⱼⱼ."""
        j = self._index(name)
        return float(math.sqrt(max(self.covariance[j, j], 0.0)))

    def t_value(self, name: str, reference: float = 0.0) -> float:
        """t = (βⱼ − reference) / SE(βⱼ), Student's t with ν degrees of freedom."""
        se = self.std_error(name)
        diff = self.coefficients[name] - reference
        if se == 0:
            return 0.0 if diff == 0 else math.copysign(math.inf, diff)
        return diff / se

    def p_value(self, name: str, reference: float = 0.0) -> float:
        """Two-sided p-value of H₀: βⱼ = reference."""
        return float(2 * stats.t.sf(abs(self.t_value(name, reference)), self.residual_df))

    def confidence_interval(self, name: str, confidence: float | None = None) -> tuple[float, float]:
        """βⱼ ± t(1 − α/2, ν)·SE(βⱼ).

        Examples
        --------
        >>> fit = fit_curve([1, 2, 3, 4, 5], [2.0, 4.1, 5.9, 8.2, 9.9])
        >>> low, high = fit.confidence_interval("slope")
        >>> bool(low < fit.coefficients["slope"] < high)
        True
        """
        half = self.t_critical(confidence) * self.std_error(name)
        estimate = self.coefficients[name]
        return estimate - half, estimate + half

    def coefficient_table(self, confidence: float | None = None) -> tuple[CoefficientRow, ...]:
        """One :class:`CoefficientRow` per coefficient."""
        rows = []
        for name in self.names:
            low, high = self.confidence_interval(name, confidence)
            rows.append(
                CoefficientRow(
                    name=name,
                    estimate=self.coefficients[name],
                    std_error=self.std_error(name),
                    t_value=self.t_value(name),
                    p_value=self.p_value(name),
                    ci_low=low,
                    ci_high=high,
                )
            )
        return tuple(rows)

    def predict(self, x: np.ndarray | float) -> np.ndarray:
        """Fitted response ŷ at concentrations ``x``."""
        return mean_band(self.model, self._beta, self.covariance, 0.0, x)[0]

    def confidence_band(self, x: np.ndarray, confidence: float | None = None) -> np.ndarray:
        """Half-width of the confidence band of the mean response at ``x``.

        Notes
        -----
        t(1 − α/2, ν)·√(gᵀ V g), g the design row at x and V the covariance.
        """
        return mean_band(self.model, self._beta, self.covariance, self.t_critical(confidence), x)[1]

    @property
    def _beta(self) -> np.ndarray:
        return np.array(list(self.coefficients.values()))

    def back_calculate(self, response: np.ndarray | float) -> np.ndarray:
        """Concentration read back from the curve for each response.

        The straight lines invert directly; for the quadratic the root inside
        (or nearest to) the calibrated range is taken.  ``nan`` where the
        curve never reaches the response.

        Examples
        --------
        >>> fit = fit_curve([1, 2, 3, 4, 5], [3.0, 5.0, 7.0, 9.0, 11.0])
        >>> fit.back_calculate([7.0]).round(12)
        array([3.])
        """
        y = np.atleast_1d(np.asarray(response, dtype=float))
        c = self.coefficients
        a = c.get("intercept", 0.0)
        b = c["slope"]
        if self.model is not Model.QUADRATIC or c["quadratic"] == 0:
            return (y - a) / b if b != 0 else np.full_like(y, np.nan)
        q = c["quadratic"]
        disc = b * b - 4 * q * (a - y)
        with np.errstate(invalid="ignore"):
            root = np.sqrt(disc)
        # Citardauq form of the two roots avoids cancellation.
        sign = np.where(b >= 0, 1.0, -1.0)
        big = -(b + sign * root) / 2
        with np.errstate(divide="ignore", invalid="ignore"):
            r1 = big / q
            r2 = np.where(big != 0, (a - y) / big, np.nan)
        lo, hi = float(self.x.min()), float(self.x.max())
        mid = (lo + hi) / 2
        d1 = np.where(np.isfinite(r1), np.abs(r1 - np.clip(r1, lo, hi)), np.inf)
        d2 = np.where(np.isfinite(r2), np.abs(r2 - np.clip(r2, lo, hi)), np.inf)
        # The root nearer the calibrated range; if both lie in it, the one nearer its middle.
        first = (d1 < d2) | ((d1 == d2) & (np.abs(r1 - mid) <= np.abs(r2 - mid)))
        out = np.where(first, r1, r2)
        return np.where(disc >= 0, out, np.nan)

    def _index(self, name: str) -> int:
        try:
            return self.names.index(name)
        except ValueError:
            raise ValueError(
                f"coefficient must be one of {', '.join(self.names)} for model "
                f"{self.model.value}; got {name!r}"
            ) from None


def _check_confidence(confidence: float) -> float:
    if isinstance(confidence, bool) or not (isinstance(confidence, Real) and 0.5 <= confidence < 1):
        raise ValueError(f"confidence must be a number from 0.5 to below 1; got {confidence!r}")
    return float(confidence)


def fit_curve(
    x: np.ndarray | list[float],
    y: np.ndarray | list[float],
    *,
    model: Model | str = Model.LINEAR,
    weighting: Weighting | str = Weighting.NONE,
    confidence: float = 0.95,
) -> CurveFit:
    """Fit a calibration curve by weighted least squares.

    Parameters
    ----------
    x, y : array_like
        Nominal concentrations and responses of the standards used.
    model : {"linear", "origin", "quadratic"}
        y = a + b·x, y = b·x, or y = a + b·x + c·x².
    weighting : {"none", "1/x", "1/x2"}
        Weights wᵢ (scaled to a mean of 1).
    confidence : float
        Confidence level of the intervals, default 0.95.

    Returns
    -------
    CurveFit

    Raises
    ------
    ValueError
        For a wrong option, fewer points than parameters + 1, or a singular design.

    Notes
    -----
    σ̂² = Σ wᵢ rᵢ² / ν with ν = N − p; SE(βⱼ) = σ̂·√Cⱼⱼ with C = (XᵀWX)⁻¹;
    (βⱼ − βⱼ⁰)/SE(βⱼ) follows Student's t with ν degrees of freedom.
    R² = 1 − Σwr²/Σw(y − ȳ_w)², and 1 − Σwr²/Σwy² (uncentred) for ``origin``.

    References
    ----------
    NIST/SEMATECH e-Handbook of Statistical Methods, §4.4.4 (weighted least squares).

    Examples
    --------
    NIST StRD NoInt2 (certified slope 0.727272727272727, SE 0.0420827318078432):

    >>> fit = fit_curve([4, 5, 6], [3, 4, 4], model="origin")
    >>> round(fit.coefficients["slope"], 12), round(fit.std_error("slope"), 12)
    (0.727272727273, 0.042082731808)
    """
    model = parse_option(Model, model, name="model")
    weighting = parse_option(Weighting, weighting, name="weighting")
    confidence = _check_confidence(confidence)
    xs = np.asarray(x, dtype=float).ravel()
    ys = np.asarray(y, dtype=float).ravel()
    if xs.shape != ys.shape:
        raise ValueError(f"x and y must have the same length; got {xs.size} and {ys.size}")
    if not (np.all(np.isfinite(xs)) and np.all(np.isfinite(ys))):
        raise ValueError("x and y must be finite numbers")
    names = COEFFICIENTS[model]
    p = len(names)
    if xs.size <= p:
        raise ValueError(f"model {model.value} needs at least {p + 1} points; got {xs.size}")
    w = fit_weights(xs, weighting)
    X = design_matrix(xs, model)
    sol = solve_wls(X, ys, w)
    nu = xs.size - p
    sigma2 = sol.weighted_ss / nu
    if model is Model.ORIGIN:
        total = float(np.sum(w * ys**2))
    else:
        ybar = float(np.sum(w * ys) / np.sum(w))
        total = float(np.sum(w * (ys - ybar) ** 2))
    r_squared = 1.0 - sol.weighted_ss / total if total > 0 else math.nan
    return CurveFit(
        model=model,
        weighting=weighting,
        confidence=confidence,
        x=xs,
        y=ys,
        weights=w,
        coefficients={n: float(b) for n, b in zip(names, sol.beta)},
        covariance=sigma2 * sol.unscaled_covariance,
        residual_df=nu,
        residual_sd=math.sqrt(sigma2),
        fitted=ys - sol.residuals,
        residuals=sol.residuals,
        r_squared=r_squared,
    )
