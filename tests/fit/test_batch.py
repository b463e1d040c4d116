"""The batched fitter against the per-curve fitter, the NIST StRD and degenerate curves.

What is compared:

* For invented multi-analyte batches (fixed seeds; 1 000 curves × 24 points, 8 levels × 3
  replicates, ragged masks that drop up to two replicates of a level and leave ``nan`` in the
  padding), for linear, origin and quadratic × none, 1/x, 1/x2 and for mean-rf: each figure
  of ``fit_batch`` equals ``fit_curve`` on the same curve to 1e-12 relative (both are one
  engine, so in fact bit for bit: ``test_batch_diagnostics.py``) — estimates,
  covariance, ν, σ̂, R², weights, fitted values, residuals, SEs, t and p against 0 and
  against a per-curve reference, t quantiles, confidence intervals, back-calculated
  concentrations, and ``curve(k)`` field by field.
  The invented curves are built so every coefficient is well determined (|t| ≥ 5 against 0):
  an estimate lying a fraction of its SE from zero is known only to an absolute, not a
  relative, 1e-12, by any solver.  The weightings 1/y, 1/y2 and 1/s2 are compared the same
  way on smaller batches.
* NIST StRD Norris, Pontius, NoInt1, NoInt2 (certified values in ``tests/data/nist_strd/``,
  see ``SOURCE.md``) placed in a batch among other curves keep at least 12 digits.
* statsmodels' WLS (QR solver) on a slice of a batch: params, bse, tvalues, pvalues, conf_int.
* Degenerate curves (too few points, one concentration, a column of zeros, a non-finite
  value, a weighting that cannot apply, bad weights) are reported with fit_curve's reason,
  filled with ``nan``, and leave the other curves bit for bit as without them.
* ``coefficient_table`` holds the per-name figures; the result's arrays are read-only copies
  of the inputs.  The kernel itself is tested in ``test_batch_wls.py``, the batched
  diagnostics in ``test_batch_diagnostics.py``.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
import statsmodels.api as sm

from calib.fit.batch import BatchFit, fit_batch
from calib.fit.curve import CurveFit, fit_curve
from calib.fit.design import design_matrix
from calib.options import Model

DATA = Path(__file__).resolve().parent.parent / "data" / "nist_strd"
CERTIFIED = tomllib.loads((DATA / "certified.toml").read_text(encoding="utf-8"))

RTOL = 1e-12
MODELS = ["linear", "origin", "quadratic"]
WEIGHTINGS = ["none", "1/x", "1/x2"]
#: Model × weighting of the 1 000-curve comparison; mean-rf takes no weighting of its own.
CASES = [(m, w) for m in MODELS for w in WEIGHTINGS] + [("mean-rf", "none")]
#: The weightings that look at the responses, on 200 curves (1/s2 keeps two replicates a level).
SMALL_CASES = [(m, w) for m in ("linear", "quadratic") for w in ("1/y", "1/y2", "1/s2")]
LEVELS = np.array([0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0])
K, WIDTH = 1000, 24


def invented_batch(
    model: str, seed: int, curves: int = K, *, replicates: int = 1
) -> tuple[np.ndarray, ...]:
    """Invented multi-analyte run: per curve 8 levels × 3 replicates, some replicates dropped.

    Each analyte has its own range (a factor 0.1–100 on the levels), slope, an intercept of
    0.5–2 % of the top response (none for ``origin`` and ``mean-rf``), a curvature of 10–30 %
    at the top for ``quadratic``, and noise of 0.4 % of the response plus a small constant,
    so that 1/x² weighting suits it and every coefficient is far from zero in SE units.
    Each level keeps at least ``replicates`` of its three replicates.
    """
    rng = np.random.default_rng(seed)
    scale = 10 ** rng.uniform(-1, 2, size=(curves, 1))
    x = np.tile(np.repeat(LEVELS, 3), (curves, 1)) * scale
    top = LEVELS[-1] * scale
    b = rng.uniform(0.5, 5, size=(curves, 1))
    a = rng.uniform(0.005, 0.02, size=(curves, 1)) * b * top * (model in ("linear", "quadratic"))
    c = -rng.uniform(0.1, 0.3, size=(curves, 1)) * b / top * (model == "quadratic")
    mean = a + b * x + c * x**2
    y = mean + rng.normal(size=(curves, WIDTH)) * (0.004 * mean + 2e-5 * b * top)
    # Some replicates of a level are dropped, never all of them.
    order = np.argsort(rng.random((curves, LEVELS.size, 3)), axis=2).argsort(axis=2)
    keep = rng.integers(replicates, 4, size=(curves, LEVELS.size, 1))
    mask = (order < keep).reshape(curves, WIDTH)
    return np.where(mask, x, np.nan), np.where(mask, y, np.nan), mask


@dataclass
class Case:
    model: str
    weighting: str
    x: np.ndarray
    y: np.ndarray
    mask: np.ndarray
    batch: BatchFit
    fits: list[CurveFit]

    def padded(self, per_curve) -> np.ndarray:
        """Per-curve arrays over the used points laid out like the batch, nan elsewhere."""
        out = np.full(self.x.shape, np.nan)
        for k, values in enumerate(per_curve):
            out[k, self.mask[k]] = values
        return out

    def per_name(self, method: str, *args) -> tuple[np.ndarray, np.ndarray]:
        """(batch, reference) arrays of shape (K, p) for an inference method."""
        names = self.batch.names
        batch = np.stack([getattr(self.batch, method)(n, *args) for n in names], axis=1)
        ref = np.array([[getattr(f, method)(n, *args) for n in names] for f in self.fits])
        return batch, ref


ALL_CASES = [(m, w, K) for m, w in CASES] + [(m, w, 200) for m, w in SMALL_CASES]


@pytest.fixture(scope="module", params=ALL_CASES, ids=[f"{m}-{w}-{k}" for m, w, k in ALL_CASES])
def case(request: pytest.FixtureRequest) -> Case:
    model, weighting, curves = request.param
    seed = 20250301 + ALL_CASES.index(request.param)
    replicates = 2 if weighting == "1/s2" else 1
    x, y, mask = invented_batch(model, seed, curves, replicates=replicates)
    batch = fit_batch(x, y, model=model, weighting=weighting, mask=mask)
    fits = [
        fit_curve(x[k, mask[k]], y[k, mask[k]], model=model, weighting=weighting)
        for k in range(curves)
    ]
    return Case(model, weighting, x, y, mask, batch, fits)


def test_every_curve_is_fitted(case: Case) -> None:
    assert case.batch.problems == (None,) * len(case.fits)
    assert case.batch.fitted_ok.all()
    assert case.batch.n_curves == len(case.fits)
    np.testing.assert_array_equal(case.batch.n_points, case.mask.sum(axis=1))
    # The ragged masks really are ragged: curves of many different lengths.
    assert np.unique(case.batch.n_points).size >= 8


def test_coefficients_and_covariance(case: Case) -> None:
    ref = np.array([list(f.coefficients.values()) for f in case.fits])
    np.testing.assert_allclose(case.batch.coefficients, ref, rtol=RTOL)
    np.testing.assert_allclose(
        case.batch.covariance, np.array([f.covariance for f in case.fits]), rtol=RTOL
    )
    assert case.batch.names == case.fits[0].names
    for j, name in enumerate(case.batch.names):
        np.testing.assert_allclose(case.batch.coefficient(name), ref[:, j], rtol=RTOL)


def test_residual_df_sd_and_r_squared(case: Case) -> None:
    np.testing.assert_array_equal(case.batch.residual_df, [f.residual_df for f in case.fits])
    np.testing.assert_allclose(
        case.batch.residual_sd, [f.residual_sd for f in case.fits], rtol=RTOL
    )
    np.testing.assert_allclose(case.batch.r_squared, [f.r_squared for f in case.fits], rtol=RTOL)


def test_weights_fitted_and_residuals(case: Case) -> None:
    batch = case.batch
    np.testing.assert_allclose(batch.weights, case.padded(f.weights for f in case.fits), rtol=RTOL)
    np.testing.assert_allclose(batch.fitted, case.padded(f.fitted for f in case.fits), rtol=RTOL)
    assert np.isnan(batch.fitted[~case.mask]).all() and np.isnan(batch.residuals[~case.mask]).all()
    # A residual y − ŷ is known to ε·|y| at best, by any solver, and some lie near zero:
    # compare them on the scale of the curve's largest response.
    scale = np.nanmax(np.abs(case.y), axis=1, keepdims=True)
    np.testing.assert_allclose(
        batch.residuals / scale,
        case.padded(f.residuals for f in case.fits) / scale,
        rtol=RTOL,
        atol=RTOL,
    )


def test_coefficient_inference(case: Case) -> None:
    for method in ("std_error", "t_value", "p_value"):
        batch, ref = case.per_name(method)
        np.testing.assert_allclose(batch, ref, rtol=RTOL, err_msg=method)
    for level in (0.95, 0.99):
        np.testing.assert_allclose(
            case.batch.t_critical(level), [f.t_critical(level) for f in case.fits], rtol=RTOL
        )
        for name in case.batch.names:
            low, high = case.batch.confidence_interval(name, level)
            ref = np.array([f.confidence_interval(name, level) for f in case.fits])
            np.testing.assert_allclose(low, ref[:, 0], rtol=RTOL)
            np.testing.assert_allclose(high, ref[:, 1], rtol=RTOL)
    low, high = case.batch.confidence_interval("slope")  # the default level, 0.95
    np.testing.assert_allclose(low, [f.confidence_interval("slope")[0] for f in case.fits],
                               rtol=RTOL)


def test_coefficient_table_holds_the_per_name_figures(case: Case) -> None:
    # The whole table at once: the per-name methods of the batch and fit_curve's table.
    table = case.batch.coefficient_table(0.99)
    assert table.names == case.batch.names and table.confidence == 0.99
    for j, name in enumerate(table.names):
        np.testing.assert_array_equal(table.std_error[:, j], case.batch.std_error(name))
        np.testing.assert_array_equal(table.p_value[:, j], case.batch.p_value(name))
        low, high = case.batch.confidence_interval(name, 0.99)
        np.testing.assert_array_equal(table.ci_low[:, j], low)
        np.testing.assert_array_equal(table.ci_high[:, j], high)
    for k in range(0, len(case.fits), 101):
        rows = case.fits[k].coefficient_table(0.99)
        for field in ("estimate", "std_error", "t_value", "p_value", "ci_low", "ci_high"):
            np.testing.assert_allclose(getattr(table, field)[k],
                                       [getattr(r, field) for r in rows], rtol=RTOL,
                                       err_msg=field)


def test_tests_against_a_reference_value(case: Case) -> None:
    # Half of each curve's slope as the reference: t and p away from the extremes, and the
    # reference given as one number per curve.
    reference = case.batch.coefficient("slope") / 2
    t = case.batch.t_value("slope", reference)
    p = case.batch.p_value("slope", reference)
    t_ref = [f.t_value("slope", r) for f, r in zip(case.fits, reference)]
    p_ref = [f.p_value("slope", r) for f, r in zip(case.fits, reference)]
    np.testing.assert_allclose(t, t_ref, rtol=RTOL)
    np.testing.assert_allclose(p, p_ref, rtol=RTOL)
    # One number for every curve (below every invented slope, so no cancellation).
    np.testing.assert_allclose(
        case.batch.t_value("slope", -1.0), [f.t_value("slope", -1.0) for f in case.fits],
        rtol=RTOL,
    )


def test_back_calculation(case: Case) -> None:
    # The standards' own responses (padded with nan) and five responses per curve from below
    # the lowest to well above the highest standard, where a quadratic may never get.
    batch = case.batch
    standards = batch.back_calculate(batch.y)
    ref = case.padded(f.back_calculate(f.y) for f in case.fits)
    np.testing.assert_allclose(standards, ref, rtol=RTOL)
    span = np.nanmax(case.y, axis=1) - np.nanmin(case.y, axis=1)
    probes = np.nanmin(case.y, axis=1)[:, None] + span[:, None] * [-0.2, 0.1, 0.5, 1.1, 3.0]
    ref = np.array([f.back_calculate(r) for f, r in zip(case.fits, probes)])
    np.testing.assert_allclose(batch.back_calculate(probes), ref, rtol=RTOL)
    single = batch.back_calculate(probes[:, 2])
    np.testing.assert_allclose(single, ref[:, 2], rtol=RTOL)
    assert single.shape == (len(case.fits),)


def test_curve_k_is_the_per_curve_fit(case: Case) -> None:
    for k in range(0, len(case.fits), 97):
        assert_same_fit(case.batch.curve(k), case.fits[k])


def assert_same_fit(got: CurveFit, want: CurveFit) -> None:
    assert (got.model, got.weighting, got.confidence) == (want.model, want.weighting,
                                                          want.confidence)
    assert got.residual_df == want.residual_df and isinstance(got.residual_df, int)
    np.testing.assert_array_equal(got.x, want.x)
    np.testing.assert_array_equal(got.y, want.y)
    assert got.names == want.names
    for name in want.names:
        np.testing.assert_allclose(got.coefficients[name], want.coefficients[name], rtol=RTOL)
    for field in ("weights", "covariance", "residual_sd", "r_squared", "fitted"):
        np.testing.assert_allclose(getattr(got, field), getattr(want, field), rtol=RTOL,
                                   err_msg=field)
    scale = np.abs(want.y).max()
    np.testing.assert_allclose(got.residuals / scale, want.residuals / scale, rtol=RTOL,
                               atol=RTOL)


def test_quadratic_root_selection_matches_curve_fit() -> None:
    # Invented parabolas (slight noise so the fitted curvature is not exactly 0) chosen for
    # every branch of the root rule: vertex beyond the range (one root inside), vertex inside
    # (both roots inside for responses above the minimum: the one nearer the middle), a
    # falling curve (b < 0), a concave curve, and responses the curve never reaches.
    x = np.linspace(0.0, 12.0, 13)
    shapes = [(1.0, 2.0, -0.05), (30.0, -10.0, 1.0), (50.0, -3.0, -0.1), (-5.0, 10.0, -1.0),
              (2.0, 0.5, 0.02)]
    rng = np.random.default_rng(11)
    xs = np.tile(x, (len(shapes), 1))
    ys = np.array([a + b * x + c * x**2 for a, b, c in shapes])
    ys = ys + rng.normal(scale=1e-3, size=ys.shape)
    batch = fit_batch(xs, ys, model="quadratic")
    probes = np.tile(np.linspace(-40.0, 60.0, 57), (len(shapes), 1))
    got = batch.back_calculate(probes)
    for k in range(len(shapes)):
        want = fit_curve(xs[k], ys[k], model="quadratic").back_calculate(probes[k])
        np.testing.assert_allclose(got[k], want, rtol=RTOL)
    assert np.isnan(got).any() and np.isfinite(got).any()
    # Both roots of 30 − 10x + x² = 14 (x = 2 and 8) lie in 0–12: 8 is nearer the middle, 6.
    assert batch.back_calculate(np.array([0, 14.0, 0, 0, 0]))[1] == pytest.approx(8.0, abs=1e-2)


def test_against_statsmodels_wls() -> None:
    # statsmodels WLS with its QR solver on the raw 1/x weights; calib scales weights to
    # mean 1, which changes none of these figures.
    x, y, mask = invented_batch("quadratic", 77, curves=40)
    batch = fit_batch(x, y, model="quadratic", weighting="1/x", mask=mask)
    low, high = np.stack([batch.confidence_interval(n, 0.95) for n in batch.names], axis=2)
    for k in range(40):
        xs, ys = x[k, mask[k]], y[k, mask[k]]
        res = sm.WLS(ys, design_matrix(xs, Model.QUADRATIC), weights=1 / xs).fit(method="qr")
        rows = [batch.coefficients[k], [batch.std_error(n)[k] for n in batch.names],
                [batch.t_value(n)[k] for n in batch.names],
                [batch.p_value(n)[k] for n in batch.names]]
        for got, want in zip(rows, (res.params, res.bse, res.tvalues, res.pvalues), strict=True):
            np.testing.assert_allclose(got, want, rtol=1e-10)
        ci = res.conf_int(0.05)
        np.testing.assert_allclose(low[k], ci[:, 0], rtol=1e-10)
        np.testing.assert_allclose(high[k], ci[:, 1], rtol=1e-10)


# --- NIST StRD inside a batch --------------------------------------------------------------

NIST_MODELS = {"norris": "linear", "pontius": "quadratic", "noint1": "origin", "noint2": "origin"}
NIST_ROW = 13


def lre(computed: float, certified: float) -> float:
    """Log relative error as certified.toml defines it (absolute when certified is 0)."""
    error = abs(computed - certified)
    if error == 0:
        return math.inf
    return -math.log10(error if certified == 0 else error / abs(certified))


@pytest.fixture(scope="module", params=sorted(NIST_MODELS))
def nist(request: pytest.FixtureRequest) -> tuple[str, BatchFit, dict]:
    """The dataset's points scattered over row 13 of a 40-curve batch of invented curves."""
    name = request.param
    model = NIST_MODELS[name]
    data = np.loadtxt(DATA / f"{name}.csv", delimiter=",", skiprows=1, ndmin=2)
    n_data = data.shape[0]
    width = n_data + 9
    rng = np.random.default_rng(5)
    x = rng.uniform(1.0, 100.0, size=(40, width))
    y = 3.0 + 2.0 * x - 0.004 * x**2 * (model == "quadratic") + rng.normal(size=x.shape)
    if model == "origin":
        y -= 3.0
    mask = rng.random(x.shape) < 0.8
    places = np.sort(rng.choice(width, size=n_data, replace=False))
    x[NIST_ROW], y[NIST_ROW] = np.nan, np.nan
    x[NIST_ROW, places], y[NIST_ROW, places] = data[:, 0], data[:, 1]
    mask[NIST_ROW] = False
    mask[NIST_ROW, places] = True
    batch = fit_batch(x, y, model=model, mask=mask)
    assert batch.problems == (None,) * 40
    return name, batch, CERTIFIED[name]


