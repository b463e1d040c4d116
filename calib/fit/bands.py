"""Confidence and prediction bands, from stored figures alone.

Kept apart from :class:`~calib.fit.curve.CurveFit` so that a stored record
(coefficients, covariance, t quantile and the figures of :func:`band_figures`)
can be drawn again without refitting.

The confidence band is where the mean response lies; the prediction band is
where one new reading at that concentration is expected to fall.  For a
weighted fit a new reading at x has variance σ̂²/w(x), with w(x) on the same
scale as the fit's weights (scaled to a mean of 1 over the standards):
w(x) = w_raw(x)/scale, scale the mean raw weight of the standards.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from calib.fit.design import design_matrix, variance_function
from calib.options import Model, Weighting, parse_option

if TYPE_CHECKING:
    from calib.fit.curve import CurveFit

__all__ = ["band_figures", "mean_band", "prediction_band", "weight_at"]


def mean_band(
    model: Model | str,
    beta: np.ndarray,
    covariance: np.ndarray,
    t_critical: float,
    x: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Fitted response and half-width of its confidence band at ``x``.

    Parameters
    ----------
    model : Model or str
        The calibration model.
    beta : array_like, shape (p,)
        Coefficients in design order (intercept, slope, quadratic as present).
    covariance : array_like, shape (p, p)
        Covariance of ``beta`` (σ̂²·C).
    t_critical : float
        t(1 − α/2, ν).
    x : array_like
        Concentrations.

    Returns
    -------
    yhat, half_width : ndarray
        ŷ(x) = g(x)ᵀβ and t·√(g(x)ᵀ V g(x)).

    Examples
    --------
    >>> yhat, half = mean_band("linear", [1.0, 2.0], [[0.04, 0.0], [0.0, 0.01]], 2.0, [0.0, 1.0])
    >>> yhat.tolist(), half.round(6).tolist()
    ([1.0, 3.0], [0.4, 0.447214])
    """
    model = parse_option(Model, model, name="model")
    G = design_matrix(np.atleast_1d(np.asarray(x, dtype=float)), model)
    V = np.asarray(covariance, dtype=float)
    var = np.einsum("ij,jk,ik->i", G, V, G)
    return G @ np.asarray(beta, dtype=float), t_critical * np.sqrt(np.maximum(var, 0.0))


def weight_at(
    x: np.ndarray,
    weight_function: Weighting | str,
    *,
    weight_scale: float = 1.0,
    fitted: np.ndarray | None = None,
    level_variances: Sequence[Sequence[float]] = (),
) -> np.ndarray:
    """w(x): the weight a new reading at concentration ``x`` would have in the fit.

    Parameters
    ----------
    x : array_like
        Concentrations.
    weight_function : Weighting or str
        The weighting the fit's weights follow (``1/x2`` for ``mean-rf``).
    weight_scale : float
        Mean raw weight of the standards; w(x) = w_raw(x)/weight_scale.
    fitted : array_like, optional
        ŷ(x), needed for ``1/y`` and ``1/y2``.
    level_variances : sequence of (concentration, s²) pairs
        Needed for ``1/s2``.

    Returns
    -------
    ndarray
        ``nan`` where the weight is undefined (x ≤ 0 for 1/x, ŷ ≤ 0 for 1/y).

    Notes
    -----
    For ``1/y`` and ``1/y2`` a new reading is not known in advance, so its
    weight is taken at the fitted response ŷ(x).  For ``1/s2`` the replicate
    variance is interpolated linearly in x between the levels (and held at
    the end levels' values beyond them): an approximation between levels,
    exact at them.

    Examples
    --------
    >>> weight_at([1.0, 4.0], "1/x", weight_scale=0.5).tolist()
    [2.0, 0.5]
    >>> weight_at([1.5], "1/s2", level_variances=[[1.0, 0.1], [2.0, 0.3]]).round(6).tolist()
    [5.0]
    """
    weight_function = parse_option(Weighting, weight_function, name="weight_function")
    xs = np.atleast_1d(np.asarray(x, dtype=float))
    with np.errstate(divide="ignore", invalid="ignore"):
        if weight_function is Weighting.NONE:
            raw = np.ones_like(xs)
        elif weight_function in (Weighting.INV_X, Weighting.INV_X2):
            power = 1 if weight_function is Weighting.INV_X else 2
            raw = np.where(xs > 0, 1.0 / xs**power, np.nan)
        elif weight_function in (Weighting.INV_Y, Weighting.INV_Y2):
            if fitted is None:
                raise ValueError(f"weight_function {weight_function.value} needs the fitted responses")
            yhat = np.atleast_1d(np.asarray(fitted, dtype=float))
            power = 1 if weight_function is Weighting.INV_Y else 2
            raw = np.where(yhat > 0, 1.0 / yhat**power, np.nan)
        else:
            table = np.asarray(level_variances, dtype=float).reshape(-1, 2)
            if table.shape[0] == 0:
                raise ValueError("weight_function 1/s2 needs the level variances")
            order = np.argsort(table[:, 0])
            s2 = np.interp(xs, table[order, 0], table[order, 1])
            raw = np.where(s2 > 0, 1.0 / s2, np.nan)
    return raw / weight_scale


