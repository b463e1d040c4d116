"""Many calibration curves fitted at once: the batched counterpart of :func:`fit_curve`.

A multi-analyte run has hundreds of curves of the same model.  :func:`fit_batch`
fits them together on (K, n) arrays, one row per curve, padded to a common
length with a boolean mask of the points used.  :func:`~calib.fit.curve.fit_curve`
is a batch of one through the same engine (:func:`calib.fit.batch_block.fit_stack`),
whose arithmetic on a curve does not depend on the others: curve k of a batch and
the same curve fitted alone are the same doubles (``tests/fit/test_batch_diagnostics.py``,
``tests/checks/test_alone_or_in_batch.py``).  ``BatchFit.curve(k)``
turns row k back into an ordinary :class:`~calib.fit.curve.CurveFit`, so everything
downstream consumes batch results unchanged.  The case diagnostics of the whole
batch (leverage, studentized residuals, Cook's distance, lack of fit) are in
:mod:`calib.fit.batch_diagnostics`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from calib.fit.batch_block import StackFit, fit_stack
from calib.fit.curve import CurveFit, stacked_curve
from calib.fit.design import COEFFICIENTS, weight_basis
from calib.fit.distributions import t_ppf, t_sf
from calib.fit.inverse import quadratic_root
from calib.options import Model, Weighting, check_confidence, parse_option

__all__ = ["BatchCoefficients", "BatchFit", "fit_batch"]


@dataclass(frozen=True, eq=False)
class BatchCoefficients:
    """The coefficient inference of every curve of a batch, columns in the order of ``names``.

    Attributes
    ----------
    names : tuple of str
        Coefficient names.
    confidence : float
        Level of the intervals.
    estimate, std_error, t_value, p_value, ci_low, ci_high : ndarray, shape (K, p)
        βⱼ, SE(βⱼ), t against 0, its two-sided p and the interval
        βⱼ ± t(1 − α/2, ν)·SE(βⱼ), as in :meth:`CurveFit.coefficient_table`.
    """

    names: tuple[str, ...]
    confidence: float
    estimate: np.ndarray
    std_error: np.ndarray
    t_value: np.ndarray
    p_value: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray


@dataclass(frozen=True, eq=False)
class BatchFit:
    """K weighted least-squares calibration fits of one model, with their inference.

    Build one with :func:`fit_batch`.  Row k of every array belongs to curve k;
    point arrays keep the padded layout of the input, with ``nan`` where
    ``mask`` is False.  A curve that could not be fitted has its reason in
    ``problems[k]`` and ``nan`` in every figure.  The arrays are read-only, and
    the inference methods return new arrays (computed once per batch and kept).

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
    residuals : ndarray, shape (K, n)
        yᵢ − ŷᵢ, ``nan`` at unused points (and on curves without a fit).
    problems : tuple of (str or None)
        Why curve k was not fitted, or None when it was.
    covariance_root : ndarray, shape (K, p, p), or None
        An upper triangular L with (XᵀWX)⁻¹ = L Lᵀ, from the factorisation; the
        leverages of :func:`calib.fit.batch_diagnostics.batch_influence` come from it.
        None on a batch built by other means (the diagnostics then factor again).
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
    residuals: np.ndarray
    problems: tuple[str | None, ...]
    covariance_root: np.ndarray | None = field(default=None, repr=False)
    # Inference computed once per batch; the result itself stays immutable.
    _cache: dict = field(default_factory=dict, init=False, repr=False)

    @property
    def n_curves(self) -> int:
        """K, the number of curves."""
        return int(self.x.shape[0])

    @property
    def n_points(self) -> np.ndarray:
        """N per curve: the number of points used."""
        return self.mask.sum(axis=1)

    @property
    def fitted(self) -> np.ndarray:
        """ŷᵢ = yᵢ − rᵢ, shape (K, n); ``nan`` where the residual is (formed on first use)."""
        if "fitted" not in self._cache:
            fitted = self.y - self.residuals
            fitted.flags.writeable = False
            self._cache["fitted"] = fitted
        return self._cache["fitted"]

    @property
    def names(self) -> tuple[str, ...]:
        """Coefficient names, in the column order of ``coefficients``."""
        return COEFFICIENTS[self.model]

    @property
    def fitted_ok(self) -> np.ndarray:
        """True for each curve that was fitted (no problem)."""
        if "ok" not in self._cache:
            self._cache["ok"] = np.isfinite(self.residual_df)
        return self._cache["ok"].copy()

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
        return self._t_critical(level).copy()

    def std_error(self, name: str) -> np.ndarray:
        """SE(βⱼ) = σ̂·√Cⱼⱼ per curve."""
        return self._std_errors()[:, self._index(name)].copy()

    def t_value(self, name: str, reference: float | np.ndarray = 0.0) -> np.ndarray:
        """t = (βⱼ − reference) / SE(βⱼ) per curve; ``reference`` a number or one per curve."""
        j = self._index(name)
        if _is_zero(reference):
            return self._t_values()[:, j].copy()
        return _t_ratio(self.coefficients[:, j]
                        - _per_curve(reference, self.n_curves, "reference"),
                        self._std_errors()[:, j])

    def p_value(self, name: str, reference: float | np.ndarray = 0.0) -> np.ndarray:
        """Two-sided p-value of H₀: βⱼ = reference, per curve."""
        j = self._index(name)
        if _is_zero(reference):
            return self._p_values()[:, j].copy()
        return _two_sided_p(self.t_value(name, reference), self.residual_df)

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
        j = self._index(name)
        level = self.confidence if confidence is None else check_confidence(confidence)
        half = self._t_critical(level) * self._std_errors()[:, j]
        estimate = self.coefficients[:, j]
        return estimate - half, estimate + half

    def coefficient_table(self, confidence: float | None = None) -> BatchCoefficients:
        """Estimate, SE, t, p and interval of every coefficient of every curve, in one go.

        The batched :meth:`CurveFit.coefficient_table`: the same figures as the
        per-name methods, as (K, p) arrays.

        Examples
        --------
        >>> batch = fit_batch([[1, 2, 3, 4, 5], [1, 2, 3, 4, 5]],
        ...                   [[2.0, 4.1, 5.9, 8.2, 9.9], [1.1, 1.9, 3.2, 3.9, 5.1]],
        ...                   model="linear")
        >>> table = batch.coefficient_table(0.95)
        >>> table.names, table.estimate.shape, bool((table.p_value[:, 1] < 1e-3).all())
        (('intercept', 'slope'), (2, 2), True)
        """
        level = self.confidence if confidence is None else check_confidence(confidence)
        se = self._std_errors()
        half = self._t_critical(level)[:, None] * se
        estimate = self.coefficients
        return BatchCoefficients(
            names=self.names,
            confidence=level,
            estimate=estimate.copy(),
            std_error=se.copy(),
            t_value=self._t_values().copy(),
            p_value=self._p_values().copy(),
            ci_low=estimate - half,
            ci_high=estimate + half,
        )

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
        return stacked_curve(self._stack(), k % self.n_curves, x=self.x[k], y=self.y[k],
                             used=self.mask[k], model=self.model, weighting=self.weighting,
                             confidence=self.confidence)

    def _stack(self) -> StackFit:
        """The batch's figures in the engine's layout (points × curves), for :meth:`curve`."""
        if "stack" not in self._cache:
            root = self.covariance_root
            if root is None:
                root = np.full(self.covariance.shape, np.nan)
            self._cache["stack"] = StackFit(
                weights=self.weights.T, residuals=self.residuals.T,
                coefficients=self.coefficients, covariance=self.covariance, root=root,
                residual_df=self.residual_df, residual_sd=self.residual_sd,
                r_squared=self.r_squared, problems=self.problems)
        return self._cache["stack"]

    def _index(self, name: str) -> int:
        try:
            return self.names.index(name)
        except ValueError:
            raise ValueError(
                f"coefficient must be one of {', '.join(self.names)} for model "
                f"{self.model.value}; got {name!r}"
            ) from None

    # The cached figures below are private and never handed out without a copy.

    def _std_errors(self) -> np.ndarray:
        if "se" not in self._cache:
            diagonal = np.diagonal(self.covariance, axis1=1, axis2=2)
            self._cache["se"] = np.sqrt(np.maximum(diagonal, 0.0))
        return self._cache["se"]

    def _t_values(self) -> np.ndarray:
        if "t" not in self._cache:
            self._cache["t"] = _t_ratio(self.coefficients, self._std_errors())
        return self._cache["t"]

    def _p_values(self) -> np.ndarray:
        if "p" not in self._cache:
            self._cache["p"] = _two_sided_p(self._t_values(), self.residual_df[:, None])
        return self._cache["p"]

    def _t_critical(self, level: float) -> np.ndarray:
        key = ("t_critical", level)
        if key not in self._cache:
            # Curves share few distinct ν (whole numbers): one quantile each, spread back
            # over the curves, from the same t quantile as CurveFit's.
            nu = self.residual_df
            fitted = np.isfinite(nu)
            index = np.where(fitted, nu, 0).astype(np.intp)
            table = np.full(index.max(initial=0) + 1, np.nan)
            present = np.flatnonzero(np.bincount(index[fitted], minlength=table.size))
            table[present] = t_ppf(0.5 + level / 2, present.astype(float))
            self._cache[key] = np.where(fitted, table[index], np.nan)
        return self._cache[key]


