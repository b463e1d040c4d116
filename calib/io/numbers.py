"""Reading the numbers of a measurement cell: decimal marks, units, markers.

Instrument exports write numbers in many ways: ``12.5``, ``12,5``,
``1,234.5``, ``1.234,5``, ``1 234,5``, ``1.5E-3``, ``12.5 ng/mL``.  They
also write words where a number would be: non-detect markers (``ND``,
``<LOD``, ``n.d.``, ``—``), over-range markers (``>ULOQ``) and spreadsheet
error values (``#DIV/0!``).  This module reads such text:

- :func:`parse_number_text` reads one number, given the file's decimal mark
  when it is known;
- :func:`decimal_evidence` says which decimal mark a text proves, so a reader
  can settle the file's convention from its unambiguous numbers;
- :func:`split_unit_suffix` splits ``"12.5 ng/mL"`` into number and unit;
- :func:`find_marker` recognises markers, which the table builder turns into
  excluded points with the marker as the reason, never into numbers.

A number such as ``1,250`` is 1.25 under a decimal comma and 1250 under a
thousands comma.  It is read only when the decimal mark is known; otherwise
it is refused, since a guess could change a value a thousandfold.
"""

from __future__ import annotations

import math
import re
import unicodedata
from dataclasses import dataclass
from typing import Literal

from calib.errors import NumberTextError

__all__ = [
    "ERROR_VALUES",
    "DecimalMark",
    "Marker",
    "NumberTextError",
    "decimal_evidence",
    "error_value",
    "find_marker",
    "is_unit",
    "normalise_unit",
    "parse_number_text",
    "split_unit_suffix",
]

DecimalMark = Literal[".", ","]
"""The character a file writes between the whole and the fractional part."""

ERROR_VALUES = frozenset(
    {
        "#DIV/0!", "#N/A", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#NULL!", "#SPILL!",
        "#CALC!", "#GETTING_DATA", "#FIELD!", "#BLOCKED!", "#UNKNOWN!", "#BUSY!",
    }
)
"""Error values spreadsheet programs write into a cell whose formula failed."""

# LibreOffice writes its own numbered errors ("Err:502") into exported text.
_NUMBERED_ERROR = re.compile(r"err:\d{3}", re.IGNORECASE)
# Spaces that office programs put between digit groups: space, no-break,
# narrow no-break and thin space; an apostrophe is the Swiss group mark.
_GROUP_SPACES = " \u00a0\u202f\u2009'"
_MINUS_SIGNS = str.maketrans({"\u2212": "-", "\u2013": "-", "\u2012": "-"})
_PLAIN = re.compile(r"([+-]?)(\d*)(?:\.(\d*))?([eE][+-]?\d+)?")
_ONE_COMMA = re.compile(r"([+-]?)(\d+),(\d+)([eE][+-]?\d+)?")
_GROUPED = re.compile(
    r"(?P<sign>[+-]?)(?P<lead>\d{1,3})(?P<groups>(?:(?P<sep>[,. \u00a0\u202f\u2009'])\d{3})"
    r"(?:(?P=sep)\d{3})*)(?:(?P<dec>[.,])(?P<frac>\d+))?(?P<exp>[eE][+-]?\d+)?"
)
_NUMBER_HEAD = re.compile(
    r"(?P<num>[+\-\u2212\u2013]?[\d.,\u00a0\u202f\u2009' ]*\d(?:[eE][+\-]?\d+)?)\s*(?P<rest>.*)",
    re.DOTALL,
)

_PREFIX = r"(?:[fpnuµμmcdk]|)"
_AMOUNT_UNIT = re.compile(
    rf"{_PREFIX}(?:g|mol|eq|M)(?:\s*/\s*(?:{_PREFIX}(?:l|g)|m3|m³))?"
    r"|ppm|ppb|ppt|ppq|%|‰|[mµμ]?IU(?:\s*/\s*[mµμd]?l)?|U\s*/\s*[mµμd]?l",
    re.IGNORECASE,
)
_SIGNAL_UNIT = re.compile(
    r"counts?|cts|cps|[mµμ]?AU(?:\s*[*·]\s*(?:s|min))?|[mµμ]?V(?:\s*[*·]\s*(?:s|min))?"
    r"|[pnµμ]A(?:\s*[*·]\s*(?:s|min))?|[mµμ]?S(?:\s*[*·]\s*(?:s|min))?|[mµμ]?S/cm",
    re.IGNORECASE,
)

_NOT_DETECTED = {
    "nd", "n.d.", "n.d", "n/d", "not detected", "none detected", "no peak", "peak not found",
    "not found", "bdl", "below detection limit", "n.n.", "nn", "n.n", "nicht nachweisbar",
    "non detecte", "non detect", "no detectado", "nicht detektiert",
}
_BELOW = {
    "blq", "bql", "bloq", "below lloq", "below loq", "below range", "below cal", "n.b.",
    "nicht bestimmbar", "< lod", "< loq",
}
_ABOVE = {
    "aql", "alq", "aloq", "over", "overrange", "over range", "ovr", "sat", "saturated",
    "above range", "above uloq", "above cal", "ueber", "uber", "sature", "saturado",
}
_NO_VALUE = {
    "-", "--", "---", "—", "–", "‒", "―", "n/a", "na", "n.a.", "n.a", "nv", "n.v.", "missing",
    "nan", "null", "none", "?", "no value",
}
_LESS_THAN = re.compile(r"<\s*(?:[a-z]{1,5}|[\d.,]+(?:\s*\S+)?)", re.IGNORECASE)
_MORE_THAN = re.compile(r">\s*(?:[a-z]{1,5}|[\d.,]+(?:\s*\S+)?)", re.IGNORECASE)


