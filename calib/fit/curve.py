"""A fitted calibration curve with its coefficient inference."""

from __future__ import annotations

import functools
import math
import weakref
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, TypeVar

import numpy as np

from calib.fit.bands import mean_band, prediction_band, weight_at
from calib.fit.batch_block import StackFit, fit_stack
from calib.fit.design import (
    COEFFICIENTS,
    design_matrix,
    level_variances,
    raw_weights,
    variance_function,
    weight_basis,
)
from calib.fit.diagnostics_core import ROUNDING, ROUNDING_UNCENTRED, Sums, weighted_sums
from calib.fit.distributions import t_ppf, t_sf
from calib.fit.inverse import quadratic_root
from calib.fit.response_factor import ResponseFactors, response_factors
from calib.options import Model, Weighting, check_confidence, parse_option
from calib.tabular import Tabular

if TYPE_CHECKING:
    import pandas as pd

__all__ = [
    "CoefficientRow", "CoefficientTest", "CurveFit", "fit_curve", "once_per_fit",
    "residuals_negligible", "response_sums", "scatter_negligible", "stacked_curve",
    "weighted_ss",
]

_T = TypeVar("_T")


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


@dataclass(frozen=True)
class CoefficientTest:
    """Two-sided t-test of one coefficient against a reference value.

    Attributes
    ----------
    name : str
        The coefficient (``slope``...).
    estimate, reference : float
        βⱼ and the value it is tested against (an expected or historical slope).
    std_error, t_value : float
        SE(βⱼ) and t = (βⱼ − reference)/SE(βⱼ).
    df : int
        ν = N − p.
    p_value : float
        Two-sided p of H₀: βⱼ = reference.
    confidence, ci_low, ci_high : float
        The interval βⱼ ± t(1 − α/2, ν)·SE(βⱼ) and its level.
    """

    name: str
    estimate: float
    reference: float
    std_error: float
    t_value: float
    df: int
    p_value: float
    confidence: float
    ci_low: float
    ci_high: float

    @property
    def change_pct(self) -> float:
        """100·(βⱼ − reference)/reference (``nan`` for a reference of 0)."""
        if self.reference == 0:
            return math.nan
        return 100 * (self.estimate - self.reference) / self.reference

    @property
    def reference_inside(self) -> bool:
        """Whether the reference lies inside the confidence interval."""
        return self.ci_low <= self.reference <= self.ci_high

    def differs(self, alpha: float = 0.05) -> bool:
        """True when the coefficient differs significantly from the reference (p < α)."""
        return self.p_value < alpha


