"""Case diagnostics and the lack-of-fit test for a whole batch of curves at once.

The batched counterparts of :func:`calib.fit.outliers.influence` (leverage,
internally and externally studentized residuals, Cook's distance) and
:func:`calib.fit.linearity.lack_of_fit` (pure error from replicate levels against
lack of fit), computed over the (K, n) arrays of a :class:`~calib.fit.batch.BatchFit`
with its mask and weights, with the same definitions, thresholds and reasons as the
per-curve functions (``tests/fit/test_batch_diagnostics.py`` compares them to
1e-10).  ``curve(k)`` on either result gives the per-curve object, so the rules
that judge one curve can take their figures from the batch.

The numbers come from :mod:`calib.fit.diagnostics_core`, which the per-curve functions
call on a block of one curve: ``batch_influence(batch).curve(k)`` and
``influence(batch.curve(k))`` are the same figures, bit for bit.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from calib.fit.batch import BatchFit
from calib.fit.batch_block import BLOCK_VALUES
from calib.fit.diagnostics_core import (
    case_figures,
    check_alpha,
    influence_reason,
    lack_of_fit_reason,
    level_sums,
)
from calib.fit.distributions import f_isf, f_ppf, f_sf, t_isf
from calib.fit.linearity import LackOfFit
from calib.fit.outliers import Influence

__all__ = ["BatchInfluence", "BatchLackOfFit", "batch_influence", "batch_lack_of_fit"]

def _index(k: int, K: int) -> int:
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or not -K <= k < K:
        raise ValueError(f"curve must be an index below {K}; got {k!r}")
    return int(k) % K


@dataclass(frozen=True, eq=False)
class BatchInfluence:
    """Case diagnostics of every point of every curve; arrays (K, n) in the batch's layout.

    Build one with :func:`batch_influence`.  Unused points, and every point of a
    curve with a ``reason``, hold ``nan``; so do the residual measures of points
    with hᵢᵢ = 1 (to rounding), as in :class:`~calib.fit.outliers.Influence`.

    Attributes
    ----------
    leverage : ndarray
        hᵢᵢ, the diagonal of the weighted hat matrix W½X(XᵀWX)⁻¹XᵀW½.
    weighted_residuals : ndarray
        eᵢ = √wᵢ·rᵢ.
    standardized : ndarray
        Internally studentized residuals eᵢ / (σ̂·√(1 − hᵢᵢ)).
    studentized : ndarray
        Externally studentized residuals eᵢ / (s₍ᵢ₎·√(1 − hᵢᵢ)); Student's t on
        ν − 1 degrees of freedom.
    cooks_distance : ndarray
        Dᵢ = eᵢ²·hᵢᵢ / (p·σ̂²·(1 − hᵢᵢ)²).
    mask : ndarray of bool
        The points of each curve's fit.
    n_params : int
        p.
    residual_df : ndarray, shape (K,)
        ν = N − p (``nan`` for a curve without a fit).
    reasons : tuple of (str or None)
        Why curve k has no diagnostics (the messages of ``influence``), or None.
    """

    leverage: np.ndarray
    weighted_residuals: np.ndarray
    standardized: np.ndarray
    studentized: np.ndarray
    cooks_distance: np.ndarray
    mask: np.ndarray
    n_params: int
    residual_df: np.ndarray
    reasons: tuple[str | None, ...]

    @property
    def n_points(self) -> np.ndarray:
        """N per curve."""
        return self.mask.sum(axis=1)

    def bonferroni_critical(self, alpha: float = 0.05) -> np.ndarray:
        """t(1 − α/(2N), ν − 1) per curve: the critical value for the largest of N residuals."""
        q = check_alpha(alpha) / (2 * np.maximum(self.n_points, 1))
        with np.errstate(invalid="ignore"):
            return np.where(self._judged, t_isf(q, self.residual_df - 1), np.nan)

    def suggested(self, alpha: float = 0.05) -> np.ndarray:
        """True where |studentized residual| exceeds :meth:`bonferroni_critical` (K, n)."""
        critical = self.bonferroni_critical(alpha)
        with np.errstate(invalid="ignore"):
            return np.abs(self.studentized) > critical[:, None]

    @property
    def cooks_reference(self) -> np.ndarray:
        """F(0.5; p, ν) per curve, the rule-of-thumb level of :meth:`influential`."""
        with np.errstate(invalid="ignore"):
            return np.where(self._judged, f_ppf(0.5, self.n_params, self.residual_df),
                            np.nan)

    def influential(self) -> np.ndarray:
        """True where Cook's distance exceeds :attr:`cooks_reference` (K, n)."""
        with np.errstate(invalid="ignore"):
            return self.cooks_distance > self.cooks_reference[:, None]

    def curve(self, k: int) -> Influence:
        """Curve ``k``'s diagnostics as an :class:`~calib.fit.outliers.Influence`.

        Raises
        ------
        ValueError
            When curve ``k`` has no diagnostics (the message gives the reason).
        """
        k = _index(k, len(self.reasons))
        if self.reasons[k] is not None:
            raise ValueError(f"curve {k} has no case diagnostics: {self.reasons[k]}")
        used = self.mask[k]
        return Influence(self.leverage[k, used].copy(), self.weighted_residuals[k, used].copy(),
                         self.standardized[k, used].copy(), self.studentized[k, used].copy(),
                         self.cooks_distance[k, used].copy(), self.n_params,
                         int(self.residual_df[k]))

    @property
    def _judged(self) -> np.ndarray:
        return np.array([r is None for r in self.reasons], dtype=bool)