def test_nist_in_a_batch_keeps_twelve_digits(nist: tuple[str, BatchFit, dict]) -> None:
    name, batch, cert = nist
    k = NIST_ROW
    assert batch.residual_df[k] == cert["residual_df"]
    for j, coef in enumerate(batch.names):
        digits = lre(batch.coefficients[k, j], cert["estimates"][j])
        assert digits >= 12, f"{name} {coef}: LRE {digits:.1f}"
        digits = lre(batch.std_error(coef)[k], cert["std_errors"][j])
        assert digits >= 12, f"{name} SE({coef}): LRE {digits:.1f}"
    assert lre(batch.residual_sd[k], cert["residual_sd"]) >= 12, name
    # NoInt1–2: the certified R² is the uncentred one, which the origin model reports.
    assert lre(batch.r_squared[k], cert["r_squared"]) >= 12, name
    fit = batch.curve(k)
    assert fit.n_points == cert["n"]
    assert lre(fit.std_error("slope"), cert["std_errors"][batch.names.index("slope")]) >= 12


# --- Degenerate curves -------------------------------------------------------------------

GOOD = 12


def degenerate_linear() -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[int, str]]:
    """Twelve invented good curves with bad ones slotted in at known rows."""
    x, y, mask = invented_batch("linear", 404, curves=GOOD)
    bad_x = np.tile(np.repeat(LEVELS, 3), (6, 1))
    bad_y = 2.0 + 3.0 * bad_x + np.cos(bad_x)
    bad_mask = np.ones(bad_x.shape, dtype=bool)
    bad_mask[0, 2:] = False  # two points for a straight line
    bad_x[1] = 5.0  # one concentration only
    bad_y[2, 4] = np.inf  # a response that is not a number
    bad_mask[3] = False  # no point at all
    bad_x[4] = 0.0  # every concentration 0: the slope column is all zeros
    bad_y[5] = 7.5  # responses that do not vary: fitted, flat, R² undefined
    rows = [3, 4, 9, 10, 15, 17]
    xs, ys, ms = (np.insert(a, [r - i for i, r in enumerate(rows)], b, axis=0)
                  for a, b in ((x, bad_x), (y, bad_y), (mask, bad_mask)))
    expected = {
        3: "model linear needs at least 3 points; got 2",
        4: "the design is singular (rank 1 < 2 parameters)",
        9: "x and y must be finite numbers",
        10: "model linear needs at least 3 points; got 0",
        15: "the design matrix has a column of zeros or non-finite values",
    }
    return xs, ys, ms, expected


