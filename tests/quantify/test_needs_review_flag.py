"""A result read from a curve that needs review carries the flag ``curve-needs-review``."""

from __future__ import annotations

import math

from calib.fit import fit_curve
from calib.options import SampleType
from calib.quantify.batch import Flag, quantify_sample
from calib.quantify.curve import CalibrationCurve
from calib.quantify.samples import Reading
from calib.run import Point

X = [1, 2, 4, 6, 8, 10]
Y = [2.0, 4.1, 7.9, 12.2, 15.8, 20.1]


def result(verdict, response=9.0, **options):
    curve = CalibrationCurve.from_fit(fit_curve(X, Y), analyte="Cu 324.754", verdict=verdict)
    sample = Reading(Point("Cu 324.754", math.nan, response, "S!C2", SampleType.UNKNOWN,
                           sample_id="FB-101"))
    return quantify_sample(curve, [sample], **options)


def test_a_needs_review_curve_flags_its_results_but_still_reads_them():
    flagged = result("needs-review")
    plain = result("accepted")
    assert flagged.flags == (Flag.CURVE_NEEDS_REVIEW.value,) and plain.flags == ()
    # The number is the same: the flag tells the reader, it does not change the reading.
    assert flagged.reported == plain.reported and flagged.concentration == plain.concentration


def test_the_flag_joins_the_range_flags():
    high = result("needs-review", response=35.0)
    assert high.flags == ("curve-needs-review", "above-uloq", "outside-range")


def test_a_refused_curve_is_not_also_flagged_for_review():
    refused = result("needs-review", refused="the curve was rejected at review")
    assert refused.flags == (Flag.CURVE_REJECTED.value,)
