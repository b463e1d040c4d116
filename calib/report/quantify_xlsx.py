"""The quantified batch as an ``.xlsx`` workbook, from its ``calib.quantify/1`` document.

Sheets: ``Results`` (one row per sample: concentration, interval, flags and
the reported value), ``QC`` (each QC against its nominal, then the rule per
analyte and level), ``Curves`` (what each analyte was read against) and
``About`` (the curve's origin, forced use, notes, cautions).

Spreadsheets are untrusted both ways: a text cell starting with ``=``, ``+``,
``-`` or ``@`` (or a tab or carriage return) would be taken for a formula by
the program that opens the file, so such text is written with a leading
apostrophe (SPEC §9; the OWASP advice on formula injection).  Numbers are
written as numbers.  The workbook's document times are the batch's
``created_at``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import datetime
from typing import Any

from openpyxl import Workbook
from openpyxl.styles import Font
from openpyxl.utils import get_column_letter

from calib.export.cells import neutralise as export_neutralise
from calib.export.workbook_bytes import workbook_bytes

__all__ = ["neutralise", "write_quantify_xlsx"]


def neutralise(value: Any) -> Any:
    """A cell value that no spreadsheet program will run as a formula.

    Examples
    --------
    >>> neutralise("=HYPERLINK(\\"x\\")"), neutralise("-12"), neutralise("< LLOQ"), neutralise(2.5)
    ('\\'=HYPERLINK("x")', "'-12", '< LLOQ', 2.5)
    """
    # One rule for every writer: the export's neutralise also drops the control characters
    # a workbook cannot hold (openpyxl would refuse the whole file) and empties NaN.
    return export_neutralise(value)


def _sheet(book: Workbook, title: str, rows: Sequence[Sequence[Any]], *, first: bool = False
           ) -> None:
    sheet = book.active if first else book.create_sheet()
    assert sheet is not None
    sheet.title = title
    for row in rows:
        sheet.append([neutralise(v) for v in row])
    if rows:
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        sheet.freeze_panes = "A2"
        for index in range(1, len(rows[0]) + 1):
            longest = max(len(str(r[index - 1])) if index - 1 < len(r) and r[index - 1]
                          is not None else 0 for r in rows)
            sheet.column_dimensions[get_column_letter(index)].width = min(max(10, longest + 2),
                                                                          60)


def _results(doc: Mapping[str, Any]) -> list[list[Any]]:
    units = {c["analyte"]: c.get("unit") for c in doc.get("curves", [])}
    rows: list[list[Any]] = [[
        "Sample", "Analyte", "Type", "Replicates", "Mean response", "Concentration",
        "Standard error", "CI low", "CI high", "Confidence", "Unit", "Dilution factor",
        "Reported", "Flags", "Note", "Nominal", "Deviation %", "Source cells",
    ]]
    for s in doc.get("samples", []):
        rows.append([
            s["sample_id"], s["analyte"], s["sample_type"], s["n_replicates"],
            s.get("mean_response"), s.get("concentration"), s.get("std_error"), s.get("ci_low"),
            s.get("ci_high"), s.get("confidence"), units.get(s["analyte"]), s["dilution_factor"],
            s["reported"], ", ".join(s["flags"]), s.get("note") or None, s.get("nominal"),
            s.get("deviation_pct"), ", ".join(s.get("source_cells", [])),
        ])
    return rows


def _qc(doc: Mapping[str, Any]) -> list[list[Any]]:
    rows: list[list[Any]] = [["Analyte", "QC", "Nominal", "Found", "Deviation %", "Allowed ±%",
                              "At LLOQ", "Within"]]
    summary: list[list[Any]] = [[], ["Analyte", "Level (nominal)", "QCs", "Within", "Share %",
                                     "Level meets the rule", "Analyte verdict", "Detail"]]
    for q in doc.get("qc", {}).get("analytes", []):
        for o in q["outcomes"]:
            rows.append([q["analyte"], o["sample_id"], o["nominal"], o.get("found"),
                         o.get("deviation_pct"), o["allowed_pct"], "yes" if o["at_lloq"] else "no",
                         "yes" if o["within"] else "no"])
        for lv in q["levels"]:
            summary.append([q["analyte"], lv["nominal"], lv["n"], lv["n_within"], lv["share_pct"],
                            "yes" if lv["ok"] else "no", q["verdict"], None])
        summary.append([q["analyte"], "all", q["n"], q["n_within"], q.get("share_pct"), None,
                        q["verdict"], q["detail"]])
    return rows + summary


def _curves(doc: Mapping[str, Any]) -> list[list[Any]]:
    keys = ["analyte", "verdict", "status", "model", "weighting", "unit", "n_points",
            "residual_df", "residual_sd", "confidence", "t_critical", "x_min", "x_max", "lloq",
            "uloq", "lod", "lod_method", "loq", "interval_method", "not_fitted"]
    return [[k.replace("_", " ") for k in keys]] + [[c.get(k) for k in keys]
                                                   for c in doc.get("curves", [])]


def _about(doc: Mapping[str, Any]) -> list[list[Any]]:
    curve, samples = doc.get("curve", {}), doc.get("samples_source", {})
    rows: list[list[Any]] = [
        ["Item", "Value"],
        ["Schema", doc.get("schema")],
        ["Created (UTC)", doc.get("created_at")],
        ["calib version", doc.get("tool_version")],
        ["Curve from", curve.get("kind")],
        ["Curve file", curve.get("file")],
        ["Curve file SHA-256", curve.get("sha256")],
        ["Record id", curve.get("record_id")],
        ["Record digest", curve.get("digest")],
        ["Profile", (f"{(curve.get('profile') or {}).get('name')} "
                    f"v{(curve.get('profile') or {}).get('version')}")],
        ["Samples file", samples.get("file")],
        ["Samples file SHA-256", samples.get("sha256")],
        ["Batch verdict", doc.get("verdict")],
        ["Forced", "yes: quantified against a rejected curve on request: "
                   + ", ".join(doc.get("forced_analytes", [])) if doc.get("forced") else "no"],
    ]
    rows += [["Not quantified", f"{a}: {why}"] for a, why in (doc.get("refused") or {}).items()]
    rows += [["Reason", r] for r in doc.get("reasons", [])]
    rows += [["Note", n] for n in doc.get("notes", [])]
    rows.append(["Caution", doc.get("cautions")])
    return rows


def write_quantify_xlsx(document: Mapping[str, Any]) -> bytes:
    """Write the batch as an ``.xlsx`` workbook.

    Parameters
    ----------
    document : mapping
        A ``calib.quantify/1`` document (:func:`calib.quantify.quantify_document`).

    Returns
    -------
    bytes
        The workbook.

    Examples
    --------
    >>> import io
    >>> from openpyxl import load_workbook
    >>> doc = {"samples": [{"sample_id": "=1+1", "analyte": "A", "sample_type": "unknown",
    ...        "n_replicates": 1, "dilution_factor": 1.0, "reported": "> ULOQ",
    ...        "flags": ["above-uloq"]}], "created_at": "2026-12-01T09:30:00Z"}
    >>> book = load_workbook(io.BytesIO(write_quantify_xlsx(doc)))
    >>> book.sheetnames, book["Results"]["A2"].value, book["Results"]["F2"].value
    (['Results', 'QC', 'Curves', 'About'], "'=1+1", None)
    """
    book = Workbook()
    _sheet(book, "Results", _results(document), first=True)
    _sheet(book, "QC", _qc(document))
    _sheet(book, "Curves", _curves(document))
    _sheet(book, "About", _about(document))
    try:
        when = datetime.strptime(str(document.get("created_at")), "%Y-%m-%dT%H:%M:%SZ")
    except ValueError:
        when = datetime(2000, 1, 1)
    book.properties.creator = "calib"
    return workbook_bytes(book, when=when)
