"""Cell values safe to hand to a spreadsheet: no formulas, no illegal characters.

A value written to an XLSX or CSV export that starts with ``=``, ``+``, ``-``
or ``@`` would be taken by a spreadsheet program as a formula (and a formula
can run commands or leak data), so such text is neutralised with a leading
apostrophe (SPEC §9; OWASP "CSV injection").  Tab and carriage return are
treated the same way, as some programs strip them before reading a formula.
Numbers are written as numbers and are left alone: ``-0.5`` is data.
"""

from __future__ import annotations

import math
import re
from typing import Any

__all__ = ["FORMULA_STARTS", "neutralise"]

#: First characters that make a spreadsheet read a text as a formula.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")

# Control characters XML 1.0 cannot hold (openpyxl refuses them).
_ILLEGAL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")


def neutralise(value: Any) -> Any:
    """A value ready for an export cell.

    Text starting like a formula gets a leading apostrophe; control characters
    a workbook cannot store are removed; NaN and infinities become empty
    (None); other numbers, booleans and None pass unchanged.

    Examples
    --------
    >>> neutralise("=HYPERLINK(\\"http://x\\")"), neutralise("@SUM(A1)"), neutralise("-2+3")
    ('\\'=HYPERLINK("http://x")', "'@SUM(A1)", "'-2+3")
    >>> neutralise(-0.5), neutralise("Run!C7"), neutralise(float("nan")) is None
    (-0.5, 'Run!C7', True)
    """
    if isinstance(value, bool) or value is None:
        return value
    if isinstance(value, (int, float)):
        return value if math.isfinite(value) else None
    text = _ILLEGAL.sub("", str(value))
    return "'" + text if text.startswith(FORMULA_STARTS) else text
