"""Is the response's variance the same across the range?

- :func:`variance_ends`: ISO 8466-1 F-test of the replicate variances at the
  lowest and the highest level;
- :func:`variance_levels`: Levene's test (mean-centred) and its
  Brown–Forsythe form (median-centred) across every replicated level.

Both tests take optional fit weights: each level's variance is then that of
the weighted responses (s²·w̄, w̄ the level's mean weight), the variance the
weighted fit assumes constant.  Unweighted they are the tests as published.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

from calib.fit.distributions import f_ppf, f_sf

__all__ = ["LevelVarianceTest", "VarianceEndsTest", "variance_ends", "variance_levels"]


def _arrays(x: Iterable[float], y: Iterable[float],
            weights: Iterable[float] | None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    xs = np.asarray(x, dtype=float).ravel()
    ys = np.asarray(y, dtype=float).ravel()
    ws = np.ones_like(xs) if weights is None else np.asarray(weights, dtype=float).ravel()
    if not xs.shape == ys.shape == ws.shape:
        raise ValueError(f"x, y and weights must have the same length; got {xs.size}, "
                         f"{ys.size} and {ws.size}")
    return xs, ys, ws


@dataclass(frozen=True)
class VarianceEndsTest:
    """ISO 8466-1 test of the replicate variances at the ends of the working range.

    Attributes
    ----------
    low, high : float
        Concentrations of the lowest and highest level.
    n_low, n_high : int
        Replicates at each.
    var_low, var_high : float
        Their sample variances (of the weighted responses for a weighted fit).
    statistic : float
        PG = larger variance / smaller variance.
    df_num, df_den : int
        n − 1 of the larger and of the smaller variance.
    confidence : float
        Quantile of the critical value (ISO 8466-1: 0.99).
    critical : float
        F(confidence; df_num, df_den).
    reason : str
        Why the test could not be made ("" when it was).
    """

    low: float
    high: float
    n_low: int
    n_high: int
    var_low: float
    var_high: float
    statistic: float
    df_num: int
    df_den: int
    confidence: float
    critical: float
    reason: str = ""

    @property
    def homogeneous(self) -> bool:
        """True when PG does not exceed the critical value."""
        return not self.reason and self.statistic <= self.critical

    @property
    def p_value(self) -> float:
        """P(F(df_num, df_den) ≥ PG): PG exceeds the critical value exactly when p < 1 − confidence."""
        if self.reason:
            return math.nan
        return f_sf(self.statistic, self.df_num, self.df_den)

    @property
    def larger_at_high(self) -> bool:
        """Whether the larger variance is at the highest level."""
        return self.var_high >= self.var_low


def variance_ends(
    x: Iterable[float], y: Iterable[float], *, weights: Iterable[float] | None = None,
    confidence: float = 0.99,
) -> VarianceEndsTest:
    """F-test of the replicate variances at the lowest and highest level (ISO 8466-1).

    Parameters
    ----------
    x, y : array_like
        Concentrations and responses of the standards; replicates share a concentration.
    weights : array_like, optional
        The fit's weights; each end's variance is then s²·w̄ (module notes).
    confidence : float
        Quantile of the critical F value, default 0.99 as in ISO 8466-1.

    Returns
    -------
    VarianceEndsTest
        With ``reason`` set (and ``nan`` figures) when an end has fewer than 2
        replicates or zero variance.

    Notes
    -----
    s²ⱼ = Σ(yⱼᵢ − ȳⱼ)²/(nⱼ − 1) at the lowest (j = 1) and highest level;
    PG = s²_larger / s²_smaller against F(0.99; n_larger − 1, n_smaller − 1).
    PG above it: the variances differ, so the range should be narrowed or the
    fit weighted.  Putting the larger variance on top makes this a two-sided
    test at 2·(1 − confidence).

    References
    ----------
    ISO 8466-1:1990 Water quality — Calibration and evaluation of analytical
    methods — Part 1: Linear calibration function, test of variance homogeneity
    with 10 replicates at the ends of the working range (from memory).

    Examples
    --------
    >>> t = variance_ends([1, 1, 1, 9, 9, 9], [1.0, 1.2, 1.1, 9.0, 9.6, 9.3])
    >>> round(t.statistic, 6), t.df_num, t.df_den, round(t.critical, 2)
    (9.0, 2, 2, 99.0)
    """
    xs, ys, ws = _arrays(x, y, weights)
    levels = np.unique(xs)
    if levels.size < 2:
        return _ends_unavailable(confidence, "the fit has a single concentration level")
    lo, hi = float(levels[0]), float(levels[-1])
    n_lo, n_hi = int(np.sum(xs == lo)), int(np.sum(xs == hi))

    def variance(level: float) -> float:
        at = xs == level
        return float(np.var(ys[at], ddof=1) * ws[at].mean())

    for level, n in ((lo, n_lo), (hi, n_hi)):
        if n < 2:
            return _ends_unavailable(confidence, (
                f"the {'lowest' if level == lo else 'highest'} level ({level:g}) has {n} "
                "replicate; the test needs at least 2 at each end (ISO 8466-1 uses 10)"),
                lo, hi, n_lo, n_hi)
    v_lo, v_hi = variance(lo), variance(hi)
    for level, v in ((lo, v_lo), (hi, v_hi)):
        if not v > 0:
            return _ends_unavailable(confidence, (
                f"the replicates at the {'lowest' if level == lo else 'highest'} level "
                f"({level:g}) are identical, so their variance is zero"), lo, hi, n_lo, n_hi)
    if v_hi >= v_lo:
        pg, df_num, df_den = v_hi / v_lo, n_hi - 1, n_lo - 1
    else:
        pg, df_num, df_den = v_lo / v_hi, n_lo - 1, n_hi - 1
    critical = f_ppf(confidence, df_num, df_den)
    return VarianceEndsTest(lo, hi, n_lo, n_hi, v_lo, v_hi, pg, df_num, df_den, confidence, critical)


def _ends_unavailable(confidence: float, reason: str, lo: float = math.nan, hi: float = math.nan,
                      n_lo: int = 0, n_hi: int = 0) -> VarianceEndsTest:
    return VarianceEndsTest(lo, hi, n_lo, n_hi, math.nan, math.nan, math.nan, 0, 0, confidence,
                            math.nan, reason)


def _medians(values: np.ndarray, group: np.ndarray, sizes: np.ndarray) -> np.ndarray:
    """Each group's median as :func:`numpy.median` computes it (for an even count, the
    mean of the middle two); ``group`` numbers the groups 0, 1, ... and ``sizes`` counts them.

    Examples
    --------
    >>> _medians(np.array([3.0, 1.0, 2.0, 9.0, 5.0]), np.array([0, 0, 0, 1, 1]), np.array([3, 2]))
    array([2., 7.])
    """
    ordered = values[np.lexsort((values, group))]
    starts = np.cumsum(sizes) - sizes
    upper = ordered[starts + sizes // 2]
    lower = ordered[starts + (sizes - 1) // 2]
    return np.where(sizes % 2 == 1, upper, (lower + upper) / 2)


@dataclass(frozen=True)
class LevelVarianceTest:
    """Levene-type test of equal variances across the replicated levels.

    Attributes
    ----------
    center : str
        ``"median"`` (Brown–Forsythe) or ``"mean"`` (Levene).
    statistic : float
        W, the one-way ANOVA F of the absolute deviations from each level's centre.
    df_num, df_den : int
        k − 1 and N − k, k the levels and N the points taking part.
    p_value : float
        P(F(k − 1, N − k) ≥ W).
    levels : tuple of float
        The levels taking part (those with at least 2 replicates).
    left_out : tuple of float
        Levels left out for having a single replicate.
    reason : str
        Why the test could not be made ("" when it was).
    """

    center: str
    statistic: float
    df_num: int
    df_den: int
    p_value: float
    levels: tuple[float, ...]
    left_out: tuple[float, ...]
    reason: str = ""

    def rejects(self, alpha: float = 0.05) -> bool:
        """True when the variances differ significantly (p < α)."""
        return not self.reason and self.p_value < alpha


_INCOMPARABLE = ("with 2 replicates at every level (or identical deviations) the deviations "
                 "cannot be compared; the test needs a level with 3 or more")


def variance_levels(
    x: Iterable[float], y: Iterable[float], *, weights: Iterable[float] | None = None,
    center: str = "median",
) -> LevelVarianceTest:
    """Levene's test (``center="mean"``) or Brown–Forsythe's (``"median"``) across levels.

    Parameters
    ----------
    x, y : array_like
        Concentrations and responses; replicates share a concentration.
    weights : array_like, optional
        The fit's weights; each level's deviations are then multiplied by √w̄.
    center : {"median", "mean"}
        Centre of each level the absolute deviations are taken from.

    Returns
    -------
    LevelVarianceTest
        With ``reason`` set when fewer than 2 levels have replicates, or every
        level has exactly 2 (both deviations from the centre are then equal,
        so the test has nothing to compare).

    Notes
    -----
    zᵢⱼ = √w̄ᵢ·|yᵢⱼ − cᵢ|, cᵢ the level's mean or median;
    W = (N − k)/(k − 1) · Σᵢ nᵢ(z̄ᵢ − z̄)² / Σᵢ Σⱼ (zᵢⱼ − z̄ᵢ)², F(k − 1, N − k).
    The median form keeps its level under skewed or heavy-tailed responses.

    References
    ----------
    H. Levene (1960), in Contributions to Probability and Statistics;
    M. B. Brown, A. B. Forsythe (1974), J. Am. Stat. Assoc. 69, 364–367;
    NIST/SEMATECH e-Handbook of Statistical Methods, Levene test for equality
    of variances (all from memory).

    Examples
    --------
    By hand: medians 1.1 and 5.6, deviations (0.1, 0, 0.2) and (0.6, 0, 0.6),
    between = 2·3·0.15² = 0.135, within = 0.02 + 0.24, W = 4·0.135/0.26 = 2.0769:

    >>> t = variance_levels([1, 1, 1, 5, 5, 5], [1.0, 1.1, 1.3, 5.0, 5.6, 6.2])
    >>> round(t.statistic, 4), t.df_num, t.df_den
    (2.0769, 1, 4)
    """
    if center not in ("median", "mean"):
        raise ValueError(f"center must be one of median, mean; got {center!r}")
    xs, ys, ws = _arrays(x, y, weights)
    levels, index, counts = np.unique(xs, return_inverse=True, return_counts=True)
    replicated = counts >= 2
    taking = levels[replicated]
    left_out = tuple(float(v) for v in levels[~replicated])

    def unavailable(reason: str) -> LevelVarianceTest:
        return LevelVarianceTest(center, math.nan, 0, 0, math.nan,
                                 tuple(float(v) for v in taking), left_out, reason)

    if taking.size < 2:
        return unavailable(f"{taking.size} level{'s' if taking.size != 1 else ''} with "
                           "replicates; the test needs at least 2")
    sizes = counts[replicated]
    if np.all(sizes <= 2):
        return unavailable(_INCOMPARABLE)
    # The points of the replicated levels, level after level (in the given order within a
    # level), and the number of each one's level among them: every sum below is per level.
    order = np.argsort(index, kind="stable")
    order = order[replicated[index[order]]]
    group = (np.cumsum(replicated) - 1)[index[order]]
    values = ys[order]
    if center == "median":
        middle = _medians(values, group, sizes)
    else:
        middle = np.bincount(group, weights=values) / sizes
    root_weight = np.sqrt(np.bincount(group, weights=ws[order]) / sizes)
    z = np.abs(values - middle[group]) * root_weight[group]
    k, n = int(sizes.size), int(sizes.sum())
    grand = z.mean()
    means = np.bincount(group, weights=z) / sizes
    between = sum((sizes * (means - grand) ** 2).tolist())
    within = sum(np.bincount(group, weights=(z - means[group]) ** 2).tolist())
    # With 2 replicates the two deviations from the median (or mean) are equal by
    # construction, so "within" is rounding noise (1e-35, not 0) and W would be ~1e27.
    scale = sum(np.bincount(group, weights=z * z).tolist())
    if not within > 1e-24 * scale:
        return unavailable(_INCOMPARABLE)
    w_stat = (n - k) / (k - 1) * between / within
    p = f_sf(w_stat, k - 1, n - k)
    return LevelVarianceTest(center, float(w_stat), k - 1, n - k, p,
                             tuple(float(v) for v in taking), left_out)