@dataclass(frozen=True, eq=False)
class BatchLackOfFit:
    """The lack-of-fit F-test of every curve; arrays (K,).

    Build one with :func:`batch_lack_of_fit`.  The fields are those of
    :class:`~calib.fit.linearity.LackOfFit`, one per curve (degrees of freedom and
    level counts as floats, ``nan`` for a curve without a fit); ``f_value`` and
    ``p_value`` are ``nan`` where the test cannot be evaluated.

    Attributes
    ----------
    ss_lack, df_lack : ndarray
        SS_lof = SS_res − SS_pure on ν_lof = m − p degrees of freedom.
    ss_pure, df_pure : ndarray
        SS_pure = Σᵢ Σⱼ wᵢⱼ(yᵢⱼ − ȳᵢ,w)² on ν_pure = N − m.
    n_levels : ndarray
        m, the distinct concentrations.
    weighted : ndarray of bool
        Whether the sums carry the fit's (unequal) weights.
    f_value, p_value : ndarray
        F = (SS_lof/ν_lof) / (SS_pure/ν_pure) and the upper-tail probability of
        F(ν_lof, ν_pure) at it.
    reasons : tuple of (str or None)
        Why the test cannot be evaluated on curve k (the messages of
        ``lack_of_fit``), or None.
    """

    ss_lack: np.ndarray
    df_lack: np.ndarray
    ss_pure: np.ndarray
    df_pure: np.ndarray
    n_levels: np.ndarray
    weighted: np.ndarray
    f_value: np.ndarray
    p_value: np.ndarray
    reasons: tuple[str | None, ...]

    def critical(self, alpha: float = 0.05) -> np.ndarray:
        """F(1 − α; ν_lof, ν_pure) per curve."""
        with np.errstate(invalid="ignore"):
            return np.where(np.isnan(self.f_value), np.nan,
                            f_isf(check_alpha(alpha), self.df_lack, self.df_pure))

    def significant(self, alpha: float = 0.05) -> np.ndarray:
        """True where p < α: the curve does not describe the level means."""
        with np.errstate(invalid="ignore"):
            return self.p_value < check_alpha(alpha)

    def curve(self, k: int) -> LackOfFit:
        """Curve ``k``'s test as a :class:`~calib.fit.linearity.LackOfFit`.

        Raises
        ------
        ValueError
            When curve ``k`` has no fit.
        """
        k = _index(k, len(self.reasons))
        if np.isnan(self.n_levels[k]):
            raise ValueError(f"curve {k} has no lack-of-fit test: {self.reasons[k]}")
        return LackOfFit(float(self.ss_lack[k]), int(self.df_lack[k]), float(self.ss_pure[k]),
                         int(self.df_pure[k]), int(self.n_levels[k]), bool(self.weighted[k]),
                         self.reasons[k])


