"""Batched case diagnostics and lack of fit against the per-curve functions, statsmodels and
the NIST/SEMATECH load-cell study.

What is compared:

* For invented multi-analyte batches (fixed seeds; 300 curves, 8 levels with one to three
  replicates left, ragged masks, ``nan`` padding) for linear, origin, quadratic and mean-rf
  with several weightings: ``batch_influence(batch).curve(k)`` equals
  ``influence(fit_curve(...))`` and ``batch_lack_of_fit(batch).curve(k)`` equals
  ``lack_of_fit(fit_curve(...))`` to 1e-10 — leverage and sums of squares relative; the
  studentized residuals and Cook's distance (dimensionless, of order 1) relative or absolute
  1e-10, since a residual near zero is known only to a fraction of the scatter by any program;
  the reasons word for word; and the array methods (Bonferroni critical values, suggested
  points, Cook's reference, F critical values) to the per-curve ones.
* statsmodels on the same data: ``OLS(√w·y, √w·X).get_influence()`` (OLSInfluence: hat
  diagonal, internally and externally studentized residuals, Cook's distance; statsmodels 0.15
  has no influence measures on WLS results) and ``anova_lm`` of the curve against the
  level-means model (WLS with the same weights), F and p.
* NIST/SEMATECH e-Handbook §4.6.1 (Pontius load-cell data, published figures in
  ``tests/data/diagnostics/published.toml``): the straight line's lack-of-fit F ≈ 214.75 on
  (18, 20) df, rejected; the quadratic's F ≈ 0.81, p ≈ 0.67 — the data placed in a batch.
* Degenerate curves get the per-curve functions' reasons; wrong arguments raise with their
  message.
"""

from __future__ import annotations

import math
import tomllib

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

from calib.fit.batch import fit_batch
from calib.fit.batch_diagnostics import batch_influence, batch_lack_of_fit
from calib.fit.curve import fit_curve
from calib.fit.design import design_matrix
from calib.fit.linearity import lack_of_fit
from calib.fit.outliers import influence
from calib.options import Model
from tests.conftest import DATA, nist_xy
from tests.fit.test_batch import invented_batch

PUBLISHED = tomllib.loads((DATA / "diagnostics" / "published.toml").read_text(encoding="utf-8"))
TOL = 1e-10
CASES = [("linear", "none"), ("linear", "1/x2"), ("quadratic", "1/x"), ("quadratic", "1/s2"),
         ("origin", "1/x"), ("mean-rf", "none")]


@pytest.fixture(scope="module", params=CASES, ids=[f"{m}-{w}" for m, w in CASES])
def case(request: pytest.FixtureRequest):
    model, weighting = request.param
    x, y, mask = invented_batch(model, 900 + CASES.index(request.param), curves=300,
                                replicates=2 if weighting == "1/s2" else 1)
    batch = fit_batch(x, y, model=model, weighting=weighting, mask=mask)
    fits = [fit_curve(x[k, mask[k]], y[k, mask[k]], model=model, weighting=weighting)
            for k in range(len(x))]
    return batch, fits


def test_influence_equals_the_per_curve_influence(case) -> None:
    batch, fits = case
    infl = batch_influence(batch)
    assert infl.reasons == (None,) * len(fits)
    for k, fit in enumerate(fits):
        got, want = infl.curve(k), influence(fit)
        assert (got.n_params, got.residual_df) == (want.n_params, want.residual_df)
        np.testing.assert_allclose(got.leverage, want.leverage, rtol=TOL)
        scatter = math.sqrt(float(np.sum(want.weighted_residuals**2)))
        np.testing.assert_allclose(got.weighted_residuals, want.weighted_residuals,
                                   rtol=TOL, atol=TOL * scatter)
        for name in ("standardized", "studentized", "cooks_distance"):
            np.testing.assert_allclose(getattr(got, name), getattr(want, name), rtol=TOL,
                                       atol=TOL, err_msg=name)
    # The batch's own arrays hold the same figures in the padded layout, nan elsewhere.
    assert np.isnan(infl.leverage[~batch.mask]).all()
    assert infl.studentized.shape == batch.x.shape


def test_influence_methods_equal_the_per_curve_methods(case) -> None:
    batch, fits = case
    infl = batch_influence(batch)
    critical = infl.bonferroni_critical(0.05)
    reference = infl.cooks_reference
    suggested, influential = infl.suggested(0.05), infl.influential()
    for k in range(0, len(fits), 7):
        want = influence(fits[k])
        assert critical[k] == pytest.approx(want.bonferroni_critical(0.05), rel=1e-14)
        assert reference[k] == pytest.approx(want.cooks_reference, rel=1e-14)
        used = batch.mask[k]
        assert np.flatnonzero(suggested[k, used]).tolist() == want.suggested(0.05).tolist()
        assert np.flatnonzero(influential[k, used]).tolist() == want.influential().tolist()
    assert not suggested[~batch.mask].any()


