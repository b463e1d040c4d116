"""Levene and Brown–Forsythe on uneven designs against scipy.stats.levene.

The test groups the points of each level itself, so it is checked on the layouts that
could trip the grouping: levels in shuffled order, unequal replicate counts (2 to 12,
so above and below 8), levels with a single replicate (left out) and weights constant
within a level (scipy then takes √w·y).  scipy.stats.levene on the same groups is the
reference throughout.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from calib.fit.variance import variance_levels


def uneven(seed: int):
    rng = np.random.default_rng(seed)
    levels = np.array([0.5, 1.0, 2.5, 5.0, 10.0, 25.0, 50.0])
    counts = np.array([2, 12, 3, 8, 1, 5, 9])
    x = np.repeat(levels, counts)
    y = 0.05 + 1.7 * x * (1 + rng.normal(0.0, 0.04, x.size))
    order = rng.permutation(x.size)
    return x[order], y[order]


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("center", ["median", "mean"])
def test_uneven_shuffled_levels_match_scipy(seed, center):
    x, y = uneven(seed)
    test = variance_levels(x, y, center=center)
    replicated = [c for c in np.unique(x) if np.sum(x == c) >= 2]
    ref = stats.levene(*(y[x == c] for c in replicated), center=center)
    assert test.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert test.p_value == pytest.approx(ref.pvalue, rel=1e-10)
    assert test.levels == tuple(replicated) and test.left_out == (10.0,)
    assert (test.df_num, test.df_den) == (5, sum(int(np.sum(x == c)) for c in replicated) - 6)


@pytest.mark.parametrize("power", [1, 2])
def test_uneven_weighted_levels_match_scipy_on_weighted_responses(power):
    x, y = uneven(4)
    w = 1 / x**power
    w = w / w.mean()
    test = variance_levels(x, y, weights=w)
    replicated = [c for c in np.unique(x) if np.sum(x == c) >= 2]
    ref = stats.levene(*(np.sqrt(w[x == c][0]) * y[x == c] for c in replicated),
                       center="median")
    assert test.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert test.p_value == pytest.approx(ref.pvalue, rel=1e-10)


def test_even_replicate_counts_take_the_mean_of_the_middle_two():
    # Medians 1.15 and 5.3 (the middle two averaged); scipy.stats.levene gives the reference.
    x = [1, 1, 1, 1, 5, 5, 5, 5]
    y = [1.3, 1.0, 1.2, 1.1, 5.0, 5.6, 5.2, 5.4]
    test = variance_levels(x, y)
    ref = stats.levene([1.3, 1.0, 1.2, 1.1], [5.0, 5.6, 5.2, 5.4], center="median")
    assert test.statistic == pytest.approx(ref.statistic, rel=1e-12)
