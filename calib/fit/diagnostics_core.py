"""The engine's case diagnostics and lack-of-fit sums, for curves laid out points × curves.

One implementation serves both the batch (:mod:`calib.fit.batch_diagnostics`, block by
block) and the single curve (:func:`calib.fit.outliers.influence`,
:func:`calib.fit.linearity.lack_of_fit`, a block of one), so a curve's diagnostics are
the same whatever it was fitted beside.  As in the fitting engine
(:mod:`calib.fit.batch_wls`), every operation is elementwise or a sum over a curve's
points in point order (:func:`~calib.fit.batch_wls.point_sum`).

Arrays are (n, B): n points (padding and unused points included, ``rows`` False there), B
curves.  Only :mod:`calib.fit.batch_wls` and :mod:`calib.options` are imported, so the
per-curve modules and the batch module can all build on this one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calib.fit.batch_wls import point_sum
from calib.options import Model

__all__ = [
    "FIXED", "ROUNDING", "ROUNDING_UNCENTRED", "CaseFigures", "LevelSums", "Sums",
    "case_figures", "check_alpha", "influence_reason", "lack_of_fit_reason", "level_sums",
    "weighted_sums",
]

#: A sum of squares at most this fraction of the weighted spread of y is rounding, not
#: scatter (calib.fit.curve.residuals_negligible).
ROUNDING = 1e-20
#: ... or at most this fraction of the uncentred sum of squares (responses all equal).
ROUNDING_UNCENTRED = 1e-24
#: 1 − hᵢᵢ at or below this: the point fixes the curve and has no residual to judge.
FIXED = 1e-10


def check_alpha(alpha: float) -> float:
    """``alpha`` as a float, or ValueError unless it is a number strictly between 0 and 1.

    Examples
    --------
    >>> check_alpha(0.05)
    0.05
    """
    if isinstance(alpha, bool) or not (isinstance(alpha, (int, float)) and 0 < alpha < 1):
        raise ValueError(f"alpha must be a number between 0 and 1; got {alpha!r}")
    return float(alpha)


@dataclass(frozen=True, eq=False)
class Sums:
    """Per-curve weighted sums of a block: the values zeroed off ``rows`` and Σwr², the
    weighted spread Σw(y − ȳ_w)² and the uncentred Σwy², each (B,)."""

    w0: np.ndarray
    y0: np.ndarray
    r0: np.ndarray
    weighted_ss: np.ndarray
    spread: np.ndarray
    uncentred: np.ndarray

    def negligible(self, ss: np.ndarray) -> np.ndarray:
        """Whether a weighted sum of squares ``ss`` per curve is rounding noise."""
        return ss <= np.maximum(ROUNDING * self.spread, ROUNDING_UNCENTRED * self.uncentred)


def weighted_sums(Y: np.ndarray, W: np.ndarray, R: np.ndarray, rows: np.ndarray) -> Sums:
    """The :class:`Sums` of responses ``Y``, weights ``W`` and residuals ``R`` on ``rows``.

    Examples
    --------
    >>> rows = np.ones((3, 1), dtype=bool)
    >>> s = weighted_sums(np.array([[1.0], [2.0], [3.0]]), np.ones((3, 1)),
    ...                   np.array([[0.5], [-1.0], [0.5]]), rows)
    >>> s.weighted_ss.tolist(), s.spread.tolist(), s.uncentred.tolist()
    ([1.5], [2.0], [14.0])
    """
    w0 = np.where(rows, W, 0.0)
    y0 = np.where(rows, Y, 0.0)
    r0 = np.where(rows, R, 0.0)
    wy = w0 * y0
    with np.errstate(invalid="ignore", divide="ignore"):
        ybar = point_sum(wy) / point_sum(w0)
        centred = y0 - ybar
    return Sums(w0, y0, r0, weighted_ss=point_sum(w0 * r0 * r0),
                spread=point_sum(w0 * centred * centred), uncentred=point_sum(wy * y0))


@dataclass(frozen=True, eq=False)
class CaseFigures:
    """Leverage, eᵢ = √wᵢrᵢ, internally and externally studentized residuals and Cook's
    distance (``figures``, (5, n, B), ``nan`` where not judged), and per curve whether the
    curve passes through its points (``scatterless``) or has ν < 2 (``few``)."""

    figures: np.ndarray
    scatterless: np.ndarray
    few: np.ndarray


def case_figures(X: np.ndarray, Y: np.ndarray, W: np.ndarray, R: np.ndarray, rows: np.ndarray,
                 root: np.ndarray, nu: np.ndarray, model: Model) -> CaseFigures:
    """The case diagnostics of B curves: ``root`` (B, p, p) an upper triangular L with
    (XᵀWX)⁻¹ = L Lᵀ, ``nu`` (B,) the residual degrees of freedom.

    Notes
    -----
    eᵢ = √wᵢ·rᵢ, hᵢᵢ = wᵢ‖xᵢᵀL‖², σ̂² = Σe²/ν, standardized eᵢ/(σ̂√(1 − hᵢᵢ)),
    s₍ᵢ₎² = (Σe² − eᵢ²/(1 − hᵢᵢ))/(ν − 1), studentized eᵢ/(s₍ᵢ₎√(1 − hᵢᵢ)),
    Dᵢ = eᵢ²hᵢᵢ/(p σ̂²(1 − hᵢᵢ)²), so that no curve is refitted (Cook and Weisberg, 1982,
    chapters 2 and 3, from memory).
    """
    n, B = X.shape
    p = root.shape[1]
    out = np.full((5, n, B), np.nan)
    sums = weighted_sums(Y, W, R, rows)
    with np.errstate(invalid="ignore", divide="ignore"):
        e = np.sqrt(sums.w0) * sums.r0
        ss = point_sum(e * e)
    few = ~(nu >= 2)
    scatterless = (ss <= ROUNDING * sums.spread) | sums.negligible(sums.weighted_ss)
    judged = rows & ~(scatterless | few)
    h = _leverage(X, sums.w0, root, model)
    with np.errstate(invalid="ignore", divide="ignore"):
        one_minus_h = 1.0 - h
        free = judged & (one_minus_h > FIXED)
        sigma2 = ss / nu
        e2 = e * e
        leverage, weighted, standardized, studentized, cooks = out
        np.copyto(leverage, h, where=judged)
        np.copyto(weighted, e, where=judged)
        np.copyto(standardized, e / np.sqrt(sigma2 * one_minus_h), where=free)
        deleted = np.maximum(ss - e2 / one_minus_h, 0.0) / (nu - 1)
        np.copyto(studentized, e / np.sqrt(deleted * one_minus_h), where=free)
        np.copyto(cooks, e2 * h / (p * sigma2 * one_minus_h * one_minus_h), where=free)
    return CaseFigures(out, scatterless, few)


def _leverage(X: np.ndarray, w0: np.ndarray, root: np.ndarray, model: Model) -> np.ndarray:
    """hᵢᵢ = wᵢ‖xᵢᵀL‖², at most 1, points × curves (L upper triangular, (B, p, p))."""
    x0 = np.where(w0 > 0, X, 0.0)
    if model in (Model.ORIGIN, Model.MEAN_RF):
        columns = [x0]
    elif model is Model.LINEAR:
        columns = [None, x0]
    else:
        columns = [None, x0, x0 * x0]
    total = None
    with np.errstate(invalid="ignore"):
        for j in range(len(columns)):
            # (xᵢᵀL)ⱼ = Σₗ xᵢₗ Lₗⱼ, over l ≤ j as L is upper triangular.
            u = None
            for i, column in enumerate(columns[: j + 1]):
                coef = root[:, i, j]
                term = coef if column is None else column * coef
                u = term if u is None else u + term
            total = u * u if total is None else total + u * u
        return np.minimum(w0 * total, 1.0)


def influence_reason(problem: str | None, few: bool, nu: float) -> str:
    """Why a curve has no case diagnostics: no fit, ν < 2, or no scatter (in that order)."""
    if problem is not None:
        return f"the curve was not fitted: {problem}"
    if few:
        return (f"studentized residuals need at least 2 residual degrees of freedom; the fit "
                f"has {int(nu)}")
    return ("the curve passes through every standard, so there is no residual scatter to judge "
            "outliers against")


@dataclass(frozen=True, eq=False)
class LevelSums:
    """Per curve (B,): SS_pure, the distinct levels m, the points used N, Σwr², the weighted
    spread and uncentred sum of y, and whether the weights are unequal."""

    pure: np.ndarray
    levels: np.ndarray
    used: np.ndarray
    residual: np.ndarray
    spread: np.ndarray
    uncentred: np.ndarray
    weighted: np.ndarray

    def negligible_pure(self) -> np.ndarray:
        """Whether SS_pure is rounding noise (the replicates agree exactly)."""
        total = np.where(self.spread > 0, self.spread, self.uncentred)
        return (self.pure <= ROUNDING * total) | (
            self.pure <= np.maximum(ROUNDING * self.spread, ROUNDING_UNCENTRED * self.uncentred))


def level_sums(X: np.ndarray, Y: np.ndarray, W: np.ndarray, R: np.ndarray,
               rows: np.ndarray) -> LevelSums:
    """The sums of the lack-of-fit test of B curves.

    Notes
    -----
    Levels are the distinct concentrations among each curve's ``rows``; with weighted
    level means ȳᵢ,w, SS_pure = Σᵢ Σⱼ wᵢⱼ(yᵢⱼ − ȳᵢ,w)².  The levels of all curves are
    found at once by sorting each curve's concentrations (stably, so each level's points
    keep their order); the level sums are sums over the runs of equal values.
    """
    sums = weighted_sums(Y, W, R, rows)
    # Curves along rows here, so that each curve's sorted points are contiguous.
    xc = np.ascontiguousarray(np.where(rows, X, np.inf).T)
    B, n = xc.shape
    order = np.argsort(xc, axis=1, kind="stable")
    xs = np.take_along_axis(xc, order, axis=1)
    ws = np.take_along_axis(sums.w0.T, order, axis=1)
    ys = np.take_along_axis(sums.y0.T, order, axis=1)
    first = np.ones((B, n), dtype=bool)
    first[:, 1:] = xs[:, 1:] != xs[:, :-1]
    pure = np.zeros(B)
    if B and n:
        # Sums over each run of equal concentrations (unused points, at +inf, form one run
        # of weight 0 at the end of each curve).  Each run's sum depends on that run's
        # values alone, so on nothing else in the block.
        starts = np.flatnonzero(first)
        sum_w = np.add.reduceat(ws.ravel(), starts)
        sum_wy = np.add.reduceat((ws * ys).ravel(), starts)
        with np.errstate(invalid="ignore", divide="ignore"):
            means = np.where(sum_w > 0, sum_wy / sum_w, 0.0)
        lengths = np.diff(np.append(starts, B * n))
        deviation = ys - np.repeat(means, lengths).reshape(B, n)
        pure = point_sum(ws * deviation * deviation, axis=1)
    with np.errstate(invalid="ignore"):
        weighted = (np.max(np.where(rows, W, -np.inf), axis=0)
                    - np.min(np.where(rows, W, np.inf), axis=0)) > 0
    return LevelSums(pure, levels=np.count_nonzero(first & np.isfinite(xs), axis=1),
                     used=np.count_nonzero(rows, axis=0), residual=sums.weighted_ss,
                     spread=sums.spread, uncentred=sums.uncentred, weighted=weighted)


def lack_of_fit_reason(problem: str | None, used: int, levels: int, p: int) -> str:
    """Why a curve's lack of fit cannot be tested: no fit, no replicates, too few levels,
    or replicates that agree exactly (in that order; the last when none of the others)."""
    if problem is not None:
        return f"the curve was not fitted: {problem}"
    if used == levels:
        return ("no concentration level has replicates, so there is no pure error to test "
                "against")
    if levels <= p:
        return (f"{levels} concentration level{'s' if levels != 1 else ''} for {p} fitted "
                "parameters; lack of fit needs more levels than parameters")
    return ("the replicates agree exactly at every level, so there is no pure error to test "
            "against")
