"""solve_wls (a stack of one through the batched engine) against scipy.linalg on the same designs.

``calib.fit.wls.solve_wls`` hands a single problem to ``calib.fit.batch_wls``; the reference
here is ``scipy.linalg.lstsq`` on W½X, W½y and ``scipy.linalg.inv`` of XᵀWX, on the column
shapes calib solves (p = 1, 2, 3) and on a 4-column design (two lines compared).  The solution
is also checked against statsmodels and the NIST StRD data in test_against_statsmodels.py and
test_nist_strd.py.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from scipy import linalg

from calib.fit.batch_wls import solve_wls_batch
from calib.fit.design import design_matrix
from calib.fit.wls import solve_wls
from calib.options import Model


def designs():
    """Designs of the three calibration shapes (p = 1, 2, 3), weights 1/x, responses noisy."""
    rng = np.random.default_rng(20261202)
    for model in (Model.ORIGIN, Model.LINEAR, Model.QUADRATIC):
        for n in (4, 7, 24, 40):
            x = np.sort(rng.uniform(0.05, 10.0 ** rng.uniform(0, 4), n))
            X = design_matrix(x, model)
            y = X @ rng.uniform(0.5, 2.0, X.shape[1]) * (1 + 0.01 * rng.normal(size=n))
            yield model.value, X, y, 1 / x


@pytest.mark.parametrize(("model", "X", "y", "w"), list(designs()))
def test_solution_equals_scipy_linalg(model, X, y, w):
    sol = solve_wls(X, y, w)
    sw = np.sqrt(w)
    beta, *_ = linalg.lstsq(X * sw[:, None], y * sw)
    np.testing.assert_allclose(sol.beta, beta, rtol=1e-9)
    np.testing.assert_allclose(sol.unscaled_covariance, linalg.inv(X.T @ (w[:, None] * X)),
                               rtol=1e-7)
    residuals = y - X @ beta
    np.testing.assert_allclose(sol.weighted_ss, np.sum(w * residuals**2), rtol=1e-7)
    assert sol.rank == X.shape[1]


def test_is_the_batched_engine_on_a_stack_of_one():
    # Not merely close: the same arithmetic, so the same bits as in any stack.
    _, X, y, w = next(designs())
    rng = np.random.default_rng(7)
    stack_X = np.stack([X, X * 3.0, X + rng.uniform(size=X.shape)])
    stack_y = np.stack([y, y * 2.0, y + 1.0])
    stack_w = np.stack([w, w, w * 5.0])
    batch = solve_wls_batch(stack_X, stack_y, stack_w, mask=np.ones(stack_y.shape, dtype=bool))
    sol = solve_wls(X, y, w)
    assert sol.beta.tobytes() == batch.beta[0].tobytes()
    assert sol.unscaled_covariance.tobytes() == batch.unscaled_covariance[0].tobytes()
    assert sol.residuals.tobytes() == batch.residuals[0].tobytes()


def test_singular_design_is_reported():
    X = np.column_stack([np.ones(4), np.full(4, 2.0)])
    with pytest.raises(ValueError, match=re.escape("the design is singular (rank 1 < 2 parameters)")):
        solve_wls(X, np.array([1.0, 2.0, 3.0, 5.0]))


def test_solver_rejects_responses_that_are_not_finite():
    X = np.column_stack([np.ones(3), [1.0, 2.0, 3.0]])
    with pytest.raises(ValueError, match=r"^the responses y must be finite numbers$"):
        solve_wls(X, np.array([1.0, np.nan, 3.0]))


def test_straight_line_through_three_points_by_hand():
    # y = 1 + 2x exactly: β = (1, 2), no residual.
    X = np.column_stack([np.ones(3), [1.0, 2.0, 3.0]])
    sol = solve_wls(X, np.array([3.0, 5.0, 7.0]), np.array([1.0, 0.5, 2.0]))
    np.testing.assert_allclose(sol.beta, [1.0, 2.0], rtol=1e-14)
    assert sol.rank == 2 and sol.weighted_ss < 1e-28
