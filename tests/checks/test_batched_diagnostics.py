"""Diagnostics worked out for a group of curves sharing a design (calib.checks.batched).

Each precomputed figure is compared with calib's per-curve function on the same fit
(those are pinned to statsmodels, scipy and the NIST handbook in ``tests/fit/``), and a
few directly with statsmodels, scipy and numpy here: Bartlett's T with
``scipy.stats.bartlett``, the quadratic term's t with statsmodels WLS, the drift slope
with ``numpy.polyfit``.  A whole run judged with and without the shared figures gives
the same checks, word for word.  The runs are invented (seeded).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from calib.checks import evaluate as evaluate_module
from calib.checks.batched import precompute
from calib.checks.evaluate import evaluate_run
from calib.fit.curve import fit_curve
from calib.fit.homogeneity import bartlett_levels
from calib.fit.linearity import (
    lack_of_fit,
    mandel_test,
    quadratic_term,
    residual_drift,
)
from calib.fit.outliers import influence
from calib.fit.power import detectable_bend_pct
from calib.fit.wls import solve_wls
from calib.fit.wls_many import solve_wls_many
from calib.options import Weighting
from calib.run import Point, Run, SourceInfo

LEVELS = np.array([0.5, 1, 2, 5, 10, 20, 50, 100])
REL = 1e-13


def _points(analyte: str, ys: np.ndarray, x: np.ndarray) -> list[Point]:
    return [Point(analyte, float(c), float(r), f"Run!D{i + 2}", injection_order=i + 1)
            for i, (c, r) in enumerate(zip(x, ys))]


def _group(weighting: Weighting, k: int = 6, seed: int = 7):
    rng = np.random.default_rng(seed)
    x = np.repeat(LEVELS, 3)
    fits, used = {}, {}
    for j in range(k):
        y = (0.02 + (1 + j) * x + 0.001 * x * x * j) * (1 + 0.02 * rng.standard_normal(x.size))
        name = f"A{j}"
        fits[name] = fit_curve(x, y, weighting=weighting)
        used[name] = _points(name, y, x)
    return x, fits, used


def _close(a: float, b: float) -> bool:
    return (math.isnan(a) and math.isnan(b)) or abs(a - b) <= REL * abs(b) + 1e-300


def _same(a, b) -> None:
    assert type(a) is type(b)
    for field in dataclasses.fields(a):
        u, v = getattr(a, field.name), getattr(b, field.name)
        if isinstance(u, float):
            assert _close(u, v), (field.name, u, v)
        elif isinstance(u, tuple) and u and isinstance(u[0], float):
            assert all(_close(p, q) for p, q in zip(u, v, strict=True)), field.name
        else:
            assert u == v, field.name


@pytest.mark.parametrize("weighting", [Weighting.NONE, Weighting.INV_X, Weighting.INV_X2])
def test_shared_figures_are_the_per_curve_functions(weighting):
    x, fits, used = _group(weighting)
    shared = precompute(fits, used)
    assert set(shared) == set(fits)
    order = [float(i + 1) for i in range(x.size)]
    for name, fit in fits.items():
        pre = shared[name]
        assert pre.fit is fit
        _same(pre.lack_of_fit, lack_of_fit(fit))
        _same(pre.mandel, mandel_test(fit))
        _same(pre.quadratic_term, quadratic_term(fit))
        _same(pre.drift, residual_drift(fit, order))
        weights = None if weighting is Weighting.NONE else fit.weights
        _same(pre.bartlett, bartlett_levels(fit.x, fit.y, weights=weights))
        infl, own = pre.influence, influence(fit)
        for name_ in ("leverage", "weighted_residuals", "standardized", "studentized",
                      "cooks_distance"):
            np.testing.assert_allclose(getattr(infl, name_), getattr(own, name_), rtol=REL)
        assert (infl.n_params, infl.residual_df) == (own.n_params, own.residual_df)
        lof = pre.lack_of_fit
        sigma2, lam = lof.ss_pure / lof.df_pure, 9.7
        assert _close(pre.detectable_bend_pct(sigma2, lam),
                      detectable_bend_pct(fit.x, fit.weights, fit.predict(fit.x), sigma2, lam))


def test_shared_figures_against_scipy_statsmodels_and_numpy():
    x, fits, used = _group(Weighting.INV_X)
    shared = precompute(fits, used)
    for name, fit in fits.items():
        pre = shared[name]
        # Bartlett on the replicates of √w̄·y (w = 1/x is constant within a level).
        groups = [fit.y[fit.x == c] / math.sqrt(c) for c in LEVELS]
        assert pre.bartlett.statistic == pytest.approx(stats.bartlett(*groups).statistic,
                                                       rel=1e-10)
        quad = sm.WLS(fit.y, np.column_stack([np.ones_like(x), x, x * x]), weights=1 / x).fit()
        assert pre.quadratic_term.t_value == pytest.approx(quad.tvalues[2], rel=1e-9)
        root = np.sqrt(1 / x)  # WLS as OLS on √w·y and √w·X, whose influence statsmodels gives
        ref = sm.OLS(fit.y * root, sm.add_constant(x) * root[:, None]).fit().get_influence()
        np.testing.assert_allclose(pre.influence.studentized, ref.resid_studentized_external,
                                   rtol=1e-9)
        e = np.sqrt(fit.weights) * fit.residuals
        assert pre.drift.slope == pytest.approx(np.polyfit(np.arange(1.0, x.size + 1), e, 1)[0],
                                                rel=1e-9)


def test_solve_many_is_solve_wls_for_each_response():
    rng = np.random.default_rng(3)
    x = np.repeat(LEVELS, 2)
    X = np.column_stack([np.ones_like(x), x, x * x])
    Y = rng.normal(size=(5, x.size)) + 2 * x
    many = solve_wls_many(X, Y, 1 / x)
    for k in range(5):
        one = solve_wls(X, Y[k], 1 / x)
        np.testing.assert_array_equal(many.beta[k], one.beta)
        assert many.weighted_ss[k] == one.weighted_ss
        ref = sm.WLS(Y[k], X, weights=1 / x).fit()  # statsmodels on the same data
        np.testing.assert_allclose(many.beta[k], ref.params, rtol=1e-9)


def test_a_curve_whose_test_has_a_reason_is_left_to_its_rule():
    x, fits, used = _group(Weighting.NONE, k=3)
    exact = 3.0 * x + 1.0  # replicates agree exactly: no pure error, no scatter
    fits["exact"] = fit_curve(x, exact)
    used["exact"] = _points("exact", exact, x)
    pre = precompute(fits, used)["exact"]
    assert pre.lack_of_fit is None and pre.mandel is None and pre.drift is None
    assert pre.influence is None
    assert lack_of_fit(fits["exact"]).reason is not None  # what the rule then says
    assert precompute({"alone": fits["A0"]}, {"alone": used["A0"]}) == {}


def _run(seed: int = 11) -> Run:
    rng = np.random.default_rng(seed)
    x = np.repeat(LEVELS, 3)
    points = []
    for j in range(8):
        y = (0.05 + (2 + j) * x) * (1 + 0.03 * rng.standard_normal(x.size))
        if j == 5:
            y[4] *= 1.4  # a stray standard (invented)
        points += [dataclasses.replace(p, source_cell=f"Run!{chr(66 + j)}{i + 2}")
                   for i, p in enumerate(_points(f"C{j}", y, x))]
    return Run(SourceInfo(file="run.csv", sha256="0" * 64, sheet="Run"), tuple(points))


@pytest.mark.parametrize("weighting", ["none", "1/x2"])
def test_a_run_is_judged_alike_with_and_without_the_shared_figures(monkeypatch, weighting):
    run = _run()
    made = []
    real = evaluate_module.precompute
    with monkeypatch.context() as patch:
        patch.setattr(evaluate_module, "precompute", lambda *a: made.append(real(*a)) or made[-1])
        together = evaluate_run(run, weighting=weighting)
    assert len(made[0]) == 8  # every curve took its figures from the group
    with monkeypatch.context() as patch:
        patch.setattr(evaluate_module, "precompute", lambda *a: {})
        alone = evaluate_run(run, weighting=weighting)
    for a, b in zip(together.curves, alone.curves, strict=True):
        assert [(c.id, c.verdict, c.detail) for c in a.checks] == \
               [(c.id, c.verdict, c.detail) for c in b.checks]
        for c, d in zip(a.checks, b.checks):
            for name in ("value", "statistic_value", "p_value", "adjusted_p"):
                u, v = getattr(c, name), getattr(d, name)
                assert (u is None and v is None) or _close(u, v) or abs(u - v) <= 1e-12 * abs(v)