def _fold(text: str) -> str:
    decomposed = unicodedata.normalize("NFKD", text.strip().casefold())
    return " ".join("".join(c for c in decomposed if not unicodedata.combining(c)).split())


@dataclass(frozen=True)
class Marker:
    """A word or symbol written where a measured number would be.

    Attributes
    ----------
    kind : str
        ``"not-detected"``, ``"below-range"``, ``"above-range"``, ``"no-value"``
        or ``"error"`` (a spreadsheet error value).
    text : str
        The cell text as written (stripped).
    """

    kind: str
    text: str

    def reason(self, what: str = "response") -> str:
        """The exclusion reason for a point whose ``what`` cell holds this marker.

        Examples
        --------
        >>> Marker("not-detected", "n.d.").reason()
        "response not detected ('n.d.' in the file)"
        >>> Marker("error", "#DIV/0!").reason("internal-standard response")
        'internal-standard response is the spreadsheet error value #DIV/0!'
        """
        if self.kind == "error":
            return f"{what} is the spreadsheet error value {self.text}"
        words = {
            "not-detected": "not detected",
            "below-range": "below the quantifiable range",
            "above-range": "above the measuring range",
            "no-value": "not given",
        }[self.kind]
        return f"{what} {words} ({self.text!r} in the file)"


def error_value(text: str) -> str | None:
    """The spreadsheet error value a text is (upper case), or None.

    Examples
    --------
    >>> error_value(" #div/0! "), error_value("Err:502"), error_value("ND")
    ('#DIV/0!', 'ERR:502', None)
    """
    upper = text.strip().upper()
    if upper in ERROR_VALUES or _NUMBERED_ERROR.fullmatch(upper):
        return upper
    return None


def find_marker(text: str) -> Marker | None:
    """Recognise a non-detect, over-range or no-value marker, or an error value.

    Examples
    --------
    >>> find_marker("<LOD"), find_marker("< 0.05 mg/L").kind, find_marker("—").kind
    (Marker(kind='below-range', text='<LOD'), 'below-range', 'no-value')
    >>> find_marker("ND").kind, find_marker(">ULOQ").kind, find_marker("#N/A").kind
    ('not-detected', 'above-range', 'error')
    >>> find_marker("12.5") is None, find_marker("vial broken") is None
    (True, True)
    """
    stripped = text.strip()
    error = error_value(stripped)
    if error is not None:
        return Marker("error", error)
    folded = _fold(stripped)
    if folded in _NOT_DETECTED:
        return Marker("not-detected", stripped)
    if folded in _BELOW or _LESS_THAN.fullmatch(folded):
        return Marker("below-range", stripped)
    if folded in _ABOVE or _MORE_THAN.fullmatch(folded):
        return Marker("above-range", stripped)
    if folded in _NO_VALUE:
        return Marker("no-value", stripped)
    return None


def _clean(text: str) -> str:
    return text.strip().translate(_MINUS_SIGNS)


def _is_thousands_shape(whole: str, fraction: str, exponent: str | None) -> bool:
    """``whole`` + sep + ``fraction`` could be one thousands group (``1,250``)."""
    return len(fraction) == 3 and 1 <= len(whole) <= 3 and whole.strip("0") != "" and not exponent


def parse_number_text(text: str, *, decimal: DecimalMark | None = None) -> float | None:
    """Read number text, or return None when the text is not a number at all.

    Parameters
    ----------
    text : str
        The cell text (no unit; see :func:`split_unit_suffix`).
    decimal : {".", ","} or None
        The file's decimal mark when known.  It settles ``1,250`` and, under a
        decimal comma, ``1.250`` (read as 1250).

    Raises
    ------
    NumberTextError
        When the text is a number only under an unknown decimal mark, or is
        not finite.

    Examples
    --------
    >>> parse_number_text("12,5"), parse_number_text("1,234.5"), parse_number_text("1.234,5")
    (12.5, 1234.5, 1234.5)
    >>> parse_number_text("1 234 567"), parse_number_text("-1.5E-3"), parse_number_text("0,250")
    (1234567.0, -0.0015, 0.25)
    >>> parse_number_text("1,250", decimal=","), parse_number_text("1,250", decimal=".")
    (1.25, 1250.0)
    >>> parse_number_text("1.250", decimal=","), parse_number_text("abc")
    (1250.0, None)
    >>> parse_number_text("1,250")
    Traceback (most recent call last):
    ...
    calib.errors.NumberTextError: found the text '1,250', where the comma may be a decimal \
comma or a thousands separator; expected a number whose decimal mark the file makes clear \
(for example 1250 or 1.250), or an import map naming the decimal mark
    """
    value = _parse(_clean(text), decimal)
    if value is not None and not math.isfinite(value):
        raise NumberTextError(f"found the text {text.strip()!r}; expected a finite number")
    return value


