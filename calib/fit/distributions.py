"""Tail probabilities and quantiles of Student's t, F, the normal and χ², without the overhead.

``scipy.stats`` checks and reshapes its arguments on every call (30–80 µs),
which adds up when each of hundreds of curves asks for a dozen p-values and
critical values.  These functions call the same ``scipy.special`` routines
that ``scipy.stats`` calls, with the same rules at the edges (invalid degrees
of freedom or probabilities give ``nan``; a probability of 0 or 1 gives the
end of the support; x beyond the support gives 0 or 1), so they return the
very same numbers, a few times faster.

Each takes scalars or arrays (broadcast together) and returns a ``float``
for scalar arguments, an ndarray otherwise.  Degrees of freedom may be any
positive real number.

==============  ======================  ========================================
distribution    functions               scipy.special routine
==============  ======================  ========================================
Student's t     t_sf                    stdtr(ν, −x)
                t_ppf, t_isf            stdtrit(ν, q), −stdtrit(ν, q)
F               f_sf                    fdtrc
                f_ppf, f_isf            fdtri(ν₁, ν₂, q), fdtri(ν₁, ν₂, 1 − q)
normal          norm_cdf                ndtr(x)
                norm_ppf                ndtri(q)
χ²              chi2_sf                 chdtrc
                chi2_isf                chdtri(ν, q)
non-central t   nct_cdf                 nctdtr(ν, δ, x)
==============  ======================  ========================================

``f_isf`` takes the quantile of 1 − q, as ``scipy.stats.f.isf`` does, so it
loses relative accuracy as q nears 1e-16 (where 1 − q rounds to 1 and the
answer becomes ``inf``); calib asks it only for F(1 − α) at a profile's α.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

__all__ = [
    "chi2_isf", "chi2_sf", "f_isf", "f_ppf", "f_sf", "nct_cdf", "norm_cdf", "norm_ppf", "t_isf",
    "t_ppf", "t_sf",
]

ArrayLike = float | np.ndarray

_REAL_LINE = (-math.inf, math.inf)
_POSITIVE = (0.0, math.inf)


def _floats(*values: ArrayLike) -> list[ArrayLike]:
    """Sequences become float arrays; numbers stay numbers, which keeps the one-value path fast."""
    return [v if isinstance(v, (int, float, np.number, np.ndarray)) else np.asarray(v, dtype=float)
            for v in values]


def _valid(*dfs: ArrayLike) -> ArrayLike:
    """Where every degrees-of-freedom argument is above 0 (``nan`` is not)."""
    if not any(isinstance(df, np.ndarray) and df.ndim for df in dfs):
        return all(df > 0 for df in dfs)
    valid: ArrayLike = True
    for df in dfs:
        valid = np.logical_and(valid, np.greater(df, 0))
    return valid


def _probability(x: ArrayLike, valid: ArrayLike, inside: ArrayLike,
                 support: tuple[float, float], *, upper: bool) -> ArrayLike:
    """A cdf (``upper`` False) or sf with scipy.stats' rules outside the open support.

    ``inside`` is the special function's value, used where ``low < x < high``.
    """
    low, high = support
    below, above = (1.0, 0.0) if upper else (0.0, 1.0)
    if not isinstance(inside, np.ndarray):
        # One value: plain comparisons cost a fraction of the array path below.
        if not valid or math.isnan(x):
            return math.nan
        return below if x <= low else above if x >= high else float(inside)
    x = np.asarray(x, dtype=float)
    value = np.where(x <= low, below, np.where(x >= high, above, inside))
    return np.where(valid & ~np.isnan(x), value, np.nan)


def _quantile(q: ArrayLike, valid: ArrayLike, inside: ArrayLike,
              support: tuple[float, float], *, upper: bool) -> ArrayLike:
    """A ppf (``upper`` False) or isf with scipy.stats' rules at q = 0, q = 1 and outside [0, 1]."""
    low, high = support
    at_zero, at_one = (high, low) if upper else (low, high)
    if not isinstance(inside, np.ndarray):
        if not (valid and 0 <= q <= 1):
            return math.nan
        return at_zero if q == 0 else at_one if q == 1 else float(inside)
    q = np.asarray(q, dtype=float)
    value = np.where(q == 0, at_zero, np.where(q == 1, at_one, inside))
    return np.where(valid & (q >= 0) & (q <= 1), value, np.nan)


# --- Student's t -------------------------------------------------------------------------------




def t_sf(x: ArrayLike, df: ArrayLike) -> ArrayLike:
    """P(T > x), the upper tail of Student's t; two-sided p = 2·t_sf(|t|, ν).

    Parameters
    ----------
    x : float or array_like
        Where the tail starts.
    df : float or array_like
        Degrees of freedom ν > 0.

    Returns
    -------
    float or ndarray

    Notes
    -----
    stdtr(ν, −x), which keeps full relative accuracy far into the tail (no 1 − cdf).

    Examples
    --------
    With one degree of freedom t is Cauchy, whose upper tail at 1 is exactly 1/4:

    >>> round(t_sf(1.0, 1), 15)
    0.25
    >>> t_sf([float("-inf"), float("inf")], 3).tolist()
    [1.0, 0.0]
    """
    x, df = _floats(x, df)
    return _probability(x, _valid(df), special.stdtr(df, -x), _REAL_LINE, upper=True)


