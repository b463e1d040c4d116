"""The batched path of evaluate_run gives what the per-curve path gives.

``evaluate_run`` fits the full-range curves of a run in one ``fit_batch`` call and hands
each ``BatchFit.curve(k)`` to the per-curve assessment.  Here the same runs are judged
with the batch switched off (every curve through ``fit_curve``) and every number of
every curve, standard, check, detection limit and proposal is compared to 1e-12
relative (SPEC §8: accuracy is not traded for speed); every word and verdict must be
the same.  The reference is calib's own per-curve path, itself pinned to NIST StRD and
statsmodels in ``tests/fit/``.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from calib.checks import evaluate as evaluate_module
from calib.checks.evaluate import assess_curve, evaluate_run
from calib.checks.profile import load_profile
from calib.options import Model, SampleType, Weighting
from calib.run import Point
from tests.checks.runs import curve_points, make_run

REL = 1e-12
#: Check values built from a difference of two fits' residual sums of squares (Mandel's
#: test) magnify the fits' ~1e-13 roundoff; measured at most 1.8e-12 here, so 1e-11.
CHECK_REL = 1e-11
#: A deviation is 100·(back − x)/x: it inherits the back-calculated value's error in
#: percentage points, not relative to itself (it is often near 0).
DEVIATION_ABS = 100 * REL
LEVELS = (0.5, 1, 2, 5, 10, 20, 50)


def _noisy(analyte: str, seed: int, *, b: float, first_row: int) -> list[Point]:
    """Replicate triplets with invented multiplicative noise about y = 0.01 + b·x."""
    rng = np.random.default_rng(seed)
    points = curve_points(LEVELS, replicates=3, b=b, analyte=analyte, first_row=first_row)
    return [dataclasses.replace(p, response=p.response * (1 + 0.02 * rng.standard_normal()))
            for p in points]


def _mixed_run():
    """Five analytes: plain, with excluded points, with zero standards, unfittable, and QCs."""
    plain = _noisy("Alpha", 1, b=0.8, first_row=2)
    excluded = _noisy("Bravo", 2, b=2.5, first_row=40)
    excluded[3] = dataclasses.replace(excluded[3], included=False,
                                      exclusion_reason="vial cap not seated")
    excluded[10] = dataclasses.replace(excluded[10], included=False,
                                       exclusion_reason="injection failed")
    zeros = [Point("Charlie", 0.0, 0.004, f"Run!D{80 + i}") for i in range(3)]
    zeros += _noisy("Charlie", 3, b=1.3, first_row=83)
    unfittable = [Point("Delta", 5.0, 4.1, "Run!D120"), Point("Delta", 5.0, 4.0, "Run!D121"),
                  Point("Delta", 5.0, 4.2, "Run!D122")]
    with_qc = _noisy("Echo", 5, b=0.05, first_row=130)
    with_qc += [Point("Echo", 0.0, 0.0011, "Run!D170", sample_type=SampleType.BLANK),
                Point("Echo", 3.0, 0.0102 + 0.15, "Run!D171", sample_type=SampleType.QC),
                Point("Echo", 30.0, 0.0098 + 1.5, "Run!D172", sample_type=SampleType.QC)]
    return make_run([*plain, *excluded, *zeros, *unfittable, *with_qc])


def _per_curve(monkeypatch: pytest.MonkeyPatch, run, **options):
    with monkeypatch.context() as patch:
        patch.setattr(evaluate_module, "_batched_fits", lambda *a, **k: {})
        return evaluate_run(run, **options)


def _assert_same(a, b, where: str = "") -> None:
    """Equal words and flags; numbers to 1e-12 relative (arrays: relative to their scale)."""
    if where.endswith(".deviation_pct") and a is not None:
        assert abs(a - b) <= DEVIATION_ABS, (where, a, b)
    elif ".checks[" in where and where.endswith((".value", ".p_value", ".statistic_value",
                                                  ".adjusted_p")) and isinstance(a, float):
        assert math.isnan(a) and math.isnan(b) or abs(a - b) <= CHECK_REL * abs(b), (where, a, b)
    elif dataclasses.is_dataclass(a) and not isinstance(a, type):
        assert type(a) is type(b), where
        for field in dataclasses.fields(a):
            _assert_same(getattr(a, field.name), getattr(b, field.name), f"{where}.{field.name}")
    elif isinstance(a, np.ndarray):
        assert a.shape == b.shape, where
        scale = float(np.nanmax(np.abs(b))) if b.size and np.isfinite(b).any() else 0.0
        np.testing.assert_allclose(a, b, rtol=0, atol=REL * scale, equal_nan=True, err_msg=where)
    elif isinstance(a, dict):
        assert a.keys() == b.keys(), where
        for key in a:
            _assert_same(a[key], b[key], f"{where}[{key!r}]")
    elif isinstance(a, list | tuple):
        assert len(a) == len(b), where
        for i, (x, y) in enumerate(zip(a, b)):
            _assert_same(x, y, f"{where}[{i}]")
    elif isinstance(a, float) and not isinstance(a, bool):
        assert isinstance(b, float), where
        if math.isnan(b):
            assert math.isnan(a), where
        else:
            assert abs(a - b) <= REL * abs(b) + 1e-300, (where, a, b)
    else:
        assert a == b, where


@pytest.mark.parametrize(("model", "weighting"), [
    ("linear", "none"), ("linear", "1/x"), ("linear", "1/x2"), ("quadratic", "1/x"),
    ("origin", "none"), ("linear", "1/s2"),
])
def test_batched_and_per_curve_paths_agree(monkeypatch, model, weighting):
    run = _mixed_run()
    batched = evaluate_run(run, model=model, weighting=weighting)
    alone = _per_curve(monkeypatch, run, model=model, weighting=weighting)
    assert [c.analyte for c in batched.curves] == ["Alpha", "Bravo", "Charlie", "Delta", "Echo"]
    _assert_same(batched.curves, alone.curves, "curves")
    assert batched.verdict is alone.verdict


def test_the_run_is_fitted_in_one_batch(monkeypatch):
    calls = []
    real = evaluate_module.fit_batch

    def spy(x, y, **options):
        calls.append(np.asarray(x).shape)
        return real(x, y, **options)

    monkeypatch.setattr(evaluate_module, "fit_batch", spy)
    assessment = evaluate_run(_mixed_run(), model="linear", weighting="1/x")
    # Delta (one level) never reaches the batch; the four others share one call.
    assert calls == [(4, 21)]  # 7 levels × 3 used points at most
    assert assessment.curves[3].fit is None


def test_zero_standards_under_1_over_x_leave_the_fit_in_both_paths(monkeypatch):
    run = _mixed_run()
    charlie = evaluate_run(run, weighting="1/x").curves[2]
    zeros = [s for s in charlie.standards if s.point.concentration == 0]
    assert len(zeros) == 3 and not any(s.used for s in zeros)
    assert charlie.fit is not None and charlie.fit.x.size == 21
    alone = _per_curve(monkeypatch, run, weighting="1/x").curves[2]
    assert [s.exclusion_reason for s in zeros] == [s.exclusion_reason for s in alone.standards[:3]]


def test_unfittable_curve_keeps_its_per_curve_reason(monkeypatch):
    run = _mixed_run()
    delta = evaluate_run(run).curves[3]
    assert delta.fit is None
    assert delta.unfitted_reason == ("the linear model needs at least 2 concentration levels; "
                                     "1 available")
    assert delta.unfitted_reason == _per_curve(monkeypatch, run).curves[3].unfitted_reason


def test_batched_curve_matches_assess_curve_directly():
    run = _mixed_run()
    profile = load_profile("default")
    batched = evaluate_run(run, profile=profile, weighting="1/x2").curves[1]
    direct = assess_curve("Bravo", run.standards("Bravo"), model=Model.LINEAR,
                          weighting=Weighting.INV_X2, confidence=profile.confidence,
                          profile=profile)
    # evaluate_run adds the range proposal; the rest is assess_curve's.
    _assert_same(dataclasses.replace(batched, proposal=None), direct, "Bravo")
    excluded = [s for s in batched.standards if not s.used]
    assert [s.exclusion_reason for s in excluded] == ["vial cap not seated", "injection failed"]


def test_a_run_of_one_curve_takes_the_per_curve_path(monkeypatch):
    def refuse(*args, **kwargs):
        raise AssertionError("fit_batch is not worth calling for one curve")

    monkeypatch.setattr(evaluate_module, "fit_batch", refuse)
    run = make_run(_noisy("Alpha", 1, b=0.8, first_row=2))
    assert evaluate_run(run).curves[0].fit is not None


def test_progress_is_reported_after_each_analyte():
    seen = []
    evaluate_run(_mixed_run(), progress=lambda done, total: seen.append((done, total)))
    assert seen == [(1, 5), (2, 5), (3, 5), (4, 5), (5, 5)]