def _parse(text: str, decimal: DecimalMark | None) -> float | None:
    plain = _PLAIN.fullmatch(text)
    if plain is not None and (plain[2] or plain[3]):
        sign, whole, fraction, exponent = plain.groups()
        if fraction is not None and decimal == "," and _is_thousands_shape(whole, fraction,
                                                                             exponent):
            return float(f"{sign}{whole}{fraction}")
        return float(text)
    comma = _ONE_COMMA.fullmatch(text)
    if comma is not None:
        sign, whole, fraction, exponent = comma.groups()
        if _is_thousands_shape(whole, fraction, exponent):
            if decimal is None:
                raise NumberTextError(
                    f"found the text {text!r}, where the comma may be a decimal comma or a "
                    f"thousands separator; expected a number whose decimal mark the file makes "
                    f"clear (for example {whole}{fraction} or {whole}.{fraction}), or an import "
                    f"map naming the decimal mark"
                )
            if decimal == ".":
                return float(f"{sign}{whole}{fraction}")
        return float(f"{sign}{whole}.{fraction}{exponent or ''}")
    grouped = _GROUPED.fullmatch(text)
    if grouped is not None:
        sep, dec = grouped["sep"], grouped["dec"]
        if dec is not None and dec == sep:
            return None
        digits = grouped["lead"] + grouped["groups"].replace(sep, "")
        fraction = f".{grouped['frac']}" if dec is not None else ""
        return float(f"{grouped['sign']}{digits}{fraction}{grouped['exp'] or ''}")
    return None


def decimal_evidence(text: str) -> DecimalMark | None:
    """The decimal mark a number text proves, or None when it proves neither.

    Examples
    --------
    >>> decimal_evidence("0,5"), decimal_evidence("12.75"), decimal_evidence("1,234.5")
    (',', '.', '.')
    >>> decimal_evidence("1,250"), decimal_evidence("1.250"), decimal_evidence("42")
    (None, None, None)
    >>> decimal_evidence("1.234.567"), decimal_evidence("1 234,5")
    (',', ',')
    """
    text = _clean(text)
    plain = _PLAIN.fullmatch(text)
    if plain is not None and (plain[2] or plain[3]):
        _, whole, fraction, exponent = plain.groups()
        if fraction is None or _is_thousands_shape(whole, fraction, exponent):
            return None
        return "."
    comma = _ONE_COMMA.fullmatch(text)
    if comma is not None:
        _, whole, fraction, exponent = comma.groups()
        return None if _is_thousands_shape(whole, fraction, exponent) else ","
    grouped = _GROUPED.fullmatch(text)
    if grouped is None:
        return None
    if grouped["dec"] is not None:
        return grouped["dec"]  # type: ignore[return-value]
    sep = grouped["sep"]
    if sep in ".," and grouped["groups"].count(sep) >= 2:
        return "," if sep == "." else "."
    return None


def split_unit_suffix(text: str) -> tuple[str, str | None]:
    """Split ``"12.5 ng/mL"`` into ``("12.5", "ng/mL")``; text without a unit is kept whole.

    Only units calib recognises (mass or amount per volume or mass, ppm-style
    ratios, percent, and common response units such as counts or mAU*s) are
    split off, so text such as ``"12 vials"`` stays text.

    Examples
    --------
    >>> split_unit_suffix("12.5 ng/mL"), split_unit_suffix("3,2µg/l")
    (('12.5', 'ng/mL'), ('3,2', 'µg/l'))
    >>> split_unit_suffix("1.5E-3 mg/L"), split_unit_suffix("12 vials"), split_unit_suffix("7")
    (('1.5E-3', 'mg/L'), ('12 vials', None), ('7', None))
    """
    stripped = text.strip()
    head = _NUMBER_HEAD.fullmatch(stripped)
    if head is None or not head["rest"]:
        return stripped, None
    unit = head["rest"].strip()
    if not is_unit(unit):
        return stripped, None
    return head["num"].strip(), unit


def is_unit(text: str, *, amounts_only: bool = False) -> bool:
    """True for a unit calib recognises: an amount (``ng/mL``, ``ppm``, ``%``) or a signal unit.

    Examples
    --------
    >>> is_unit("ng/mL"), is_unit("mAU*s"), is_unit("mAU*s", amounts_only=True), is_unit("vials")
    (True, True, False, False)
    """
    text = text.strip()
    if _AMOUNT_UNIT.fullmatch(text):
        return True
    return not amounts_only and _SIGNAL_UNIT.fullmatch(text) is not None


def normalise_unit(unit: str) -> str:
    """Fold a unit for comparison: case, the micro sign, spaces.

    Examples
    --------
    >>> normalise_unit("µg/L") == normalise_unit("ug/l") == normalise_unit("μg / L")
    True
    """
    return "".join(unit.replace("µ", "u").replace("μ", "u").casefold().split())