def test_degenerate_curves_are_reported_with_fit_curves_reason() -> None:
    x, y, mask, expected = degenerate_linear()
    batch = fit_batch(x, y, model="linear", mask=mask)
    assert {k: p for k, p in enumerate(batch.problems) if p is not None} == expected
    for k, message in expected.items():
        with pytest.raises(ValueError) as err:
            fit_curve(x[k, mask[k]], y[k, mask[k]], model="linear")
        assert str(err.value) == message
        with pytest.raises(ValueError, match="^curve .* has no fit: ") as err:
            batch.curve(k)
        assert str(err.value) == f"curve {k} has no fit: {message}"
    np.testing.assert_array_equal(batch.fitted_ok, [k not in expected for k in range(len(x))])


def test_degenerate_curves_hold_nan_everywhere() -> None:
    x, y, mask, expected = degenerate_linear()
    batch = fit_batch(x, y, model="linear", mask=mask)
    bad = sorted(expected)
    for figure in (batch.coefficients, batch.covariance, batch.residual_df, batch.residual_sd,
                   batch.r_squared, batch.fitted, batch.residuals):
        assert np.isnan(figure[bad]).all()
    for method in ("std_error", "t_value", "p_value", "coefficient"):
        assert np.isnan(getattr(batch, method)("slope")[bad]).all(), method
    assert np.isnan(batch.t_critical()[bad]).all()
    assert np.isnan(np.stack(batch.confidence_interval("slope"))[:, bad]).all()
    assert np.isnan(batch.back_calculate(10.0)[bad]).all()