def _blocks(fit: BatchFit) -> Iterator[tuple[slice, np.ndarray, np.ndarray, np.ndarray,
                                              np.ndarray, np.ndarray]]:
    """(slice, points × curves views of x, y, weights, residuals, rows) per block of curves.

    Blocks keep the working arrays small enough for the cache, as in fit_batch.
    """
    K, n = fit.x.shape
    X, Y, W, R = fit.x.T, fit.y.T, fit.weights.T, fit.residuals.T
    rows_all = fit.mask.T & fit.fitted_ok
    step = max(1, BLOCK_VALUES // max(n, 1))
    for start in range(0, K, step):
        at = slice(start, start + step)
        yield at, X[:, at], Y[:, at], W[:, at], R[:, at], rows_all[:, at]


def batch_influence(fit: BatchFit) -> BatchInfluence:
    """Leverage, studentized residuals and Cook's distance of every point of every curve.

    Parameters
    ----------
    fit : BatchFit
        Any batch; curves without a fit, with fewer than 2 residual degrees of
        freedom, or passing through every point get a reason instead of figures.

    Returns
    -------
    BatchInfluence

    Notes
    -----
    The definitions of :func:`calib.fit.outliers.influence`: eᵢ = √wᵢ·rᵢ,
    hᵢᵢ = wᵢ‖xᵢᵀL‖² with L the batch's factor of (XᵀWX)⁻¹ = L Lᵀ (an inverse of
    the triangular factor of W½X), s₍ᵢ₎² = (Σe² − eᵢ²/(1 − hᵢᵢ)) / (ν − 1), so that
    no curve is refitted; all curves are computed together.

    References
    ----------
    Cook, R. D. and Weisberg, S. (1982), Residuals and Influence in Regression,
    chapters 2 and 3 (from memory).

    Examples
    --------
    The last standard of the first curve reads 30 % high:

    >>> from calib.fit.batch import fit_batch
    >>> x = [[1, 2, 3, 4, 5, 6, 7, 8]] * 2
    >>> y = [[1.02, 1.98, 3.01, 3.99, 5.02, 5.97, 7.01, 10.4],
    ...      [1.01, 2.02, 2.97, 4.03, 4.98, 6.01, 7.02, 7.98]]
    >>> infl = batch_influence(fit_batch(x, y, model="linear"))
    >>> infl.studentized.shape, int(np.argmax(np.abs(infl.studentized[0])))
    ((2, 8), 7)
    >>> infl.suggested(0.05).sum(axis=1).tolist()   # one suspect, in the first curve
    [1, 0]
    """
    K, n = fit.x.shape
    p = len(fit.names)
    nu = fit.residual_df
    ok = fit.fitted_ok
    root = fit.covariance_root
    if root is None:
        raise ValueError("the batch carries no factor of (XᵀWX)⁻¹ (covariance_root); "
                         "fit it with fit_batch")
    # One buffer for the five (K, n) results, laid out points × curves like the batch.
    out = np.full((5, n, K), np.nan)
    scatterless = np.zeros(K, dtype=bool)
    few = np.zeros(K, dtype=bool)
    for at, X, Y, W, R, rows in _blocks(fit):
        block = case_figures(X, Y, W, R, rows, root[at], nu[at], fit.model)
        out[:, :, at] = block.figures
        scatterless[at] = block.scatterless
        few[at] = block.few
    # The reasons in influence's order: no fit, too few degrees of freedom, no scatter.
    reasons: list[str | None] = [None] * K
    for k in np.flatnonzero(~ok | few | scatterless):
        reasons[k] = influence_reason(fit.problems[k], bool(few[k]), nu[k])
    out.flags.writeable = False
    return BatchInfluence(*(a.T for a in out), mask=fit.mask, n_params=p,
                          residual_df=nu, reasons=tuple(reasons))


def batch_lack_of_fit(fit: BatchFit) -> BatchLackOfFit:
    """Split every curve's residual sum of squares into pure error and lack of fit.

    Parameters
    ----------
    fit : BatchFit
        Any batch; levels are the distinct concentrations among each curve's used
        points.

    Returns
    -------
    BatchLackOfFit
        With a reason per curve where ``lack_of_fit`` gives one (no replicates, no
        more levels than parameters, replicates that agree exactly) or the curve has
        no fit.

    Notes
    -----
    The sums of :func:`calib.fit.linearity.lack_of_fit`: weighted level means
    ȳᵢ,w, SS_pure = Σᵢ Σⱼ wᵢⱼ(yᵢⱼ − ȳᵢ,w)² on N − m degrees of freedom,
    SS_lof = Σwr² − SS_pure on m − p.  The levels of all curves are found at once
    by sorting each curve's concentrations; the level sums are sums over the runs
    of equal values.

    References
    ----------
    NIST/SEMATECH e-Handbook of Statistical Methods, §4.6.1 (load-cell calibration).

    Examples
    --------
    The first curve misses its level means (F = 50/3 as in ``lack_of_fit``); the second
    has no replicates:

    >>> from calib.fit.batch import fit_batch
    >>> batch = fit_batch([[1, 1, 2, 2, 3, 3], [1, 2, 3, 4, 5, 6]],
    ...                   [[1.0, 1.2, 2.5, 2.7, 3.0, 3.2], [1.0, 2.1, 2.9, 4.2, 5.0, 6.1]],
    ...                   model="linear")
    >>> test = batch_lack_of_fit(batch)
    >>> test.f_value.round(3).tolist()[0], test.df_lack.tolist(), test.reasons[1]
    (16.667, [1.0, 4.0], 'no concentration level has replicates, so there is no pure error to test against')
    """
    K = fit.n_curves
    p = len(fit.names)
    ok = fit.fitted_ok
    names = ("pure", "residual", "levels", "used", "weighted", "negligible")
    per_curve = {name: np.zeros(K) for name in names}
    for at, X, Y, W, R, rows in _blocks(fit):
        sums = level_sums(X, Y, W, R, rows)
        block = {"pure": sums.pure, "residual": sums.residual, "levels": sums.levels,
                 "used": sums.used, "weighted": sums.weighted,
                 "negligible": sums.negligible_pure()}
        for name in names:
            per_curve[name][at] = block[name]
    pure, levels, n_used = per_curve["pure"], per_curve["levels"], per_curve["used"]
    # The reasons in lack_of_fit's order: no fit, no replicates, too few levels, no scatter.
    reasons: list[str | None] = [None] * K
    untested = ~ok | (n_used == levels) | (levels <= p) | per_curve["negligible"].astype(bool)
    for k in np.flatnonzero(untested):
        reasons[k] = lack_of_fit_reason(fit.problems[k] if not ok[k] else None,
                                        int(n_used[k]), int(levels[k]), p)
    tested = ~untested
    missing = np.where(ok, 0.0, np.nan)
    df_lack = levels - p + missing
    df_pure = n_used - levels + missing
    ss_lack = per_curve["residual"] - pure + missing
    with np.errstate(invalid="ignore", divide="ignore"):
        f_value = np.where(tested, (np.maximum(ss_lack, 0.0) / df_lack) / (pure / df_pure),
                           np.nan)
        p_value = np.where(tested, f_sf(f_value, df_lack, df_pure), np.nan)
    arrays = [ss_lack, df_lack, pure + missing, df_pure, levels + missing,
              per_curve["weighted"].astype(bool) & ok, f_value, p_value]
    for a in arrays:
        a.flags.writeable = False
    return BatchLackOfFit(*arrays, reasons=tuple(reasons))
