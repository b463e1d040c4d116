"""Wrong arguments and unusable data raise ValueError with a message naming what is wrong."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from calib.fit.curve import fit_curve
from calib.fit.wls import solve_wls
from calib.options import Model, Weighting

X = [1.0, 2.0, 3.0, 4.0, 5.0]
Y = [2.1, 3.9, 6.1, 8.0, 9.9]


@pytest.mark.parametrize(
    ("option", "value", "message"),
    [
        ("model", "cubic", "model must be one of linear, origin, quadratic, mean-rf; got 'cubic'"),
        ("model", "Linear",
         "model must be one of linear, origin, quadratic, mean-rf; got 'Linear'"),
        ("weighting", "1/z",
         "weighting must be one of none, 1/x, 1/x2, 1/y, 1/y2, 1/s2; got '1/z'"),
        ("weighting", "1/x^2",
         "weighting must be one of none, 1/x, 1/x2, 1/y, 1/y2, 1/s2; got '1/x^2'"),
        ("confidence", 1.5, "confidence must be a number from 0.5 to below 1; got 1.5"),
        ("confidence", 1, "confidence must be a number from 0.5 to below 1; got 1"),
        ("confidence", 0.05, "confidence must be a number from 0.5 to below 1; got 0.05"),
        ("confidence", "95%", "confidence must be a number from 0.5 to below 1; got '95%'"),
    ],
)
def test_wrong_option(option: str, value: object, message: str) -> None:
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit_curve(X, Y, **{option: value})


def test_enum_members_are_accepted() -> None:
    fit = fit_curve(X, Y, model=Model.ORIGIN, weighting=Weighting.INV_X2)
    assert fit.model is Model.ORIGIN
    assert fit.weighting is Weighting.INV_X2


def test_wrong_confidence_on_the_result() -> None:
    fit = fit_curve(X, Y)
    message = "confidence must be a number from 0.5 to below 1; got 0.3"
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit.confidence_interval("slope", 0.3)
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit.t_critical(0.3)
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit.coefficient_table(0.3)


@pytest.mark.parametrize(
    ("model", "name", "message"),
    [
        (
            "linear",
            "quadratic",
            "coefficient must be one of intercept, slope for model linear; got 'quadratic'",
        ),
        (
            "origin",
            "intercept",
            "coefficient must be one of slope for model origin; got 'intercept'",
        ),
        (
            "quadratic",
            "b",
            "coefficient must be one of intercept, slope, quadratic for model quadratic; got 'b'",
        ),
    ],
)
def test_unknown_coefficient(model: str, name: str, message: str) -> None:
    fit = fit_curve(X, Y, model=model)
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit.std_error(name)
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit.confidence_interval(name)


@pytest.mark.parametrize(
    ("model", "n", "message"),
    [
        ("linear", 2, "model linear needs at least 3 points; got 2"),
        ("origin", 1, "model origin needs at least 2 points; got 1"),
        ("quadratic", 3, "model quadratic needs at least 4 points; got 3"),
        ("linear", 0, "model linear needs at least 3 points; got 0"),
    ],
)
def test_too_few_points(model: str, n: int, message: str) -> None:
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit_curve(X[:n], Y[:n], model=model)


def test_smallest_allowed_fit_has_one_degree_of_freedom() -> None:
    assert fit_curve(X[:3], Y[:3]).residual_df == 1
    assert fit_curve(X[:2], Y[:2], model="origin").residual_df == 1
    assert fit_curve(X[:4], Y[:4], model="quadratic").residual_df == 1


@pytest.mark.parametrize("level", [0.7, 3.0, 250.0, 1e-6])
def test_all_x_equal_is_singular(level: float) -> None:
    x = np.full(6, level)
    y = np.array([1.0, 1.1, 0.9, 1.05, 0.95, 1.0])
    with pytest.raises(
        ValueError, match=re.escape("the design is singular (rank 1 < 2 parameters)")
    ):
        fit_curve(x, y)
    with pytest.raises(
        ValueError, match=re.escape("the design is singular (rank 1 < 3 parameters)")
    ):
        fit_curve(x, y, model="quadratic")


def test_quadratic_on_two_levels_is_singular() -> None:
    x = np.repeat([1.0, 5.0], 3)
    y = np.array([2.0, 2.1, 1.9, 10.0, 10.2, 9.8])
    with pytest.raises(
        ValueError, match=re.escape("the design is singular (rank 2 < 3 parameters)")
    ):
        fit_curve(x, y, model="quadratic")


def test_origin_with_all_x_zero() -> None:
    message = "the design matrix has a column of zeros or non-finite values"
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit_curve([0.0, 0.0, 0.0], [0.1, 0.2, 0.0], model="origin")


@pytest.mark.parametrize(
    ("x", "y"),
    [
        ([1.0, 2.0, math.nan, 4.0], [1.0, 2.0, 3.0, 4.0]),
        ([1.0, 2.0, 3.0, 4.0], [1.0, math.inf, 3.0, 4.0]),
        ([1.0, -math.inf, 3.0, 4.0], [1.0, 2.0, 3.0, 4.0]),
        ([1.0, 2.0, 3.0, 4.0], [1.0, 2.0, 3.0, -math.nan]),
    ],
)
def test_non_finite_input(x: list[float], y: list[float]) -> None:
    with pytest.raises(ValueError, match="^x and y must be finite numbers$"):
        fit_curve(x, y)


def test_lengths_differ() -> None:
    with pytest.raises(ValueError, match="^x and y must have the same length; got 5 and 4$"):
        fit_curve(X, Y[:4])


@pytest.mark.parametrize("weighting", ["1/x", "1/x2"])
@pytest.mark.parametrize("bad", [0.0, -2.0])
def test_weighting_dividing_by_x_refuses_x_not_positive(weighting: str, bad: float) -> None:
    x = [bad, 1.0, 2.0, 4.0, 8.0]
    message = f"weighting {weighting} needs positive concentrations"
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        fit_curve(x, Y, weighting=weighting)
    # The unweighted fit uses a standard at concentration 0 as an ordinary point.
    assert fit_curve(x, Y).n_points == 5


def test_solver_rejects_singular_design() -> None:
    X_design = np.column_stack([np.ones(4), [1.0, 2.0, 3.0, 4.0], [2.0, 4.0, 6.0, 8.0]])
    with pytest.raises(
        ValueError, match=re.escape("the design is singular (rank 2 < 3 parameters)")
    ):
        solve_wls(X_design, np.array([1.0, 2.0, 3.0, 5.0]))
