"""Reading one raw spreadsheet or text cell as the value a column needs.

A cell arrives as whatever the file format gives: a float, int, bool, date or
string from a workbook, always a string from a text file, ``None`` or ``""``
when empty.  The functions here turn it into a float, an int, a flag or a
piece of text, or raise :class:`CellError` whose message says what was found
and what was expected.  They know nothing about rows and columns: the table
builder adds the place when it turns a :class:`CellError` into an
:class:`~calib.errors.InputError`.
"""

from __future__ import annotations

import datetime as _dt
import math
import re

__all__ = [
    "ERROR_VALUES",
    "Cell",
    "CellError",
    "describe",
    "is_blank",
    "to_flag",
    "to_integer",
    "to_number",
    "to_text",
]

Cell = (
    str | float | int | bool | _dt.date | _dt.datetime | _dt.time | _dt.timedelta | None
)
"""A raw cell as a reader hands it over."""

ERROR_VALUES = frozenset(
    {
        "#DIV/0!",
        "#N/A",
        "#VALUE!",
        "#REF!",
        "#NAME?",
        "#NUM!",
        "#NULL!",
        "#SPILL!",
        "#CALC!",
        "#GETTING_DATA",
    }
)
"""Error values spreadsheet programs write into a cell whose formula failed."""

# LibreOffice writes its own numbered errors ("Err:502") into exported text.
_NUMBERED_ERROR = re.compile(r"err:\d{3}", re.IGNORECASE)
_DOT_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_COMMA_NUMBER = re.compile(r"([+-]?)(\d+),(\d+)((?:[eE][+-]?\d+)?)")
_GROUPED_NUMBER = re.compile(r"[+-]?\d{1,3}(?:[,.' ]\d{3})+(?:[.,]\d+)?")
_NOT_FINITE = frozenset({"nan", "+nan", "-nan", "inf", "+inf", "-inf", "infinity", "+infinity",
                         "-infinity"})
_FLAGS = {
    "yes": True, "y": True, "true": True, "1": True, "x": True,
    "no": False, "n": False, "false": False, "0": False,
}
# Typographic minus signs that office programs put in front of numbers.
_MINUS_SIGNS = str.maketrans({"\u2212": "-", "\u2013": "-"})


class CellError(ValueError):
    """A cell cannot be read as what its column needs.

    The message says what was found and what was expected; it names no place,
    the caller adds file, sheet, row and column.
    """


def is_blank(value: Cell) -> bool:
    """Return True for an empty cell: ``None`` or text holding only spaces.

    Examples
    --------
    >>> is_blank(None), is_blank("  "), is_blank(0.0)
    (True, True, False)
    """
    if isinstance(value, str):
        return not value.strip()
    return value is None


def _error_value(text: str) -> str | None:
    upper = text.strip().upper()
    if upper in ERROR_VALUES or _NUMBERED_ERROR.fullmatch(upper):
        return upper
    return None


def describe(value: Cell) -> str:
    """Say in plain words what a cell holds, for error messages.

    Examples
    --------
    >>> describe(None)
    'an empty cell'
    >>> describe(" #div/0! ")
    'the spreadsheet error value #DIV/0!'
    >>> describe("n.d.")
    "the text 'n.d.'"
    >>> describe(True)
    'the logical value TRUE'
    """
    if is_blank(value):
        return "an empty cell"
    if isinstance(value, bool):
        return f"the logical value {'TRUE' if value else 'FALSE'}"
    if isinstance(value, str):
        error = _error_value(value)
        if error is not None:
            return f"the spreadsheet error value {error}"
        return f"the text {value.strip()!r}"
    if isinstance(value, (int, float)):
        return f"the number {value!r}"
    if isinstance(value, _dt.datetime):
        return f"the date and time {value.isoformat(sep=' ')}"
    if isinstance(value, _dt.date):
        return f"the date {value.isoformat()}"
    if isinstance(value, _dt.time):
        return f"the time {value.isoformat()}"
    return f"the duration {value}"


def _problem(value: Cell, expected: str) -> CellError:
    return CellError(f"found {describe(value)}; expected {expected}")


def _parse_number_text(text: str, *, decimal_comma: bool) -> float | None:
    """Read number text; None when it is not a number we can read unambiguously."""
    if _DOT_NUMBER.fullmatch(text):
        return float(text)
    comma = _COMMA_NUMBER.fullmatch(text)
    if comma is None:
        return None
    sign, whole, fraction, exponent = comma.groups()
    # "1,250" may be 1.25 written with a decimal comma or 1250 with a
    # thousands separator; guessing would silently change a value by 1000x.
    # A leading zero ("0,250") or a fraction of other than three digits cannot
    # be a thousands group, and a file known to use decimal commas settles it.
    ambiguous = len(fraction) == 3 and int(whole) != 0 and not exponent
    if ambiguous and not decimal_comma:
        raise CellError(
            f"found the text {text!r}, where the comma may be a decimal comma or a "
            f"thousands separator; expected a number written without thousands "
            f"separators (for example {whole}{fraction} or {whole}.{fraction})"
        )
    return float(f"{sign}{whole}.{fraction}{exponent}")


