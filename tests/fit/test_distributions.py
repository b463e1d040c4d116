"""The fast distribution functions against scipy.stats on grids of df, x and probabilities.

scipy.stats (the installed version) is the reference throughout: the module calls the same
scipy.special routines, so agreement is expected to the last digit; the tests allow 1e-13
relative and require nan and ±inf in the same places.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from calib.fit import distributions as dist

RTOL = 1e-13

# Degrees of freedom: the small whole numbers calib meets, fractional ones, large ones,
# and invalid ones (0, negative, nan) that must give nan as scipy.stats gives it.
DFS = [1, 2, 3, 4, 5, 7, 10, 16, 30, 100, 1e4, 1e7, 0.5, 2.5, 0, -1, math.nan]
# Probabilities, with extreme tails, the ends and values outside [0, 1].
PROBS = [1e-300, 1e-100, 1e-20, 1e-12, 1e-6, 0.000625, 0.005, 0.025, 0.05, 0.1, 0.5, 0.9,
         0.95, 0.975, 0.99, 0.999999, 1 - 1e-12, 0.0, 1.0, -0.1, 1.5, math.nan]
# Points of the t and normal scales, far tails and the infinities included.
XS = [-1e6, -40.0, -8.0, -2.0, -0.5, 0.0, 0.5, 1.0, 2.0, 2.5706, 8.0, 40.0, 1e3, 1e6,
      math.inf, -math.inf, math.nan]
# F and χ² statistics (negative and 0 below the support).
POSITIVE_XS = [-1.0, 0.0, 1e-12, 1e-3, 0.1, 0.5, 1.0, 2.0, 4.1, 10.0, 100.0, 1e4, 1e8,
               math.inf, math.nan]


def assert_same(ours, reference):
    ours, reference = np.asarray(ours, dtype=float), np.asarray(reference, dtype=float)
    assert ours.shape == reference.shape
    np.testing.assert_array_equal(np.isnan(ours), np.isnan(reference))
    np.testing.assert_array_equal(np.isposinf(ours), np.isposinf(reference))
    np.testing.assert_array_equal(np.isneginf(ours), np.isneginf(reference))
    finite = np.isfinite(reference)
    np.testing.assert_allclose(ours[finite], reference[finite], rtol=RTOL, atol=0)


def grid(*axes):
    """The cartesian product of ``axes`` as broadcast-ready columns."""
    return [np.array(column, dtype=float) for column in zip(*itertools.product(*axes))]


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.t_sf, stats.t.sf),
])
def test_t_probabilities_match_scipy(ours, theirs):
    x, df = grid(XS, DFS)
    assert_same(ours(x, df), theirs(x, df))


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.t_ppf, stats.t.ppf), (dist.t_isf, stats.t.isf),
])
def test_t_quantiles_match_scipy(ours, theirs):
    q, df = grid(PROBS, DFS)
    assert_same(ours(q, df), theirs(q, df))


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.f_sf, stats.f.sf),
])
def test_f_probabilities_match_scipy(ours, theirs):
    x, dfn, dfd = grid(POSITIVE_XS, DFS, DFS)
    assert_same(ours(x, dfn, dfd), theirs(x, dfn, dfd))


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.f_ppf, stats.f.ppf), (dist.f_isf, stats.f.isf),
])
def test_f_quantiles_match_scipy(ours, theirs):
    q, dfn, dfd = grid(PROBS, DFS, DFS)
    assert_same(ours(q, dfn, dfd), theirs(q, dfn, dfd))


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.norm_cdf, stats.norm.cdf),
])
def test_normal_probabilities_match_scipy(ours, theirs):
    assert_same(ours(np.array(XS)), theirs(np.array(XS)))


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.norm_ppf, stats.norm.ppf),
])
def test_normal_quantiles_match_scipy(ours, theirs):
    assert_same(ours(np.array(PROBS)), theirs(np.array(PROBS)))


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.chi2_sf, stats.chi2.sf),
])
def test_chi2_probabilities_match_scipy(ours, theirs):
    x, df = grid(POSITIVE_XS, DFS)
    assert_same(ours(x, df), theirs(x, df))


@pytest.mark.parametrize(("ours", "theirs"), [
    (dist.chi2_isf, stats.chi2.isf),
])
def test_chi2_quantiles_match_scipy(ours, theirs):
    q, df = grid(PROBS, DFS)
    assert_same(ours(q, df), theirs(q, df))


def test_noncentral_t_matches_scipy():
    x, df, nc = grid([-3.0, 0.0, 1.0, 1.8595, 4.0, 10.0, math.inf, math.nan],
                     [1, 2, 5, 10, 30, 0, math.nan], [0.0, 0.5, 2.0, 3.7, 8.0, -1.0, math.nan])
    assert_same(dist.nct_cdf(x, df, nc), stats.nct.cdf(x, df, nc))


@pytest.mark.parametrize("df", [1, 3, 6, 22, 1e3])
@pytest.mark.parametrize("q", [1e-200, 1e-15, 1e-8, 0.00125, 0.3, 0.5])
def test_scalar_arguments_give_floats_equal_to_the_array_path(df, q):
    # The one-value path must not differ from the array path (nor from scipy.stats).
    for ours, theirs in ((dist.t_isf, stats.t.isf), (dist.t_ppf, stats.t.ppf)):
        value = ours(q, df)
        assert type(value) is float
        assert value == ours(np.array([q]), np.array([df]))[0]
        assert value == pytest.approx(float(theirs(q, df)), rel=RTOL)
    x = dist.t_isf(q, df)
    assert dist.t_sf(x, df) == pytest.approx(float(stats.t.sf(x, df)), rel=RTOL)
    assert dist.f_sf(x * x, 1, df) == pytest.approx(float(stats.f.sf(x * x, 1, df)), rel=RTOL)


def test_scalar_edges_follow_scipy():
    # Each edge rule of scipy.stats' rv_continuous on one value at a time.
    cases = [
        (dist.t_sf, (math.inf, 4), stats.t.sf), (dist.t_sf, (-math.inf, 4), stats.t.sf),
        (dist.t_sf, (1.0, 0), stats.t.sf), (dist.t_sf, (math.nan, 4), stats.t.sf),
        (dist.t_isf, (0.0, 4), stats.t.isf), (dist.t_isf, (1.0, 4), stats.t.isf),
        (dist.t_ppf, (1.2, 4), stats.t.ppf), (dist.f_sf, (-2.0, 1, 5), stats.f.sf),
        (dist.f_sf, (0.0, 1, 5), stats.f.sf), (dist.f_ppf, (0.0, 2, 5), stats.f.ppf),
        (dist.f_isf, (0.0, 2, 5), stats.f.isf), (dist.f_isf, (1e-30, 2, 5), stats.f.isf),
        (dist.f_ppf, (0.5, 2, -1), stats.f.ppf), (dist.chi2_sf, (-1.0, 3), stats.chi2.sf),
        (dist.norm_cdf, (-math.inf,), stats.norm.cdf), (dist.norm_ppf, (1.0,), stats.norm.ppf),
    ]
    for ours, args, theirs in cases:
        assert_same(ours(*args), theirs(*args))


def test_published_table_values():
    # Handbook tables (from memory): t(0.975; 10) = 2.228, F(0.99; 1, 10) = 10.04,
    # χ²(0.95; 10) = 18.307, z(0.975) = 1.960.
    assert round(dist.t_ppf(0.975, 10), 3) == 2.228
    assert round(dist.f_ppf(0.99, 1, 10), 2) == 10.04
    assert round(dist.chi2_isf(0.05, 10), 3) == 18.307
    assert round(dist.norm_ppf(0.975), 3) == 1.96


@settings(max_examples=200, deadline=None)
@given(q=st.floats(min_value=1e-250, max_value=1 - 1e-12),
       df=st.floats(min_value=0.2, max_value=1e6), dfd=st.integers(min_value=1, max_value=500))
def test_random_arguments_match_scipy(q, df, dfd):
    assert_same(dist.t_isf(q, df), stats.t.isf(q, df))
    assert_same(dist.t_sf(dist.t_isf(q, df), df), stats.t.sf(stats.t.isf(q, df), df))
    assert_same(dist.f_ppf(q, df, dfd), stats.f.ppf(q, df, dfd))
    assert_same(dist.f_sf(df, dfd, df), stats.f.sf(df, dfd, df))