def test_good_curves_are_unaffected_by_degenerate_ones() -> None:
    x, y, mask, expected = degenerate_linear()
    batch = fit_batch(x, y, model="linear", mask=mask)
    flat = 17
    keep = [k for k in range(len(x)) if k not in expected and k != flat]
    alone = fit_batch(x[keep], y[keep], model="linear", mask=mask[keep])
    for field in ("coefficients", "covariance", "residual_df", "residual_sd", "r_squared",
                  "fitted", "residuals", "weights"):
        np.testing.assert_array_equal(getattr(batch, field)[keep], getattr(alone, field),
                                      err_msg=field)
    np.testing.assert_array_equal(batch.p_value("intercept")[keep], alone.p_value("intercept"))


def test_constant_responses_give_a_flat_line_as_fit_curve_does() -> None:
    x, y, mask, _ = degenerate_linear()
    batch = fit_batch(x, y, model="linear", mask=mask)
    flat = 17
    assert batch.problems[flat] is None
    want = fit_curve(x[flat], y[flat], model="linear")
    assert math.isnan(want.r_squared) and math.isnan(batch.r_squared[flat])
    # The true slope and residuals are 0 here, so they are compared with a tiny atol.
    np.testing.assert_allclose(batch.coefficients[flat], list(want.coefficients.values()),
                               rtol=RTOL, atol=1e-12)
    np.testing.assert_allclose(batch.residuals[flat], want.residuals, atol=1e-12)


