"""Design matrices and weights of the calibration models.

Weights are built in two steps: :func:`raw_weights` gives wᵢ as the weighting
defines it (1/xᵢ, 1/yᵢ², 1/s²ᵢ...), :func:`fit_weights` scales them to a mean
of 1.  The scale is kept apart because a prediction band needs w(x) at a new
concentration on the same scale as the fit's weights.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from calib.fit.wls import solve_wls
from calib.options import Model, Weighting, combination_problem, own_weighting

__all__ = [
    "COEFFICIENTS", "design_matrix", "fit_weights", "level_variances", "model_refuses",
    "raw_weights", "weight_basis", "weighting_refuses",
]

#: Coefficient names per model, in column order of the design matrix.
COEFFICIENTS: dict[Model, tuple[str, ...]] = {
    Model.LINEAR: ("intercept", "slope"),
    Model.ORIGIN: ("slope",),
    Model.QUADRATIC: ("intercept", "slope", "quadratic"),
    # The average response factor is the slope of y = RF·x; naming it ``slope``
    # lets every downstream reader treat it like the origin line's slope.
    Model.MEAN_RF: ("slope",),
}

_BY_X = (Weighting.INV_X, Weighting.INV_X2)
_BY_Y = (Weighting.INV_Y, Weighting.INV_Y2)


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
    if model in (Model.ORIGIN, Model.MEAN_RF):
        return x[:, None].copy()
    if model is Model.QUADRATIC:
        return np.column_stack([np.ones_like(x), x, x * x])
    raise ValueError(f"model must be a Model; got {model!r}")


def weight_basis(model: Model, weighting: Weighting) -> Weighting:
    """The weighting the least-squares weights of ``model`` actually follow.

    The mean of the response factors yᵢ/xᵢ is the least-squares slope of
    y = RF·x with weights 1/xᵢ², so ``mean-rf`` is fitted with 1/x² weights
    (:func:`calib.options.own_weighting`); ``none`` is still read as the equal
    weight of its response factors, as records before ``calib.record/2`` say.

    Examples
    --------
    >>> weight_basis(Model.MEAN_RF, Weighting.NONE).value
    '1/x2'
    >>> weight_basis(Model.MEAN_RF, Weighting.INV_X)
    Traceback (most recent call last):
    ...
    ValueError: model mean-rf is fitted with weighting 1/x2 (each response factor yᵢ/xᵢ counts alike) and takes no other; got weighting 1/x: leave the weighting out, or choose another model
    """
    if model is not Model.MEAN_RF or weighting is Weighting.NONE:
        return own_weighting(model) or weighting
    problem = combination_problem(model, weighting)
    if problem is not None:
        raise ValueError(problem)
    return weighting


def model_refuses(concentration: float, model: Model) -> str | None:
    """Say why ``model`` cannot use a standard at ``concentration``, or None.

    Examples
    --------
    >>> model_refuses(0.0, Model.MEAN_RF)
    'model mean-rf divides the response by the concentration, which is 0 here'
    >>> model_refuses(0.0, Model.LINEAR) is None
    True
    """
    if model is Model.MEAN_RF and not concentration > 0:
        return f"model mean-rf divides the response by the concentration, which is {concentration:g} here"
    return None


def weighting_refuses(
    concentration: float,
    weighting: Weighting,
    *,
    response: float | None = None,
    replicates: Sequence[float] | None = None,
) -> str | None:
    """Say why ``weighting`` cannot use a standard at ``concentration``, or None.

    Parameters
    ----------
    concentration : float
        Nominal concentration of the standard.
    weighting : Weighting
        The weighting asked for.
    response : float, optional
        The standard's response; needed to judge ``1/y`` and ``1/y2``.
    replicates : sequence of float, optional
        Responses of every standard in the fit at this concentration (this one
        included); needed to judge ``1/s2``.  Without them those weightings
        refuse nothing here and :func:`raw_weights` raises instead.

    Examples
    --------
    >>> weighting_refuses(0.0, Weighting.INV_X)
    'weighting 1/x divides by the concentration, which is 0 here'
    >>> weighting_refuses(0.0, Weighting.NONE) is None
    True
    >>> weighting_refuses(1.0, Weighting.INV_Y2, response=-0.004)
    'weighting 1/y2 divides by the response, which is -0.004 here'
    >>> weighting_refuses(5.0, Weighting.INV_S2, replicates=[12.1])
    'weighting 1/s2 needs at least 2 replicates at each level; concentration 5 has 1'
    """
    if weighting in _BY_X and not concentration > 0:
        return f"weighting {weighting.value} divides by the concentration, which is {concentration:g} here"
    if weighting in _BY_Y and response is not None and not response > 0:
        return f"weighting {weighting.value} divides by the response, which is {response:g} here"
    if weighting is Weighting.INV_S2 and not concentration > 0:
        return (f"weighting 1/s2 fits the variance as a power of the concentration, which is "
                f"{concentration:g} here")
    if weighting is Weighting.INV_S2 and replicates is not None:
        return _variance_problem(concentration, np.asarray(replicates, dtype=float))
    return None


def _variance_problem(concentration: float, responses: np.ndarray) -> str | None:
    n = responses.size
    if n < 2:
        return (f"weighting 1/s2 needs at least 2 replicates at each level; "
                f"concentration {concentration:g} has {n}")
    if not np.var(responses, ddof=1) > 0:
        return (f"weighting 1/s2 cannot use concentration {concentration:g}: "
                f"its {n} replicates have zero variance")
    return None


def level_variances(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct concentrations, the sample variance s² of the responses at each, and their counts.

    s² has n − 1 in the denominator; it is ``nan`` where a level has a single response.

    Examples
    --------
    >>> levels, s2, n = level_variances([1, 1, 2, 2, 2], [1.0, 1.2, 2.0, 2.2, 2.4])
    >>> levels.tolist(), s2.round(6).tolist(), n.tolist()
    ([1.0, 2.0], [0.02, 0.04], [2, 3])
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    levels, index, counts = np.unique(x, return_inverse=True, return_counts=True)
    sums = np.bincount(index, weights=y)
    means = sums / counts
    ss = np.bincount(index, weights=(y - means[index]) ** 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        s2 = np.where(counts > 1, ss / np.maximum(counts - 1, 1), np.nan)
    return levels, s2, counts


#: Fewest replicated levels the ``1/s2`` variance function is fitted from (2 parameters and
#: at least one degree of freedom left to smooth the level variances).
MIN_VARIANCE_LEVELS = 3
#: Largest standard error of the fitted power θ for which ``1/s2`` is used.  Weights from a
#: loosely fixed power are weights the data chose: in simulation (6 levels over two decades,
#: proportional noise) nominal 95 % slope intervals covered 87 % at 2 replicates (SE(θ̂) ≈
#: 0.56), 92 % at 3 (0.33), 93.5 % at 5 (0.20) and 94 % at 10 (0.13).
_MAX_POWER_SE = 0.2


def variance_function(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Levels, the variance function s²(x) = exp(c)·x^θ fitted at each, and the counts.

    The ``1/s2`` weighting uses this smooth function of concentration, not each level's
    own s²: replicate variances from 1–4 degrees of freedom, taken as known weights,
    made nominal 95 % intervals cover 52–84 % in simulation.  ln s²ⱼ is regressed on
    ln xⱼ with weights νⱼ = nⱼ − 1, after removing the bias E ln(s²/σ²) = ψ(ν/2) −
    ln(ν/2) of a log sample variance (so levels with different replicate counts are
    comparable), weighted by 1/Var ln s²ⱼ = 1/ψ′(νⱼ/2).  Two parameters estimated from all
    levels make the weights nearly fixed once the power θ is known to within
    :data:`_MAX_POWER_SE`; with fewer replicates the checks refuse the weighting
    (:func:`variance_power_problem`), because weights the data chose loosely cost the
    intervals their coverage (tests/fit/test_variance_function.py).

    Raises
    ------
    ValueError
        When a level has fewer than 2 replicates or zero variance, a concentration is not
        above 0, or fewer than :data:`MIN_VARIANCE_LEVELS` levels are available.

    Examples
    --------
    Variances exactly proportional to x² are reproduced:

    >>> x = np.repeat([1.0, 10.0, 100.0], 10)
    >>> levels, s2, n = variance_function(x, x * np.tile(np.linspace(0.99, 1.01, 10), 3))
    >>> bool(np.allclose(s2 / levels**2, s2[0]))
    True
    """
    from scipy.special import digamma, polygamma

    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    levels, s2, counts = level_variances(x, y)
    for level in levels:
        problem = _variance_problem(float(level), y[x == level])
        if problem:
            raise ValueError(problem)
    if np.any(~(levels > 0)):
        raise ValueError("weighting 1/s2 fits the variance as a power of the concentration "
                         "and needs concentrations above 0")
    if levels.size < MIN_VARIANCE_LEVELS:
        raise ValueError(f"weighting 1/s2 fits the variance as a power of the concentration "
                         f"from the replicate variances and needs at least "
                         f"{MIN_VARIANCE_LEVELS} levels with replicates; {levels.size} available")
    nu = (counts - 1).astype(float)
    target = np.log(s2) - (digamma(nu / 2) - np.log(nu / 2))
    design = np.column_stack([np.ones_like(levels), np.log(levels)])
    # Var ln s² = ψ′(ν/2) (trigamma; closed form for a χ²_ν/ν variable): weight by its inverse.
    weight = 1.0 / polygamma(1, nu / 2)
    coef = solve_wls(design, target, weight).beta
    return levels, np.exp(design @ coef), counts


