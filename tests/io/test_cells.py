"""Reading single cells: numbers as text, decimal commas, rejections with their messages."""

from __future__ import annotations

import datetime as dt
import math

import pytest

from calib.io.cells import CellError, describe, is_blank, to_flag, to_integer, to_number, to_text


@pytest.mark.parametrize(
    ("raw", "expected"),
    [
        (12.5, 12.5),
        (7, 7.0),
        ("12.5", 12.5),
        ("  12.5\t", 12.5),
        ("\u00a012.5\u00a0", 12.5),  # non-breaking spaces, common in pasted exports
        ("+3", 3.0),
        ("-0.25", -0.25),
        ("\u22120.25", -0.25),  # typographic minus
        (".5", 0.5),
        ("5.", 5.0),
        ("12,5", 12.5),
        ("0,250", 0.25),  # a leading zero cannot start a thousands group
        ("1,2345", 1.2345),
        ("1.5E-3", 0.0015),
        ("1.5e+03", 1500.0),
        ("2E5", 200000.0),
        ("1,5E-3", 0.0015),
        ("1,250E2", 125.0),  # with an exponent the comma can only be decimal
    ],
)
def test_numbers_are_read(raw, expected):
    assert to_number(raw) == pytest.approx(expected, rel=1e-15)


def test_known_decimal_mark_settles_three_decimals():
    assert to_number("1,250", decimal=",") == 1.25
    assert to_number("1,250", decimal=".") == 1250.0
    assert to_number("12.5", decimal=",") == 12.5


def test_ambiguous_comma_is_refused():
    with pytest.raises(CellError) as err:
        to_number("1,250")
    assert str(err.value) == (
        "found the text '1,250', where the comma may be a decimal comma or a thousands "
        "separator; expected a number whose decimal mark the file makes clear (for example 1250 "
        "or 1.250), or an import map naming the decimal mark"
    )


def test_thousands_separators_where_the_decimal_mark_is_clear():
    assert to_number("1,234,567") == 1234567.0
    assert to_number("1.234,5") == 1234.5
    assert to_number("1 234.5") == 1234.5


@pytest.mark.parametrize(
    ("raw", "message"),
    [
        (None, "found an empty cell; expected a number"),
        ("   ", "found an empty cell; expected a number"),
        ("n.d.", "found the text 'n.d.'; expected a number"),
        ("12 mg/L", "found the text '12 mg/L'; expected a number"),
        ("#DIV/0!", "found the spreadsheet error value #DIV/0!; expected a number"),
        ("#n/a", "found the spreadsheet error value #N/A; expected a number"),
        (" #VALUE! ", "found the spreadsheet error value #VALUE!; expected a number"),
        ("Err:502", "found the spreadsheet error value ERR:502; expected a number"),
        ("NaN", "found the text 'NaN'; expected a finite number"),
        ("-inf", "found the text '-inf'; expected a finite number"),
        ("1e999", "found the text '1e999'; expected a finite number"),
        (math.nan, "found the number nan; expected a finite number"),
        (math.inf, "found the number inf; expected a finite number"),
        (True, "found the logical value TRUE; expected a number"),
        (dt.date(2026, 11, 30), "found the date 2026-11-30; expected a number"),
        (
            dt.datetime(2026, 11, 30, 9, 15),
            "found the date and time 2026-11-30 09:15:00; expected a number",
        ),
        ("1,23,4", "found the text '1,23,4'; expected a number"),
    ],
)
def test_unusable_numbers_are_refused_with_what_was_found(raw, message):
    with pytest.raises(CellError) as err:
        to_number(raw)
    assert str(err.value) == message


@pytest.mark.parametrize(
    ("raw", "expected"),
    [
        ("yes", True), ("YES", True), ("y", True), ("True", True), ("1", True),
        ("", True), (None, True), (True, True), (1.0, True),
        ("no", False), ("N", False), ("false", False), ("0", False), (False, False), (0, False),
        ("ja", True), ("Nein", False), ("oui", True), ("non", False), ("sí", True), ("falso", False),
    ],
)
def test_include_flags(raw, expected):
    assert to_flag(raw) is expected


def test_unknown_include_flag_is_refused():
    with pytest.raises(CellError) as err:
        to_flag("excluded")
    assert str(err.value) == (
        "found the text 'excluded'; expected yes/no, y/n, true/false, 1/0 or an empty cell "
        "(included)"
    )


@pytest.mark.parametrize("mark", ["x", " X ", "\u2713", "*", "-"])
def test_a_bare_include_mark_is_refused(mark):
    # Common practice: some labs tick the rows they use, others the rows they leave out, so a
    # mark read either way could reverse an analyst's exclusion.
    with pytest.raises(CellError) as err:
        to_flag(mark)
    assert str(err.value) == (
        f"found the mark {mark.strip()!r}, which some labs use for included and others for "
        "excluded; write yes or no in the include column (an empty cell means included)"
    )


def test_integers():
    assert to_integer(3.0) == 3
    assert to_integer(" 2 ") == 2
    with pytest.raises(CellError) as err:
        to_integer("first")
    assert str(err.value) == "found the text 'first'; expected a whole number"
    with pytest.raises(CellError) as err:
        to_integer(1.5)
    assert str(err.value) == "found the number 1.5; expected a whole number"


def test_text_and_blanks():
    assert to_text(" KX-214 ") == "KX-214"
    assert to_text(12.0) == "12"
    assert to_text(12) == "12"
    assert to_text(dt.date(2026, 11, 30)) == "2026-11-30"
    assert to_text(False) == "FALSE"
    assert to_text("\t") is None
    assert is_blank("") and is_blank(None) and not is_blank(0)
    assert describe(dt.time(9, 30)) == "the time 09:30:00"