@pytest.mark.parametrize(
    ("model", "weighting", "xs", "message"),
    [
        ("linear", "1/x", [0.0, 1.0, 2.0, 3.0], "weighting 1/x needs positive concentrations"),
        ("origin", "1/x2", [-1.0, 1.0, 2.0, 3.0], "weighting 1/x2 needs positive concentrations"),
        ("quadratic", "none", [1.0, 1.0, 2.0, 2.0, 2.0],
         "the design is singular (rank 2 < 3 parameters)"),
        ("origin", "none", [0.0, 0.0, 0.0], ("the design matrix has a column of zeros or "
         "non-finite values")),
        ("mean-rf", "none", [0.0, 1.0, 2.0, 3.0], ("model mean-rf needs concentrations above 0 "
         "(each response is divided by its concentration)")),
        ("linear", "1/y", [1.0, 2.0, 3.0, 4.0], "weighting 1/y needs positive responses"),
        ("quadratic", "1/s2", [1.0, 1.0, 2.0, 2.0, 3.0], ("weighting 1/s2 needs at least 2 "
         "replicates at each level; concentration 3 has 1")),
    ],
)
def test_weighting_and_design_problems_match_fit_curve(
    model: str, weighting: str, xs: list[float], message: str
) -> None:
    # Good curves on either side: four levels in duplicate, so that 1/s2 can weight them.
    good_x = np.array([[1.0, 1.0, 2.0, 2.0, 3.0, 3.0, 4.0, 4.0]] * 2)
    good_y = 1.0 + 2.0 * good_x + np.array([[0.1, -0.1, 0.05, 0.0, -0.02, 0.03, 0.08, -0.04]])
    x = np.full((3, 8), np.nan)
    y = np.full((3, 8), np.nan)
    x[[0, 2]], y[[0, 2]] = good_x, good_y
    x[1, : len(xs)] = xs
    y[1, : len(xs)] = np.arange(len(xs)) ** 1.5 - 0.5  # the first response is below 0
    mask = np.isfinite(x)
    batch = fit_batch(x, y, model=model, weighting=weighting, mask=mask)
    assert batch.problems == (None, message, None)
    with pytest.raises(ValueError) as err:
        fit_curve(xs, y[1, : len(xs)], model=model, weighting=weighting)
    assert str(err.value) == message
    alone = fit_batch(x[[0, 2]], y[[0, 2]], model=model, weighting=weighting, mask=mask[[0, 2]])
    np.testing.assert_array_equal(batch.coefficients[[0, 2]], alone.coefficients)