def variance_power_problem(x: np.ndarray, y: np.ndarray) -> str | None:
    """Why the replicate variances fix the ``1/s2`` variance function too loosely, or None.

    The standard error of the power θ of s² = a·x^θ, from the levels' spread in ln x and
    Var ln s²ⱼ = ψ′(νⱼ/2), must not exceed :data:`_MAX_POWER_SE`.  The checks refuse
    ``1/s2`` otherwise (the fit engine itself still fits it, for comparison).

    Examples
    --------
    >>> x = np.repeat([1.0, 2.0, 5.0, 10.0, 50.0, 100.0], 3)
    >>> print(variance_power_problem(x, x * np.tile([0.98, 1.0, 1.02], 6)))  # doctest: +ELLIPSIS
    weighting 1/s2 needs ... these 6 levels give θ = 2.00 ± 0.32 ...
    """
    from scipy.special import polygamma

    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    try:
        levels, _, counts = variance_function(x, y)
    except ValueError as exc:
        return str(exc)
    s2 = level_variances(x, y)[1]
    nu = (counts - 1).astype(float)
    weight = 1.0 / polygamma(1, nu / 2)
    design = np.column_stack([np.ones_like(levels), np.log(levels)])
    # The slope of ln s² on ln x with the weights 1/ψ′(ν/2): θ and its SE from (XᵀWX)⁻¹.
    sol = solve_wls(design, np.log(s2), weight)
    power_se = float(np.sqrt(sol.unscaled_covariance[1, 1]))
    theta = float(sol.beta[1])
    if power_se <= _MAX_POWER_SE:
        return None
    return (f"weighting 1/s2 needs the replicate variances to fix the power of the variance "
            f"function s² = a·x^θ to within a standard error of {_MAX_POWER_SE:g}; these "
            f"{levels.size} levels give θ = {theta:.2f} ± {power_se:.2f} (more replicates or a "
            f"wider range would; or use 1/x or 1/x2, chosen in validation)")


