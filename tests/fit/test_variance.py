"""Variance diagnostics: the ISO 8466-1 end-level F-test, Levene / Brown–Forsythe, weighting advice.

Outside references: scipy.stats.f (critical values and tail probabilities), scipy.stats.levene
(center="mean" is Levene's test, center="median" Brown–Forsythe's) on the same groups, the
figure F(0.99; 9, 9) ≈ 5.35 quoted for the ISO 8466-1 test with 10 replicates (SPEC §10, any F
table), and small examples worked by hand.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from calib.fit.variance import variance_ends, variance_levels


def replicated(levels, n, *, cv=0.0, sd=0.0, seed=5, slope=2.0):
    """Invented replicate responses: SD = sd + cv·mean at each level."""
    rng = np.random.default_rng(seed)
    x = np.repeat(np.asarray(levels, dtype=float), n)
    mean = 0.1 + slope * x
    return x, mean + rng.normal(0.0, sd + cv * mean)


def test_ten_replicates_use_the_published_critical_value() -> None:
    # ISO 8466-1 with 10 replicates at each end: F(0.99; 9, 9) ≈ 5.35 (SPEC §10, F table).
    x, y = replicated([1.0, 10.0], 10, sd=0.05)
    test = variance_ends(x, y)
    assert (test.n_low, test.n_high, test.df_num, test.df_den) == (10, 10, 9, 9)
    assert round(test.critical, 2) == 5.35
    s2_lo, s2_hi = np.var(y[:10], ddof=1), np.var(y[10:], ddof=1)
    assert test.statistic == pytest.approx(max(s2_lo, s2_hi) / min(s2_lo, s2_hi), rel=1e-12)
    assert test.homogeneous
    assert test.p_value == pytest.approx(stats.f.sf(test.statistic, 9, 9), rel=1e-12)


def test_larger_variance_goes_on_top_with_its_degrees_of_freedom() -> None:
    # By hand: lowest level 1.0, 1.2, 1.1 (s² = 0.01), highest 9.0, 9.6, 9.3, 9.9 (s² = 0.15):
    # PG = 15 on (3, 2) df, F(0.99; 3, 2) = 99.17 (scipy), so not significant at 1 %.
    test = variance_ends([1, 1, 1, 9, 9, 9, 9], [1.0, 1.2, 1.1, 9.0, 9.6, 9.3, 9.9])
    assert test.var_low == pytest.approx(0.01, rel=1e-12)
    assert test.var_high == pytest.approx(0.15, rel=1e-12)
    assert test.statistic == pytest.approx(15.0, rel=1e-12)
    assert (test.df_num, test.df_den) == (3, 2) and test.larger_at_high
    assert test.critical == pytest.approx(stats.f.ppf(0.99, 3, 2), rel=1e-12)
    # The lowest level is the noisier one here: its variance goes on top.
    flipped = variance_ends([1, 1, 1, 1, 9, 9, 9], [1.0, 1.6, 1.3, 1.9, 9.0, 9.2, 9.1])
    assert not flipped.larger_at_high and (flipped.df_num, flipped.df_den) == (3, 2)


def test_a_clearly_growing_variance_is_not_homogeneous() -> None:
    x, y = replicated([0.5, 10.0], 10, cv=0.05, sd=0.001)
    test = variance_ends(x, y)
    assert not test.homogeneous and test.statistic > test.critical and test.p_value < 0.01


def test_weighted_variances_are_scaled_by_the_level_weight() -> None:
    # With 1/x² weights the test compares s²/x²: constant relative spread passes.
    x, y = replicated([0.5, 10.0], 10, cv=0.05)
    w = 1 / x**2
    test = variance_ends(x, y, weights=w / w.mean())
    lo = np.var(y[x == 0.5], ddof=1) / 0.25
    hi = np.var(y[x == 10.0], ddof=1) / 100
    assert test.statistic == pytest.approx(max(lo, hi) / min(lo, hi), rel=1e-12)
    assert test.homogeneous


@pytest.mark.parametrize(
    ("x", "y", "reason"),
    [
        ([1, 2, 2], [1.0, 2.0, 2.1],
         ("the lowest level (1) has 1 replicate; the test needs at least 2 at each end "
         "(ISO 8466-1 uses 10)")),
        ([1, 1, 2, 2], [1.0, 1.0, 2.0, 2.1],
         "the replicates at the lowest level (1) are identical, so their variance is zero"),
        ([3, 3, 3], [1.0, 1.1, 1.2], "the fit has a single concentration level"),
    ],
)
def test_variance_ends_not_made_says_why(x, y, reason) -> None:
    test = variance_ends(x, y)
    assert test.reason == reason
    assert math.isnan(test.statistic) and not test.homogeneous and math.isnan(test.p_value)


@pytest.mark.parametrize("center", ["mean", "median"])
def test_levene_and_brown_forsythe_against_scipy(center: str) -> None:
    x, y = replicated([1, 2, 5, 10, 20, 50], [3, 4, 3, 5, 3, 4], cv=0.03, sd=0.02)
    test = variance_levels(x, y, center=center)
    groups = [y[x == c] for c in np.unique(x)]
    ref = stats.levene(*groups, center=center)
    assert test.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert test.p_value == pytest.approx(ref.pvalue, rel=1e-10)
    assert (test.df_num, test.df_den) == (5, x.size - 6)


def replicated_uneven():
    x = np.repeat([1.0, 2.0, 5.0, 10.0, 20.0, 50.0], [3, 4, 3, 5, 3, 4])
    rng = np.random.default_rng(8)
    return x, 0.1 + 2.0 * x + rng.normal(0.0, 0.02 + 0.03 * (0.1 + 2.0 * x))


def test_level_weights_scale_the_groups_like_scipy_on_weighted_responses() -> None:
    # Weights constant within a level (1/x, 1/x², 1/s²): the test equals scipy's on √w·y.
    x, y = replicated_uneven()
    for w in (1 / x, 1 / x**2):
        test = variance_levels(x, y, weights=w / w.mean())
        groups = [np.sqrt(w[x == c][0] / w.mean()) * y[x == c] for c in np.unique(x)]
        ref = stats.levene(*groups, center="median")
        assert test.p_value == pytest.approx(ref.pvalue, rel=1e-10)


def test_levels_with_one_replicate_are_left_out() -> None:
    x = np.array([1, 1, 1, 2, 5, 5, 5, 9])
    y = np.array([1.0, 1.1, 1.3, 2.0, 5.0, 5.6, 6.2, 9.0])
    test = variance_levels(x, y)
    assert test.levels == (1.0, 5.0) and test.left_out == (2.0, 9.0)
    ref = stats.levene([1.0, 1.1, 1.3], [5.0, 5.6, 6.2], center="median")
    assert test.statistic == pytest.approx(ref.statistic, rel=1e-12)


@pytest.mark.parametrize(
    ("x", "y", "reason"),
    [
        ([1, 1, 2], [1.0, 1.1, 2.0], "1 level with replicates; the test needs at least 2"),
        ([1, 1, 2, 2], [1.0, 1.1, 2.0, 2.3],
         ("with 2 replicates at every level (or identical deviations) the deviations cannot be "
         "compared; the test needs a level with 3 or more")),
    ],
)
def test_variance_levels_not_made_says_why(x, y, reason) -> None:
    test = variance_levels(x, y)
    assert test.reason == reason and math.isnan(test.p_value) and not test.rejects()


def test_wrong_center_is_refused() -> None:
    with pytest.raises(ValueError, match=r"^center must be one of median, mean; got 'trimmed'$"):
        variance_levels([1, 1, 2, 2], [1, 2, 3, 4], center="trimmed")
