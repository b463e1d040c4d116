"""Weighted least squares for a stack of curves at once, orthogonalised across the stack.

The same problem as :func:`calib.fit.wls.solve_wls`, solved for K curves of equal
padded length in one pass: unused rows carry weight 0 and drop out of every sum.
Calibration models have p ≤ 3 coefficients, so the QR factorisation is written
out column by column as modified Gram–Schmidt in the weighted inner product
⟨u, v⟩ = Σ wᵢuᵢvᵢ (the factorisation of W½X without forming W½X), and each step
works on whole rows of (points × curves) arrays: every sum over a curve's points
is then a sum of a few rows of length K.  That is several times quicker than a
batched LAPACK factorisation, which pays a call per tiny matrix.  Nothing loops
over the curves.

The estimates are refined once on residuals evaluated with error-free products
(:func:`residuals_exactly`), so that the residuals, σ̂ and everything built on
them keep their digits even when the scatter is a tiny fraction of the responses.

A curve that cannot be solved (a column of zeros, a singular design) does not
stop the others: it is reported in ``problems`` and its figures are ``nan``.

This is calib's one least-squares engine: :func:`calib.fit.curve.fit_curve` and
:func:`calib.fit.wls.solve_wls` are a stack of one curve through it.  A curve's figures
must not depend on what else is in the stack, so every operation is either elementwise
(the same rounding for each curve whatever the stack) or a sum over a curve's points
added in point order (:func:`point_sum`); the zeros of padding and of unused rows add
nothing.  ``np.sum`` and ``np.einsum`` would not do: they add in pairs or in vector
lanes chosen by the array's shape and layout, so a curve alone and the same curve
among others would round differently in the last bits.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = ["BatchWlsSolution", "Factor", "factor", "point_sum", "residuals_exactly",
           "solve_block", "solve_wls_batch", "solve_wls_columns"]

_EPS = np.finfo(float).eps

#: Up to this many curves (values per point) :func:`point_sum` takes a running sum; a
#: running sum along the points visits each curve's column separately, which beyond a few
#: dozen curves is slower than adding whole rows.
_RUNNING_SUM_LIMIT = 32

#: 2²⁷ + 1: Veltkamp's constant, splitting a double into two halves of at most 26 bits
#: whose products with the halves of another double are exact.
_SPLIT = 134217729.0


def point_sum(a: np.ndarray, axis: int = 0) -> np.ndarray:
    """Σ along the points axis ``axis``, each curve's terms added one after another in order.

    Strictly left to right, whatever the number of curves and the memory layout: a few
    curves by a running sum (``np.add.accumulate``, in order by definition), many by adding
    the points' rows one at a time (each an elementwise addition over the curves).  Both
    are the same additions in the same order, so the same doubles.  Zeros in the sum
    (padding, unused rows) change nothing, so a curve's sum is the same at any padded
    length.  ``np.sum`` is not: it adds a single column pairwise, many columns row by row
    or pairwise depending on the layout.

    Examples
    --------
    >>> a = np.array([[1e16, 3.0], [1.0, 4.0], [-1e16, 0.0]])   # two curves, one per column
    >>> point_sum(a).tolist()   # (1e16 + 1) − 1e16 in that order: the 1 is rounded away
    [0.0, 7.0]
    """
    axis %= a.ndim
    n = a.shape[axis]
    if n == 0:
        return np.zeros(a.shape[:axis] + a.shape[axis + 1:])
    if a.size <= _RUNNING_SUM_LIMIT * n:
        return np.add.accumulate(a, axis=axis)[(slice(None),) * axis + (-1,)]
    rows = np.moveaxis(a, axis, 0)
    total = rows[0].copy()
    for row in rows[1:]:
        total += row
    return total


@dataclass(frozen=True, eq=False)
class BatchWlsSolution:
    """Solutions of K weighted least-squares problems.

    Attributes
    ----------
    beta : ndarray, shape (K, p)
        Estimated coefficients (``nan`` on a curve with a problem).
    unscaled_covariance : ndarray, shape (K, p, p)
        C = (XᵀWX)⁻¹ per curve.
    covariance_root : ndarray, shape (K, p, p)
        L = R⁻¹ (upper triangular), C = L Lᵀ; W½X L has orthonormal columns, so
        the leverage of row i is wᵢ‖xᵢᵀL‖² (see :mod:`calib.fit.batch_diagnostics`).
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
    covariance_root: np.ndarray
    residuals: np.ndarray
    weighted_ss: np.ndarray
    rank: np.ndarray
    problems: tuple[str | None, ...]