@dataclass(frozen=True, eq=False)
class CurveFit(Tabular):
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
        Concentrations, responses and the weights (scaled to a mean of 1).  For
        ``mean-rf`` the weights are 1/x² (see :attr:`weight_basis`): with them
        the least-squares slope is the mean response factor.
    coefficients : dict of str to float
        Estimates by name (``intercept``, ``slope``, ``quadratic``; the mean
        response factor of ``mean-rf`` is its ``slope``).
    covariance : ndarray
        σ̂²·(XᵀWX)⁻¹, rows and columns in the order of ``coefficients``.
    residual_df : int
        ν = N − p.
    residual_sd : float
        σ̂ = √(Σ wᵢ rᵢ² / ν).
    fitted, residuals : ndarray
        ŷᵢ and yᵢ − ŷᵢ.
    r_squared : float
        Weighted R², uncentred for ``origin`` and ``mean-rf``.
    covariance_root : ndarray or None
        An upper triangular L with (XᵀWX)⁻¹ = L Lᵀ from the engine's factorisation (the
        leverages of :func:`calib.fit.outliers.influence` come from it); None on a fit
        built by other means.
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
    covariance_root: np.ndarray | None = field(default=None, repr=False)

    def to_frame(self) -> pd.DataFrame:
        """The coefficient table as a pandas DataFrame (shown as a table in Jupyter)."""
        from calib.tabular import fit_frame

        return fit_frame(self)

    @property
    def n_points(self) -> int:
        """N, the number of points in the fit."""
        return int(self.x.size)

    @property
    def names(self) -> tuple[str, ...]:
        """Coefficient names in design-matrix order."""
        return tuple(self.coefficients)

    @functools.cached_property
    def exact(self) -> bool:
        """Whether the curve passes through every point, up to floating-point rounding.

        Then the residual SD and every standard error are rounding noise, and a
        t-test on them would judge that noise.  "Negligible" is a weighted
        residual sum of squares at most 1e-20 of the weighted spread of y about
        its mean, or at most (1e-12)² of its uncentred sum of squares (which
        covers responses that are all equal, where the spread is itself noise).
        """
        return residuals_negligible(weighted_ss(self), self)

    @property
    def r(self) -> float:
        """Correlation coefficient: √R², with the sign of the slope for a straight line."""
        root = math.sqrt(max(self.r_squared, 0.0))
        if self.model is Model.QUADRATIC:
            return root
        return math.copysign(root, self.coefficients["slope"])

    @property
    def weight_basis(self) -> Weighting:
        """The weighting the weights follow: :attr:`weighting`, or ``1/x2`` for ``mean-rf``."""
        return weight_basis(self.model, self.weighting)

    @property
    def weight_scale(self) -> float:
        """Mean raw weight of the standards: raw wᵢ = weights[i]·weight_scale."""
        return float(raw_weights(self.x, self.weight_basis, y=self.y).mean())

    @property
    def level_variances(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Distinct concentrations, replicate variance s² and count at each (``1/s2`` uses them)."""
        return level_variances(self.x, self.y)

    @functools.cached_property
    def response_factors(self) -> ResponseFactors:
        """Response factors yᵢ/xᵢ of the non-zero standards, with their mean and %RSD.

        For ``mean-rf`` their mean is the slope, SE(slope) = s(RF)/√n and the
        %RSD is what US EPA SW-846 Method 8000D judges (≤ 20 %, from memory).

        Examples
        --------
        Factors 2.0, 2.1, 1.95, 2.05: mean 2.025, s = √(0.0125/3), %RSD 3.188 (by hand).

        >>> fit = fit_curve([1, 2, 4, 8], [2.0, 4.2, 7.8, 16.4], model="mean-rf")
        >>> rf = fit.response_factors
        >>> round(fit.coefficients["slope"], 12), round(rf.rsd_pct, 3)
        (2.025, 3.188)
        """
        return response_factors(self.x, self.y)

    def t_critical(self, confidence: float | None = None) -> float:
        """Two-sided Student's t quantile t(1 − α/2, ν).

        Examples
        --------
        >>> fit = fit_curve([1, 2, 3, 4, 5, 6, 7], [2.1, 3.9, 6.2, 7.8, 10.1, 12.2, 13.8])
        >>> round(fit.t_critical(0.95), 3)   # ν = 5: 2.571 in any handbook table
        2.571
        """
        level = self.confidence if confidence is None else check_confidence(confidence)
        return t_ppf(0.5 + level / 2, self.residual_df)

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
        return 2 * t_sf(abs(self.t_value(name, reference)), self.residual_df)

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

    def coefficient_test(
        self, name: str, reference: float, *, confidence: float | None = None
    ) -> CoefficientTest:
        """t-test of coefficient ``name`` against ``reference`` (e.g. the expected slope).

        Notes
        -----
        t = (βⱼ − reference)/SE(βⱼ) on ν = N − p degrees of freedom, two-sided;
        the reference lies inside the (1 − α) interval exactly when p ≥ α.

        Examples
        --------
        >>> fit = fit_curve([1, 2, 3, 4, 5], [2.0, 4.1, 5.9, 8.2, 9.9])
        >>> test = fit.coefficient_test("slope", 2.0)
        >>> test.differs(0.05), test.reference_inside, round(test.change_pct, 2)
        (False, True, -0.5)
        """
        level = self.confidence if confidence is None else check_confidence(confidence)
        low, high = self.confidence_interval(name, level)
        return CoefficientTest(
            name=name, estimate=self.coefficients[name], reference=float(reference),
            std_error=self.std_error(name), t_value=self.t_value(name, reference),
            df=self.residual_df, p_value=self.p_value(name, reference), confidence=level,
            ci_low=low, ci_high=high,
        )

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
        """Fitted response ŷ at concentrations ``x`` (g(x)ᵀβ, as :func:`~calib.fit.bands.mean_band`
        computes it, without the band)."""
        return design_matrix(np.atleast_1d(np.asarray(x, dtype=float)), self.model) @ self._beta

    def confidence_band(self, x: np.ndarray, confidence: float | None = None) -> np.ndarray:
        """Half-width of the confidence band of the mean response at ``x``.

        Notes
        -----
        t(1 − α/2, ν)·√(gᵀ V g), g the design row at x and V the covariance.
        """
        return mean_band(self.model, self._beta, self.covariance, self.t_critical(confidence), x)[1]

    def prediction_band(self, x: np.ndarray, confidence: float | None = None) -> np.ndarray:
        """Half-width of the prediction band for one new reading at ``x``.

        Notes
        -----
        t(1 − α/2, ν)·√(gᵀ V g + σ̂²/w(x)), w(x) on the scale of the fit's
        weights (see :func:`calib.fit.bands.prediction_band`).

        Examples
        --------
        >>> fit = fit_curve([1, 2, 3, 4, 5], [2.0, 4.1, 5.9, 8.2, 9.9])
        >>> bool(fit.prediction_band([3.0])[0] > fit.confidence_band([3.0])[0])
        True
        """
        return prediction_band(
            self.model, self._beta, self.covariance, self.t_critical(confidence), x,
            residual_sd=self.residual_sd, weight_function=self.weight_basis,
            weight_scale=self.weight_scale, level_variances=self._level_table(),
        )[1]

    def weight_at(self, x: np.ndarray) -> np.ndarray:
        """w(x) of a new reading at ``x``, on the scale of :attr:`weights`."""
        return weight_at(x, self.weight_basis, weight_scale=self.weight_scale,
                         fitted=self.predict(x), level_variances=self._level_table())

    def _level_table(self) -> list[list[float]]:
        if self.weight_basis is not Weighting.INV_S2:
            return []
        c, s2, _ = variance_function(self.x, self.y)
        return np.column_stack([c, s2]).tolist()

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
        return quadratic_root(a, b, c["quadratic"], y, self.x.min(), self.x.max())

    def _index(self, name: str) -> int:
        try:
            return self.names.index(name)
        except ValueError:
            raise ValueError(
                f"coefficient must be one of {', '.join(self.names)} for model "
                f"{self.model.value}; got {name!r}"
            ) from None



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
    model : {"linear", "origin", "quadratic", "mean-rf"}
        y = a + b·x, y = b·x, y = a + b·x + c·x², or y = RF·x with RF the mean
        of the response factors yᵢ/xᵢ (every xᵢ must then be above 0).
    weighting : {"none", "1/x", "1/x2", "1/y", "1/y2", "1/s2"}
        Weights wᵢ (scaled to a mean of 1): 1/xᵢ, 1/xᵢ², 1/yᵢ, 1/yᵢ², or the
        inverse of the sample variance of the replicate responses at xᵢ's level
        (each level needs at least 2 replicates with a non-zero variance).
        ``mean-rf`` takes ``none`` only.
    confidence : float
        Confidence level of the intervals, default 0.95.

    Returns
    -------
    CurveFit

    Raises
    ------
    ValueError
        For a wrong option, fewer points than parameters + 1, a singular design,
        or data the weighting cannot use (see :func:`calib.fit.design.raw_weights`).

    Notes
    -----
    σ̂² = Σ wᵢ rᵢ² / ν with ν = N − p; SE(βⱼ) = σ̂·√Cⱼⱼ with C = (XᵀWX)⁻¹;
    (βⱼ − βⱼ⁰)/SE(βⱼ) follows Student's t with ν degrees of freedom.
    R² = 1 − Σwr²/Σw(y − ȳ_w)², and 1 − Σwr²/Σwy² (uncentred) for ``origin``
    and ``mean-rf``.

    The fit is a batch of one through the engine of :func:`calib.fit.batch.fit_batch`
    (:func:`calib.fit.batch_block.fit_stack`): the same curve in any batch gives the same
    doubles, so the same record.

    ``mean-rf``: RF̄ = Σ(yᵢ/xᵢ)/n minimises Σ (yᵢ − RF·xᵢ)²/xᵢ², so it is
    fitted as y = RF·x with weights 1/xᵢ²; then SE(RF̄) = s(RF)/√n and t has
    n − 1 degrees of freedom, the figures of US EPA SW-846 Method 8000D
    §11.5.1 (from memory).  ``1/y`` and ``1/y2`` weight by the observed
    responses, so the weights carry the responses' own noise.

    References
    ----------
    NIST/SEMATECH e-Handbook of Statistical Methods, §4.4.4 (weighted least squares).
    US EPA SW-846 Method 8000D (2018), §11.5.1 (average response factor).

    Examples
    --------
    NIST StRD NoInt2 (certified slope 0.727272727272727, SE 0.0420827318078432):

    >>> fit = fit_curve([4, 5, 6], [3, 4, 4], model="origin")
    >>> round(fit.coefficients["slope"], 12), round(fit.std_error("slope"), 12)
    (0.727272727273, 0.042082731808)
    """
    model = parse_option(Model, model, name="model")
    weighting = parse_option(Weighting, weighting, name="weighting")
    confidence = check_confidence(confidence)
    xs = np.asarray(x, dtype=float).ravel()
    ys = np.asarray(y, dtype=float).ravel()
    if xs.shape != ys.shape:
        raise ValueError(f"x and y must have the same length; got {xs.size} and {ys.size}")
    # A stack of one curve through the engine that fits batches (calib.fit.batch_block),
    # so this curve's figures are those it gets in any batch.
    points = np.empty((4, xs.size, 1))
    points[0, :, 0] = xs
    points[1, :, 0] = ys
    used = np.ones((xs.size, 1), dtype=bool)
    fitted = fit_stack(points[0], points[1], used, None, model=model,
                       basis=weight_basis(model, weighting), weights_out=points[2],
                       residuals_out=points[3])
    if fitted.problems[0] is not None:
        raise ValueError(fitted.problems[0])
    return stacked_curve(fitted, 0, x=points[0, :, 0], y=points[1, :, 0], used=used[:, 0],
                         model=model, weighting=weighting, confidence=confidence)


def stacked_curve(fitted: StackFit, k: int, *, x: np.ndarray, y: np.ndarray, used: np.ndarray,
                  model: Model, weighting: Weighting, confidence: float) -> CurveFit:
    """Curve ``k`` of the engine's result as a :class:`CurveFit` over its ``used`` points.

    The one place a fit is made from the engine's arrays, by :func:`fit_curve` and by
    :meth:`calib.fit.batch.BatchFit.curve` alike: ``x``, ``y`` and ``used`` are the
    curve's row of the stack (padding included).
    """
    residuals = fitted.residuals[used, k]
    ys = y[used]
    root = fitted.root[k].copy()
    return CurveFit(
        model=model,
        weighting=weighting,
        confidence=confidence,
        x=x[used],
        y=ys,
        weights=fitted.weights[used, k],
        coefficients={n: float(b) for n, b in zip(COEFFICIENTS[model], fitted.coefficients[k])},
        covariance=fitted.covariance[k].copy(),
        residual_df=int(fitted.residual_df[k]),
        residual_sd=float(fitted.residual_sd[k]),
        fitted=ys - residuals,
        residuals=residuals,
        r_squared=float(fitted.r_squared[k]),
        covariance_root=root if np.isfinite(root).all() else None,
    )


def once_per_fit(function: Callable[[CurveFit], _T]) -> Callable[[CurveFit], _T]:
    """Make ``function(fit)`` work its result out once per fit and remember it.

    A fit never changes once made, so a figure computed from the fit alone can
    be shared by every check that needs it (Mandel's test and the quadratic-term
    test use the same comparison quadratic).  The memory is held by weak
    reference: it goes when the fit goes.

    Examples
    --------
    >>> calls = []
    >>> @once_per_fit
    ... def slope(fit):
    ...     calls.append(fit)
    ...     return fit.coefficients["slope"]
    >>> fit = fit_curve([1, 2, 3], [2.0, 4.0, 6.0])
    >>> slope(fit) is slope(fit), len(calls)
    (True, 1)
    """
    results: weakref.WeakKeyDictionary[CurveFit, _T] = weakref.WeakKeyDictionary()

    @functools.wraps(function)
    def remembered(fit: CurveFit) -> _T:
        try:
            return results[fit]
        except KeyError:
            result = results[fit] = function(fit)
            return result

    return remembered


@once_per_fit
def weighted_ss(fit: CurveFit) -> float:
    """Σ wᵢ rᵢ², the weighted residual sum of squares of ``fit`` (worked out once per fit).

    Examples
    --------
    >>> round(weighted_ss(fit_curve([1, 2, 3], [1.0, 2.5, 3.0])), 12)   # residuals −1/6, 1/3, −1/6
    0.166666666667
    """
    return float(_sums(fit).weighted_ss[0])


@once_per_fit
def response_sums(fit: CurveFit) -> tuple[float, float]:
    """Σ wᵢ(yᵢ − ȳ_w)² and Σ wᵢyᵢ² of the fit's responses (worked out once per fit).

    The weighted spread of y about its weighted mean ȳ_w, and its uncentred sum
    of squares: the scales against which a residual sum counts as rounding noise.
    """
    sums = _sums(fit)
    return float(sums.spread[0]), float(sums.uncentred[0])


@once_per_fit
def _sums(fit: CurveFit) -> Sums:
    """The engine's weighted sums of the fit, as a batch of one curve (diagnostics_core)."""
    column = (fit.n_points, 1)
    return weighted_sums(fit.y.reshape(column), fit.weights.reshape(column),
                         fit.residuals.reshape(column), np.ones(column, dtype=bool))


def residuals_negligible(ss: float, fit: CurveFit) -> bool:
    """Whether a weighted residual sum of squares ``ss`` on ``fit``'s points is rounding noise.

    See :attr:`CurveFit.exact` for the thresholds.
    """
    spread, uncentred = response_sums(fit)
    return ss <= max(ROUNDING * spread, ROUNDING_UNCENTRED * uncentred)


def scatter_negligible(ss: float, fit: CurveFit) -> bool:
    """Whether a weighted sum of squares ``ss`` on ``fit``'s points (of a test's residuals,
    of the replicates about their level means) is rounding noise, not scatter.

    At most 1e-20 of the weighted spread of y (of its uncentred sum of squares when the
    responses do not vary), or :func:`residuals_negligible`.  No test on such a sum means
    anything: the curve (or the comparison model) passes through the points.
    """
    spread, uncentred = response_sums(fit)
    return ss <= ROUNDING * (spread if spread > 0 else uncentred) or residuals_negligible(ss, fit)
