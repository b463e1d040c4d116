"""Weighted least squares for one design: a stack of one through the batched engine.

calib has one least-squares engine, :mod:`calib.fit.batch_wls` (modified Gram–Schmidt
in the weighted inner product, refined once on residuals evaluated with error-free
products).  :func:`solve_wls` hands it a single problem, for the designs that are not a
calibration model of their own (the comparison quadratic, residuals against injection
order, two curves compared): the same arithmetic, the same rank test, the same digits.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calib.fit.batch_wls import solve_wls_batch

__all__ = ["WlsSolution", "solve_wls"]


@dataclass(frozen=True)
class WlsSolution:
    """Solution of a weighted least-squares problem.

    Attributes
    ----------
    beta : ndarray, shape (p,)
        Estimated coefficients.
    unscaled_covariance : ndarray, shape (p, p)
        C = (XᵀWX)⁻¹; the covariance of ``beta`` is σ̂²·C.
    residuals : ndarray, shape (N,)
        y − Xβ (unweighted).
    weighted_ss : float
        Σ wᵢ rᵢ².
    rank : int
        Numerical rank of the weighted design.
    """

    beta: np.ndarray
    unscaled_covariance: np.ndarray
    residuals: np.ndarray
    weighted_ss: float
    rank: int


def solve_wls(X: np.ndarray, y: np.ndarray, w: np.ndarray | None = None) -> WlsSolution:
    """Minimise Σ wᵢ (yᵢ − xᵢᵀβ)² for one design.

    Parameters
    ----------
    X : ndarray, shape (N, p)
        Design matrix.
    y : ndarray, shape (N,)
        Responses.
    w : ndarray, shape (N,), optional
        Positive weights (all 1 when omitted).

    Returns
    -------
    WlsSolution

    Raises
    ------
    ValueError
        For non-finite responses, a column of zeros or non-finite values, or a rank
        below p (the rank test of :func:`calib.fit.batch_wls.factor`: with the columns
        scaled to unit length, a diagonal entry of R at or below max|Rⱼⱼ|·N·ε counts as 0).

    Notes
    -----
    :func:`calib.fit.batch_wls.solve_wls_batch` on a stack of one problem.

    Examples
    --------
    >>> X = np.column_stack([np.ones(3), [1.0, 2.0, 3.0]])
    >>> solve_wls(X, np.array([3.0, 5.0, 7.0])).beta.round(12)
    array([1., 2.])
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, _ = X.shape
    w = np.ones(n) if w is None else np.asarray(w, dtype=float)
    if not np.all(np.isfinite(np.sqrt(w) * y)):
        raise ValueError("the responses y must be finite numbers")
    sol = solve_wls_batch(X[None], y[None], w[None], mask=np.ones((1, n), dtype=bool))
    if sol.problems[0] is not None:
        raise ValueError(sol.problems[0])
    return WlsSolution(
        beta=sol.beta[0],
        unscaled_covariance=sol.unscaled_covariance[0],
        residuals=sol.residuals[0],
        weighted_ss=float(sol.weighted_ss[0]),
        rank=int(sol.rank[0]),
    )
