"""Flags, reported values, dilution and refusal: no sample above the top standard is ever a number."""

from __future__ import annotations

import math

import numpy as np
import pytest

from calib.errors import InputError
from calib.fit import fit_curve
from calib.options import SampleType
from calib.quantify.batch import Flag, ReportingConvention, quantify, quantify_sample
from calib.quantify.curve import CalibrationCurve
from calib.quantify.inverse import inverse_predict
from tests.quantify.helpers import reading, standards


def nitrate_curve(*, zero: bool = False, lod: float | None = None,
                  verdict: str = "accepted") -> CalibrationCurve:
    points = standards()
    if zero:
        points = [(0.0, 0.0012), (0.0, -0.0009), (0.0, 0.0003), *points]
    x, y = zip(*points)
    return CalibrationCurve.from_fit(fit_curve(x, y), analyte="Nitrate-N", verdict=verdict,
                                     lod=lod, unit="mg/L")


def is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


CURVE = nitrate_curve()
TOP = float(CURVE.predict(CURVE.x_max)[0])
BOTTOM = float(CURVE.predict(CURVE.x_min)[0])


@pytest.mark.parametrize("factor", [1.0 + 1e-7, 1.01, 1.5, 10.0, 1e6])
@pytest.mark.parametrize("dilution", [1.0, 10.0])
def test_above_the_top_standard_is_never_a_number(factor, dilution):
    result = quantify_sample(CURVE, [reading(TOP * factor, "S-1", dilution=dilution)])
    assert result.reported == "> ULOQ" and not is_number(result.reported)
    assert result.flags == (Flag.ABOVE_ULOQ.value, Flag.OUTSIDE_RANGE.value)
    assert result.note == "dilute and re-run"
    assert (result.concentration, result.std_error, result.ci_low, result.ci_high) == (None,) * 4


def test_a_response_at_the_top_standard_is_inside_the_range():
    result = quantify_sample(CURVE, [reading(TOP, "S-1")])
    assert result.flags == ()
    assert result.concentration == pytest.approx(10.0, rel=1e-9)
    assert result.reported == "10.0"


def test_just_below_the_top_is_reported_and_just_above_is_not():
    below = quantify_sample(CURVE, [reading(TOP * (1 - 1e-6), "S-1")])
    above = quantify_sample(CURVE, [reading(TOP * (1 + 1e-6), "S-2")])
    assert below.flags == () and is_number(below.reported)
    assert Flag.ABOVE_ULOQ.value in above.flags and above.concentration is None


def test_below_the_lowest_standard_is_outside_the_range_and_not_a_number():
    result = quantify_sample(CURVE, [reading(BOTTOM * 0.8, "S-1")])
    assert result.flags == (Flag.OUTSIDE_RANGE.value, Flag.BELOW_LLOQ.value)
    assert result.reported == "< LLOQ" and result.concentration is None
    assert result.note == "below the calibrated range"


def test_at_the_lloq_is_reported():
    result = quantify_sample(CURVE, [reading(BOTTOM, "S-1")])
    assert result.flags == () and result.concentration == pytest.approx(0.5, rel=1e-9)


def test_between_a_zero_standard_and_the_lloq_keeps_its_number_but_reports_below_lloq():
    curve = nitrate_curve(zero=True)
    assert (curve.x_min, curve.lloq) == (0.0, 0.5)
    result = quantify_sample(curve, [reading(float(curve.predict(0.3)[0]), "S-1")])
    assert result.flags == (Flag.BELOW_LLOQ.value,)
    assert result.reported == "< LLOQ"
    assert result.concentration == pytest.approx(0.3, rel=1e-9)


def test_below_the_lod_is_reported_as_below_lod():
    curve = nitrate_curve(zero=True, lod=0.2)
    result = quantify_sample(curve, [reading(float(curve.predict(0.1)[0]), "S-1")])
    assert result.flags == (Flag.BELOW_LLOQ.value, Flag.BELOW_LOD.value)
    assert result.reported == "< LOD"
    at_lod = quantify_sample(curve, [reading(float(curve.predict(0.2)[0]) * 1.0001, "S-2")])
    assert Flag.BELOW_LOD.value not in at_lod.flags


def test_dilution_multiplies_the_concentration_its_error_and_interval():
    y0 = float(CURVE.predict(4.0)[0])
    plain = quantify_sample(CURVE, [reading(y0, "S-1"), reading(y0 + 0.002, "S-1")])
    diluted = quantify_sample(CURVE, [reading(y0, "S-1", dilution=20),
                                      reading(y0 + 0.002, "S-1", dilution=20)])
    assert diluted.n_replicates == 2 and diluted.dilution_factor == 20
    for name in ("concentration", "std_error", "ci_low", "ci_high"):
        assert getattr(diluted, name) == pytest.approx(20 * getattr(plain, name), rel=1e-12)
    assert diluted.reported == ReportingConvention().number(diluted.concentration)