def test_precomputed_weights_match_the_named_weighting() -> None:
    x, y, mask = invented_batch("linear", 9, curves=30)
    by_name = fit_batch(x, y, model="linear", weighting="1/x2", mask=mask)
    raw = np.where(mask, 5.0 / x**2, np.nan)  # any positive multiple: rescaled to mean 1
    given = fit_batch(x, y, model="linear", weighting="1/x2", weights=raw, mask=mask)
    np.testing.assert_allclose(given.weights, by_name.weights, rtol=RTOL)
    np.testing.assert_allclose(given.coefficients, by_name.coefficients, rtol=RTOL)
    np.testing.assert_allclose(given.covariance, by_name.covariance, rtol=RTOL)
    assert given.curve(0).weighting.value == "1/x2"


def test_bad_precomputed_weights_are_a_curve_problem() -> None:
    x = np.array([[1.0, 2.0, 3.0, 4.0]] * 3)
    y = 2.0 * x + np.array([[0.1, -0.1, 0.05, 0.0]])
    w = np.ones_like(x)
    w[1, 2] = 0.0
    w[2, 3] = np.nan
    mask = np.ones(x.shape, dtype=bool)
    mask[2, 3] = False  # the nan weight sits on an unused point: harmless
    batch = fit_batch(x, y, model="linear", weighting="none", weights=w, mask=mask)
    assert batch.problems == (
        None, "weights must be positive finite numbers at every used point", None
    )