def raw_weights(x: np.ndarray, weighting: Weighting, *, y: np.ndarray | None = None) -> np.ndarray:
    """Return the weights of ``weighting`` as it defines them, before scaling.

    ``none`` → 1, ``1/x`` → 1/xᵢ, ``1/x2`` → 1/xᵢ², ``1/y`` → 1/yᵢ,
    ``1/y2`` → 1/yᵢ², ``1/s2`` → 1/s²(xᵢ) with s²(x) the variance function fitted to
    the levels' replicate variances (:func:`variance_function`).  Along the last axis, so a stack of
    curves (one per row) gives one row of weights per curve.

    Raises
    ------
    ValueError
        When the weighting cannot be formed: concentrations or responses not
        above zero where they divide, ``y`` missing, or a level without two
        replicates or with zero variance for ``1/s2``.

    Examples
    --------
    >>> x = np.repeat([1.0, 10.0, 100.0], 10)
    >>> w = raw_weights(x, Weighting.INV_S2, y=x * np.tile(np.linspace(0.99, 1.01, 10), 3))
    >>> bool(np.allclose(w[0] / w[-1], 1e4))  # s ∝ x exactly, so s² ∝ x²
    True
    """
    x = np.asarray(x, dtype=float)
    if weighting is Weighting.NONE:
        return np.ones_like(x)
    if weighting in _BY_X:
        if np.any(~(x > 0)):
            raise ValueError(f"weighting {weighting.value} needs positive concentrations")
        return 1.0 / x if weighting is Weighting.INV_X else 1.0 / (x * x)
    if y is None:
        raise ValueError(f"weighting {weighting.value} needs the responses y")
    y = np.asarray(y, dtype=float)
    if y.shape != x.shape:
        raise ValueError(f"x and y must have the same shape; got {x.shape} and {y.shape}")
    if weighting in _BY_Y:
        if np.any(~(y > 0)):
            raise ValueError(f"weighting {weighting.value} needs positive responses")
        return 1.0 / y if weighting is Weighting.INV_Y else 1.0 / (y * y)
    if weighting is Weighting.INV_S2:
        if x.ndim > 1:
            return np.stack([raw_weights(xr, weighting, y=yr) for xr, yr in zip(x, y)])
        levels, s2, _ = variance_function(x, y)
        return 1.0 / s2[np.searchsorted(levels, x)]
    raise ValueError(f"weighting must be a Weighting; got {weighting!r}")


def fit_weights(x: np.ndarray, weighting: Weighting, *, y: np.ndarray | None = None) -> np.ndarray:
    """Return the weights of ``weighting`` at ``x``, scaled to a mean of 1.

    Scaling leaves every estimate, standard error and test unchanged and keeps
    the residual standard deviation in response units.  ``y`` is needed for
    ``1/y``, ``1/y2`` and ``1/s2`` (see :func:`raw_weights`); for a stack of
    curves the mean is taken along the last axis.

    Examples
    --------
    >>> fit_weights(np.array([1.0, 3.0]), Weighting.INV_X)
    array([1.5, 0.5])
    >>> fit_weights(np.array([1.0, 3.0]), Weighting.INV_Y, y=np.array([2.0, 6.0]))
    array([1.5, 0.5])
    """
    raw = raw_weights(x, weighting, y=y)
    return raw / raw.mean(axis=-1, keepdims=True)
