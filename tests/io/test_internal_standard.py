"""Internal standard: ratio responses, unusable internal-standard cells, the 50 % screen."""

from __future__ import annotations

import math

import pytest

from calib.io import read_run
from calib.options import SampleType

HEADER = "Sample,Conc (ng/mL),Area,IS area\n"


def test_response_is_the_ratio_and_both_areas_are_kept(write_csv):
    text = HEADER + "Cal 1,1,2050,101000\nCal 2,5,10300,99800\nCal 3,20,40900,100500\n"
    run = read_run(write_csv(text))
    first = run.points[0]
    assert first.response == pytest.approx(2050 / 101000, rel=1e-15)
    assert (first.analyte_response, first.is_response) == (2050.0, 101000.0)
    assert run.units == {"concentration": "ng/mL", "response": "ratio"}


def test_units_of_the_two_areas(write_csv):
    text = ("Sample,Conc (ng/mL),Area (counts),IS area (counts)\n"
            "Cal 1,1,2050,101000\nCal 2,5,10300,99800\nCal 3,20,40900,100500\n")
    assert read_run(write_csv(text)).units == {
        "analyte_response": "counts", "concentration": "ng/mL", "is_response": "counts",
        "response": "ratio",
    }


@pytest.mark.parametrize(
    ("cell", "reason"),
    [
        ("ND", ("internal-standard response not detected ('ND' in the file); the ratio cannot "
               "be formed")),
        ("#DIV/0!", ("internal-standard response is the spreadsheet error value #DIV/0!; the "
                    "ratio cannot be formed")),
        ("0", "internal-standard response is 0; the ratio cannot be formed"),
    ],
)
def test_unusable_internal_standard_sets_the_point_aside(write_csv, cell, reason):
    text = HEADER + f"Cal 1,1,2050,{cell}\nCal 2,5,10300,99800\nCal 3,20,40900,100500\n" \
        "Cal 4,50,102000,99900\n"
    point = read_run(write_csv(text)).points[0]
    assert (point.included, point.exclusion_reason, point.analyte_response) == (
        False, reason, 2050.0)
    assert math.isnan(point.response)


def test_a_double_blank_has_no_internal_standard(write_csv):
    text = HEADER + "Double blank,,ND,\nCal 1,1,2050,101000\nCal 2,5,10300,99800\n" \
        "Cal 3,20,40900,100500\n"
    blank = read_run(write_csv(text)).points[0]
    assert blank.sample_type is SampleType.BLANK
    assert blank.exclusion_reason == (
        "response not detected ('ND' in the file); no internal-standard response (a blank "
        "without internal standard); the ratio cannot be formed"
    )


def test_internal_standard_responses_far_from_the_mean_are_named(write_csv):
    # Common practice: an internal-standard response more than 50 % above or below the
    # mean of the run's internal-standard responses is flagged for review.  Mean of the six
    # responses below: 600,000 / 6 = 100,000; 45,000 is 55 % below it, 148,000 48 % above.
    text = HEADER + (
        "Cal 1,1,2050,101000\nCal 2,5,10300,99000\nCal 3,20,40900,100000\n"
        "Cal 4,50,102000,107000\nQC-M,10,20000,148000\nSubject 1,,15000,45000\n"
    )
    run = read_run(write_csv(text))
    assert run.warnings == (
        ("run.csv!D7 (Subject 1): the internal standard of run responded 45,000, 55 % below the "
        "run's mean of 100,000; common practice flags internal-standard responses more than "
        "50 % from the mean (check spiking and matrix suppression)"),
    )
    assert all(p.included for p in run.points)  # flagged, never excluded


def test_each_analyte_of_a_long_table_has_its_own_internal_standard(write_csv):
    rows = ["Analyte,Sample,Conc,Area,IS area"]
    for analyte, istd in (("A", 1000), ("B", 500000)):
        rows += [f"{analyte},Cal {i},{c},{c * 10},{istd}" for i, c in enumerate((1, 2, 5), 1)]
    assert read_run(write_csv("\n".join(rows) + "\n")).warnings == ()


def test_shared_internal_standard_of_a_wide_table_is_screened_once(write_csv):
    text = ("Level,Conc,IS area,Lead,Iron\nL1,1,100000,10,20\nL2,2,99000,20,40\n"
            "L3,5,101000,50,100\nL4,10,30000,30,60\n")
    run = read_run(write_csv(text))
    assert len(run.warnings) == 1
    assert run.warnings[0].startswith(
        "run.csv!C5: the internal standard in column C (IS area) responded 30,000, 64 % below "
        "the run's mean of 82,500"
    )
    assert run.standards("Iron")[1].response == pytest.approx(40 / 99000, rel=1e-15)