def test_lack_of_fit_equals_the_per_curve_test(case) -> None:
    batch, fits = case
    test = batch_lack_of_fit(batch)
    critical = test.critical(0.05)
    significant = test.significant(0.05)
    for k, fit in enumerate(fits):
        got, want = test.curve(k), lack_of_fit(fit)
        assert got.reason == want.reason
        assert (got.df_lack, got.df_pure, got.n_levels, got.weighted) == (
            want.df_lack, want.df_pure, want.n_levels, want.weighted)
        assert got.ss_pure == pytest.approx(want.ss_pure, rel=TOL)
        # SS_lof = SS_res − SS_pure: known to a fraction of SS_res.
        ss_res = want.ss_lack + want.ss_pure
        assert got.ss_lack == pytest.approx(want.ss_lack, rel=TOL, abs=TOL * ss_res)
        if want.reason is None:
            assert test.f_value[k] == pytest.approx(want.f_value, rel=TOL)
            assert test.p_value[k] == pytest.approx(want.p_value, rel=TOL)
            assert critical[k] == pytest.approx(want.critical(0.05), rel=1e-14)
            assert bool(significant[k]) is want.significant(0.05)
    # The invented runs keep replicates at most levels: the test is evaluated on nearly all.
    assert sum(r is None for r in test.reasons) >= 0.9 * len(fits)


def test_a_curve_alone_is_its_batch_row_bit_for_bit(case) -> None:
    # One engine (issue 18): a curve fitted alone and the same curve as a row of a padded
    # batch of 300 are the same doubles, and so are their case diagnostics and lack-of-fit
    # sums; the tolerances above are for the comparisons with other programs.  This is the
    # contract that keeps a record's digest independent of the other analytes of its run.
    batch, fits = case
    infl, test = batch_influence(batch), batch_lack_of_fit(batch)
    for k, fit in enumerate(fits):
        row = batch.curve(k)
        for name in ("x", "y", "weights", "covariance", "covariance_root", "fitted",
                     "residuals"):
            assert getattr(row, name).tobytes() == getattr(fit, name).tobytes(), (k, name)
        assert row.coefficients == fit.coefficients
        assert (row.residual_df, row.residual_sd) == (fit.residual_df, fit.residual_sd)
        assert np.array([row.r_squared]).tobytes() == np.array([fit.r_squared]).tobytes()
        got, want = infl.curve(k), influence(fit)
        for name in ("leverage", "weighted_residuals", "standardized", "studentized",
                     "cooks_distance"):
            assert getattr(got, name).tobytes() == getattr(want, name).tobytes(), (k, name)
        assert test.curve(k) == lack_of_fit(fit)


def _statsmodels_influence(x, y, model, weights):
    sw = np.sqrt(weights)
    return sm.OLS(y * sw, design_matrix(x, Model(model)) * sw[:, None]).fit().get_influence()


@pytest.mark.parametrize(("model", "weighting"), [("linear", "none"), ("linear", "1/x"),
                                                  ("quadratic", "1/x2")])