@dataclass(frozen=True, eq=False)
class BlockSolution:
    """What :func:`solve_block` finds for B curves, before the rank test.

    ``R`` (B, p, p) is the triangular factor of W½X, ``beta`` (B, p) the refined
    estimates, ``residuals`` (n, B) y − Xβ (meaningful on used rows only),
    ``weighted_ss`` (B,) Σwr², and ``centred_ss`` (B,) Σw(y − ȳ_w)² when the design
    has an intercept (else None).
    """

    R: np.ndarray
    beta: np.ndarray
    residuals: np.ndarray
    weighted_ss: np.ndarray
    centred_ss: np.ndarray | None


@dataclass(frozen=True, eq=False)
class Factor:
    """The rank test and the inverse factor of K curves (see :func:`factor`)."""

    rank: np.ndarray  # (K,) int
    solved: np.ndarray  # (K,) bool
    root: np.ndarray  # (K, p, p): R⁻¹, nan where not solved
    unscaled_covariance: np.ndarray  # (K, p, p): R⁻¹R⁻ᵀ, nan where not solved


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
    Per curve, W½X = QR by modified Gram–Schmidt in the weighted inner product, with
    W½y carried along as one more column; β = R⁻¹Qᵀ W½y, refined once by the
    corrected semi-normal equations Rᵀ R δ = XᵀW r on the residual r = y − Xβ
    evaluated with error-free products; C = R⁻¹R⁻ᵀ.  The rank test is that of
    ``solve_wls``: with the columns scaled to unit length, a diagonal entry of R at or
    below max|Rⱼⱼ|·N·ε (N the used rows) counts as zero.  This is
    :func:`solve_wls_columns` on the columns of X.

    References
    ----------
    Björck, Å. (1996), Numerical Methods for Least Squares Problems, SIAM, §2.4
    (modified Gram–Schmidt) and §6.6 (corrected semi-normal equations) (from memory).

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
    p = X.shape[2]
    return solve_wls_columns(
        [X[:, :, j].T for j in range(p)],
        np.asarray(y, dtype=float).T,
        np.asarray(w, dtype=float).T,
        mask=np.asarray(mask, dtype=bool).T,
        active=active,
    )


def solve_wls_columns(
    columns: Sequence[np.ndarray],
    y: np.ndarray,
    w: np.ndarray,
    *,
    mask: np.ndarray,
    active: np.ndarray | None = None,
) -> BatchWlsSolution:
    """:func:`solve_wls_batch` with the design given as p arrays laid out points × curves.

    Parameters
    ----------
    columns : sequence of p ndarrays, each shape (n, K)
        Column j of every curve's design; column k of each array is curve k.
        Rows outside ``mask`` are ignored, whatever they hold.
    y, w : ndarray, shape (n, K)
        Responses and weights, one column per curve.
    mask : ndarray of bool, shape (n, K)
        True where a row belongs to its curve's problem.
    active : ndarray of bool, shape (K,), optional
        As in :func:`solve_wls_batch`.

    Returns
    -------
    BatchWlsSolution
        Shapes as in :func:`solve_wls_batch` (``residuals`` is (K, n)).

    Examples
    --------
    >>> x = np.array([[1.0, 1.0], [2.0, 2.0], [3.0, 0.0]])   # two curves, one per column
    >>> used = np.array([[True, True], [True, True], [True, False]])
    >>> sol = solve_wls_columns([np.ones_like(x), x], np.array([[3.0, 1.0], [5.0, 0.0],
    ...                         [7.0, 0.0]]), np.ones_like(x), mask=used)
    >>> sol.beta.round(12), sol.residuals.shape
    (array([[ 1.,  2.],
           [ 2., -1.]]), (2, 3))
    """
    mask = np.asarray(mask, dtype=bool)
    K = mask.shape[1]
    problems: list[str | None] = [None] * K
    active = np.ones(K, dtype=bool) if active is None else np.asarray(active, dtype=bool).copy()
    for k in np.flatnonzero(~active):
        problems[k] = "not solved"
    used = mask & active
    design = np.stack([np.where(used, np.asarray(c, dtype=float), 0.0) for c in columns])
    block = solve_block(design, np.where(used, np.asarray(y, dtype=float), 0.0),
                        np.where(used, np.asarray(w, dtype=float), 0.0), intercept=False)
    fac = factor(block.R, np.count_nonzero(used, axis=0), active, problems)
    solved = fac.solved
    beta = np.where(solved[:, None], block.beta, np.nan)
    return BatchWlsSolution(
        beta=beta,
        unscaled_covariance=fac.unscaled_covariance,
        covariance_root=fac.root,
        residuals=np.where(used & solved, block.residuals, np.nan).T,
        weighted_ss=np.where(solved, block.weighted_ss, np.nan),
        rank=fac.rank,
        problems=tuple(problems),
    )