def to_number(value: Cell, *, decimal_comma: bool = False) -> float:
    """Read a cell as a finite float.

    Parameters
    ----------
    value : Cell
        The raw cell.
    decimal_comma : bool, optional
        True when the file is known to write decimal commas (a semicolon-separated
        text file); then ``"1,250"`` is 1.25.  Otherwise a comma is read as a
        decimal comma only where it cannot be a thousands separator.

    Returns
    -------
    float

    Raises
    ------
    CellError
        For an empty cell, text that is not a number, NaN or infinity, a
        spreadsheet error value, a logical value or a date.

    Notes
    -----
    Accepted text: surrounding spaces, a leading ``+`` or ``-`` (also the
    typographic minus), a decimal point or an unambiguous decimal comma, and
    scientific notation (``1.5E-3``, ``1,5e-3``).

    Examples
    --------
    >>> to_number(" 12,5 ")
    12.5
    >>> to_number("1.2E+03")
    1200.0
    >>> to_number("0,125")
    0.125
    >>> to_number("1,250", decimal_comma=True)
    1.25
    >>> to_number("#N/A")
    Traceback (most recent call last):
    ...
    calib.io.cells.CellError: found the spreadsheet error value #N/A; expected a number
    """
    kind = type(value)
    if kind is float or kind is int:
        number = float(value)  # type: ignore[arg-type]
        if math.isfinite(number):
            return number
        raise CellError(f"found the number {value!r}; expected a finite number")
    if not isinstance(value, str) or is_blank(value):
        raise _problem(value, "a number")
    text = value.strip().translate(_MINUS_SIGNS)
    if text.lower() in _NOT_FINITE:
        raise CellError(f"found the text {text!r}; expected a finite number")
    number = _parse_number_text(text, decimal_comma=decimal_comma)
    if number is not None:
        if math.isfinite(number):
            return number
        raise CellError(f"found the text {text!r}, which overflows; expected a finite number")
    if _GROUPED_NUMBER.fullmatch(text):
        raise CellError(
            f"found the text {text!r}; expected a number written without thousands separators"
        )
    raise _problem(value, "a number")


def to_integer(value: Cell) -> int:
    """Read a cell as a whole number (a replicate or injection number).

    Examples
    --------
    >>> to_integer(2.0), to_integer(" 3 ")
    (2, 3)
    >>> to_integer("2.5")
    Traceback (most recent call last):
    ...
    calib.io.cells.CellError: found the text '2.5'; expected a whole number
    """
    try:
        number = to_number(value)
    except CellError:
        raise _problem(value, "a whole number") from None
    if not number.is_integer():
        raise _problem(value, "a whole number")
    return int(number)


def to_flag(value: Cell) -> bool:
    """Read an include cell: True for included, False for excluded.

    Accepted, ignoring case and surrounding spaces: yes/no, y/n, true/false,
    1/0 and ``x`` (a mark meaning included); an empty cell means included.

    Examples
    --------
    >>> to_flag("Yes"), to_flag("n"), to_flag(None), to_flag("X"), to_flag(0.0)
    (True, False, True, True, False)
    >>> to_flag("maybe")
    Traceback (most recent call last):
    ...
    calib.io.cells.CellError: found the text 'maybe'; expected yes/no, y/n, true/false, 1/0, x \
or an empty cell (included)
    """
    if is_blank(value):
        return True
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)) and value in (0, 1):
        return bool(value)
    if isinstance(value, str):
        flag = _FLAGS.get(value.strip().casefold())
        if flag is not None:
            return flag
    raise _problem(value, "yes/no, y/n, true/false, 1/0, x or an empty cell (included)")


def to_text(value: Cell) -> str | None:
    """Read a cell as text: stripped, ``None`` when empty.

    Numbers keep the form a spreadsheet shows (``7.0`` becomes ``"7"``), dates
    are written in ISO 8601.

    Examples
    --------
    >>> to_text("  Nitrate-N "), to_text(7.0), to_text(""), to_text(0.5)
    ('Nitrate-N', '7', None, '0.5')
    """
    if isinstance(value, str):
        return value.strip() or None
    if value is None:
        return None
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, (_dt.date, _dt.time)):
        return value.isoformat()
    return str(value)