def test_influence_matches_statsmodels_olsinfluence(model, weighting) -> None:
    # statsmodels OLSInfluence on the √w-scaled OLS of each curve of an invented batch: hat
    # diagonal, internally and externally studentized residuals, Cook's distance, to 1e-9
    # (statsmodels solves by pseudo-inverse, so concentrations are kept below 100 here).
    rng = np.random.default_rng(31)
    levels = np.repeat([0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0], 3)
    x = np.tile(levels, (12, 1))
    y = 0.3 + 2.0 * x - 0.004 * x**2 * (model == "quadratic")
    y = y * (1 + 0.01 * rng.normal(size=x.shape))
    batch = fit_batch(x, y, model=model, weighting=weighting)
    infl = batch_influence(batch)
    for k in range(len(x)):
        theirs = _statsmodels_influence(x[k], y[k], model, batch.weights[k])
        np.testing.assert_allclose(infl.leverage[k], theirs.hat_matrix_diag, rtol=1e-9)
        np.testing.assert_allclose(infl.standardized[k], theirs.resid_studentized_internal,
                                   rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(infl.studentized[k], theirs.resid_studentized_external,
                                   rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(infl.cooks_distance[k], theirs.cooks_distance[0],
                                   rtol=1e-9, atol=1e-15)


def _statsmodels_lack_of_fit(x, y, formula, weights):
    """anova_lm of the curve against the level-means model y ~ C(x), WLS: (F, p, df_diff)."""
    frame = pd.DataFrame({"x": x, "y": y})
    curve = smf.wls(formula, frame, weights=weights).fit()
    means = smf.wls("y ~ C(x)", frame, weights=weights).fit()
    row = anova_lm(curve, means).iloc[1]
    return row["F"], row["Pr(>F)"], int(row["df_diff"])


@pytest.mark.parametrize(("model", "formula", "weighting"),
                         [("linear", "y ~ x", "none"), ("linear", "y ~ x", "1/x"),
                          ("quadratic", "y ~ x + I(x**2)", "1/x2")])
def test_lack_of_fit_matches_statsmodels_anova(model, formula, weighting) -> None:
    # statsmodels anova_lm(curve, level means), weighted least squares with the batch's weights.
    x, y, mask = invented_batch(model, 77, curves=15)
    batch = fit_batch(x, y, model=model, weighting=weighting, mask=mask)
    test = batch_lack_of_fit(batch)
    for k in range(len(x)):
        used = mask[k]
        f_sm, p_sm, df_sm = _statsmodels_lack_of_fit(x[k, used], y[k, used], formula,
                                                     batch.weights[k, used])
        assert test.df_lack[k] == df_sm
        assert test.f_value[k] == pytest.approx(f_sm, rel=1e-9)
        assert test.p_value[k] == pytest.approx(p_sm, rel=1e-9)


def test_load_cell_lack_of_fit_in_a_batch() -> None:
    # NIST/SEMATECH e-Handbook §4.6.1 (Pontius data, published.toml): the straight line's
    # F ≈ 214.75 on (18, 20) df against F(0.95; 18, 20) ≈ 2.15, rejected; the quadratic's
    # F ≈ 0.81, p ≈ 0.67, not rejected.  The data sit in row 1 of a three-curve batch, shuffled
    # and padded, between two invented curves.
    ref = PUBLISHED["load_cell"]
    px, py = map(np.array, nist_xy("pontius"))
    order = np.random.default_rng(4).permutation(px.size)
    width = px.size + 5
    x = np.full((3, width), np.nan)
    y = np.full((3, width), np.nan)
    x[:, : px.size] = px[order]
    y[1, : px.size] = py[order]
    y[0, : px.size] = 2.0 + 3.0 * px[order] * 1e-6 + np.cos(px[order])
    y[2, : px.size] = 1.0 + px[order] * 1e-6 + np.sin(px[order])
    mask = np.isfinite(x)
    line = batch_lack_of_fit(fit_batch(x, y, model="linear", mask=mask))
    assert line.reasons[1] is None
    assert [line.df_lack[1], line.df_pure[1]] == ref["line_df"] and line.n_levels[1] == 20
    assert line.f_value[1] == pytest.approx(ref["line_f"], abs=0.005)
    assert line.critical(0.05)[1] == pytest.approx(ref["line_f_critical_95"], abs=0.005)
    assert line.significant(0.05)[1]
    quadratic = batch_lack_of_fit(fit_batch(x, y, model="quadratic", mask=mask))
    assert (quadratic.df_lack[1], quadratic.df_pure[1]) == (17, 20)
    assert quadratic.f_value[1] == pytest.approx(ref["quadratic_f"], abs=0.005)
    assert quadratic.p_value[1] == pytest.approx(ref["quadratic_p"], abs=0.005)
    assert not quadratic.significant(0.05)[1]


# --- Degenerate curves and wrong arguments ---------------------------------------------------

def test_degenerate_curves_get_the_per_curve_reasons() -> None:
    # Row 0: three points for a line (ν = 1); row 1: on a line exactly; row 2: one
    # concentration (no fit); row 3: no replicates; row 4: replicates that agree exactly;
    # row 5: replicates at two levels only (2 levels for 2 parameters); row 6: a good curve.
    rows = [
        ([1, 2, 3], [1.0, 2.1, 2.9]),
        ([1, 2, 3, 4, 5], [3.0, 5.0, 7.0, 9.0, 11.0]),
        ([5, 5, 5, 5], [1.0, 1.1, 0.9, 1.0]),
        ([1, 2, 3, 4, 5], [1.1, 1.9, 3.2, 3.9, 5.1]),
        ([1, 1, 2, 2, 3, 3], [1.0, 1.0, 2.1, 2.1, 2.9, 2.9]),
        ([1, 1, 2, 2], [1.0, 1.1, 2.0, 2.1]),
        ([1, 1, 2, 2, 3, 3], [1.0, 1.2, 2.5, 2.7, 3.0, 3.2]),
    ]
    width = max(len(xs) for xs, _ in rows)
    x = np.full((len(rows), width), np.nan)
    y = np.full((len(rows), width), np.nan)
    for k, (xs, ys) in enumerate(rows):
        x[k, : len(xs)], y[k, : len(ys)] = xs, ys
    batch = fit_batch(x, y, model="linear", mask=np.isfinite(x))
    infl = batch_influence(batch)
    lof = batch_lack_of_fit(batch)
    for k, (xs, ys) in enumerate(rows):
        if batch.problems[k] is not None:
            message = f"the curve was not fitted: {batch.problems[k]}"
            assert infl.reasons[k] == lof.reasons[k] == message
            assert np.isnan(infl.studentized[k]).all() and np.isnan(lof.df_lack[k])
            with pytest.raises(ValueError) as err:
                lof.curve(k)
            assert str(err.value) == f"curve {k} has no lack-of-fit test: {message}"
            continue
        fit = fit_curve(xs, ys)
        try:
            influence(fit)
        except ValueError as err:
            assert infl.reasons[k] == str(err)
            assert np.isnan(infl.leverage[k]).all()
            with pytest.raises(ValueError) as raised:
                infl.curve(k)
            assert str(raised.value) == f"curve {k} has no case diagnostics: {err}"
        else:
            assert infl.reasons[k] is None
        assert lof.reasons[k] == lack_of_fit(fit).reason
    assert batch.problems[2] == "the design is singular (rank 1 < 2 parameters)"
    assert [r is None for r in lof.reasons] == [False] * 6 + [True]
    assert lof.f_value[6] == pytest.approx(50 / 3, rel=1e-12)  # by hand, as in lack_of_fit
    assert np.isnan(lof.f_value[:6]).all() and not lof.significant(0.05)[:6].any()


def test_a_point_with_leverage_one_has_no_residual_diagnostics() -> None:
    # As for influence: the quadratic through three levels, one a single standard.
    x = np.array([[1.0, 1.0, 1.0, 2.0, 2.0, 2.0, 5.0]])
    y = np.array([[1.0, 1.1, 0.9, 2.1, 1.9, 2.0, 4.0]])
    infl = batch_influence(fit_batch(x, y, model="quadratic"))
    assert infl.leverage[0, -1] == pytest.approx(1.0, abs=1e-12)
    assert math.isnan(infl.studentized[0, -1]) and math.isnan(infl.cooks_distance[0, -1])
    assert not infl.suggested(0.05).any()


def test_results_are_read_only() -> None:
    x, y, mask = invented_batch("linear", 3, curves=4)
    batch = fit_batch(x, y, model="linear", mask=mask)
    infl, lof = batch_influence(batch), batch_lack_of_fit(batch)
    for arr in (infl.leverage, infl.studentized, lof.f_value, lof.ss_pure):
        with pytest.raises(ValueError, match="read-only"):
            arr[0] = 1.0


def test_an_empty_batch() -> None:
    batch = fit_batch(np.zeros((0, 6)), np.zeros((0, 6)), model="linear")
    assert batch_influence(batch).leverage.shape == (0, 6)
    assert batch_lack_of_fit(batch).f_value.shape == (0,)


def test_wrong_arguments_raise() -> None:
    batch = fit_batch([[1, 1, 2, 2, 3, 3]], [[1.0, 1.2, 2.5, 2.7, 3.0, 3.2]], model="linear")
    infl, lof = batch_influence(batch), batch_lack_of_fit(batch)
    for call in (infl.bonferroni_critical, infl.suggested, lof.critical, lof.significant):
        with pytest.raises(ValueError) as err:
            call(1.5)
        assert str(err.value) == "alpha must be a number between 0 and 1; got 1.5"
    for result in (infl, lof):
        with pytest.raises(ValueError) as err:
            result.curve(1)
        assert str(err.value) == "curve must be an index below 1; got 1"
    from dataclasses import replace

    bare = replace(batch, covariance_root=None)
    with pytest.raises(ValueError) as err:
        batch_influence(bare)
    assert str(err.value) == ("the batch carries no factor of (XᵀWX)⁻¹ (covariance_root); "
                              "fit it with fit_batch")