def prediction_band(
    model: Model | str,
    beta: np.ndarray,
    covariance: np.ndarray,
    t_critical: float,
    x: np.ndarray,
    *,
    residual_sd: float,
    weight_function: Weighting | str = Weighting.NONE,
    weight_scale: float = 1.0,
    level_variances: Sequence[Sequence[float]] = (),
) -> tuple[np.ndarray, np.ndarray]:
    """Fitted response and half-width of the prediction band for one new reading at ``x``.

    Parameters
    ----------
    model, beta, covariance, t_critical, x
        As for :func:`mean_band`.
    residual_sd : float
        σ̂ of the fit (weights scaled to a mean of 1).
    weight_function, weight_scale, level_variances
        As for :func:`weight_at`; the keys of the same names in
        :func:`band_figures` give them from a stored record.

    Returns
    -------
    yhat, half_width : ndarray
        ŷ(x) and t·√(g(x)ᵀ V g(x) + σ̂²/w(x)).

    Notes
    -----
    The new reading y₀ = ŷ(x) + e with Var(e) = σ̂²/w(x) independent of the
    fitted curve, so Var(y₀ − ŷ(x)) = g(x)ᵀ V g(x) + σ̂²/w(x); unweighted,
    w(x) = 1 and for the straight line this is the textbook
    σ̂²·(1 + 1/N + (x − x̄)²/Sxx).

    References
    ----------
    NIST/SEMATECH e-Handbook of Statistical Methods, chapter 4 (process
    modelling), prediction intervals for a new measurement (from memory).

    Examples
    --------
    >>> yhat, half = prediction_band("linear", [1.0, 2.0], [[0.04, 0.0], [0.0, 0.01]], 2.0,
    ...                              [0.0], residual_sd=0.3)
    >>> yhat.tolist(), half.round(6).tolist()   # 2·√(0.04 + 0.09)
    ([1.0], [0.72111])
    """
    model = parse_option(Model, model, name="model")
    xs = np.atleast_1d(np.asarray(x, dtype=float))
    G = design_matrix(xs, model)
    V = np.asarray(covariance, dtype=float)
    yhat = G @ np.asarray(beta, dtype=float)
    w = weight_at(xs, weight_function, weight_scale=weight_scale, fitted=yhat,
                  level_variances=level_variances)
    var = np.einsum("ij,jk,ik->i", G, V, G) + residual_sd**2 / w
    return yhat, t_critical * np.sqrt(np.maximum(var, 0.0))


def band_figures(fit: CurveFit) -> dict[str, Any]:
    """The figures a stored record needs to draw the prediction band of ``fit``.

    Returns
    -------
    dict
        ``residual_sd``, ``residual_df``, ``weight_function`` (the weighting the
        weights follow), ``weight_scale`` and ``level_variances`` (pairs of
        concentration and the fitted variance s²(x), for ``1/s2`` only); numbers that are not finite
        become ``None``.  Pass them to :func:`prediction_band` by keyword
        (all but ``residual_df``).

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> figures = band_figures(fit_curve([1, 2, 4], [1.1, 2.0, 4.1], weighting="1/x"))
    >>> figures["weight_function"], round(figures["weight_scale"], 6)
    ('1/x', 0.583333)
    """
    def finite(value: float) -> float | None:
        return float(value) if math.isfinite(value) else None

    levels: list[list[float | None]] = []
    if fit.weight_basis is Weighting.INV_S2:
        # The fitted variance function at each level: the weights the fit used.
        concentrations, s2, _ = variance_function(fit.x, fit.y)
        levels = [[finite(c), finite(v)] for c, v in zip(concentrations, s2)]
    return {
        "residual_sd": finite(fit.residual_sd),
        "residual_df": fit.residual_df,
        "weight_function": fit.weight_basis.value,
        "weight_scale": finite(fit.weight_scale),
        "level_variances": levels,
    }
