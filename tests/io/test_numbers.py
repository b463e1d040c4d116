"""Number text: decimal marks, thousands separators, units after numbers, markers."""

from __future__ import annotations

import pytest

from calib.io.numbers import (
    Marker,
    NumberTextError,
    decimal_evidence,
    find_marker,
    is_unit,
    normalise_unit,
    parse_number_text,
    split_unit_suffix,
)


@pytest.mark.parametrize(
    ("text", "decimal", "expected"),
    [
        ("12.5", None, 12.5),
        ("12,5", None, 12.5),
        ("0,250", None, 0.25),  # a leading zero cannot start a thousands group
        ("1234,567", None, 1234.567),  # four digits before the comma: not a group
        ("1,234.5", None, 1234.5),
        ("1.234,5", None, 1234.5),
        ("12,345,678", None, 12345678.0),
        ("12.345.678", None, 12345678.0),
        ("1 234,5", None, 1234.5),
        ("1\u00a0234.5", None, 1234.5),  # no-break space between groups
        ("1\u202f234,5", None, 1234.5),  # narrow no-break space (French typography)
        ("1'234.5", None, 1234.5),  # Swiss group mark
        ("1.5E-3", None, 0.0015),
        ("1,5E-3", None, 0.0015),
        ("1,250E2", None, 125.0),  # with an exponent the comma can only be decimal
        ("\u22120.25", None, -0.25),  # typographic minus
        ("+3", None, 3.0),
        ("1,250", ",", 1.25),
        ("1,250", ".", 1250.0),
        ("1.250", ",", 1250.0),  # under a decimal comma the point groups thousands
        ("1.250", ".", 1.25),
        ("1.250", None, 1.25),
    ],
)
def test_number_text(text, decimal, expected):
    assert parse_number_text(text, decimal=decimal) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize("text", ["abc", "1,2,3", "1.2.3,4.5", "12 apples", "", "-"])
def test_not_numbers(text):
    assert parse_number_text(text) is None


def test_ambiguous_comma_names_both_readings():
    with pytest.raises(NumberTextError) as err:
        parse_number_text("3,125")
    assert str(err.value) == (
        "found the text '3,125', where the comma may be a decimal comma or a thousands "
        "separator; expected a number whose decimal mark the file makes clear (for example 3125 "
        "or 3.125), or an import map naming the decimal mark"
    )


def test_overflow_is_refused():
    with pytest.raises(NumberTextError) as err:
        parse_number_text("1e999")
    assert str(err.value) == "found the text '1e999'; expected a finite number"


@pytest.mark.parametrize(
    ("text", "mark"),
    [("0,5", ","), ("12,75", ","), ("1.234,5", ","), ("1.234.567", ","), ("0.5", "."),
     ("12.75", "."), ("1,234.5", "."), ("1,234,567", "."), ("1,250", None), ("1.250", None),
     ("42", None), ("text", None)],
)
def test_decimal_evidence(text, mark):
    assert decimal_evidence(text) == mark


@pytest.mark.parametrize(
    ("text", "number", "unit"),
    [
        ("12.5 ng/mL", "12.5", "ng/mL"),
        ("12,5 µg/l", "12,5", "µg/l"),
        ("3mg/L", "3", "mg/L"),
        ("0.4 ppm", "0.4", "ppm"),
        ("15 %", "15", "%"),
        ("1.5E-3 mg/L", "1.5E-3", "mg/L"),
        ("12 345 counts", "12 345", "counts"),
        ("0.213 AU", "0.213", "AU"),
        ("45.1 mAU*s", "45.1", "mAU*s"),
        ("2 nmol/L", "2", "nmol/L"),
        ("12 vials", "12 vials", None),
        ("7", "7", None),
    ],
)
def test_units_after_numbers(text, number, unit):
    assert split_unit_suffix(text) == (number, unit)


def test_units_compare_without_case_or_micro_sign():
    assert normalise_unit("µg/L") == normalise_unit("ug/l") == normalise_unit("μg / L")
    assert is_unit("ng/mL") and is_unit("µS*min") and not is_unit("vials")
    assert not is_unit("counts", amounts_only=True)


@pytest.mark.parametrize(
    ("text", "kind"),
    [
        ("ND", "not-detected"), ("n.d.", "not-detected"), ("N.D.", "not-detected"),
        ("not detected", "not-detected"), ("n.n.", "not-detected"), ("no peak", "not-detected"),
        ("<LOD", "below-range"), ("< LOQ", "below-range"), ("<LLOQ", "below-range"),
        ("BLQ", "below-range"), ("< 0.05", "below-range"), ("<0,05 mg/L", "below-range"),
        (">ULOQ", "above-range"), ("> 1000", "above-range"), ("OVER", "above-range"),
        ("saturated", "above-range"),
        ("—", "no-value"), ("–", "no-value"), ("-", "no-value"), ("--", "no-value"),
        ("n/a", "no-value"), ("NaN", "no-value"),
        ("#DIV/0!", "error"), ("#N/A", "error"), ("#value!", "error"), ("Err:502", "error"),
    ],
)
def test_markers(text, kind):
    assert find_marker(text) == Marker(kind, text.upper() if kind == "error" else text)


@pytest.mark.parametrize("text", ["12.5", "vial broken", "Std 3", "NDMA"])
def test_not_markers(text):
    assert find_marker(text) is None


def test_marker_reasons():
    assert Marker("below-range", "<LOD").reason() == (
        "response below the quantifiable range ('<LOD' in the file)"
    )
    assert Marker("above-range", ">ULOQ").reason() == (
        "response above the measuring range ('>ULOQ' in the file)"
    )
    assert Marker("no-value", "—").reason() == "response not given ('—' in the file)"
    assert Marker("error", "#N/A").reason("internal-standard response") == (
        "internal-standard response is the spreadsheet error value #N/A"
    )
