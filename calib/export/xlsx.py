"""The results workbook: a summary sheet and one sheet per analyte (openpyxl).

Built from a ``calib.check/1`` document.  Numbers stay numbers (openpyxl
writes 16 significant digits; the JSON and CSV keep every digit); every text
goes through :func:`calib.export.cells.neutralise`, so no cell can turn into
a formula.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping, Sequence
from datetime import datetime
from typing import Any

from calib.cautions import CAUTIONS
from calib.export.cells import FORMULA_STARTS, neutralise
from calib.export.tables import (
    CHECK_COLUMNS,
    COEFFICIENT_COLUMNS,
    POINT_COLUMNS,
    SUMMARY_COLUMNS,
    check_rows,
    coefficient_rows,
    point_rows,
    summary_rows,
)
from calib.export.workbook_bytes import workbook_bytes

__all__ = ["results_xlsx", "sheet_name"]

_FORBIDDEN = re.compile(r"[\[\]:*?/\\]")
# Fixed document times keep the workbook's bytes the same for the same results.
_EPOCH = datetime(2000, 1, 1)


def sheet_name(analyte: str, taken: set[str]) -> str:
    """A worksheet name for ``analyte``: legal, at most 31 characters, not yet taken.

    ``taken`` holds the lower-cased names already used and is updated.

    Examples
    --------
    >>> taken = {"summary"}
    >>> sheet_name("Nitrate/Nitrite [as N]", taken), sheet_name("Summary", taken)
    ('Nitrate_Nitrite _as N_', 'Summary (2)')
    """
    base = _FORBIDDEN.sub("_", analyte).strip().strip("'") or "Analyte"
    if base.startswith(FORMULA_STARTS):
        base = "_" + base[1:]
    base = base[:31]
    name, n = base, 1
    while name.lower() in taken or name.lower() == "history":
        n += 1
        suffix = f" ({n})"
        name = base[:31 - len(suffix)] + suffix
    taken.add(name.lower())
    return name


def _put_row(ws: Any, values: Iterable[Any], *, bold: bool = False) -> None:
    ws.append([neutralise(v) for v in values])
    if bold:
        from openpyxl.styles import Font

        for cell in ws[ws.max_row]:
            cell.font = Font(bold=True)


def _table(ws: Any, columns: Sequence[tuple[str, str]], rows: Iterable[Mapping[str, Any]]) -> None:
    _put_row(ws, (heading for _, heading in columns), bold=True)
    for row in rows:
        _put_row(ws, (row.get(key) for key, _ in columns))


def _facts(ws: Any, document: Mapping[str, Any]) -> None:
    source = document.get("source") or {}
    profile = document.get("profile") or {}
    facts = [
        ("Run file", source.get("file")),
        ("Run file SHA-256", source.get("sha256")),
        ("Sheet", source.get("sheet")),
        ("Profile", f"{profile.get('name')} version {profile.get('version')}"),
        ("Profile SHA-256", profile.get("sha256")),
        ("calib version", document.get("tool_version")),
        ("Run verdict", document.get("verdict")),
        ("Caution", CAUTIONS),
    ]
    for label, value in facts:
        _put_row(ws, (label, value))
        ws.cell(ws.max_row, 1).font = _bold()


def _bold() -> Any:
    from openpyxl.styles import Font

    return Font(bold=True)


def _widths(ws: Any, widths: Sequence[int]) -> None:
    from openpyxl.utils import get_column_letter

    for i, width in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(i)].width = width


def _summary(ws: Any, document: Mapping[str, Any]) -> None:
    _put_row(ws, ["calib results"], bold=True)
    _facts(ws, document)
    ws.append([])
    _table(ws, SUMMARY_COLUMNS, summary_rows(document))
    exclusions = document.get("exclusions") or []
    if exclusions:
        ws.append([])
        _put_row(ws, ["Excluded when checking", "Reason", "Cells", "Analytes"], bold=True)
        for e in exclusions:
            _put_row(ws, (e.get("target"), e.get("reason"), ", ".join(e.get("cells", [])),
                          ", ".join(e.get("analytes", []))))
    _widths(ws, [22, 16, 12, 12] + [14] * (len(SUMMARY_COLUMNS) - 4))


def _curve(ws: Any, curve: Mapping[str, Any]) -> None:
    _put_row(ws, [f"{curve.get('analyte')}: {curve.get('verdict')}"], bold=True)
    for reason in curve.get("reasons") or []:
        _put_row(ws, ["Reason", reason])
    lod, loq = curve.get("lod") or {}, curve.get("loq") or {}
    for label, value in (("Model", curve.get("model")), ("Weighting", curve.get("weighting")),
                         ("Confidence", curve.get("confidence")),
                         ("Points in the fit N", curve.get("n_points")),
                         ("Levels", curve.get("n_levels")),
                         ("Residual df", curve.get("residual_df")),
                         ("Residual SD", curve.get("residual_sd")),
                         ("R²", curve.get("r_squared")), ("r", curve.get("r"))):
        _put_row(ws, (label, value))
    if lod:
        _put_row(ws, ("LOD", lod.get("value"), lod.get("method")))
    if loq:
        _put_row(ws, ("LOQ", loq.get("value"), loq.get("method")))
    span = curve.get("working_range") or {}
    _put_row(ws, ("LLOQ (lowest level in the fit)", span.get("lloq")))
    _put_row(ws, ("ULOQ (highest level in the fit)", span.get("uloq")))
    applied, proposed = span.get("applied"), span.get("proposed")
    if applied:
        _put_row(ws, ("Working range applied", applied.get("low"), applied.get("high"),
                      applied.get("reason")))
        original = applied.get("original") or {}
        _put_row(ws, ("Verdict on the full range", original.get("verdict")))
    if proposed:
        _put_row(ws, ("Range proposed (not applied)", proposed.get("lloq"), proposed.get("uloq"),
                      proposed.get("reason")))
        _put_row(ws, ("Verdict on the proposed range", proposed.get("verdict")))
    ws.append([])
    _table(ws, COEFFICIENT_COLUMNS, coefficient_rows(curve))
    ws.append([])
    _table(ws, CHECK_COLUMNS, check_rows(curve))
    ws.append([])
    _table(ws, POINT_COLUMNS, point_rows(curve))
    _widths(ws, [30, 16, 16, 16, 16, 16, 60, 12, 40])


def results_xlsx(document: Mapping[str, Any]) -> bytes:
    """The results workbook of a ``calib.check/1`` document, as bytes.

    Parameters
    ----------
    document : mapping
        As :func:`calib.record.check_document` builds it.

    Returns
    -------
    bytes
        An ``.xlsx`` file: sheet ``Summary`` (run facts, one row per curve,
        the analyst's exclusions), then one sheet per analyte (fit, working
        range, checks, standards).

    Examples
    --------
    >>> import io
    >>> from openpyxl import load_workbook
    >>> doc = {"verdict": "accepted", "curves": [{"analyte": "=cmd", "verdict": "accepted"}]}
    >>> wb = load_workbook(io.BytesIO(results_xlsx(doc)))
    >>> wb.sheetnames, wb["_cmd"]["A1"].value
    (['Summary', '_cmd'], "'=cmd: accepted")
    """
    from openpyxl import Workbook

    wb = Workbook()
    wb.properties.creator = "calib"
    summary = wb.active
    summary.title = "Summary"
    _summary(summary, document)
    taken = {"summary"}
    for curve in document.get("curves", []):
        _curve(wb.create_sheet(sheet_name(str(curve.get("analyte") or "Analyte"), taken)), curve)
    return workbook_bytes(wb, when=_EPOCH)
