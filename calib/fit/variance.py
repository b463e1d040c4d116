"""Is the response's variance the same across the range, and which weighting suits it?

- :func:`variance_ends`: ISO 8466-1 F-test of the replicate variances at the
  lowest and the highest level;
- :func:`variance_levels`: Levene's test (mean-centred) and its
  Brown–Forsythe form (median-centred) across every replicated level;
- :func:`recommend_weighting`: fits candidate weightings and recommends the
  simplest adequate one, with the reason in plain words.  It only advises: no
  fit is ever switched by it.

Both tests take optional fit weights: each level's variance is then that of
the weighted responses (s²·w̄, w̄ the level's mean weight), the variance the
weighted fit assumes constant.  Unweighted they are the tests as published.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

from calib.fit.curve import CurveFit, fit_curve
from calib.fit.design import weighting_refuses
from calib.fit.distributions import f_ppf, f_sf
from calib.options import Model, Weighting, parse_option

__all__ = [
    "LevelVarianceTest", "VarianceEndsTest", "WeightingAdvice", "WeightingCandidate",
    "recommend_weighting", "variance_ends", "variance_levels",
]


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


# --- Weighting recommendation ------------------------------------------------------------------

#: Candidate weightings in order of simplicity (the recommendation prefers the earlier).
_SIMPLICITY = tuple(Weighting)


@dataclass(frozen=True)
class WeightingCandidate:
    """One weighting tried by :func:`recommend_weighting`.

    Attributes
    ----------
    weighting : Weighting
        The candidate.
    fit : CurveFit or None
        The fit with it (None when it could not be fitted: see ``reason``).
    reason : str
        Why it could not be fitted ("" otherwise).
    left_out : int
        Standards this weighting cannot use (e.g. concentration 0 for 1/x).
    sum_abs_deviation_pct : float
        Σ |100·(x̂ᵢ − xᵢ)/xᵢ| over every non-zero standard given, each read back
        from this candidate's curve (``inf`` if one cannot be read back).
    spread : float
        Larger over smaller of the mean squared weighted residual (wᵢ·rᵢ²) in
        the lower and the upper half of the levels; about 1 when the
        weighting suits the variance.
    spread_limit : float
        F(1 − α/2; n_larger, n_smaller): the ratio chance alone exceeds with
        probability α (an approximation: residuals are not quite independent).
    """

    weighting: Weighting
    fit: CurveFit | None
    reason: str
    left_out: int
    sum_abs_deviation_pct: float
    spread: float
    spread_limit: float

    @property
    def even(self) -> bool:
        """Whether the weighted residuals are of similar size across the range."""
        return self.fit is not None and math.isfinite(self.spread) and self.spread <= self.spread_limit


@dataclass(frozen=True)
class WeightingAdvice:
    """Which weighting suits the standards, and why.

    Attributes
    ----------
    model : Model
        The model every candidate was fitted with.
    candidates : tuple of WeightingCandidate
        In order of simplicity.
    recommended : Weighting or None
        None when no candidate could be fitted.
    explanation : str
        The reason for the choice, in plain words.
    """

    model: Model
    candidates: tuple[WeightingCandidate, ...]
    recommended: Weighting | None
    explanation: str

    def candidate(self, weighting: Weighting | str) -> WeightingCandidate:
        """The candidate of ``weighting``."""
        weighting = parse_option(Weighting, weighting, name="weighting")
        for c in self.candidates:
            if c.weighting is weighting:
                return c
        raise ValueError(f"weighting {weighting.value} was not a candidate; candidates: "
                         f"{', '.join(c.weighting.value for c in self.candidates)}")


def _usable(xs: np.ndarray, ys: np.ndarray, weighting: Weighting) -> np.ndarray:
    keep = np.array([weighting_refuses(c, weighting, response=r) is None
                     for c, r in zip(xs.tolist(), ys.tolist())], dtype=bool)
    if weighting is Weighting.INV_S2:
        for level in np.unique(xs[keep]):
            at = keep & (xs == level)
            if weighting_refuses(level, weighting, replicates=ys[at]) is not None:
                keep &= xs != level
    return keep


def _spread(fit: CurveFit, alpha: float) -> tuple[float, float]:
    levels = np.unique(fit.x)
    half = levels.size // 2
    if half < 1:
        return math.nan, math.nan
    e2 = fit.weights * fit.residuals**2
    lower = e2[fit.x <= levels[half - 1]]
    upper = e2[fit.x >= levels[-half]]
    if lower.size < 2 or upper.size < 2:
        return math.nan, math.nan
    ms_lo, ms_hi = float(lower.mean()), float(upper.mean())
    if not (ms_lo > 0 and ms_hi > 0):
        return math.nan, math.nan
    if ms_hi >= ms_lo:
        ratio, n_num, n_den = ms_hi / ms_lo, upper.size, lower.size
    else:
        ratio, n_num, n_den = ms_lo / ms_hi, lower.size, upper.size
    return ratio, f_ppf(1 - alpha / 2, n_num, n_den)


def _candidate(xs: np.ndarray, ys: np.ndarray, model: Model, weighting: Weighting,
               alpha: float) -> WeightingCandidate:
    keep = _usable(xs, ys, weighting)
    left_out = int(np.sum(~keep))
    try:
        fit = fit_curve(xs[keep], ys[keep], model=model, weighting=weighting)
    except ValueError as exc:
        return WeightingCandidate(weighting, None, str(exc), left_out, math.nan, math.nan, math.nan)
    nonzero = xs > 0
    with np.errstate(invalid="ignore"):
        back = fit.back_calculate(ys[nonzero])
    deviation = np.abs(100 * (back - xs[nonzero]) / xs[nonzero])
    total = float(deviation.sum()) if np.all(np.isfinite(deviation)) else math.inf
    spread, limit = _spread(fit, alpha)
    return WeightingCandidate(weighting, fit, "", left_out, total, spread, limit)


def recommend_weighting(
    x: Iterable[float],
    y: Iterable[float],
    *,
    model: Model | str = Model.LINEAR,
    candidates: Iterable[Weighting | str] = (Weighting.NONE, Weighting.INV_X, Weighting.INV_X2),
    alpha: float = 0.05,
    slack_pct: float = 10.0,
) -> WeightingAdvice:
    """Fit each candidate weighting and recommend the simplest adequate one.

    Parameters
    ----------
    x, y : array_like
        Concentrations and responses of the standards.
    model : Model or str
        The model to fit (not ``mean-rf``, whose weights are fixed).
    candidates : iterable of Weighting or str
        Weightings to try, default none, 1/x and 1/x².  Simplicity follows
        :class:`~calib.options.Weighting`'s order: none, 1/x, 1/x2, 1/y, 1/y2, 1/s2.
    alpha : float
        Level at which the weighted residuals' spread counts as uneven.
    slack_pct : float
        A simpler weighting is preferred while its sum of absolute deviations
        is within this many per cent of the best even candidate's.

    Returns
    -------
    WeightingAdvice

    Notes
    -----
    For each candidate: the spread (ratio of the mean squared weighted
    residual wᵢrᵢ² in the upper and the lower half of the levels, larger over
    smaller) and the sum of absolute back-calculated deviations
    Σ|100·(x̂ᵢ − xᵢ)/xᵢ|.  A candidate is *even* when its spread is within
    F(1 − α/2; n₁, n₂).  Among the even candidates, the simplest whose sum
    is within ``slack_pct`` % of the smallest sum is recommended; when none is
    even, the one with the smallest spread, said so.  A standard a weighting
    cannot use (concentration 0 for 1/x, a response ≤ 0 for 1/y, a level
    without replicate variance for 1/s2) is left out of that candidate's fit
    but still read back for its sum.  The thresholds are our own choice, not
    from a standard.

    References
    ----------
    A. M. Almeida, M. M. Castel-Branco, A. C. Falcão (2002), Linear regression
    for calibration lines revisited: weighting schemes for bioanalytical
    methods, J. Chromatogr. B 774, 215–222 (sum of relative errors as the
    criterion; from memory).

    Examples
    --------
    Responses whose noise grows with the concentration (invented):

    >>> x = [1, 1, 1, 10, 10, 10, 100, 100, 100, 1000, 1000, 1000]
    >>> y = [1.02, 0.97, 1.01, 10.3, 9.8, 10.1, 97.0, 104.0, 101.0, 1030.0, 975.0, 990.0]
    >>> advice = recommend_weighting(x, y)
    >>> advice.recommended.value
    '1/x2'
    """
    model = parse_option(Model, model, name="model")
    if model is Model.MEAN_RF:
        raise ValueError("model mean-rf averages the response factors with equal weight; "
                         "there is no weighting to choose")
    chosen = {parse_option(Weighting, c, name="candidates") for c in candidates}
    if not chosen:
        raise ValueError("candidates must name at least one weighting")
    xs, ys, _ = _arrays(x, y, None)
    tried = tuple(_candidate(xs, ys, model, w, alpha) for w in _SIMPLICITY if w in chosen)
    recommended, explanation = _decide(tried, slack_pct)
    return WeightingAdvice(model, tried, recommended, explanation)


def _figure(value: float) -> str:
    return f"{value:.3g}" if abs(value) < 1000 else f"{value:.0f}"


def _describe(c: WeightingCandidate) -> str:
    spread = f"ratio {_figure(c.spread)}" if math.isfinite(c.spread) else "ratio not measurable"
    return f"{c.weighting.value}: {spread}, {_figure(c.sum_abs_deviation_pct)} %"


def _decide(tried: tuple[WeightingCandidate, ...],
            slack_pct: float) -> tuple[Weighting | None, str]:
    fitted = [c for c in tried if c.fit is not None]
    if not fitted:
        reasons = "; ".join(f"{c.weighting.value}: {c.reason}" for c in tried)
        return None, f"No candidate weighting could be fitted ({reasons})."
    even = [c for c in fitted if c.even]
    measured = [c for c in fitted if math.isfinite(c.spread)]
    best = min(c.sum_abs_deviation_pct for c in (even or fitted))
    if even:
        pick = next(c for c in even if c.sum_abs_deviation_pct <= best * (1 + slack_pct / 100))
        why = (f"{pick.weighting.value} is recommended: the simplest weighting that leaves the "
               "weighted residuals of similar size in the lower and upper half of the range "
               f"(ratio {_figure(pick.spread)}; chance alone gives up to {_figure(pick.spread_limit)}) "
               "and reads the standards back about as well as the best (sum of absolute "
               f"deviations {_figure(pick.sum_abs_deviation_pct)} %, best {_figure(best)} %).")
    elif measured:
        pick = min(measured, key=lambda c: c.spread)
        why = (f"{pick.weighting.value} comes closest, but no candidate leaves the weighted "
               "residuals of similar size in the lower and upper half of the range (its ratio "
               f"{_figure(pick.spread)}; chance alone gives up to {_figure(pick.spread_limit)}); "
               "consider a narrower range or another model.")
    else:
        pick = next(c for c in fitted if c.sum_abs_deviation_pct <= best * (1 + slack_pct / 100))
        why = (f"{pick.weighting.value} is suggested on the back-calculated deviations alone "
               f"(sum {_figure(pick.sum_abs_deviation_pct)} %): too few levels or replicates to "
               "judge the spread of the residuals.")
    rest = [c for c in tried if c is not pick]
    if rest:
        why += " Others: " + "; ".join(
            _describe(c) if c.fit is not None else f"{c.weighting.value}: not fitted ({c.reason})"
            for c in rest) + "."
    return pick.weighting, why