def solve_block(
    design: np.ndarray,
    y: np.ndarray,
    w: np.ndarray,
    *,
    intercept: bool,
) -> BlockSolution:
    """Factor, solve and refine B weighted least-squares problems laid out points × curves.

    Parameters
    ----------
    design : ndarray, shape (m, n, B)
        The design columns other than the intercept, zero on unused rows.
    y, w : ndarray, shape (n, B)
        Responses and weights, zero on unused rows.
    intercept : bool
        Whether the model has an intercept, the first coefficient, whose column (1 on
        used rows) is implied: its products are exact and cost nothing.

    Returns
    -------
    BlockSolution
        Curves that turn out singular hold meaningless numbers (inf, nan): the rank
        test is :func:`factor`'s, on ``R``.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        R, c, centred_ss = _gram_schmidt(design, y, w, intercept=intercept)
        beta0 = _back_substitute(R, c)
        r0 = residuals_exactly(y, design, beta0, intercept=intercept)
        # One step of iterative refinement on the exact residuals, by the corrected
        # semi-normal equations RᵀR δ = XᵀW r; then the residuals follow the (tiny) change
        # in plain arithmetic, which loses nothing.
        wr = w * r0
        g = point_sum(wr * design, axis=1).T
        if intercept:
            g = np.concatenate([point_sum(wr)[:, None], g], axis=1)
        beta = beta0 + _back_substitute(R, _forward_substitute(R, g))
        step = beta - beta0
        residuals = r0 - _combine(design, step, intercept=intercept)
        weighted_ss = _dot(w * residuals, residuals)
    return BlockSolution(R, beta, residuals, weighted_ss, centred_ss)


def factor(
    R: np.ndarray, n_used: np.ndarray, active: np.ndarray, problems: list[str | None]
) -> Factor:
    """The rank test of ``solve_wls`` and the inverse factor, for K triangular factors R.

    Curves ``active`` whose design has a column of zeros (or non-finite values), or
    is singular, get their reason in ``problems`` and are not ``solved``.  The
    inverse factor is formed entry by entry as (K,) arrays: with p ≤ 3 that beats
    reducing over the tiny trailing axes.
    """
    K, p, _ = R.shape
    active = active.copy()
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # ‖column j‖ = ‖column j of R‖ (R is 0 below its diagonal); with the columns
        # scaled to unit length the test is solve_wls's.
        squares = R * R
        norms = squares[:, 0, :]
        for i in range(1, p):
            norms = norms + squares[:, i, :]
        norms = np.sqrt(norms)  # (K, p)
        pivots = np.diagonal(R, axis1=1, axis2=2)  # (K, p)
        # After a pivot of 0 (a column that depends on the earlier ones) the later entries
        # of R are 0/0: the design is singular, which the rank test below reports.
        pivots_ok = np.ones((K, p), dtype=bool)
        pivots_ok[:, 1:] = np.logical_and.accumulate(np.isfinite(pivots) & (pivots != 0),
                                                     axis=1)[:, :-1]
        bad_norm = (pivots_ok & (~(norms > 0) | ~np.isfinite(norms))).any(axis=1) & active
        for k in np.flatnonzero(bad_norm):
            problems[k] = "the design matrix has a column of zeros or non-finite values"
        active &= ~bad_norm
        diag = np.abs(pivots) / norms
        # A 0/0 entry (nan) counts as a zero pivot: fmax passes over it.
        tol = np.fmax.reduce(diag, axis=1) * np.maximum(n_used, 1) * _EPS
        rank = np.count_nonzero(diag > tol[:, None], axis=1)
        singular = active & (rank < p)
        for k in np.flatnonzero(singular):
            problems[k] = f"the design is singular (rank {rank[k]} < {p} parameters)"
        active &= ~singular
        # L = R⁻¹ row by row from the last (back substitution on every unit vector at
        # once), then L Lᵀ; each entry's terms are added in the order of their index.
        root = np.zeros((K, p, p))
        for i in range(p - 1, -1, -1):
            row = np.zeros((K, p - i))  # columns i… of row i (L is 0 below its diagonal)
            row[:, 0] = 1.0
            for l in range(i + 1, p):
                row = row - R[:, i, l, None] * root[:, l, i:]
            root[:, i, i:] = row / R[:, i, i, None]
        unscaled = root[:, :, 0, None] * root[:, None, :, 0]
        for l in range(1, p):
            # (L Lᵀ)ᵢⱼ = Σₗ Lᵢₗ Lⱼₗ.
            unscaled = unscaled + root[:, :, l, None] * root[:, None, :, l]
    off = ~active
    if off.any():
        root[off] = np.nan
        unscaled[off] = np.nan
    return Factor(np.where(active | singular, rank, 0), active, root, unscaled)


def _gram_schmidt(
    design: np.ndarray, y: np.ndarray, w: np.ndarray, *, intercept: bool
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Modified Gram–Schmidt of the columns in ⟨u, v⟩ = Σ wuv, carrying y along.

    The columns are kept unnormalised (vⱼ with ⟨vⱼ, vⱼ⟩ = Rⱼⱼ²), which saves a pass
    over the points per column, and each step projects every later column in one
    operation.  Returns R (B, p, p), c = QᵀW½y (B, p) for Q = W½XR⁻¹, and with an
    intercept the centred sum of squares Σw(y − ȳ_w)² (B,), else None.
    """
    m, _, B = design.shape
    p = m + intercept
    R = np.zeros((B, p, p))
    c = np.empty((B, p))
    V, Vy = design, y
    centred_ss = None
    if intercept:
        # The first column is 1 on the used rows: projecting it out is weighted centring.
        d = point_sum(w)
        s = point_sum(w * design, axis=1)
        sy = _dot(w, y)
        length = np.sqrt(d)
        R[:, 0, 0] = length
        R[:, 0, 1:] = (s / length).T
        c[:, 0] = sy / length
        V = design - (s / d)[:, None, :]
        Vy = y - sy / d
        centred_ss = _dot(w * Vy, Vy)
    for i in range(m):
        j = i + intercept
        v = V[i]
        wv = w * v
        s = point_sum(wv * V[i:], axis=1)
        sy = _dot(wv, Vy)
        length = np.sqrt(s[0])
        R[:, j, j] = length
        R[:, j, j + 1 :] = (s[1:] / length).T
        c[:, j] = sy / length
        if i + 1 < m:
            if V is design:
                V = design.copy()  # the caller's columns stay as they are
            V[i + 1 :] -= v * (s[1:] / s[0])[:, None, :]
            Vy = Vy - v * (sy / s[0])
    return R, c, centred_ss


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Σᵢ aᵢbᵢ per curve in point order: (n, B) and (n, B) → (B,)."""
    return point_sum(a * b)


def _back_substitute(R: np.ndarray, c: np.ndarray) -> np.ndarray:
    """Solve R z = c per curve: R (B, p, p) upper triangular, c (B, p)."""
    p = c.shape[1]
    z = np.empty_like(c)
    for j in range(p - 1, -1, -1):
        s = c[:, j]
        for l in range(j + 1, p):
            s = s - R[:, j, l] * z[:, l]
        z[:, j] = s / R[:, j, j]
    return z


def _forward_substitute(R: np.ndarray, g: np.ndarray) -> np.ndarray:
    """Solve Rᵀ z = g per curve: R (B, p, p) upper triangular, g (B, p)."""
    p = g.shape[1]
    z = np.empty_like(g)
    for j in range(p):
        s = g[:, j]
        for l in range(j):
            s = s - R[:, l, j] * z[:, l]
        z[:, j] = s / R[:, j, j]
    return z


def _combine(design: np.ndarray, beta: np.ndarray, *, intercept: bool) -> np.ndarray:
    """Xβ for every curve: design (m, n, B) without the intercept's column, beta (B, p)."""
    first = int(intercept)
    out = design[0] * beta[:, first]
    for i in range(1, len(design)):
        out += design[i] * beta[:, first + i]
    if intercept:
        out += beta[:, 0]
    return out