def test_results_are_read_only() -> None:
    batch = fit_batch([[1.0, 2.0, 3.0]], [[2.0, 4.1, 5.9]], model="origin")
    for name in ("x", "y", "mask", "weights", "coefficients", "covariance", "residual_df",
                 "residual_sd", "r_squared", "fitted", "residuals", "covariance_root"):
        with pytest.raises(ValueError, match="read-only"):
            getattr(batch, name)[0] = 1.0
    # The inference methods hand out copies: changing one leaves the batch as it was.
    se = batch.std_error("slope")
    se[0] = -1.0
    assert batch.std_error("slope")[0] > 0


def test_fitted_values_are_the_responses_less_the_residuals() -> None:
    x, y, mask = invented_batch("quadratic", 12, curves=30)
    batch = fit_batch(x, y, model="quadratic", mask=mask)
    np.testing.assert_array_equal(batch.fitted, batch.y - batch.residuals)
    assert np.isnan(batch.fitted[~mask]).all()


def test_inputs_are_copied() -> None:
    x, y, mask = invented_batch("linear", 13, curves=5)
    batch = fit_batch(x, y, model="linear", mask=mask)
    before = batch.x.copy(), batch.y.copy()
    x[:] = 0.0
    y[:] = 0.0
    mask[:] = False
    np.testing.assert_array_equal(batch.x, before[0])
    np.testing.assert_array_equal(batch.y, before[1])
    assert batch.mask.any()


