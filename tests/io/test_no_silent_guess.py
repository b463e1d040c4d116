"""Ambiguity is an error, not a guess: cases where a reading could silently change a result.

Each case was found reading invented exports (Fernbrook Water Laboratory) as a new user would;
before, each gave a verdict without a word.  Now each refuses with a message naming the cells
and saying what to do, or sets the cells aside with a note.  The rules are common practice in
laboratory data review: an analyst's exclusion and its reason are never reversed or dropped,
summary rows are not injections, independent checks are not calibration points.
"""

from __future__ import annotations

import pytest

from calib.io import read_run

from .conftest import message

_HEAD = "Analyte,Sample,Conc (mg/L),Area,Include,Reason\n"
_BODY = "".join(f"Nitrate-N,Std {i},{c},{round(0.2 * c, 4)},yes,\n"
                for i, c in enumerate((0.5, 1, 2, 5, 10), start=1))


# -- include marks and reasons ---------------------------------------------------------------

def test_include_x_with_a_reason_is_refused(write_csv):
    path = write_csv(_HEAD + _BODY + "Nitrate-N,Std 6,20,4.1,x,bubble in syringe\n")
    assert message(path) == (
        f"{path}, row 7, column E (Include): found the mark 'x', which some labs use for "
        "included and others for excluded; write yes or no in the include column (an empty "
        "cell means included)"
    )


def test_a_reason_beside_an_empty_include_cell_is_refused(write_csv):
    path = write_csv(_HEAD + _BODY + "Nitrate-N,Std 6,20,4.1,,bubble in syringe\n")
    assert message(path) == (
        f"{path}, row 7, column F (Reason): found the exclusion reason 'bubble in syringe' on a "
        "row marked included (its include cell E7 is empty); write no in the include column to "
        "exclude the point, or clear the reason to keep it"
    )


def test_a_reason_beside_yes_is_refused(write_csv):
    path = write_csv(_HEAD + _BODY + "Nitrate-N,Std 6,20,4.1,yes,bubble in syringe\n")
    assert message(path).endswith(
        "row 7, column F (Reason): found the exclusion reason 'bubble in syringe' on a row "
        "marked included (its include cell E7 says 'yes'); write no in the include column to "
        "exclude the point, or clear the reason to keep it"
    )


def test_a_reason_without_an_include_column_is_refused(write_csv):
    text = "Conc (mg/L),Area,Reason\n0.5,0.1,\n1,0.2,\n2,0.4,carry-over\n"
    path = write_csv(text)
    assert message(path) == (
        f"{path}, row 4, column C (Reason): found the exclusion reason 'carry-over' on a row "
        "marked included (the table has no include column, so the row counts as included); "
        "write no in the include column to exclude the point, or clear the reason to keep it"
    )


def test_a_remark_beside_an_explicit_yes_is_kept_as_a_remark(write_csv):
    text = ("Conc (mg/L),Area,Include,Comment\n0.5,0.1,yes,new vial\n1,0.2,yes,\n"
            "2,0.4,no,carry-over\n5,1.0,yes,\n")
    run = read_run(write_csv(text))
    assert [p.included for p in run.points] == [True, True, False, True]
    assert run.points[2].exclusion_reason == "carry-over"


def test_a_remark_beside_an_empty_include_cell_is_refused(write_csv):
    text = "Conc (mg/L),Area,Include,Comment\n0.5,0.1,,bubble\n1,0.2,yes,\n2,0.4,yes,\n"
    path = write_csv(text)
    assert message(path) == (
        f"{path}, row 2, column D (Comment): found the exclusion reason 'bubble' on a row marked "
        "included (its include cell C2 is empty); write no in the include column to exclude "
        "the point, or clear the reason to keep it"
    )
