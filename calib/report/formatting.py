"""Numbers and times as a calibration record prints them.

A missing value (JSON null, or a float that is not finite) is printed as an
em dash, never as ``nan``.  Negative numbers use the ASCII hyphen so that
copied text searches as typed.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["MISSING", "as_float", "format_compact", "format_number", "format_p", "format_percent", "format_utc"]

MISSING = "—"


def as_float(value: Any) -> float | None:
    """``value`` as a finite float, or None (null, non-numbers, NaN, ±inf, booleans).

    Examples
    --------
    >>> as_float(2), as_float(None), as_float(float("nan")), as_float("3")
    (2.0, None, None, None)
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def format_number(value: Any, digits: int = 5) -> str:
    """``value`` to ``digits`` significant digits, fixed-point unless very large or small.

    Examples
    --------
    >>> format_number(1234.5678), format_number(0.00123456), format_number(-0.262323073774)
    ('1234.6', '0.0012346', '-0.26232')
    >>> format_number(3.2e-07, 3), format_number(12345678.0), format_number(None)
    ('3.20e-07', '1.2346e+07', '—')
    >>> format_number(0.0), format_number(-0.0000001, 2)
    ('0', '-1.0e-07')
    """
    v = as_float(value)
    if v is None:
        return MISSING
    if v == 0:
        return "0"
    exponent = math.floor(math.log10(abs(v)))
    if -4 <= exponent < 7:
        decimals = max(digits - 1 - exponent, 0)
        text = f"{v:.{decimals}f}"
        # Rounding may carry into a new digit (9.99996 → 10.0000); drop the extra one.
        if decimals and len(text.lstrip("-").replace(".", "").lstrip("0")) > digits:
            text = text[:-1]
        return "0" if float(text) == 0 else text
    return f"{v:.{digits - 1}e}"


def format_compact(value: Any, digits: int = 4) -> str:
    """Like :func:`format_number` but without trailing zeros (for limits and check values).

    Examples
    --------
    >>> format_compact(0.27), format_compact(1.2e-05), format_compact(15.0), format_compact(0.99512)
    ('0.27', '1.2e-05', '15', '0.9951')
    """
    text = format_number(value, digits)
    if "e" in text:
        mantissa, _, exponent = text.partition("e")
        if "." in mantissa:
            mantissa = mantissa.rstrip("0").rstrip(".")
        return f"{mantissa}e{exponent}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def format_p(value: Any) -> str:
    """A p-value: three significant digits, scientific below 0.0001.

    Examples
    --------
    >>> format_p(0.0123456), format_p(0.27), format_p(1.23e-05), format_p(0.0), format_p(None)
    ('0.0123', '0.270', '1.2e-05', '< 1e-300', '—')
    """
    v = as_float(value)
    if v is None:
        return MISSING
    if v == 0:
        # The t distribution's tail underflowed: the p-value is below any double.
        return "< 1e-300"
    if v < 1e-4:
        return f"{v:.1e}"
    return format_number(v, 3)


def format_percent(value: Any, decimals: int = 1) -> str:
    """A signed percentage deviation without the % sign.

    Examples
    --------
    >>> format_percent(2.345), format_percent(-0.04), format_percent(None)
    ('+2.3', '+0.0', '—')
    """
    v = as_float(value)
    if v is None:
        return MISSING
    if round(v, decimals) == 0:
        v = 0.0
    return f"{v:+.{decimals}f}"


def format_utc(stamp: Any) -> str:
    """An ISO 8601 UTC time stamp (``2026-12-01T09:30:00Z``) as ``2026-12-01 09:30:00 UTC``.

    Anything else is returned as given, a missing value as the em dash.

    Examples
    --------
    >>> format_utc("2026-12-01T09:30:00Z"), format_utc(None)
    ('2026-12-01 09:30:00 UTC', '—')
    """
    if not stamp or not isinstance(stamp, str):
        return MISSING
    if stamp.endswith("Z") and "T" in stamp:
        return stamp[:-1].replace("T", " ", 1) + " UTC"
    return stamp
