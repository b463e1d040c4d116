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


def test_the_terminal_text_remarks_an_lod_above_the_lloq(tmp_path):
    from datetime import UTC, datetime

    from calib.quantify.document import quantify_document
    from calib.quantify.text import batch_text
    from calib.quantify.workflow import quantify_files
    from tests.quantify.helpers import write_run_csv

    doc = quantify_document(quantify_files(write_run_csv(tmp_path / "run.csv"),
                                           created_at=datetime(2026, 12, 1, tzinfo=UTC)))
    assert "lies above the LLOQ" not in batch_text(doc)  # LOD below the LLOQ: no remark
    doc["curves"][0].update(lod=0.6, lloq=0.5)
    text = batch_text(doc)
    assert "Remark: the LOD (0.6" in text and "lies above the LLOQ (0.5" in text
