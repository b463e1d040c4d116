"""Weighted least squares of many response vectors on one design.

The curves of a run usually share their standards (concentrations, weights, injection
order): the diagnostics that refit something on that design (the comparison quadratic,
the residual trend with injection order) then solve many problems on one design.  They go
through calib's one engine (:func:`calib.fit.batch_wls.solve_wls_batch`) as one stack, so
each response's solution is :func:`calib.fit.wls.solve_wls`'s on it, digit for digit: the
engine's figures for a curve never depend on the other curves of the stack.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calib.fit.batch_wls import solve_wls_batch

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
    K = Y.shape[0]
    n, p = X.shape
    w = np.ones(n) if w is None else np.asarray(w, dtype=float)
    if not np.all(np.isfinite(np.sqrt(w) * Y)):
        raise ValueError("the responses y must be finite numbers")
    sol = solve_wls_batch(np.broadcast_to(X, (K, n, p)), Y, np.broadcast_to(w, (K, n)),
                          mask=np.ones((K, n), dtype=bool))
    problem = next((text for text in sol.problems if text is not None), None)
    if problem is not None:
        raise ValueError(problem)
    return ManySolution(sol.beta, sol.unscaled_covariance[0], sol.weighted_ss)
