"""Weighted least squares of many response vectors on one design.

The curves of a run usually share their standards (concentrations, weights, injection
order): the diagnostics that refit something on that design (the comparison quadratic,
the residual trend with injection order) then need one QR factorisation for all of them.
The arithmetic is :func:`calib.fit.wls.solve_wls`'s — column scaling, QR of the weighted
design, one step of iterative refinement — with the factorisation made once, so each
response's solution is ``solve_wls``'s on it, digit for digit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calib.fit.wls import _factor, _solve_upper

__all__ = ["ManySolution", "solve_wls_many"]


@dataclass(frozen=True)
class ManySolution:
    """Solutions of K least-squares problems sharing design and weights.

    Attributes
    ----------
    beta : ndarray, shape (K, p)
        Coefficients of each response vector.
    unscaled_covariance : ndarray, shape (p, p)
        C = (XᵀWX)⁻¹, shared by every problem.
    weighted_ss : ndarray, shape (K,)
        Σ wᵢ rᵢ² of each.
    """

    beta: np.ndarray
    unscaled_covariance: np.ndarray
    weighted_ss: np.ndarray


def solve_wls_many(X: np.ndarray, Y: np.ndarray, w: np.ndarray | None = None) -> ManySolution:
    """Minimise Σ wᵢ (yₖᵢ − xᵢᵀβₖ)² for every row yₖ of ``Y`` (shape (K, N)).

    Raises
    ------
    ValueError
        For a design with a zero or non-finite column, non-finite responses or a rank
        below p (the messages of ``solve_wls``).

    Examples
    --------
    >>> X = np.column_stack([np.ones(3), [1.0, 2.0, 3.0]])
    >>> solve_wls_many(X, np.array([[3.0, 5.0, 7.0], [1.0, 1.0, 1.0]])).beta.round(12)
    array([[1., 2.],
           [1., 0.]])
    """
    X = np.asarray(X, dtype=float)
    Y = np.asarray(Y, dtype=float)
    n, p = X.shape
    w = np.ones(n) if w is None else np.asarray(w, dtype=float)
    sw = np.sqrt(w)
    Yw = (Y * sw).T  # (N, K): one right-hand side per column
    A, Q, R, norms, _ = _factor(X * sw[:, None], Yw)
    # One factorisation; each column then goes through solve_wls's own steps (matrix-vector
    # products, a triangular solve, one refinement), so its figures are solve_wls's digit
    # for digit whatever the other columns.
    beta = np.empty((Y.shape[0], p))
    ss = np.empty(Y.shape[0])
    for k, yw in enumerate(Yw.T):
        z = _solve_upper(R, Q.T @ yw)
        z = z + _solve_upper(R, Q.T @ (yw - A @ z))
        beta[k] = z / norms
        residuals = Y[k] - X @ beta[k]
        ss[k] = float(np.sum(w * residuals**2))
    R_inv = _solve_upper(R, np.eye(p))
    unscaled = (R_inv @ R_inv.T) / np.outer(norms, norms)
    return ManySolution(beta, unscaled, ss)
