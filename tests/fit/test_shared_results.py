"""Figures worked out once per fit and shared between the checks that need them.

Sharing must not change a figure: each shared result is compared with the same figure
worked out on a fresh copy of the fit (by the code path the check used before sharing).
"""

from __future__ import annotations

import dataclasses
import gc
import weakref

import numpy as np
import pytest

from calib.fit import linearity
from calib.fit.curve import fit_curve, once_per_fit, response_sums, weighted_ss
from calib.fit.linearity import mandel_test, quadratic_term

X = [1, 1, 1, 2, 2, 2, 4, 4, 4, 8, 8, 8]
Y = [2.1, 1.9, 2.0, 4.2, 3.9, 4.1, 7.8, 8.3, 8.0, 15.1, 16.4, 15.8]


def test_mandel_and_quadratic_term_share_one_comparison_quadratic(monkeypatch):
    calls = []
    solve = linearity.solve_wls

    def counting(*args, **kwargs):
        calls.append(args)
        return solve(*args, **kwargs)

    monkeypatch.setattr(linearity, "solve_wls", counting)
    fit = fit_curve(X, Y, weighting="1/x")
    mandel, term = mandel_test(fit), quadratic_term(fit)
    assert len(calls) == 1
    # The same figures as each test on a fit of its own (each then refits).
    assert mandel == mandel_test(dataclasses.replace(fit))
    assert term == quadratic_term(dataclasses.replace(fit))
    assert len(calls) == 3
    # Mandel's PG is the square of the quadratic term's t (ISO 8466-1; by algebra).
    assert mandel.pg == pytest.approx(term.t_value**2, rel=1e-9)


def test_remembered_results_go_with_the_fit():
    fit = fit_curve(X, Y)
    mandel_test(fit)
    alive = weakref.ref(fit)
    del fit
    gc.collect()
    assert alive() is None


def test_once_per_fit_tells_fits_apart():
    seen = []

    @once_per_fit
    def slope(fit):
        seen.append(fit)
        return fit.coefficients["slope"]

    a, b = fit_curve(X, Y), fit_curve(X, [2 * v for v in Y])
    assert (slope(a), slope(b), slope(a)) == (a.coefficients["slope"], b.coefficients["slope"],
                                              a.coefficients["slope"])
    assert seen == [a, b]


def test_sums_of_squares_by_their_definitions():
    # Σwr² and the weighted spread of y about ȳ_w, written out with numpy.
    fit = fit_curve(X, Y, weighting="1/x2")
    w, y = fit.weights, fit.y
    assert weighted_ss(fit) == pytest.approx(float(np.sum(w * fit.residuals**2)), rel=1e-15)
    ybar = np.sum(w * y) / np.sum(w)
    spread, uncentred = response_sums(fit)
    assert spread == pytest.approx(float(np.sum(w * (y - ybar) ** 2)), rel=1e-15)
    assert uncentred == pytest.approx(float(np.sum(w * y * y)), rel=1e-15)
    assert fit.exact is False
