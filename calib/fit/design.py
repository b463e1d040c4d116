"""Design matrices and weights of the calibration models."""

from __future__ import annotations

import numpy as np

from calib.options import Model, Weighting

__all__ = ["COEFFICIENTS", "design_matrix", "fit_weights", "weighting_refuses"]

#: Coefficient names per model, in column order of the design matrix.
COEFFICIENTS: dict[Model, tuple[str, ...]] = {
    Model.LINEAR: ("intercept", "slope"),
    Model.ORIGIN: ("slope",),
    Model.QUADRATIC: ("intercept", "slope", "quadratic"),
}


def design_matrix(x: np.ndarray, model: Model) -> np.ndarray:
    """Return the N × p design matrix of ``model`` at concentrations ``x``.

    Examples
    --------
    >>> design_matrix(np.array([1.0, 2.0]), Model.QUADRATIC)
    array([[1., 1., 1.],
           [1., 2., 4.]])
    """
    x = np.asarray(x, dtype=float)
    if model is Model.LINEAR:
        return np.column_stack([np.ones_like(x), x])
    if model is Model.ORIGIN:
        return x[:, None].copy()
    if model is Model.QUADRATIC:
        return np.column_stack([np.ones_like(x), x, x * x])
    raise ValueError(f"model must be a Model; got {model!r}")


def weighting_refuses(concentration: float, weighting: Weighting) -> str | None:
    """Say why ``weighting`` cannot use a standard at ``concentration``, or None.

    Examples
    --------
    >>> weighting_refuses(0.0, Weighting.INV_X)
    'weighting 1/x divides by the concentration, which is 0 here'
    >>> weighting_refuses(0.0, Weighting.NONE) is None
    True
    """
    if weighting in (Weighting.INV_X, Weighting.INV_X2) and concentration <= 0:
        return f"weighting {weighting.value} divides by the concentration, which is {concentration:g} here"
    return None


def fit_weights(x: np.ndarray, weighting: Weighting) -> np.ndarray:
    """Return the weights of ``weighting`` at ``x``, scaled to a mean of 1.

    Scaling leaves every estimate, standard error and test unchanged and keeps
    the residual standard deviation in response units.

    Examples
    --------
    >>> fit_weights(np.array([1.0, 3.0]), Weighting.INV_X)
    array([1.5, 0.5])
    """
    x = np.asarray(x, dtype=float)
    if weighting is Weighting.NONE:
        return np.ones_like(x)
    if np.any(x <= 0):
        raise ValueError(f"weighting {weighting.value} needs positive concentrations")
    raw = 1.0 / x if weighting is Weighting.INV_X else 1.0 / (x * x)
    return raw / raw.mean()
