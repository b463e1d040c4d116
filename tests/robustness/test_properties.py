"""Property-based tests of the importer and the fitter (hypothesis, modest example counts)."""

from __future__ import annotations

import math
from itertools import pairwise

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from openpyxl import Workbook

from calib.checks import evaluate_run
from calib.errors import InputError
from calib.fit import fit_curve
from calib.fit.design import design_matrix
from calib.fit.wls import solve_wls
from calib.io import read_run
from calib.options import Model
from calib.run import Point, Run
from tests.conftest import make_run

SETTINGS = settings(max_examples=60, deadline=None, database=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])

CELL = st.one_of(
    st.none(), st.booleans(), st.integers(-10**6, 10**6),
    st.floats(allow_nan=True, allow_infinity=True, width=64),
    st.text(st.characters(blacklist_categories=("Cs",)), max_size=12),
    st.sampled_from(["Concentration", "Response", "Analyte", "ND", "<LOD", "#DIV/0!", "n/a",
                     "mg/L", "Cal-1", "1,5", "1e999", "-0", "Replicate", "Include", "no"]),
)
TABLE = st.lists(st.lists(CELL, min_size=1, max_size=6), min_size=0, max_size=12)


def _csv_text(value) -> str:
    if value is None:
        return ""
    text = str(value)
    if any(c in text for c in ',"\n\r'):
        text = '"' + text.replace('"', '""') + '"'
    return text


@SETTINGS
@given(table=TABLE, header=st.booleans())
def test_any_table_as_csv_reads_or_raises_input_error(tmp_path_factory, table, header):
    rows = ([["Analyte", "Concentration (mg/L)", "Response"]] if header else []) + table
    path = tmp_path_factory.mktemp("csv") / "run.csv"
    path.write_text("\n".join(",".join(_csv_text(v) for v in row) for row in rows) + "\n",
                    encoding="utf-8", errors="surrogatepass")
    try:
        run = read_run(path)
    except InputError as exc:
        assert str(exc).startswith("run.csv") or "run.csv" in str(exc)
        return
    assert all(math.isfinite(p.concentration) for p in run.points if p.included)


@SETTINGS
@given(table=TABLE, header=st.booleans())
def test_any_table_as_xlsx_reads_or_raises_input_error(tmp_path_factory, table, header):
    book = Workbook()
    sheet = book.active
    if header:
        sheet.append(["Analyte", "Concentration (mg/L)", "Response"])
    for row in table:
        # openpyxl itself refuses control characters and non-finite numbers in cells.
        sheet.append([None if isinstance(v, float) and not math.isfinite(v) else
                      "".join(c for c in v if c.isprintable()) if isinstance(v, str) else v
                      for v in row])
    path = tmp_path_factory.mktemp("xlsx") / "run.xlsx"
    book.save(path)
    try:
        read_run(path)
    except InputError as exc:
        assert "run.xlsx" in str(exc)


# --- the fitter and the evaluator ---------------------------------------------------------

# Levels apart by more than rounding: scaling the concentrations by k must not make two
# of them equal (999.9999999999999 and 1000.0 become the same level at k = 0.1, which
# hypothesis found); calib counts levels by exact equality of the nominal values.
LEVELS = st.lists(st.floats(0.1, 1000), min_size=5, max_size=7, unique=True).map(sorted).filter(
    lambda levels: all(b > a * (1 + 1e-9) for a, b in pairwise(levels)))


@st.composite
def curves(draw):
    levels = draw(LEVELS)
    slope = draw(st.floats(0.01, 100))
    intercept = draw(st.floats(-1, 1))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    xs = [x for x in levels for _ in range(3)]
    ys = [intercept + slope * x * (1 + rng.normal(0, 0.02)) for x in xs]
    return xs, ys


def _verdicts(run: Run, **options) -> list[tuple[str, str]]:
    curve = evaluate_run(run, **options).curves[0]
    return [curve.verdict.value] + [(c.id, c.verdict.value) for c in curve.checks]


@SETTINGS
@given(data=curves(), seed=st.integers(0, 1000))
def test_row_order_does_not_change_the_results(data, seed):
    xs, ys = data
    order = np.random.default_rng(seed).permutation(len(xs))
    a = fit_curve(xs, ys, weighting="1/x")
    b = fit_curve([xs[i] for i in order], [ys[i] for i in order], weighting="1/x")
    for name in a.coefficients:
        assert math.isclose(a.coefficients[name], b.coefficients[name], rel_tol=1e-9,
                            abs_tol=1e-12)
        assert math.isclose(a.std_error(name), b.std_error(name), rel_tol=1e-7, abs_tol=1e-14)
    assert _verdicts(make_run(xs, ys)) == _verdicts(
        make_run([xs[i] for i in order], [ys[i] for i in order]))


@SETTINGS
@given(data=curves(), k=st.sampled_from([1e-3, 0.1, 7.0, 1000.0]))
def test_scaling_concentration_scales_the_slope_and_keeps_verdicts(data, k):
    xs, ys = data
    a = fit_curve(xs, ys)
    b = fit_curve([k * x for x in xs], ys)
    assert math.isclose(b.coefficients["slope"], a.coefficients["slope"] / k, rel_tol=1e-8)
    assert math.isclose(b.coefficients["intercept"], a.coefficients["intercept"],
                        rel_tol=1e-7, abs_tol=1e-9 * max(map(abs, ys)))
    assert math.isclose(b.p_value("intercept"), a.p_value("intercept"), rel_tol=1e-6,
                        abs_tol=1e-12)
    assert _verdicts(make_run(xs, ys)) == _verdicts(make_run([k * x for x in xs], ys))


@SETTINGS
@given(data=curves(), c=st.sampled_from([1e-6, 0.3, 42.0, 1e6]))
def test_scaling_all_weights_changes_nothing(data, c):
    xs, ys = data
    x, y = np.asarray(xs), np.asarray(ys)
    w = 1 / x
    a = solve_wls(design_matrix(x, Model.LINEAR), y, w)
    b = solve_wls(design_matrix(x, Model.LINEAR), y, c * w)
    assert np.allclose(a.beta, b.beta, rtol=1e-9, atol=1e-12)
    # Covariance of the estimates: s² (XᵀWX)⁻¹ with s² = weighted SS / (N − p).
    cov_a = a.unscaled_covariance * a.weighted_ss
    cov_b = b.unscaled_covariance * b.weighted_ss
    assert np.allclose(cov_a, cov_b, rtol=1e-7, atol=0)


@SETTINGS
@given(data=curves(), where=st.floats(0, 1), response=st.floats(-1e6, 1e6))
def test_an_excluded_point_changes_nothing(data, where, response):
    # Inside the range of the levels. An excluded standard below the lowest level (or above
    # the highest) was the run's LLOQ (ULOQ): the next level is then a new LLOQ held to the
    # main tolerance (ICH M10 3.3.2, from memory; tests/checks/test_guidance_boundaries.py).
    xs, ys = data
    at = min(xs) + where * (max(xs) - min(xs))
    plain = make_run(xs, ys)
    extra = Point(analyte="A", concentration=at, response=response, source_cell="Run!C99",
                  included=False, exclusion_reason="vial cap not seated")
    with_excluded = Run(plain.source, (*plain.points, extra))
    a = evaluate_run(plain).curves[0]
    b = evaluate_run(with_excluded).curves[0]
    assert a.fit.coefficients == b.fit.coefficients
    assert _verdicts(plain) == _verdicts(with_excluded)
