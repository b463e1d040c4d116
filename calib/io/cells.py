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
from collections.abc import Sequence

from calib.errors import CellError
from calib.io.numbers import (
    ERROR_VALUES,
    DecimalMark,
    NumberTextError,
    error_value,
    parse_number_text,
)

__all__ = [
    "ERROR_VALUES",
    "Cell",
    "CellError",
    "describe",
    "is_blank",
    "is_empty_row",
    "to_flag",
    "to_integer",
    "to_name",
    "to_number",
    "to_text",
]

Cell = (
    str | float | int | bool | _dt.date | _dt.datetime | _dt.time | _dt.timedelta | None
)
"""A raw cell as a reader hands it over."""

_FLAGS = {
    "yes": True, "y": True, "true": True, "1": True, "ja": True, "j": True,
    "oui": True, "si": True, "sí": True, "wahr": True, "vrai": True, "verdadero": True,
    "no": False, "n": False, "false": False, "0": False, "nein": False, "non": False,
    "falsch": False, "faux": False, "falso": False,
}
_FLAG_WORDS = "yes/no, y/n, true/false, 1/0"
# Marks some labs put on the rows they use and others on the rows they leave out: reading
# one either way could reverse an analyst's exclusion, so they are refused.
_AMBIGUOUS_MARKS = frozenset({"x", "\u2713", "\u2714", "\u2717", "\u2718", "*", "+", "-", "\u2022",
                              "\u00d7"})


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


def is_empty_row(row: Sequence[Cell]) -> bool:
    """Return True for a row whose every cell is ``None`` or ``""``, decided at C speed.

    A stray cell far below a table makes a sheet of a million such rows; a row with
    only spaces in a cell is left to :func:`is_blank`.

    Examples
    --------
    >>> is_empty_row(["", None, ""]), is_empty_row(["", " "]), is_empty_row([])
    (True, False, True)
    """
    return row.count("") + row.count(None) == len(row)


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
        error = error_value(value)
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


def to_number(value: Cell, *, decimal: DecimalMark | None = None) -> float:
    """Read a cell as a finite float.

    Parameters
    ----------
    value : Cell
        The raw cell.
    decimal : {".", ","} or None, optional
        The file's decimal mark when known; it settles text such as ``"1,250"``
        (see :func:`calib.io.numbers.parse_number_text`).

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
    typographic minus), a decimal point or decimal comma, thousands separators
    where the decimal mark is clear (``1,234.5``, ``1.234,5``, ``1 234,5``)
    and scientific notation (``1.5E-3``, ``1,5e-3``).

    Examples
    --------
    >>> to_number(" 12,5 ")
    12.5
    >>> to_number("1.2E+03")
    1200.0
    >>> to_number("1,250", decimal=",")
    1.25
    >>> to_number("#N/A")
    Traceback (most recent call last):
    ...
    calib.errors.CellError: found the spreadsheet error value #N/A; expected a number
    """
    kind = type(value)
    if kind is float or kind is int:
        number = float(value)  # type: ignore[arg-type]
        if math.isfinite(number):
            return number
        raise CellError(f"found the number {value!r}; expected a finite number")
    if not isinstance(value, str) or is_blank(value):
        raise _problem(value, "a number")
    text = value.strip()
    if text.lower().lstrip("+-") in ("nan", "inf", "infinity"):
        raise CellError(f"found the text {text!r}; expected a finite number")
    try:
        number = parse_number_text(text, decimal=decimal)
    except NumberTextError as exc:
        raise CellError(str(exc)) from None
    if number is None:
        raise _problem(value, "a number")
    return number


def to_integer(value: Cell) -> int:
    """Read a cell as a whole number (a replicate or injection number).

    Examples
    --------
    >>> to_integer(2.0), to_integer(" 3 ")
    (2, 3)
    >>> to_integer("2.5")
    Traceback (most recent call last):
    ...
    calib.errors.CellError: found the text '2.5'; expected a whole number
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

    Accepted, ignoring case and surrounding spaces: yes/no, y/n, true/false
    and 1/0, also in German, French and Spanish (ja/nein, oui/non, sí/no...);
    an empty cell means included.  A bare mark such as ``x`` or a tick is
    refused: some labs mark the rows they use, others the rows they leave out.

    Examples
    --------
    >>> to_flag("Yes"), to_flag("n"), to_flag(None), to_flag(0.0)
    (True, False, True, False)
    >>> to_flag("maybe")
    Traceback (most recent call last):
    ...
    calib.errors.CellError: found the text 'maybe'; expected yes/no, y/n, true/false, 1/0 or \
an empty cell (included)
    >>> to_flag(" X ")
    Traceback (most recent call last):
    ...
    calib.errors.CellError: found the mark 'X', which some labs use for included and others \
for excluded; write yes or no in the include column (an empty cell means included)
    """
    if is_blank(value):
        return True
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)) and value in (0, 1):
        return bool(value)
    if isinstance(value, str):
        folded = value.strip().casefold()
        flag = _FLAGS.get(folded)
        if flag is not None:
            return flag
        if folded in _AMBIGUOUS_MARKS:
            raise CellError(f"found the mark {value.strip()!r}, which some labs use for included "
                            "and others for excluded; write yes or no in the include column (an "
                            "empty cell means included)")
    raise _problem(value, f"{_FLAG_WORDS} or an empty cell (included)")


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


# Characters that change how the text around them is shown: C0/C1 controls (a terminal obeys
# ESC sequences) and the bidirectional controls that reverse what follows (U+202E makes
# "Nitrate-N" print as something else).  A name holding one would not read as written.
_HIDDEN_CONTROLS = frozenset(
    [*range(0x20), *range(0x7F, 0xA0), 0x061C, 0x200E, 0x200F, *range(0x202A, 0x202F),
     *range(0x2066, 0x206A), 0xFEFF]
)


def to_name(value: Cell) -> str | None:
    r"""Read a cell as a name (analyte, sample): text without control characters.

    Raises
    ------
    CellError
        When the text holds a control character or a bidirectional control
        (such as the right-to-left override U+202E), which would change how the
        name is shown in the record and on a terminal.

    Examples
    --------
    >>> to_name(" Nitrate-N ")
    'Nitrate-N'
    >>> try:  # doctest: +NORMALIZE_WHITESPACE
    ...     to_name("Nitrate\u202e-N")
    ... except CellError as exc:
    ...     print(exc)
    found the text 'Nitrate\u202e-N' holding the control character U+202E; expected a name of
    printable characters
    """
    text = to_text(value)
    if text is None or text.isprintable():
        return text
    for char in text:
        if ord(char) in _HIDDEN_CONTROLS:
            raise CellError(f"found the text {text!r} holding the control character "
                            f"U+{ord(char):04X}; expected a name of printable characters")
    return text
