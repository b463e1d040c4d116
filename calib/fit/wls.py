"""Weighted least squares by QR decomposition.

The normal equations square the condition number of the design; a QR
decomposition of the column-scaled, weighted design does not.  One step of
iterative refinement on the residual recovers the last digits cheaply.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg

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
    """Minimise Σ wᵢ (yᵢ − xᵢᵀβ)² by QR of the column-scaled weighted design.

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

    Notes
    -----
    With D = diag(1/‖column j of W½X‖) the scaled design A = W½XD is factored
    as A = QR; then β = D R⁻¹ Qᵀ W½y and C = (XᵀWX)⁻¹ = D R⁻¹ R⁻ᵀ D.  A rank
    below p raises ``ValueError``.

    Examples
    --------
    >>> X = np.column_stack([np.ones(3), [1.0, 2.0, 3.0]])
    >>> solve_wls(X, np.array([3.0, 5.0, 7.0])).beta.round(12)
    array([1., 2.])
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, p = X.shape
    w = np.ones(n) if w is None else np.asarray(w, dtype=float)
    sw = np.sqrt(w)
    Xw = X * sw[:, None]
    yw = y * sw
    norms = np.linalg.norm(Xw, axis=0)
    if np.any(norms == 0) or not np.all(np.isfinite(norms)):
        raise ValueError("the design matrix has a column of zeros or non-finite values")
    A = Xw / norms
    Q, R = linalg.qr(A, mode="economic")
    diag = np.abs(np.diag(R))
    rank = int(np.sum(diag > diag.max() * n * np.finfo(float).eps))
    if rank < p:
        raise ValueError(f"the design is singular (rank {rank} < {p} parameters)")
    z = linalg.solve_triangular(R, Q.T @ yw)
    # One step of iterative refinement: solve again for the correction on the residual.
    z = z + linalg.solve_triangular(R, Q.T @ (yw - A @ z))
    beta = z / norms
    R_inv = linalg.solve_triangular(R, np.eye(p))
    unscaled = (R_inv @ R_inv.T) / np.outer(norms, norms)
    residuals = y - X @ beta
    return WlsSolution(
        beta=beta,
        unscaled_covariance=unscaled,
        residuals=residuals,
        weighted_ss=float(np.sum(w * residuals**2)),
        rank=rank,
    )