def residuals_exactly(
    y: np.ndarray, design: np.ndarray, beta: np.ndarray, *, intercept: bool = False
) -> np.ndarray:
    """r = y − Xβ for every curve, correct to about one rounding of r itself.

    Parameters
    ----------
    y : ndarray, shape (n, K)
        Responses, one column per curve.
    design : ndarray, shape (m, n, K)
        Design columns, without the intercept's.
    beta : ndarray, shape (K, m + intercept)
        Coefficients per curve, the intercept first when there is one.
    intercept : bool
        Whether the first coefficient multiplies a column of ones (exactly).

    Returns
    -------
    ndarray, shape (n, K)

    Notes
    -----
    Evaluated plainly, a residual carries the rounding of ŷ, about ε·|y|; on a curve
    whose scatter is 10⁻⁴ of its responses that is 10⁻¹² of the residual, and σ̂,
    the standard errors and the studentized residuals inherit it.  Here each
    product βⱼ·xᵢⱼ is split into its rounded value and its exact error (Dekker's
    product with Veltkamp's splitting) and each subtraction keeps its error
    (Knuth's two-sum); the errors are added back at the end.

    References
    ----------
    Dekker, T. J. (1971), A floating-point technique for extending the available
    precision, Numer. Math. 18, 224–242; Ogita, Rump and Oishi (2005), Accurate sum
    and dot product, SIAM J. Sci. Comput. 26, 1955–1988 (both from memory).

    Examples
    --------
    The line 0.1 + 0.7x at x = 3 is 2.2 to rounding; the residual of a response of
    2.2 + 10⁻¹⁵ keeps its digits, where plain evaluation gives 1.3322676295501878e-15:

    >>> from fractions import Fraction
    >>> r = residuals_exactly(np.array([[2.2 + 1e-15]]), np.array([[[3.0]]]),
    ...                       np.array([[0.1, 0.7]]), intercept=True)
    >>> exact = Fraction(2.2 + 1e-15) - Fraction(0.1) - 3 * Fraction(0.7)
    >>> float(r[0, 0]), float(exact)
    (1.1934897514720433e-15, 1.1934897514720433e-15)
    """
    b = beta[:, int(intercept):].T[:, None, :]
    products = design * b
    d_hi, d_lo = _split(design)
    b_hi, b_lo = _split(b)
    # Dekker: the exact error of each rounded product.
    e_products = ((d_hi * b_hi - products) + d_hi * b_lo + d_lo * b_hi) + d_lo * b_lo
    total = e_products[0]
    for more in e_products[1:]:
        total = total + more
    error = -total
    terms = ([beta[:, 0]] if intercept else []) + list(products)
    r = y
    for term in terms[:-1]:
        r, e = _two_difference(r, term)
        error += e
    # The last difference is (nearly) the residual itself, so its rounding is already
    # relative to r: no error term needed.
    return (r - terms[-1]) + error


def _split(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    t = a * _SPLIT
    hi = t - (t - a)
    return hi, a - hi


def _two_difference(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """a − b as its rounded value and the exact error of that rounding."""
    s = a - b
    v = s - a
    return s, (a - (s - v)) - (b + v)
