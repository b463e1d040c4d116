"""The results as CSV: one row per curve, the summary table of the workbook.

Columns are the keys of :data:`calib.export.tables.SUMMARY_COLUMNS`, for
programs to read (a LIMS import, a script).  Numbers are written in the
shortest form that reads back to the same double; text goes through
:func:`calib.export.cells.neutralise`.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Mapping
from typing import Any

from calib.export.cells import neutralise
from calib.export.tables import SUMMARY_COLUMNS, summary_rows

__all__ = ["results_csv"]


def _text(value: Any) -> str:
    value = neutralise(value)
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    return repr(value) if isinstance(value, float) else str(value)


def results_csv(document: Mapping[str, Any]) -> bytes:
    """The summary of a ``calib.check/1`` document as UTF-8 CSV bytes.

    Examples
    --------
    >>> doc = {"curves": [{"analyte": "+A", "verdict": "rejected", "checks": [],
    ...                    "coefficients": {"slope": {"estimate": 0.1}}}]}
    >>> lines = results_csv(doc).decode("utf-8").splitlines()
    >>> lines[0].split(",")[:3], lines[1].split(",")[:2], lines[1].split(",")[8]
    (['analyte', 'verdict', 'model'], ["'+A", 'rejected'], '0.1')
    """
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow([key for key, _ in SUMMARY_COLUMNS])
    for row in summary_rows(document):
        writer.writerow([_text(row.get(key)) for key, _ in SUMMARY_COLUMNS])
    return out.getvalue().encode("utf-8")