def test_the_mean_of_the_usable_replicates_is_read_back():
    y0 = float(CURVE.predict(3.0)[0])
    result = quantify_sample(CURVE, [
        reading(y0 - 0.001, "S-1"), reading(y0 + 0.001, "S-1"),
        reading(math.nan, "S-1", included=False, reason="response not detected ('ND' in the file)"),
    ])
    expected = inverse_predict(CURVE, y0, m=2)
    assert result.n_replicates == 2 and result.mean_response == pytest.approx(y0)
    assert result.std_error == pytest.approx(expected.std_error, rel=1e-12)


def test_a_sample_without_a_usable_reading_has_no_result():
    result = quantify_sample(CURVE, [reading(math.nan, "S-1", included=False,
                                             reason="response not detected ('ND' in the file)")])
    assert result.flags == (Flag.NO_READING.value,) and result.reported == "no result"
    assert result.note == "response not detected ('ND' in the file)"


def test_a_quadratic_beyond_its_turning_point_is_above_the_range():
    x = np.array([1, 2, 4, 6, 8, 10], dtype=float)
    curve = CalibrationCurve.from_fit(fit_curve(x, 2 * x - 0.08 * x**2, model="quadratic"),
                                      analyte="A")
    # The curve peaks at 12.5 (y = 12.5), beyond the top standard; 13 is never reached.
    result = quantify_sample(curve, [reading(13.0, "S-1", analyte="A")])
    assert result.prediction is not None and math.isnan(result.prediction.concentration)
    assert result.reported == "> ULOQ" and result.concentration is None


def test_a_lab_convention_changes_the_words_only():
    convention = ReportingConvention(above_uloq="over range", below_lloq="BLQ", digits=4)
    high = quantify_sample(CURVE, [reading(TOP * 2, "S-1")], convention=convention)
    low = quantify_sample(CURVE, [reading(BOTTOM * 0.5, "S-2")], convention=convention)
    mid = quantify_sample(CURVE, [reading(float(CURVE.predict(4.321)[0]), "S-3")],
                          convention=convention)
    assert (high.reported, low.reported, mid.reported) == ("over range", "BLQ", "4.321")


def test_qc_read_back_just_outside_the_range_keeps_its_deviation():
    qc = reading(BOTTOM * 0.98, "QC-LLOQ", kind=SampleType.QC, nominal=0.5)
    result = quantify_sample(CURVE, [qc])
    assert result.concentration is None and result.reported == "< LLOQ"
    assert result.found is not None and result.deviation_pct == pytest.approx(
        100 * (result.found - 0.5) / 0.5)


def test_rejected_curve_is_refused_unless_forced():
    curve = nitrate_curve(verdict="rejected")
    samples = [reading(float(curve.predict(3.0)[0]), "S-1")]
    refused = quantify({"Nitrate-N": curve}, samples)
    assert refused.verdict == "rejected" and refused.forced == ()
    assert "Nitrate-N" in refused.refused
    only = refused.samples[0]
    assert only.flags == (Flag.CURVE_REJECTED.value,) and only.reported == "not reported"
    assert only.concentration is None and only.prediction is None
    forced = quantify({"Nitrate-N": curve}, samples, force=True)
    assert forced.verdict == "rejected" and forced.forced == ("Nitrate-N",)
    assert forced.samples[0].flags == (Flag.FORCED.value,)
    assert forced.samples[0].concentration == pytest.approx(3.0, rel=1e-9)
    assert "was rejected (quantified on request)" in forced.reasons[0]


def test_a_curve_needing_review_sends_the_batch_to_review():
    batch = quantify({"Nitrate-N": nitrate_curve(verdict="needs-review")},
                     [reading(float(CURVE.predict(3.0)[0]), "S-1")])
    assert batch.verdict == "needs-review"
    assert batch.reasons == ("Nitrate-N: the curve needs review",)


def test_accepted_curve_and_no_qc_gives_an_accepted_batch():
    batch = quantify({"Nitrate-N": CURVE}, [reading(float(CURVE.predict(3.0)[0]), "S-1")])
    assert batch.verdict == "accepted" and batch.qc[0].verdict == "not-evaluated"


def test_a_sample_of_an_analyte_without_a_curve_is_refused_with_its_name():
    with pytest.raises(InputError, match=r"sample S-9 \(S!C2\) is of analyte 'Nitrite-N', which "
                                         r"has no curve \(curves: Nitrate-N\)"):
        quantify({"Nitrate-N": CURVE}, [reading(1.0, "S-9", analyte="Nitrite-N")])


def test_replicates_at_another_dilution_are_another_result():
    y0 = float(CURVE.predict(3.0)[0])
    batch = quantify({"Nitrate-N": CURVE}, [reading(TOP * 3, "S-1"),
                                            reading(y0, "S-1", dilution=10)])
    first, rerun = batch.samples
    assert first.reported == "> ULOQ"
    assert rerun.dilution_factor == 10 and rerun.concentration == pytest.approx(30.0, rel=1e-9)
