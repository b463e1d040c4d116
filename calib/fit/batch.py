"""Many calibration curves fitted at once: the batched counterpart of :func:`fit_curve`.

A multi-analyte run has hundreds of curves of the same model.  :func:`fit_batch`
fits them together on (K, n) arrays, one row per curve, padded to a common
length with a boolean mask of the points used, and gives the same numbers as
fitting each curve with :func:`~calib.fit.curve.fit_curve` (to about 1e-12
relative; ``tests/fit/test_batch.py`` holds the comparison).  ``BatchFit.curve(k)``
turns row k back into an ordinary :class:`~calib.fit.curve.CurveFit`, so everything
downstream consumes batch results unchanged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from calib.fit.batch_wls import solve_wls_batch
from calib.fit.curve import CurveFit
from calib.fit.design import COEFFICIENTS, design_matrix, fit_weights, weight_basis
from calib.fit.inverse import quadratic_root
from calib.options import Model, Weighting, check_confidence, parse_option

__all__ = ["BatchFit", "fit_batch"]

#: Weightings whose weight at a point depends on that point alone, so a whole stack of
#: curves is weighted in one call.  Others (``1/s2`` pools the replicates of a level) are
#: prepared curve by curve.
_POINTWISE_WEIGHTINGS = frozenset({"none", "1/x", "1/x2", "1/y", "1/y2"})

#: Models whose R² is uncentred (no intercept), as in fit_curve.
_UNCENTRED = (Model.ORIGIN, Model.MEAN_RF)


@dataclass(frozen=True, eq=False)
class BatchFit:
    """K weighted least-squares calibration fits of one model, with their inference.

    Build one with :func:`fit_batch`.  Row k of every array belongs to curve k;
    point arrays keep the padded layout of the input, with ``nan`` where
    ``mask`` is False.  A curve that could not be fitted has its reason in
    ``problems[k]`` and ``nan`` in every figure.  The arrays are read-only.

    Attributes
    ----------
    model, weighting : Model, Weighting
        What was fitted (the same for every curve); for ``mean-rf`` the weighting
        is ``none`` and the weights follow 1/x², as in :func:`fit_curve`.
    confidence : float
        Default confidence level of intervals.
    x, y : ndarray, shape (K, n)
        Concentrations and responses as given.
    mask : ndarray of bool, shape (K, n)
        True where a point is used in its curve's fit.
    weights : ndarray, shape (K, n)
        Weights scaled to a mean of 1 over each curve's used points; ``nan`` elsewhere.
    coefficients : ndarray, shape (K, p)
        Estimates, columns in the order of ``names``.
    covariance : ndarray, shape (K, p, p)
        σ̂²·(XᵀWX)⁻¹ per curve.
    residual_df : ndarray, shape (K,)
        ν = N − p (float, so that a curve without a fit can hold ``nan``).
    residual_sd : ndarray, shape (K,)
        σ̂ = √(Σ wᵢ rᵢ² / ν).
    r_squared : ndarray, shape (K,)
        Weighted R², uncentred for ``origin`` and ``mean-rf``; ``nan`` when the
        responses do not vary.
    fitted, residuals : ndarray, shape (K, n)
        ŷᵢ and yᵢ − ŷᵢ, ``nan`` at unused points.
    problems : tuple of (str or None)
        Why curve k was not fitted, or None when it was.
    """

    model: Model
    weighting: Weighting
    confidence: float
    x: np.ndarray
    y: np.ndarray
    mask: np.ndarray
    weights: np.ndarray
    coefficients: np.ndarray
    covariance: np.ndarray
    residual_df: np.ndarray
    residual_sd: np.ndarray
    r_squared: np.ndarray
    fitted: np.ndarray
    residuals: np.ndarray
    problems: tuple[str | None, ...]

    @property
    def n_curves(self) -> int:
        """K, the number of curves."""
        return int(self.x.shape[0])

    @property
    def n_points(self) -> np.ndarray:
        """N per curve: the number of points used."""
        return self.mask.sum(axis=1)

    @property
    def names(self) -> tuple[str, ...]:
        """Coefficient names, in the column order of ``coefficients``."""
        return COEFFICIENTS[self.model]

    @property
    def fitted_ok(self) -> np.ndarray:
        """True for each curve that was fitted (no problem)."""
        return np.array([p is None for p in self.problems], dtype=bool)

    def coefficient(self, name: str) -> np.ndarray:
        """Estimate of coefficient ``name`` for every curve, shape (K,)."""
        return self.coefficients[:, self._index(name)].copy()

    def t_critical(self, confidence: float | None = None) -> np.ndarray:
        """Two-sided Student's t quantile t(1 − α/2, ν) for each curve's ν.

        Examples
        --------
        >>> batch = fit_batch([[1, 2, 3, 4, 5, 6, 7]], [[2.1, 3.9, 6.2, 7.8, 10.1, 12.2, 13.8]],
        ...                   model="linear")
        >>> batch.t_critical(0.95).round(3)   # ν = 5: 2.571 in any handbook table
        array([2.571])
        """
        level = self.confidence if confidence is None else check_confidence(confidence)
        # Curves share few distinct ν: one quantile each, spread back over the curves.
        nus, where = np.unique(self.residual_df, return_inverse=True)
        return stats.t.ppf(0.5 + level / 2, nus)[where]

    def std_error(self, name: str) -> np.ndarray:
        """SE(βⱼ) = σ̂·√Cⱼⱼ per curve."""
        j = self._index(name)
        return np.sqrt(np.maximum(self.covariance[:, j, j], 0.0))

    def t_value(self, name: str, reference: float | np.ndarray = 0.0) -> np.ndarray:
        """t = (βⱼ − reference) / SE(βⱼ) per curve; ``reference`` a number or one per curve."""
        se = self.std_error(name)
        diff = self.coefficient(name) - _per_curve(reference, self.n_curves, "reference")
        with np.errstate(divide="ignore", invalid="ignore"):
            t = diff / se
        # As CurveFit: an exact fit (SE 0) gives t = 0 when the estimate equals the reference.
        return np.where(se == 0, np.where(diff == 0, 0.0, np.copysign(np.inf, diff)), t)

    def p_value(self, name: str, reference: float | np.ndarray = 0.0) -> np.ndarray:
        """Two-sided p-value of H₀: βⱼ = reference, per curve."""
        return 2 * stats.t.sf(np.abs(self.t_value(name, reference)), self.residual_df)

    def confidence_interval(
        self, name: str, confidence: float | None = None
    ) -> tuple[np.ndarray, np.ndarray]:
        """βⱼ ± t(1 − α/2, ν)·SE(βⱼ) per curve, as (low, high) arrays.

        Examples
        --------
        >>> batch = fit_batch([[1, 2, 3, 4, 5]], [[2.0, 4.1, 5.9, 8.2, 9.9]], model="linear")
        >>> low, high = batch.confidence_interval("slope")
        >>> bool(low[0] < batch.coefficient("slope")[0] < high[0])
        True
        """
        half = self.t_critical(confidence) * self.std_error(name)
        estimate = self.coefficient(name)
        return estimate - half, estimate + half

    def back_calculate(self, response: np.ndarray | float) -> np.ndarray:
        """Concentration read back from each curve for each response.

        Parameters
        ----------
        response : float or array_like, shape (K,) or (K, m)
            One number for every curve, one per curve, or a row of m per curve.

        Returns
        -------
        ndarray, the shape of ``response`` (shape (K,) for a single number)
            As :meth:`CurveFit.back_calculate`: the straight lines invert directly;
            for the quadratic the root nearer the calibrated range is taken, and
            if both lie in it the one nearer its middle.  ``nan`` where the curve
            never reaches the response and on curves without a fit.

        Examples
        --------
        >>> batch = fit_batch([[1, 2, 3, 4, 5], [1, 2, 3, 4, 5]],
        ...                   [[3.0, 5.0, 7.0, 9.0, 11.0], [1.0, 4.0, 9.0, 16.0, 25.0]],
        ...                   model="quadratic")
        >>> batch.back_calculate([[7.0], [9.0]]).round(12)
        array([[3.],
               [3.]])
        """
        K = self.n_curves
        r = np.asarray(response, dtype=float)
        if r.ndim == 0:
            r = np.full(K, float(r))
        if r.ndim not in (1, 2) or r.shape[0] != K:
            raise ValueError(
                f"response must be a number or have one row per curve, shape ({K},) or "
                f"({K}, m); got shape {r.shape}"
            )
        lead = (slice(None),) + (None,) * (r.ndim - 1)
        names = self.names
        coef = self.coefficients
        a = (coef[:, names.index("intercept")] if "intercept" in names else np.zeros(K))[lead]
        b = coef[:, names.index("slope")][lead]
        with np.errstate(divide="ignore", invalid="ignore"):
            straight = np.where(b != 0, (r - a) / b, np.nan)
            if self.model is not Model.QUADRATIC:
                return straight
            q = coef[:, names.index("quadratic")][lead]
            lo = np.min(np.where(self.mask, self.x, np.inf), axis=1)[lead]
            hi = np.max(np.where(self.mask, self.x, -np.inf), axis=1)[lead]
            curved = quadratic_root(a, b, q, r, lo, hi)
        return np.where(q == 0, straight, curved)

    def curve(self, k: int) -> CurveFit:
        """Curve ``k`` as an ordinary :class:`CurveFit` over its used points.

        Raises
        ------
        ValueError
            When curve ``k`` has no fit (the message gives its problem).

        Examples
        --------
        >>> batch = fit_batch([[4, 5, 6]], [[3, 4, 4]], model="origin")
        >>> fit = batch.curve(0)
        >>> round(fit.coefficients["slope"], 12)   # NIST StRD NoInt2: 0.727272727272727
        0.727272727273
        """
        if not -self.n_curves <= k < self.n_curves:
            raise ValueError(f"curve must be an index below {self.n_curves}; got {k!r}")
        problem = self.problems[k]
        if problem is not None:
            raise ValueError(f"curve {k} has no fit: {problem}")
        used = self.mask[k]
        return CurveFit(
            model=self.model,
            weighting=self.weighting,
            confidence=self.confidence,
            x=self.x[k, used].copy(),
            y=self.y[k, used].copy(),
            weights=self.weights[k, used].copy(),
            coefficients={n: float(b) for n, b in zip(self.names, self.coefficients[k])},
            covariance=self.covariance[k].copy(),
            residual_df=int(self.residual_df[k]),
            residual_sd=float(self.residual_sd[k]),
            fitted=self.fitted[k, used].copy(),
            residuals=self.residuals[k, used].copy(),
            r_squared=float(self.r_squared[k]),
        )

    def _index(self, name: str) -> int:
        try:
            return self.names.index(name)
        except ValueError:
            raise ValueError(
                f"coefficient must be one of {', '.join(self.names)} for model "
                f"{self.model.value}; got {name!r}"
            ) from None



def _per_curve(value: float | np.ndarray, K: int, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        return np.full(K, float(arr))
    if arr.shape != (K,):
        raise ValueError(f"{name} must be a number or one per curve, shape ({K},); got {arr.shape}")
    return arr


def _readonly(*arrays: np.ndarray) -> None:
    for arr in arrays:
        arr.flags.writeable = False


def _weights_from(
    x: np.ndarray, y: np.ndarray, mask: np.ndarray, basis: Weighting, problems: list
) -> np.ndarray:
    """Weights of ``basis`` per curve, scaled to mean 1 over the used points; nan elsewhere.

    A curve the weighting cannot use gets fit_weights' reason in ``problems``.
    """
    todo = mask & _unrefused(problems)[:, None]
    if basis.value in _POINTWISE_WEIGHTINGS:
        try:
            # Padding and curves already refused get 1 (a harmless value) in the one call.
            raw = fit_weights(np.where(todo, x, 1.0), basis, y=np.where(todo, y, 1.0))
        except ValueError:
            raw = None  # some curve cannot be weighted: find which, one by one
    else:
        raw = None
    if raw is None:
        raw = np.ones(x.shape)
        for k in np.flatnonzero(todo.any(axis=1)):
            used = todo[k]
            try:
                raw[k, used] = fit_weights(x[k, used], basis, y=y[k, used])
            except ValueError as err:
                problems[k] = str(err)
                todo[k] = False
    return np.where(todo, raw / _mean_used(raw, todo)[:, None], np.nan)


def _mean_used(values: np.ndarray, used: np.ndarray) -> np.ndarray:
    count = used.sum(axis=1)
    total = np.where(used, values, 0.0).sum(axis=1)
    return np.where(count > 0, total / np.maximum(count, 1), np.nan)


def fit_batch(
    x: np.ndarray | list[list[float]],
    y: np.ndarray | list[list[float]],
    *,
    model: Model | str,
    weighting: Weighting | str | None = None,
    weights: np.ndarray | None = None,
    mask: np.ndarray | None = None,
    confidence: float = 0.95,
) -> BatchFit:
    """Fit K calibration curves of one model by weighted least squares, all at once.

    Parameters
    ----------
    x, y : array_like, shape (K, n)
        Concentrations and responses, one curve per row.  Curves with fewer
        points are padded to n; the padding may hold anything (``nan`` is usual)
        and is left out by ``mask``.
    model : {"linear", "origin", "quadratic", "mean-rf"}
        The models of :func:`fit_curve`.  ``mean-rf`` is fitted as fit_curve
        fits it: the mean of the response factors yᵢ/xᵢ is the least-squares
        slope of y = RF·x with weights 1/xᵢ².
    weighting : str or Weighting, optional
        Without ``weights``: the weighting to compute per curve (default ``none``;
        ``mean-rf`` takes no other).  The weightings that look at each point alone
        are formed for all curves in one call; ``1/s2`` is prepared curve by curve
        with ``fit_weights``.  With ``weights``: the name of the weighting that
        produced them, recorded on the result (required).
    weights : array_like, shape (K, n), optional
        Precomputed weights, for any weighting (not with ``mean-rf``, whose
        weights are fixed); positive and finite at used points.  They are
        rescaled to a mean of 1 over each curve's used points, as ``fit_weights``
        does, which changes no estimate or test.
    mask : array_like of bool, shape (K, n), optional
        True where a point is used (default: every point).
    confidence : float
        Default confidence level of the intervals, default 0.95.

    Returns
    -------
    BatchFit
        Curve k agrees with ``fit_curve`` on row k's used points.  A curve that
        ``fit_curve`` would refuse (too few points, non-finite values, a weighting
        that cannot apply to its data, a concentration of 0 under ``mean-rf``, a
        singular design such as a single concentration) is
        reported in ``problems`` with fit_curve's reason and filled with ``nan``;
        the other curves are unaffected.  Responses that do not vary give a flat
        line with R² ``nan``, as in ``fit_curve``.

    Raises
    ------
    ValueError
        For a wrong option or arrays of the wrong shape (never for a bad curve).

    Notes
    -----
    The formulas are those of :func:`fit_curve`: σ̂² = Σ wᵢ rᵢ² / ν, ν = N − p,
    covariance σ̂²·(XᵀWX)⁻¹, R² = 1 − Σwr²/Σw(y − ȳ_w)² (uncentred for ``origin``
    and ``mean-rf``).
    The (K, n, p) stack of column-scaled weighted designs, unused rows zeroed,
    is factored by one batched QR with one step of iterative refinement
    (:func:`calib.fit.batch_wls.solve_wls_batch`); there is no loop over curves
    in the numerical work.

    References
    ----------
    NIST/SEMATECH e-Handbook of Statistical Methods, §4.4.4 (weighted least squares).

    Examples
    --------
    Two straight lines, the second with one point fewer (its last entry is padding):

    >>> batch = fit_batch(
    ...     [[1, 2, 3, 4, 5], [1, 2, 3, 4, 0]],
    ...     [[2.1, 3.9, 6.2, 7.8, 10.1], [1.0, 1.6, 2.1, 2.4, 0]],
    ...     model="linear",
    ...     mask=[[True] * 5, [True] * 4 + [False]],
    ... )
    >>> batch.coefficient("slope").round(4).tolist(), batch.residual_df.tolist()
    ([1.99, 0.47], [3.0, 2.0])
    >>> batch.curve(1).back_calculate([2.1]).round(4)
    array([3.1915])
    """
    model = parse_option(Model, model, name="model")
    if weights is not None and model is Model.MEAN_RF:
        raise ValueError("model mean-rf fixes its own weights (1/x2); weights must not be given")
    if weights is not None and weighting is None:
        raise ValueError(
            "weights were given without the weighting that produced them; "
            "pass weighting= as well, so each curve records what was fitted"
        )
    weighting = parse_option(Weighting, Weighting.NONE if weighting is None else weighting,
                             name="weighting")
    basis = weight_basis(model, weighting)
    confidence = check_confidence(confidence)
    xs = np.array(x, dtype=float)
    ys = np.array(y, dtype=float)
    if xs.ndim != 2 or xs.shape != ys.shape:
        raise ValueError(
            f"x and y must be 2-D arrays of the same shape (curves × points); "
            f"got shapes {xs.shape} and {ys.shape}"
        )
    K, n = xs.shape
    used = _mask_array(mask, xs.shape)
    names = COEFFICIENTS[model]
    p = len(names)

    # The same checks, in the same order, as fit_curve; the first reason found is kept.
    problems: list[str | None] = [None] * K
    n_used = used.sum(axis=1)
    finite = np.where(used, np.isfinite(xs) & np.isfinite(ys), True).all(axis=1)
    _refuse(problems, ~finite, "x and y must be finite numbers")
    for k in np.flatnonzero(n_used <= p):
        _refuse(problems, k, f"model {model.value} needs at least {p + 1} points; got {n_used[k]}")
    if model is Model.MEAN_RF:
        with np.errstate(invalid="ignore"):
            positive = np.where(used, xs > 0, True).all(axis=1)
        _refuse(problems, ~positive, "model mean-rf needs concentrations above 0 (each "
                "response is divided by its concentration)")

    if weights is None:
        w = _weights_from(xs, ys, used, basis, problems)
    else:
        w = _given_weights(weights, used, problems)

    active = _unrefused(problems)
    fit_rows = used & active[:, None]
    X = design_matrix(np.where(fit_rows, xs, 0.0).ravel(), model).reshape(K, n, p)
    sol = solve_wls_batch(X, np.where(fit_rows, ys, 0.0), np.where(fit_rows, w, 1.0),
                          mask=fit_rows, active=active)
    for k in np.flatnonzero(active & ~_unrefused(sol.problems)):
        problems[k] = sol.problems[k]
    ok = _unrefused(problems)

    nu = np.where(ok, n_used - p, np.nan).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        sigma2 = sol.weighted_ss / nu
    covariance = sigma2[:, None, None] * sol.unscaled_covariance
    rows = used & ok[:, None]
    w_used = np.where(rows, w, 0.0)
    y_used = np.where(rows, ys, 0.0)
    if model in _UNCENTRED:
        total = np.sum(w_used * y_used**2, axis=1)
    else:
        with np.errstate(invalid="ignore", divide="ignore"):
            ybar = np.sum(w_used * y_used, axis=1) / np.sum(w_used, axis=1)
        total = np.sum(w_used * np.where(rows, ys - ybar[:, None], 0.0) ** 2, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        r_squared = np.where(total > 0, 1.0 - sol.weighted_ss / total, np.nan)
    residuals = np.where(rows, sol.residuals, np.nan)
    fitted = np.where(rows, ys - np.where(rows, sol.residuals, 0.0), np.nan)

    result = BatchFit(
        model=model,
        weighting=weighting,
        confidence=confidence,
        x=xs,
        y=ys,
        mask=used,
        weights=np.where(used, w, np.nan),
        coefficients=np.where(ok[:, None], sol.beta, np.nan),
        covariance=np.where(ok[:, None, None], covariance, np.nan),
        residual_df=nu,
        residual_sd=np.where(ok, np.sqrt(np.where(ok, sigma2, 0.0)), np.nan),
        r_squared=np.where(ok, r_squared, np.nan),
        fitted=fitted,
        residuals=residuals,
        problems=tuple(problems),
    )
    _readonly(result.x, result.y, result.mask, result.weights, result.coefficients,
              result.covariance, result.residual_df, result.residual_sd, result.r_squared,
              result.fitted, result.residuals)
    return result


def _refuse(problems: list[str | None], which: np.ndarray | int, reason: str) -> None:
    """Record ``reason`` for the curves ``which`` (index or boolean array) not yet refused."""
    index = np.flatnonzero(which) if isinstance(which, np.ndarray) else [which]
    for k in index:
        if problems[k] is None:
            problems[k] = reason


def _unrefused(problems: tuple[str | None, ...] | list[str | None]) -> np.ndarray:
    return np.fromiter((p is None for p in problems), dtype=bool, count=len(problems))


def _mask_array(mask: np.ndarray | None, shape: tuple[int, int]) -> np.ndarray:
    if mask is None:
        return np.ones(shape, dtype=bool)
    arr = np.array(mask)
    if arr.dtype != bool:
        raise ValueError(
            f"mask must be an array of True/False (True = point used); got dtype {arr.dtype}"
        )
    if arr.shape != shape:
        raise ValueError(f"mask must have the shape of x, {shape}; got {arr.shape}")
    return arr


def _given_weights(weights: np.ndarray, used: np.ndarray, problems: list) -> np.ndarray:
    w = np.array(weights, dtype=float)
    if w.shape != used.shape:
        raise ValueError(f"weights must have the shape of x, {used.shape}; got {w.shape}")
    with np.errstate(invalid="ignore"):
        good = np.where(used, np.isfinite(w) & (w > 0), True).all(axis=1)
    _refuse(problems, ~good, "weights must be positive finite numbers at every used point")
    ok = used & good[:, None]
    return np.where(ok, w / _mean_used(np.where(ok, w, 0.0), ok)[:, None], np.nan)

