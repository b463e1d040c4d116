"""Back-calculated concentrations: reading a response back through the fitted curve."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from calib.fit.curve import CurveFit, fit_curve

DATA = Path(__file__).resolve().parent.parent / "data" / "nist_strd"


def exact_quadratic(a: float, b: float, c: float, x: np.ndarray) -> CurveFit:
    """Fit a quadratic to points lying exactly on y = a + b·x + c·x²."""
    x = np.asarray(x, dtype=float)
    return fit_curve(x, a + b * x + c * x**2, model="quadratic")


GRID = np.array([1.0, 1.5, 2.0, 5.0, 10.0, 50.0, 99.0, 100.0])
X_LEVELS = np.repeat([1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0], 2)
NOISE = np.tile([0.02, -0.03], 7) * X_LEVELS  # invented, fixed, proportional to x


@pytest.mark.parametrize("weighting", ["none", "1/x", "1/x2"])
@pytest.mark.parametrize("model", ["linear", "origin"])
def test_straight_lines_invert_predict(model: str, weighting: str) -> None:
    fit = fit_curve(X_LEVELS, 0.4 + 1.7 * X_LEVELS + NOISE, model=model, weighting=weighting)
    np.testing.assert_allclose(fit.back_calculate(fit.predict(GRID)), GRID, rtol=1e-14)
    # The inverse written out from the coefficients.
    a = fit.coefficients.get("intercept", 0.0)
    b = fit.coefficients["slope"]
    responses = np.array([0.0, 3.3, 170.0])
    np.testing.assert_allclose(fit.back_calculate(responses), (responses - a) / b, rtol=1e-15)


def test_line_by_hand() -> None:
    # Unweighted line through x = 1..5, y = 2.1, 3.9, 6.1, 8.0, 9.9 (invented, derived by hand):
    # x̄ = 3, ȳ = 6, Sxx = 10, Sxy = 19.7, so b = 1.97 and a = ȳ − b·x̄ = 0.09.
    # The line passes through the centroid, so the response 6 reads back as exactly 3;
    # the response 10 reads back as (10 − 0.09)/1.97 = 9.91/1.97 = 5.030456852791878….
    fit = fit_curve([1, 2, 3, 4, 5], [2.1, 3.9, 6.1, 8.0, 9.9])
    np.testing.assert_allclose(fit.back_calculate([6.0, 10.0]), [3.0, 9.91 / 1.97], rtol=1e-13)


def test_scalar_response_gives_one_value() -> None:
    fit = fit_curve([1, 2, 3, 4, 5], [3.0, 5.0, 7.0, 9.0, 11.0])
    out = fit.back_calculate(7.0)
    assert out.shape == (1,)
    assert out[0] == pytest.approx(3.0, rel=1e-14)


def test_quadratic_upward_by_hand() -> None:
    # y = 1 + 2x + 0.5x² calibrated on x = 1..5 (c > 0, invented).  Response 11.5:
    # 0.5x² + 2x + 1 − 11.5 = 0  ⇔  x² + 4x − 21 = 0  ⇔  (x + 7)(x − 3) = 0,
    # roots 3 (inside [1, 5]) and −7 (outside): 3 is the answer.
    # Response 4.5: x² + 4x − 7 = 0, x = −2 ± √11, inside root √11 − 2 = 1.31662479….
    fit = exact_quadratic(1.0, 2.0, 0.5, np.arange(1.0, 6.0))
    np.testing.assert_allclose(
        fit.back_calculate([11.5, 4.5]), [3.0, math.sqrt(11) - 2], rtol=1e-12
    )


def test_quadratic_downward_by_hand() -> None:
    # y = 2 + 10x − 0.5x² calibrated on x = 1..8 (c < 0, a detector saturating; invented).
    # Response 34: −0.5x² + 10x − 32 = 0  ⇔  x² − 20x + 64 = 0  ⇔  (x − 4)(x − 16) = 0,
    # roots 4 (inside [1, 8]) and 16 (outside, past the maximum at x = 10): 4 is the answer.
    fit = exact_quadratic(2.0, 10.0, -0.5, np.arange(1.0, 9.0))
    assert fit.coefficients["quadratic"] < 0
    np.testing.assert_allclose(fit.back_calculate([34.0]), [4.0], rtol=1e-12)


@pytest.mark.parametrize(("a", "b", "c"), [(1.0, 2.0, 0.5), (2.0, 10.0, -0.5)])
def test_quadratic_inverts_predict_inside_range(a: float, b: float, c: float) -> None:
    x = np.arange(1.0, 9.0)
    fit = exact_quadratic(a, b, c, x)
    grid = np.linspace(1.0, 8.0, 29)
    np.testing.assert_allclose(fit.back_calculate(fit.predict(grid)), grid, rtol=1e-12)


def test_quadratic_response_never_reached_is_nan() -> None:
    # Upward: y = 1 + 2x + 0.5x² has its minimum −1 at x = −2; a response of −5 is never reached.
    up = exact_quadratic(1.0, 2.0, 0.5, np.arange(1.0, 6.0))
    # Downward: y = 2 + 10x − 0.5x² has its maximum 52 at x = 10; 60 is never reached.
    down = exact_quadratic(2.0, 10.0, -0.5, np.arange(1.0, 9.0))
    assert np.isnan(up.back_calculate([-5.0])).all()
    assert np.isnan(down.back_calculate([60.0])).all()
    # Mixed input: only the unreachable entry is nan.
    out = down.back_calculate([34.0, 60.0])
    assert out[0] == pytest.approx(4.0, rel=1e-12)
    assert np.isnan(out[1])


def test_quadratic_outside_range_takes_nearer_root() -> None:
    # y = 2 + 10x − 0.5x² on x = 1..8; response 51.5 = y(9): x² − 20x + 99 = 0 ⇔
    # (x − 9)(x − 11) = 0.  Neither root is inside [1, 8]; 9 is the nearer one.
    fit = exact_quadratic(2.0, 10.0, -0.5, np.arange(1.0, 9.0))
    np.testing.assert_allclose(fit.back_calculate([51.5]), [9.0], rtol=1e-12)


def test_quadratic_both_roots_inside_takes_nearer_middle() -> None:
    # Calibrated past the maximum, x = 1..16: response 34 has roots 4 and 16 (see above), both
    # in range.  The documented rule takes the one nearer the middle of the range (8.5): 4.
    fit = exact_quadratic(2.0, 10.0, -0.5, np.arange(1.0, 17.0))
    np.testing.assert_allclose(fit.back_calculate([34.0]), [4.0], rtol=1e-12)


def test_nearly_linear_quadratic_keeps_digits() -> None:
    # With a tiny curvature the textbook root formula (−b + √(b² − 4c(a − y)))/(2c) loses most
    # digits to cancellation; the back-calculation must still invert the curve.
    x = np.array([1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0])
    fit = exact_quadratic(0.5, 3.0, 1e-9, x)
    np.testing.assert_allclose(fit.back_calculate(fit.predict(x)), x, rtol=1e-11)


def test_pontius_standards_read_back() -> None:
    # NIST StRD Pontius (tests/data/nist_strd, public-domain data): a real quadratic with
    # c < 0 whose curvature is small against the linear term.  Each fitted response must read
    # back as its load, and agree with the in-range root found by numpy.roots.
    data = np.loadtxt(DATA / "pontius.csv", delimiter=",", skiprows=1)
    fit = fit_curve(data[:, 0], data[:, 1], model="quadratic")
    assert fit.coefficients["quadratic"] < 0
    np.testing.assert_allclose(fit.back_calculate(fit.fitted), fit.x, rtol=1e-12)
    a, b, c = fit.coefficients.values()
    for response in (0.5, 1.234, 2.0):
        roots = np.roots([c, b, a - response]).real
        inside = roots[(roots >= fit.x.min()) & (roots <= fit.x.max())]
        assert inside.size == 1
        assert fit.back_calculate([response])[0] == pytest.approx(inside[0], rel=1e-10)
