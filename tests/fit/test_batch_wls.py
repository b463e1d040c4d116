"""The stacked least-squares kernel: against solve_wls curve by curve, exact arithmetic, blocks.

What is compared:

* ``solve_wls_batch`` on invented stacks (fixed seeds; unused rows holding garbage, inf and
  nan included) against ``calib.fit.wls.solve_wls`` on each problem's used rows: β, (XᵀWX)⁻¹,
  the residuals and Σwr² to 1e-12, the rank, and L Lᵀ = (XᵀWX)⁻¹ for ``covariance_root``.
* ``residuals_exactly`` against exact rational arithmetic (``fractions.Fraction`` on the
  same doubles): within a few units in the last place of the residual itself, where plain
  evaluation is off by many.
* ``fit_batch`` does not depend on how the batch is cut into blocks: the same numbers, bit
  for bit, with blocks of 2 curves as with the default, for every model.
* Problems (a column of zeros, a singular design, curves not active) carry solve_wls's reasons.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

import calib.fit.batch_block as block_module
from calib.fit.batch import fit_batch
from calib.fit.batch_wls import residuals_exactly, solve_wls_batch, solve_wls_columns
from calib.fit.wls import solve_wls
from tests.fit.test_batch import invented_batch

RTOL = 1e-12


def stack(seed: int, K: int = 60, n: int = 15, p: int = 3):
    """Invented polynomial problems, a ragged mask, garbage on the unused rows."""
    rng = np.random.default_rng(seed)
    x = rng.uniform(0.1, 50.0, size=(K, n)) * 10 ** rng.uniform(-1, 1, size=(K, 1))
    X = np.stack([x**j for j in range(p)], axis=2)
    beta = rng.uniform(0.5, 2.0, size=(K, p)) * [10.0, 1.0, -0.01][:p]
    y = np.einsum("knp,kp->kn", X, beta) * (1 + 0.003 * rng.normal(size=(K, n)))
    w = 1.0 / x
    mask = rng.random((K, n)) < 0.8
    mask[:, : p + 2] = True
    garbage = rng.choice([np.nan, np.inf, -1e300, 7.0], size=(K, n))
    X = np.where(mask[:, :, None], X, garbage[:, :, None])
    return X, np.where(mask, y, garbage), np.where(mask, w, garbage), mask


@pytest.mark.parametrize("p", [1, 2, 3])
def test_each_problem_equals_solve_wls(p: int) -> None:
    X, y, w, mask = stack(10 + p, p=p)
    sol = solve_wls_batch(X, y, w, mask=mask)
    assert sol.problems == (None,) * len(X)
    for k in range(len(X)):
        used = mask[k]
        want = solve_wls(X[k, used], y[k, used], w[k, used])
        np.testing.assert_allclose(sol.beta[k], want.beta, rtol=RTOL)
        np.testing.assert_allclose(sol.unscaled_covariance[k], want.unscaled_covariance,
                                   rtol=RTOL)
        L = sol.covariance_root[k]
        np.testing.assert_allclose(L @ L.T, want.unscaled_covariance, rtol=RTOL)
        assert np.all(np.tril(L, -1) == 0)
        scale = np.abs(y[k, used]).max()
        np.testing.assert_allclose(sol.residuals[k, used] / scale, want.residuals / scale,
                                   rtol=RTOL, atol=RTOL)
        assert np.isnan(sol.residuals[k, ~used]).all()
        assert sol.weighted_ss[k] == pytest.approx(want.weighted_ss, rel=1e-11)
        assert sol.rank[k] == want.rank == p


def test_columns_layout_gives_the_same_solution() -> None:
    X, y, w, mask = stack(3, p=2)
    by_stack = solve_wls_batch(X, y, w, mask=mask)
    by_columns = solve_wls_columns([X[:, :, 0].T, X[:, :, 1].T], y.T, w.T, mask=mask.T)
    np.testing.assert_array_equal(by_columns.beta, by_stack.beta)
    np.testing.assert_array_equal(by_columns.residuals, by_stack.residuals)


def test_problems_carry_solve_wls_reasons() -> None:
    X, y, w, mask = stack(5, K=5, p=2)
    X[1, :, 1] = 0.0  # a column of zeros
    X[2, :, 1] = 3.0  # the slope's column equals 3 × the intercept's: singular
    active = np.array([True, True, True, False, True])
    sol = solve_wls_batch(X, y, w, mask=mask, active=active)
    for k in (1, 2):
        with pytest.raises(ValueError) as err:
            solve_wls(X[k, mask[k]], y[k, mask[k]], w[k, mask[k]])
        assert sol.problems[k] == str(err.value)
    assert sol.problems == (None, "the design matrix has a column of zeros or non-finite values",
                            "the design is singular (rank 1 < 2 parameters)", "not solved", None)
    assert sol.rank.tolist() == [2, 0, 1, 0, 2]
    bad = [1, 2, 3]
    assert np.isnan(sol.beta[bad]).all() and np.isnan(sol.unscaled_covariance[bad]).all()
    assert np.isnan(sol.residuals[bad]).all() and np.isnan(sol.weighted_ss[bad]).all()
    alone = solve_wls_batch(X[[0, 4]], y[[0, 4]], w[[0, 4]], mask=mask[[0, 4]])
    np.testing.assert_array_equal(sol.beta[[0, 4]], alone.beta)


def _exact_residual(y: float, columns: list[float], beta: list[float]) -> Fraction:
    return Fraction(y) - sum((Fraction(c) * Fraction(b) for c, b in zip(columns, beta)),
                             Fraction(0))


def test_residuals_are_exact_to_a_few_units_in_their_last_place() -> None:
    # Invented near-fits: responses equal to the fitted values up to 1e-9 relative, so that
    # plain evaluation loses about 7 of the residual's digits.  Exact rational arithmetic
    # (fractions.Fraction) on the same doubles is the reference.
    rng = np.random.default_rng(8)
    K, n = 40, 9
    x = rng.uniform(0.5, 300.0, size=(n, K))
    design = np.stack([x, x * x])
    beta = np.column_stack([rng.uniform(1, 5, K), rng.uniform(0.5, 3, K),
                            -rng.uniform(1e-4, 1e-3, K)])
    plain = beta[:, 0] + design[0] * beta[:, 1] + design[1] * beta[:, 2]
    y = plain * (1 + 1e-9 * rng.normal(size=(n, K)))
    got = residuals_exactly(y, design, beta, intercept=True)
    worst_exact = worst_plain = 0.0
    for i in range(n):
        for k in range(K):
            exact = _exact_residual(y[i, k], [1.0, design[0, i, k], design[1, i, k]],
                                    list(beta[k]))
            ulp = np.spacing(abs(float(exact)))
            worst_exact = max(worst_exact, abs(float(Fraction(got[i, k]) - exact)) / ulp)
            worst_plain = max(worst_plain, abs(float(Fraction(y[i, k] - plain[i, k]) - exact))
                              / ulp)
    assert worst_exact <= 4
    assert worst_plain > 1e4  # what the exact evaluation saves


def test_residuals_without_intercept_are_exact_too() -> None:
    x = np.array([[0.1, 0.7], [1.3, 2.9], [3.3, 0.3]])
    beta = np.array([[1 / 3], [2 / 7]])
    y = x * beta[:, 0] + 1e-13
    got = residuals_exactly(y, x[None], beta)
    for i in range(3):
        for k in range(2):
            exact = _exact_residual(y[i, k], [x[i, k]], [beta[k, 0]])
            assert abs(float(Fraction(got[i, k]) - exact)) <= 2 * np.spacing(float(exact))


@pytest.mark.parametrize(("model", "weighting"), [("linear", "1/x"), ("quadratic", "none"),
                                                  ("origin", "1/x2"), ("mean-rf", "none"),
                                                  ("quadratic", "1/s2")])
def test_blocks_do_not_change_any_number(model: str, weighting: str,
                                         monkeypatch: pytest.MonkeyPatch) -> None:
    # The default blocks (hundreds of curves) against blocks of two curves and of one each.
    x, y, mask = invented_batch(model, 61, curves=150, replicates=2)
    whole = fit_batch(x, y, model=model, weighting=weighting, mask=mask)
    for values in (2 * x.shape[1] * 2, 1):
        monkeypatch.setattr(block_module, "BLOCK_VALUES", values)
        small = fit_batch(x, y, model=model, weighting=weighting, mask=mask)
        _assert_same_bits(small, whole)


def _assert_same_bits(small, whole) -> None:
    for field in ("coefficients", "covariance", "residual_df", "residual_sd", "r_squared",
                  "residuals", "weights", "fitted", "covariance_root"):
        np.testing.assert_array_equal(getattr(small, field), getattr(whole, field),
                                      err_msg=field)
    assert small.problems == whole.problems
