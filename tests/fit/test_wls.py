"""The least-squares solver's direct LAPACK calls against scipy.linalg on the same matrices.

``calib.fit.wls`` calls dgeqrf, dorgqr and dtrtrs itself, with the arguments
``scipy.linalg.qr(mode="economic")`` and ``scipy.linalg.solve_triangular`` pass them, so
that every downstream figure stays what those functions give (scipy.linalg is the reference;
the factors must agree to the last digit).  The solution itself is checked against
statsmodels and the NIST StRD data in test_against_statsmodels.py and test_nist_strd.py.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from scipy import linalg

from calib.fit.design import design_matrix
from calib.fit.wls import _economic_qr, _solve_upper, solve_wls
from calib.options import Model


def designs():
    """Column-scaled weighted designs of the three shapes calib solves (p = 1, 2, 3)."""
    rng = np.random.default_rng(20261202)
    for model in (Model.ORIGIN, Model.LINEAR, Model.QUADRATIC):
        for n in (4, 7, 24, 40):
            x = np.sort(rng.uniform(0.05, 10.0 ** rng.uniform(0, 4), n))
            w = 1 / x
            a = design_matrix(x, model) * np.sqrt(w / w.mean())[:, None]
            yield model.value, a / np.linalg.norm(a, axis=0), rng.normal(size=n)


@pytest.mark.parametrize(("model", "a", "b"), list(designs()))
def test_factors_and_solves_equal_scipy_linalg(model, a, b):
    q, r = _economic_qr(a)
    q_ref, r_ref = linalg.qr(a, mode="economic")
    np.testing.assert_array_equal(q, q_ref)
    np.testing.assert_array_equal(r, r_ref)
    rhs = q.T @ b
    np.testing.assert_array_equal(_solve_upper(r, rhs), linalg.solve_triangular(r, rhs))
    eye = np.eye(r.shape[0])
    np.testing.assert_array_equal(_solve_upper(r, eye), linalg.solve_triangular(r, eye))


def test_solve_upper_takes_fortran_and_c_ordered_factors():
    r = np.array([[2.0, 1.0, -1.0], [0.0, 4.0, 0.5], [0.0, 0.0, 0.25]])
    b = np.array([1.0, 2.0, 3.0])
    expected = linalg.solve_triangular(r, b)
    np.testing.assert_array_equal(_solve_upper(np.ascontiguousarray(r), b), expected)
    np.testing.assert_array_equal(_solve_upper(np.asfortranarray(r), b),
                                  linalg.solve_triangular(np.asfortranarray(r), b))
    np.testing.assert_allclose(r @ _solve_upper(r, b), b, rtol=1e-15)


def test_singular_triangle_is_reported():
    r = np.array([[1.0, 2.0], [0.0, 0.0]])
    with pytest.raises(linalg.LinAlgError,
                       match=re.escape("singular matrix: resolution failed at diagonal 1")):
        _solve_upper(r, np.array([1.0, 1.0]))


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