def t_ppf(q: ArrayLike, df: ArrayLike) -> ArrayLike:
    """The t with P(T ≤ t) = q.

    Examples
    --------
    >>> round(t_ppf(0.975, 5), 4)   # 2.5706 in any handbook table
    2.5706
    """
    q, df = _floats(q, df)
    return _quantile(q, _valid(df), special.stdtrit(df, q), _REAL_LINE, upper=False)


def t_isf(q: ArrayLike, df: ArrayLike) -> ArrayLike:
    """The t with P(T > t) = q: the upper critical value of a test at level q.

    Notes
    -----
    −stdtrit(ν, q), the t distribution being symmetric; accurate for tiny q
    (Bonferroni and Grubbs critical values divide α by the number of points).

    Examples
    --------
    >>> round(t_isf(0.025, 10), 4)   # 2.2281 in any handbook table
    2.2281
    >>> t_isf(0.0, 10)
    inf
    """
    q, df = _floats(q, df)
    return _quantile(q, _valid(df), -special.stdtrit(df, q), _REAL_LINE, upper=True)


# --- F -----------------------------------------------------------------------------------------




def f_sf(x: ArrayLike, dfn: ArrayLike, dfd: ArrayLike) -> ArrayLike:
    """P(F > x), the p-value of an F-test.

    Parameters
    ----------
    x : float or array_like
        The F statistic.
    dfn, dfd : float or array_like
        Numerator and denominator degrees of freedom, both above 0.

    Returns
    -------
    float or ndarray

    Notes
    -----
    fdtrc(ν₁, ν₂, x), the regularised incomplete beta function of the upper tail.

    Examples
    --------
    F(0.95; 2, 10) = 4.10 in published tables:

    >>> round(f_sf(4.102821015130399, 2, 10), 12)
    0.05
    """
    x, dfn, dfd = _floats(x, dfn, dfd)
    return _probability(x, _valid(dfn, dfd), special.fdtrc(dfn, dfd, x), _POSITIVE,
                        upper=True)


def f_ppf(q: ArrayLike, dfn: ArrayLike, dfd: ArrayLike) -> ArrayLike:
    """The F quantile: the x with P(F ≤ x) = q.

    Examples
    --------
    >>> round(f_ppf(0.99, 2, 2), 2)   # 99.00 in published tables
    99.0
    """
    q, dfn, dfd = _floats(q, dfn, dfd)
    return _quantile(q, _valid(dfn, dfd), special.fdtri(dfn, dfd, q), _POSITIVE, upper=False)


def f_isf(q: ArrayLike, dfn: ArrayLike, dfd: ArrayLike) -> ArrayLike:
    """The x with P(F > x) = q, as ``scipy.stats.f.isf`` gives it (via 1 − q, module notes).

    Examples
    --------
    >>> round(f_isf(0.05, 1, 10), 3)   # 4.965 in published tables
    4.965
    """
    q, dfn, dfd = _floats(q, dfn, dfd)
    return _quantile(q, _valid(dfn, dfd), special.fdtri(dfn, dfd, 1.0 - q), _POSITIVE,
                     upper=True)


# --- Normal ------------------------------------------------------------------------------------


def norm_cdf(x: ArrayLike) -> ArrayLike:
    """Φ(x), the standard normal distribution function.

    Examples
    --------
    >>> round(norm_cdf(-1.959963984540054), 12)
    0.025
    """
    (x,) = _floats(x)
    return _probability(x, True, special.ndtr(x), _REAL_LINE, upper=False)




def norm_ppf(q: ArrayLike) -> ArrayLike:
    """Φ⁻¹(q).

    Examples
    --------
    >>> round(norm_ppf(0.975), 6)
    1.959964
    """
    (q,) = _floats(q)
    return _quantile(q, True, special.ndtri(q), _REAL_LINE, upper=False)




# --- χ² ----------------------------------------------------------------------------------------




def chi2_sf(x: ArrayLike, df: ArrayLike) -> ArrayLike:
    """P(χ² > x) on ``df`` degrees of freedom.

    Examples
    --------
    >>> round(chi2_sf(3.841458820694124, 1), 12)
    0.05
    """
    x, df = _floats(x, df)
    return _probability(x, _valid(df), special.chdtrc(df, x), _POSITIVE, upper=True)




def chi2_isf(q: ArrayLike, df: ArrayLike) -> ArrayLike:
    """The x with P(χ² > x) = q.

    Examples
    --------
    >>> round(chi2_isf(0.05, 10), 3)   # 18.307 in published tables
    18.307
    """
    q, df = _floats(q, df)
    return _quantile(q, _valid(df), special.chdtri(df, q), _POSITIVE, upper=True)


# --- Non-central t -----------------------------------------------------------------------------


def nct_cdf(x: ArrayLike, df: ArrayLike, nc: ArrayLike) -> ArrayLike:
    """P(T′ ≤ x) for the non-central t with ``df`` degrees of freedom and non-centrality ``nc``.

    ISO 11843-2 finds the minimum detectable value's δ from it.

    Examples
    --------
    With δ = 0 it is Student's t:

    >>> abs(nct_cdf(1.5, 7, 0.0) - (1 - t_sf(1.5, 7))) < 1e-12
    True
    """
    x, df, nc = _floats(x, df, nc)
    valid = np.logical_and(_valid(df), np.logical_not(np.isnan(nc)))
    return _probability(x, valid, special.nctdtr(df, nc, x), _REAL_LINE, upper=False)