def test_an_empty_batch() -> None:
    batch = fit_batch(np.zeros((0, 6)), np.zeros((0, 6)), model="quadratic")
    assert batch.problems == () and batch.coefficients.shape == (0, 3)
    assert batch.p_value("quadratic").shape == (0,)


# --- Wrong arguments -----------------------------------------------------------------------

X3 = [[1.0, 2.0, 3.0, 4.0]]
Y3 = [[2.0, 4.1, 5.9, 8.2]]


def test_mean_rf_takes_no_weighting_and_no_weights() -> None:
    message = ("model mean-rf is fitted with weighting 1/x2 (each response factor yᵢ/xᵢ counts "
               "alike) and takes no other; got weighting 1/x: leave the weighting out, or choose "
               "another model")
    with pytest.raises(ValueError) as err:
        fit_curve(X3[0], Y3[0], model="mean-rf", weighting="1/x")
    assert str(err.value) == message
    with pytest.raises(ValueError) as err:
        fit_batch(X3, Y3, model="mean-rf", weighting="1/x")
    assert str(err.value) == message
    with pytest.raises(ValueError) as err:
        fit_batch(X3, Y3, model="mean-rf", weighting="none", weights=[[1.0] * 4])
    assert str(err.value) == "model mean-rf fixes its own weights (1/x2); weights must not be given"


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0]},
         ("x and y must be 2-D arrays of the same shape (curves × points); "
         "got shapes (3,) and (3,)")),
        ({"y": [[1.0, 2.0, 3.0]]},
         ("x and y must be 2-D arrays of the same shape (curves × points); "
         "got shapes (1, 4) and (1, 3)")),
        ({"mask": [[1, 1, 1, 0]]},
         "mask must be an array of True/False (True = point used); got dtype int64"),
        ({"mask": [[True, True]]}, "mask must have the shape of x, (1, 4); got (1, 2)"),
        ({"weights": [[1.0, 1.0, 1.0, 1.0]]},
         ("weights were given without the weighting that produced them; "
         "pass weighting= as well, so each curve records what was fitted")),
        ({"weights": [[1.0, 1.0]], "weighting": "1/x"},
         "weights must have the shape of x, (1, 4); got (1, 2)"),
        ({"weighting": "1/z"}, "weighting must be one of "),
        ({"confidence": 1.0}, "confidence must be a number from 0.5 to below 1; got 1.0"),
        ({"model": "cubic"}, "model must be one of "),
    ],
)
def test_wrong_arguments_raise(kwargs: dict, message: str) -> None:
    args = {"x": X3, "y": Y3, "model": "linear"} | kwargs
    with pytest.raises(ValueError) as err:
        fit_batch(args.pop("x"), args.pop("y"), **args)
    assert str(err.value).startswith(message)
    if message.endswith("one of "):
        assert str(err.value).endswith(f"got {kwargs.get('weighting', kwargs.get('model'))!r}")


def test_wrong_method_arguments_raise() -> None:
    batch = fit_batch(X3 * 3, Y3 * 3, model="origin")
    with pytest.raises(ValueError) as err:
        batch.std_error("intercept")
    assert str(err.value) == "coefficient must be one of slope for model origin; got 'intercept'"
    with pytest.raises(ValueError) as err:
        batch.back_calculate([1.0, 2.0])
    assert str(err.value) == (
        "response must be a number or have one row per curve, shape (3,) or (3, m); "
        "got shape (2,)"
    )
    with pytest.raises(ValueError) as err:
        batch.t_value("slope", [1.0, 2.0])
    assert str(err.value) == "reference must be a number or one per curve, shape (3,); got (2,)"
    with pytest.raises(ValueError) as err:
        batch.curve(3)
    assert str(err.value) == "curve must be an index below 3; got 3"
    with pytest.raises(ValueError) as err:
        batch.t_critical(0.3)
    assert str(err.value) == "confidence must be a number from 0.5 to below 1; got 0.3"
