"""Weighted least squares for a stack of curves at once, by batched QR.

The same arithmetic as :func:`calib.fit.wls.solve_wls` (QR of the column-scaled
weighted design, one step of iterative refinement), done for K problems of
equal padded length in one pass: unused rows carry weight 0, so their rows of
the weighted design are zero and drop out of every sum.  Numpy factors the
(K, n, p) stack in one call; the triangular solves loop over the p ≤ 3 columns,
never over the curves.

A curve that cannot be solved (a column of zeros, a singular design) does not
stop the others: it is reported in ``problems`` and its figures are ``nan``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["BatchWlsSolution", "solve_wls_batch"]


@dataclass(frozen=True, eq=False)
class BatchWlsSolution:
    """Solutions of K weighted least-squares problems.

    Attributes
    ----------
    beta : ndarray, shape (K, p)
        Estimated coefficients (``nan`` on a curve with a problem).
    unscaled_covariance : ndarray, shape (K, p, p)
        C = (XᵀWX)⁻¹ per curve.
    residuals : ndarray, shape (K, n)
        y − Xβ (unweighted), ``nan`` at unused rows.
    weighted_ss : ndarray, shape (K,)
        Σ wᵢ rᵢ² over the used rows.
    rank : ndarray of int, shape (K,)
        Numerical rank of each weighted design (0 for a curve not solved).
    problems : tuple of (str or None)
        Why a curve has no solution, or None.
    """

    beta: np.ndarray
    unscaled_covariance: np.ndarray
    residuals: np.ndarray
    weighted_ss: np.ndarray
    rank: np.ndarray
    problems: tuple[str | None, ...]


def solve_wls_batch(
    X: np.ndarray,
    y: np.ndarray,
    w: np.ndarray,
    *,
    mask: np.ndarray,
    active: np.ndarray | None = None,
) -> BatchWlsSolution:
    """Minimise Σ wᵢ (yᵢ − xᵢᵀβ)² separately for each of K stacked problems.

    Parameters
    ----------
    X : ndarray, shape (K, n, p)
        Design matrices (rows outside ``mask`` are ignored, whatever they hold).
    y : ndarray, shape (K, n)
        Responses, finite on used rows.
    w : ndarray, shape (K, n)
        Weights, positive and finite on used rows.
    mask : ndarray of bool, shape (K, n)
        True where a row belongs to its problem.
    active : ndarray of bool, shape (K,), optional
        Curves to solve; the others come back as ``nan`` with problem
        ``"not solved"`` unless the caller already knows why.

    Returns
    -------
    BatchWlsSolution

    Notes
    -----
    Per curve, with D = diag(1/‖column j of W½X‖) and A = W½XD = QR:
    β = D R⁻¹ Qᵀ W½y, refined once by β += D R⁻¹ Qᵀ (W½y − A D⁻¹β), and
    C = D R⁻¹ R⁻ᵀ D.  The rank test is that of ``solve_wls``: a diagonal entry
    of R at or below max|Rⱼⱼ|·N·ε (N the used rows) counts as zero.

    Examples
    --------
    Two straight lines, the second padded with an unused row:

    >>> x = np.array([[1.0, 2.0, 3.0], [1.0, 2.0, 0.0]])
    >>> X = np.stack([np.ones_like(x), x], axis=-1)
    >>> y = np.array([[3.0, 5.0, 7.0], [1.0, 0.0, 0.0]])
    >>> mask = np.array([[True, True, True], [True, True, False]])
    >>> solve_wls_batch(X, y, np.ones_like(x), mask=mask).beta.round(12)
    array([[ 1.,  2.],
           [ 2., -1.]])
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.asarray(w, dtype=float)
    mask = np.asarray(mask, dtype=bool)
    K, width, p = X.shape
    if width < p:
        # Pad to p rows so the reduced QR is square; the padding is unused and changes nothing.
        extra = p - width
        X = np.concatenate([X, np.zeros((K, extra, p))], axis=1)
        y, w = (np.concatenate([a, np.zeros((K, extra))], axis=1) for a in (y, w))
        mask = np.concatenate([mask, np.zeros((K, extra), dtype=bool)], axis=1)
    n = X.shape[1]
    active = np.ones(K, dtype=bool) if active is None else np.asarray(active, dtype=bool).copy()
    problems: list[str | None] = [None] * K
    for k in np.flatnonzero(~active):
        problems[k] = "not solved"
    used = mask & active[:, None]
    n_used = used.sum(axis=1)

    w0 = np.where(used, w, 0.0)
    y0 = np.where(used, y, 0.0)
    X0 = np.where(used[:, :, None], X, 0.0)
    Xw = X0 * np.sqrt(w0)[:, :, None]
    yw = y0 * np.sqrt(w0)
    norms = np.linalg.norm(Xw, axis=1)
    bad_norm = active & (np.any(norms == 0, axis=1) | ~np.all(np.isfinite(norms), axis=1))
    for k in np.flatnonzero(bad_norm):
        problems[k] = "the design matrix has a column of zeros or non-finite values"
    active &= ~bad_norm

    # Curves not solved get a harmless stand-in (the first p rows of the identity) so the
    # batched factorisation neither warns nor divides by zero; their figures are nan later.
    standin = np.zeros((n, p))
    standin[np.arange(p), np.arange(p)] = 1.0
    off = ~active
    norms[off] = 1.0
    A = Xw / norms[:, None, :]
    A[off] = standin
    yw[off] = 0.0
    Q, R = np.linalg.qr(A)

    diag = np.abs(np.diagonal(R, axis1=1, axis2=2))
    tol = diag.max(axis=1, initial=0.0) * np.maximum(n_used, 1) * np.finfo(float).eps
    rank = np.sum(diag > tol[:, None], axis=1)
    singular = active & (rank < p)
    for k in np.flatnonzero(singular):
        problems[k] = f"the design is singular (rank {rank[k]} < {p} parameters)"
    active &= ~singular
    R[singular] = np.eye(p)

    z = _solve_upper(R, _qt(Q, yw))
    # One step of iterative refinement: solve again for the correction on the residual.
    z = z + _solve_upper(R, _qt(Q, yw - np.einsum("knp,kp->kn", A, z)))
    beta = z / norms
    R_inv = _solve_upper(R, np.broadcast_to(np.eye(p), (K, p, p)))
    unscaled = (R_inv @ np.swapaxes(R_inv, 1, 2)) / (norms[:, :, None] * norms[:, None, :])

    r0 = np.where(used, y0 - np.einsum("knp,kp->kn", X0, beta), 0.0)
    weighted_ss = np.sum(w0 * r0**2, axis=1)
    residuals = np.where(used & active[:, None], r0, np.nan)[:, :width]

    off = ~active
    beta[off] = np.nan
    unscaled[off] = np.nan
    weighted_ss[off] = np.nan
    rank = np.where(active | singular, rank, 0)
    return BatchWlsSolution(
        beta=beta,
        unscaled_covariance=unscaled,
        residuals=residuals,
        weighted_ss=weighted_ss,
        rank=rank,
        problems=tuple(problems),
    )


def _qt(Q: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Qᵀv per curve: (K, n, p) and (K, n) → (K, p)."""
    return np.einsum("knp,kn->kp", Q, v)


def _solve_upper(R: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Back substitution R z = b per curve; b of shape (K, p) or (K, p, m).

    The loop runs over the p ≤ 3 columns, vectorised over the curves.
    """
    vector = b.ndim == 2
    rhs = b[:, :, None] if vector else b
    z = np.empty(rhs.shape, dtype=float)
    p = R.shape[-1]
    for j in range(p - 1, -1, -1):
        s = rhs[:, j, :] - np.einsum("ki,kim->km", R[:, j, j + 1 :], z[:, j + 1 :, :])
        z[:, j, :] = s / R[:, j, j][:, None]
    return z[:, :, 0] if vector else z
