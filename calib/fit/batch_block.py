"""The fitting engine: curves laid out points × curves, fitted block by block.

:func:`fit_stack` is what every calibration fit goes through: a batch of many
(:func:`calib.fit.batch.fit_batch`) and a single curve
(:func:`calib.fit.curve.fit_curve`, a stack of one) alike, so a curve's figures are
the same whatever else is fitted beside it.

:func:`calib.fit.batch.fit_batch` cuts a batch into blocks of curves small enough
that every working array of a block stays in the processor's cache (tens of
kilobytes): numpy operations on whole batches of thousands of curves spend more
time fetching fresh memory than computing.  Within a block the arrays are laid
out points × curves, so that a sum over a curve's points runs along whole rows.
Each block does, for its curves, what :func:`fit_curve` does for one up to the
solution: the same checks in the same order (the first reason found is kept),
the weights, and the refined estimates with their residuals.  What needs only
one number per curve (the rank test, the covariance, the inference) is left to
fit_batch, once for the whole batch.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calib.fit.batch_wls import factor, point_sum, solve_block
from calib.fit.design import COEFFICIENTS, raw_weights
from calib.options import Model, Weighting

__all__ = ["BLOCK_VALUES", "StackFit", "fit_stack"]

#: Values per working array of a block (8 bytes each): curves per block = this / points
#: (half that for the quadratic, whose two design columns travel together).  96 KiB keeps
#: every temporary below 128 KiB, the size above which the C allocator asks the kernel for
#: fresh pages each time, and a block's arrays within the second-level cache.
BLOCK_VALUES = 12288

#: Weightings whose weight at a point depends on that point alone, so a whole block of
#: curves is weighted in one call.  Others (``1/s2`` pools the replicates of a level) are
#: prepared curve by curve.
_POINTWISE_WEIGHTINGS = frozenset({"none", "1/x", "1/x2", "1/y", "1/y2"})
_BY_X = (Weighting.INV_X, Weighting.INV_X2)
_ONCE = (Weighting.INV_X, Weighting.INV_Y)


class _Stack:
    """The figures of a whole batch, filled in block by block.

    Point arrays are points × curves (n, K), given by the caller; ``weights`` and
    ``residuals`` get ``nan`` where a point is not in its curve's fit.  ``ok`` marks the
    curves not refused so far and ``problems`` holds the reasons of the others.
    """

    def __init__(self, K: int, p: int, *, weights: np.ndarray, residuals: np.ndarray) -> None:
        self.problems: list[str | None] = [None] * K
        self.ok = np.ones(K, dtype=bool)
        self.n_used = np.empty(K, dtype=int)
        self.R = np.empty((K, p, p))
        self.beta = np.empty((K, p))
        self.weighted_ss = np.empty(K)
        self.total_ss = np.empty(K)
        self.weights = weights
        self.residuals = residuals


@dataclass(frozen=True, eq=False)
class StackFit:
    """The engine's figures of K curves (see :func:`fit_stack`).

    ``weights`` and ``residuals`` are points × curves (n, K), ``nan`` off each curve's
    fit; ``coefficients`` (K, p), ``covariance`` σ̂²·(XᵀWX)⁻¹ and ``root`` L with
    (XᵀWX)⁻¹ = L Lᵀ (K, p, p), ``residual_df``, ``residual_sd`` and ``r_squared`` (K,),
    all ``nan`` on a curve with a reason in ``problems``.
    """

    weights: np.ndarray
    residuals: np.ndarray
    coefficients: np.ndarray
    covariance: np.ndarray
    root: np.ndarray
    residual_df: np.ndarray
    residual_sd: np.ndarray
    r_squared: np.ndarray
    problems: tuple[str | None, ...]


def fit_stack(
    X: np.ndarray,
    Y: np.ndarray,
    U: np.ndarray,
    given: np.ndarray | None,
    *,
    model: Model,
    basis: Weighting,
    weights_out: np.ndarray,
    residuals_out: np.ndarray,
) -> StackFit:
    """Fit K curves of one model, arrays points × curves (n, K); nothing loops over curves.

    ``X``, ``Y`` the concentrations and responses, ``U`` True where a point is used,
    ``given`` precomputed weights or None to form those of ``basis``.  The weights and
    residuals are written to ``weights_out`` and ``residuals_out`` (n, K).

    Notes
    -----
    σ̂² = Σ wᵢ rᵢ² / ν with ν = N − p, covariance σ̂²·(XᵀWX)⁻¹, R² = 1 − Σwr²/Σw(y − ȳ_w)²
    (uncentred for the models without intercept).  The blocks only bound the size of the
    working arrays: every figure of a curve is computed from its own column alone, in
    the same order whatever the block (module notes of :mod:`calib.fit.batch_wls`).
    """
    n, K = X.shape
    p = len(COEFFICIENTS[model])
    stack = _Stack(K, p, weights=weights_out, residuals=residuals_out)
    # The quadratic's two design columns travel as one (2, n, B) array: half the curves.
    step = max(1, BLOCK_VALUES // (max(n, 1) * (2 if model is Model.QUADRATIC else 1)))
    for start in range(0, K, step):
        at = slice(start, start + step)
        _fit_block(X[:, at], Y[:, at], U[:, at], None if given is None else given[:, at],
                  model=model, basis=basis, out=stack, at=at)
    # What takes one number per curve, once for the whole stack.
    fitted_rows = stack.ok.copy()
    fac = factor(stack.R, stack.n_used, stack.ok, stack.problems)
    ok = fac.solved
    lost = fitted_rows & ~ok
    if lost.any():
        stack.residuals[:, lost] = np.nan
    with np.errstate(invalid="ignore", divide="ignore"):
        nu = np.where(ok, stack.n_used - p, np.nan)
        sigma2 = np.where(ok, stack.weighted_ss, np.nan) / nu
        r_squared = np.where(ok & (stack.total_ss > 0),
                             1.0 - stack.weighted_ss / stack.total_ss, np.nan)
    return StackFit(
        weights=stack.weights,
        residuals=stack.residuals,
        coefficients=np.where(ok[:, None], stack.beta, np.nan),
        covariance=sigma2[:, None, None] * fac.unscaled_covariance,
        root=fac.root,
        residual_df=nu,
        residual_sd=np.sqrt(sigma2),
        r_squared=r_squared,
        problems=tuple(stack.problems),
    )


class _Problems:
    """Why each curve of a block is refused (None while it is not), and which are still in."""

    def __init__(self, B: int) -> None:
        self.reasons: list[str | None] = [None] * B
        self.ok = np.ones(B, dtype=bool)

    def refuse(self, which: np.ndarray, reason: str) -> None:
        """Record ``reason`` for the curves ``which`` (a boolean array) not yet refused."""
        for k in np.flatnonzero(which & self.ok):
            self.refuse_one(int(k), reason)

    def refuse_one(self, k: int, reason: str) -> None:
        if self.ok[k]:
            self.reasons[k] = reason
            self.ok[k] = False


def _fit_block(
    X: np.ndarray,
    Y: np.ndarray,
    U: np.ndarray,
    weights: np.ndarray | None,
    *,
    model: Model,
    basis: Weighting,
    out: _Stack,
    at: slice,
) -> None:
    """Fit the curves ``at`` of ``out``; arrays points × curves, (n, B).

    ``X``, ``Y`` and the mask ``U`` are as given to fit_batch (transposed);
    ``weights`` are the caller's precomputed weights, or None to form ``basis``.
    """
    p = len(COEFFICIENTS[model])
    problems = _Problems(X.shape[1])
    n_used = np.count_nonzero(U, axis=0)
    finite = np.isfinite(X)
    finite &= np.isfinite(Y)
    problems.refuse((U > finite).any(axis=0), "x and y must be finite numbers")
    for k in np.flatnonzero(n_used <= p):
        problems.refuse_one(int(k), f"model {model.value} needs at least {p + 1} points; "
                                    f"got {n_used[k]}")
    if model is Model.MEAN_RF:
        with np.errstate(invalid="ignore"):
            positive = X > 0
        problems.refuse((U > positive).any(axis=0), "model mean-rf needs concentrations "
                        "above 0 (each response is divided by its concentration)")
    rows = U & problems.ok
    X0 = np.where(rows, X, 0.0)
    Y0 = np.where(rows, Y, 0.0)
    if weights is None:
        w = _weights_from(X0, Y0, rows, n_used, basis, problems, out.weights[:, at])
    else:
        w = _given_weights(weights, U, rows, problems, out.weights[:, at])
    if not problems.ok.all():
        rows &= problems.ok  # the weighting refused some curves

    intercept = model in (Model.LINEAR, Model.QUADRATIC)
    if model is Model.QUADRATIC:
        design = np.empty((2, *X0.shape))
        design[0] = X0
        np.multiply(X0, X0, out=design[1])
    else:
        design = X0[None]
    sol = solve_block(design, Y0, w, intercept=intercept)
    out.residuals[:, at] = np.where(rows, sol.residuals, np.nan)
    out.problems[at] = problems.reasons
    out.ok[at] = problems.ok
    out.n_used[at] = n_used
    out.R[at] = sol.R
    out.beta[at] = sol.beta
    out.weighted_ss[at] = sol.weighted_ss
    # The total sum of squares of R²: about the weighted mean, or uncentred for the models
    # without intercept, as in fit_curve.
    out.total_ss[at] = sol.centred_ss if sol.centred_ss is not None else point_sum(
        (w * Y0) * Y0)


def _weights_from(X0: np.ndarray, Y0: np.ndarray, rows: np.ndarray, n_used: np.ndarray,
                  basis: Weighting, problems: _Problems, out: np.ndarray) -> np.ndarray:
    """Weights of ``basis`` per curve, scaled to mean 1 over the points ``rows``.

    ``X0`` and ``Y0`` hold the values at those points and 0 elsewhere.  Returns the
    weights with 0 where a point is not fitted, and writes them to ``out`` with
    ``nan`` there.  A curve the weighting cannot use gets fit_weights' reason in
    ``problems`` (and weights 0).
    """
    if basis is Weighting.NONE:
        # All ones, whose mean is exactly 1: nothing to scale.
        out[...] = np.where(rows, 1.0, np.nan)
        return rows.astype(float)
    raw = None
    if basis.value in _POINTWISE_WEIGHTINGS:
        # The arithmetic of raw_weights, with +inf off the rows so that they weigh 0.
        base = np.where(rows, X0 if basis in _BY_X else Y0, np.inf)
        if (np.min(base, axis=0) > 0).all():
            raw = 1.0 / (base if basis in _ONCE else base * base)
    if raw is None:
        # Some curve cannot be weighted (or the weighting pools replicates): the raw weights
        # curve by curve with fit_weights' reasons, scaled below exactly as in the one call,
        # so that a curve's weights do not depend on its neighbours.
        todo = rows.copy()
        raw = np.zeros(X0.shape)
        for k in np.flatnonzero(todo.any(axis=0)):
            at = todo[:, k]
            try:
                raw[at, k] = raw_weights(X0[at, k], basis, y=Y0[at, k])
            except ValueError as err:
                problems.refuse_one(int(k), str(err))
                todo[:, k] = False
                raw[:, k] = 0.0
        rows = todo
    count = np.where(problems.ok, n_used, 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        # A curve without any point has a mean of 0/0: its weights stay 0.
        mean = np.where(count > 0, point_sum(raw) / count, 1.0)
    w = raw / mean
    out[...] = np.where(rows, w, np.nan)
    return w


def _given_weights(w: np.ndarray, used: np.ndarray, rows: np.ndarray, problems: _Problems,
                   out: np.ndarray) -> np.ndarray:
    with np.errstate(invalid="ignore"):
        bad = (used > (np.isfinite(w) & (w > 0))).any(axis=0)
    problems.refuse(bad, "weights must be positive finite numbers at every used point")
    # As fit_curve would, the weights of every curve with good ones are scaled (also of
    # curves refused for another reason); only the curves still fitted weigh in the sums.
    ok = used & ~bad
    raw = np.where(ok, w, 0.0)
    count = np.count_nonzero(ok, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(count > 0, point_sum(raw) / count, 1.0)
    scaled = raw / mean
    out[...] = np.where(ok, scaled, np.nan)
    return np.where(rows & problems.ok, scaled, 0.0)
