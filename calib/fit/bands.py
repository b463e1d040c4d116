"""Confidence band of the fitted mean response, from coefficients and covariance alone.

Kept apart from :class:`~calib.fit.curve.CurveFit` so that a stored record
(coefficients, covariance, t quantile) can be drawn again without refitting.
"""

from __future__ import annotations

import numpy as np

from calib.fit.design import design_matrix
from calib.options import Model, parse_option

__all__ = ["mean_band"]


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
