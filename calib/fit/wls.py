"""Weighted least squares by QR decomposition.

The normal equations square the condition number of the design; a QR
decomposition of the column-scaled, weighted design does not.  One step of
iterative refinement on the residual recovers the last digits cheaply.

The LAPACK routines behind ``scipy.linalg.qr`` and ``scipy.linalg.solve_triangular``
(dgeqrf, dorgqr, dtrtrs) are called directly, with the arguments those functions
pass them, so the numbers are theirs: for a design of a few dozen standards
scipy's argument handling takes longer than the factorisation itself, and a run
of hundreds of curves solves thousands of these problems.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, lapack

__all__ = ["WlsSolution", "solve_wls"]

_GEQRF, _ORGQR, _TRTRS = lapack.get_lapack_funcs(("geqrf", "orgqr", "trtrs"), dtype=np.float64)
_EPS = float(np.finfo(float).eps)


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
    yw = y * sw
    A, Q, R, norms, rank = _factor(X * sw[:, None], yw)
    z = _solve_upper(R, Q.T @ yw)
    # One step of iterative refinement: solve again for the correction on the residual.
    z = z + _solve_upper(R, Q.T @ (yw - A @ z))
    beta = z / norms
    R_inv = _solve_upper(R, np.eye(p))
    unscaled = (R_inv @ R_inv.T) / np.outer(norms, norms)
    residuals = y - X @ beta
    return WlsSolution(
        beta=beta,
        unscaled_covariance=unscaled,
        residuals=residuals,
        weighted_ss=float(np.sum(w * residuals**2)),
        rank=rank,
    )


def _factor(Xw: np.ndarray, yw: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray,
                                                     np.ndarray, int]:
    """A = W½X·D (unit columns), its QR, the column norms 1/D and the rank; refuses a zero
    or non-finite column, non-finite responses ``yw`` (any shape) and a rank below p."""
    n, p = Xw.shape
    norms = np.linalg.norm(Xw, axis=0)
    if np.any(norms == 0) or not np.all(np.isfinite(norms)):
        raise ValueError("the design matrix has a column of zeros or non-finite values")
    if not np.all(np.isfinite(yw)):
        raise ValueError("the responses y must be finite numbers")
    A = Xw / norms
    Q, R = _economic_qr(A)
    diag = np.abs(np.diag(R))
    rank = int(np.sum(diag > diag.max() * n * _EPS))
    if rank < p:
        raise ValueError(f"the design is singular (rank {rank} < {p} parameters)")
    return A, Q, R, norms, rank


def _workspace(query: tuple[np.ndarray, ...]) -> int:
    """The optimal workspace a LAPACK workspace query (lwork = −1) reports."""
    return int(query[-2][0].real)


def _economic_qr(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Q (N × p) and upper-triangular R (p × p) of a = QR, N ≥ p, as
    ``scipy.linalg.qr(a, mode="economic")`` computes them (module notes).

    Examples
    --------
    >>> q, r = _economic_qr(np.array([[3.0, 1.0], [4.0, 2.0]]))
    >>> bool(np.allclose(q @ r, [[3.0, 1.0], [4.0, 2.0]])), abs(float(r[0, 0]))
    (True, 5.0)
    """
    p = a.shape[1]
    qr, tau, _, info = _GEQRF(a, lwork=_workspace(_GEQRF(a, lwork=-1)))
    if info < 0:  # pragma: no cover - only a wrong call gives a negative info
        raise ValueError(f"illegal value in argument {-info} of LAPACK dgeqrf")
    r = np.triu(qr[:p, :])
    q, _, info = _ORGQR(qr, tau, lwork=_workspace(_ORGQR(qr, tau, lwork=-1)), overwrite_a=1)
    if info < 0:  # pragma: no cover
        raise ValueError(f"illegal value in argument {-info} of LAPACK dorgqr")
    return q, r


def _solve_upper(r: np.ndarray, b: np.ndarray) -> np.ndarray:
    """x with R·x = b for upper-triangular R, as ``scipy.linalg.solve_triangular(r, b)``.

    dtrtrs works on Fortran-ordered arrays, so a C-ordered R goes in as its
    transpose: the lower triangle of a Fortran array, solved transposed (as scipy does).

    Examples
    --------
    >>> _solve_upper(np.array([[2.0, 1.0], [0.0, 4.0]]), np.array([4.0, 8.0])).tolist()
    [1.0, 2.0]
    """
    if r.flags.f_contiguous:
        x, info = _TRTRS(r, b)
    else:
        x, info = _TRTRS(r.T, b, lower=1, trans=1)
    if info > 0:
        raise LinAlgError(f"singular matrix: resolution failed at diagonal {info - 1}")
    if info < 0:  # pragma: no cover
        raise ValueError(f"illegal value in argument {-info} of LAPACK dtrtrs")
    return x