def _is_zero(reference: float | np.ndarray) -> bool:
    """Whether ``reference`` is the number 0, whose t and p are computed once and kept."""
    return (isinstance(reference, (int, float)) and not isinstance(reference, bool)
            and reference == 0)


def _t_ratio(diff: np.ndarray, se: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        t = diff / se
    # As CurveFit: an exact fit (SE 0) gives t = 0 when the estimate equals the reference.
    return np.where(se == 0, np.where(diff == 0, 0.0, np.copysign(np.inf, diff)), t)


def _two_sided_p(t: np.ndarray, nu: np.ndarray) -> np.ndarray:
    # The tail CurveFit.p_value takes; one call covers every curve and coefficient.
    return 2 * t_sf(np.abs(t), nu)


def _per_curve(value: float | np.ndarray, K: int, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        return np.full(K, float(arr))
    if arr.shape != (K,):
        raise ValueError(f"{name} must be a number or one per curve, shape ({K},); got {arr.shape}")
    return arr


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
    The weighted designs of the curves, unused rows zeroed, are factored together
    (QR of W½X by modified Gram–Schmidt, :func:`calib.fit.batch_wls.solve_block`)
    and the estimates refined once on residuals evaluated with error-free products
    (:func:`calib.fit.batch_wls.residuals_exactly`), so that σ̂ keeps its digits on
    curves of very small scatter; the rank test is solve_wls's
    (:func:`calib.fit.batch_wls.factor`).  The work runs over blocks of a few hundred
    curves that fit in cache (:mod:`calib.fit.batch_block`); nothing loops over
    single curves.

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
    xs = np.asarray(x, dtype=float)
    ys = np.asarray(y, dtype=float)
    if xs.ndim != 2 or xs.shape != ys.shape:
        raise ValueError(
            f"x and y must be 2-D arrays of the same shape (curves × points); "
            f"got shapes {xs.shape} and {ys.shape}"
        )
    K, n = xs.shape
    # Points × curves from here on.  One buffer holds the copies of x and y that the
    # result keeps and its weights and residuals, filled block by block: fresh memory is
    # slow to obtain a page at a time, and one request is much cheaper than four.
    points = np.empty((4, n, K))
    X, Y = points[0], points[1]
    X[...] = xs.T
    Y[...] = ys.T
    U = np.array(_mask_array(mask, xs.shape).T, order="C")
    given = None
    if weights is not None:
        given = np.asarray(weights, dtype=float)
        if given.shape != xs.shape:
            raise ValueError(f"weights must have the shape of x, {xs.shape}; got {given.shape}")
        given = given.T
    fitted = fit_stack(X, Y, U, given, model=model, basis=basis, weights_out=points[2],
                       residuals_out=points[3])
    result = BatchFit(
        model=model,
        weighting=weighting,
        confidence=confidence,
        x=X.T,
        y=Y.T,
        mask=U.T,
        weights=fitted.weights.T,
        coefficients=fitted.coefficients,
        covariance=fitted.covariance,
        residual_df=fitted.residual_df,
        residual_sd=fitted.residual_sd,
        r_squared=fitted.r_squared,
        residuals=fitted.residuals.T,
        problems=fitted.problems,
        covariance_root=fitted.root,
    )
    _readonly(result.x, result.y, result.mask, result.weights, result.residuals,
              result.coefficients, result.covariance, fitted.root, result.residual_df,
              result.residual_sd, result.r_squared)
    return result


def _readonly(*arrays: np.ndarray) -> None:
    for arr in arrays:
        arr.flags.writeable = False


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
