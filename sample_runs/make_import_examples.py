"""Write invented instrument exports in every layout and format calib imports.

Run from the repository root to regenerate the files beside this script::

    python sample_runs/make_import_examples.py

Every number is invented with a fixed seed, in the fictional scenarios of the
project (Fernbrook Water Laboratory, Kestrel Bioanalytical, a multi-residue
screen); no real laboratory, instrument, product or person is described.
The files are shaped the way data systems and office programs write
exports: title and ``key: value`` lines above the table, merged title cells,
non-detect markers, decimal commas, other languages and encodings.

=================================================  ==================================
file                                               shape
=================================================  ==================================
``fernbrook_anions_wide_2026-12-01.xlsx``          wide, a concentration column per
                                                   analyte (``Fluoride conc (mg/L)``)
``fernbrook_cations_grouped_2026-12-02.xlsx``      wide, analyte names in merged
                                                   cells over ``Conc | Area``
``fernbrook_metals_stacked_2026-12-03.csv``        three tables stacked in one file,
                                                   Spanish headings, thousands commas
``fernbrook_anions_by_sheet_2026-12-04.ods``       one sheet per analyte; an error
                                                   value (``#DIV/0!``) in one cell
``fernbrook_nitrat_2026-12-05.txt``                German, Windows-1252, semicolons,
                                                   decimal commas, ``n.n.`` marker
``fernbrook_phosphate_2026-12-06.tsv``             French, UTF-16 with byte-order mark
``fernbrook_fluoride_macro_2026-12-07.xlsm``       long; merged analyte cells, a
                                                   hidden row, a (never run) macro part
``kestrel_kx214_plasma_2026-12-08.xlsx``           long, internal standard, sample
                                                   types from names, QCs, unknowns
``kestrel_kx214_plasma_2026-12-09.xls``            the same method, a type column,
                                                   as an Excel 97-2003 workbook
``multiresidue_screen_40_2026-12-10.xlsx``         wide, 40 analyte columns named by
                                                   analyte, one internal standard
=================================================  ==================================

The writers :func:`write_xlsx`, :func:`write_ods` and :func:`write_xls` are
small and keep to what these exports need; the tests use them too.
"""

from __future__ import annotations

import io
import struct
import zipfile
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from xml.sax.saxutils import escape, quoteattr

import numpy as np

HERE = Path(__file__).resolve().parent
SEED = 20261201

Rows = Sequence[Sequence[object]]


@dataclass(frozen=True)
class ErrorValue:
    """A spreadsheet error value in a cell (``#DIV/0!``), written as the format stores errors."""

    text: str


# --- writers ------------------------------------------------------------------------------------


def write_xlsx(path: Path, sheets: Mapping[str, Rows], *,
               hidden_rows: Mapping[str, Sequence[int]] | None = None,
               merges: Mapping[str, Sequence[str]] | None = None, macros: bool = False) -> Path:
    """Write an ``.xlsx`` (or ``.xlsm``) workbook with openpyxl; rows are 1-based when hidden.

    ``macros`` adds an inert ``xl/vbaProject.bin`` part, as a macro-enabled
    workbook carries (its bytes are not a macro; nothing can run).
    """
    from openpyxl import Workbook

    book = Workbook()
    book.remove(book.active)
    for title, rows in sheets.items():
        sheet = book.create_sheet(title)
        for r, row in enumerate(rows, start=1):
            for c, value in enumerate(row, start=1):
                if value is None:
                    continue
                cell = sheet.cell(row=r, column=c)
                if isinstance(value, ErrorValue):
                    cell.value = value.text
                    cell.data_type = "e"
                else:
                    cell.value = value
        for number in (hidden_rows or {}).get(title, ()):
            sheet.row_dimensions[number].hidden = True
        for ref in (merges or {}).get(title, ()):
            sheet.merge_cells(ref)
    buffer = io.BytesIO()
    book.save(buffer)
    data = buffer.getvalue()
    if macros:
        data = _with_member(data, "xl/vbaProject.bin", b"calib demo: not a macro project\n")
    path.write_bytes(data)
    return path


def _with_member(archive: bytes, name: str, content: bytes) -> bytes:
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(archive)) as source, \
            zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            target.writestr(info, source.read(info))
        target.writestr(name, content)
    return out.getvalue()


_ODS_NS = (
    'xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
    'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
    'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" '
    'xmlns:calcext="urn:org:documentfoundation:names:experimental:calc:xmlns:calcext:1.0"'
)


def _ods_cell(value: object, span: tuple[int, int] | None) -> str:
    attrs = ""
    if span is not None:
        attrs = (f' table:number-rows-spanned="{span[0]}" '
                 f'table:number-columns-spanned="{span[1]}"')
    if value is None:
        return f"<table:table-cell{attrs}/>"
    if isinstance(value, ErrorValue):
        # The way LibreOffice saves a formula whose result is an error.
        return (f'<table:table-cell{attrs} table:formula="of:=1/0" office:value-type="float" '
                f'office:value="0" calcext:value-type="error"><text:p>{escape(value.text)}'
                f"</text:p></table:table-cell>")
    if isinstance(value, bool):
        return (f'<table:table-cell{attrs} office:value-type="boolean" '
                f'office:boolean-value="{str(value).lower()}"><text:p>{str(value).upper()}'
                f"</text:p></table:table-cell>")
    if isinstance(value, (int, float)):
        return (f'<table:table-cell{attrs} office:value-type="float" office:value="{value!r}">'
                f"<text:p>{value!r}</text:p></table:table-cell>")
    return (f'<table:table-cell{attrs} office:value-type="string"><text:p>{escape(str(value))}'
            f"</text:p></table:table-cell>")


def _ref_span(ref: str) -> tuple[int, int, int, int]:
    from openpyxl.utils.cell import range_boundaries

    first_col, first_row, last_col, last_row = range_boundaries(ref)
    return first_row - 1, first_col - 1, last_row - 1, last_col - 1


def write_ods(path: Path, sheets: Mapping[str, Rows], *,
              hidden_rows: Mapping[str, Sequence[int]] | None = None,
              merges: Mapping[str, Sequence[str]] | None = None) -> Path:
    """Write an OpenDocument spreadsheet (``.ods``) by hand: a zip of ``content.xml``.

    ``hidden_rows`` are 1-based; ``merges`` are ranges such as ``"A1:D1"``.
    """
    parts = [(f'<?xml version="1.0" encoding="UTF-8"?><office:document-content {_ODS_NS} '
             f'office:version="1.2"><office:body><office:spreadsheet>')]
    for title, rows in sheets.items():
        hidden = set((hidden_rows or {}).get(title, ()))
        spans: dict[tuple[int, int], tuple[int, int]] = {}
        covered: set[tuple[int, int]] = set()
        for ref in (merges or {}).get(title, ()):
            r0, c0, r1, c1 = _ref_span(ref)
            spans[(r0, c0)] = (r1 - r0 + 1, c1 - c0 + 1)
            covered.update((r, c) for r in range(r0, r1 + 1) for c in range(c0, c1 + 1))
            covered.discard((r0, c0))
        parts.append(f"<table:table table:name={quoteattr(title)}>")
        for r, row in enumerate(rows):
            visibility = ' table:visibility="collapse"' if r + 1 in hidden else ""
            parts.append(f"<table:table-row{visibility}>")
            for c, value in enumerate(row):
                if (r, c) in covered:
                    parts.append("<table:covered-table-cell/>")
                else:
                    parts.append(_ods_cell(value, spans.get((r, c))))
            parts.append("</table:table-row>")
        parts.append("</table:table>")
    parts.append("</office:spreadsheet></office:body></office:document-content>")
    manifest = (
        '<?xml version="1.0" encoding="UTF-8"?><manifest:manifest xmlns:manifest='
        '"urn:oasis:names:tc:opendocument:xmlns:manifest:1.0" manifest:version="1.2">'
        '<manifest:file-entry manifest:full-path="/" manifest:media-type='
        '"application/vnd.oasis.opendocument.spreadsheet"/><manifest:file-entry '
        'manifest:full-path="content.xml" manifest:media-type="text/xml"/></manifest:manifest>'
    )
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr(zipfile.ZipInfo("mimetype"), "application/vnd.oasis.opendocument.spreadsheet")
        archive.writestr("META-INF/manifest.xml", manifest, compress_type=zipfile.ZIP_DEFLATED)
        archive.writestr("content.xml", "".join(parts), compress_type=zipfile.ZIP_DEFLATED)
    return path


_XLS_ERRORS = {"#NULL!": 0x00, "#DIV/0!": 0x07, "#VALUE!": 0x0F, "#REF!": 0x17, "#NAME?": 0x1D,
               "#NUM!": 0x24, "#N/A": 0x2A}


def _record(kind: int, body: bytes = b"") -> bytes:
    return struct.pack("<HH", kind, len(body)) + body


def _bof(kind: int) -> bytes:
    return _record(0x0809, struct.pack("<HHHHII", 0x0600, kind, 0x0DBB, 0x07CC, 0x41, 0x06))


def _xls_sheet(rows: Rows, merges: Sequence[str]) -> bytes:
    """One BIFF8 worksheet substream: cells as NUMBER, LABEL and BOOLERR records."""
    out = [_bof(0x0010)]
    width = max((len(row) for row in rows), default=0)
    out.append(_record(0x0200, struct.pack("<IIHHH", 0, len(rows), 0, width, 0)))
    for r, row in enumerate(rows):
        for c, value in enumerate(row):
            if value is None or value == "":
                continue
            if isinstance(value, ErrorValue):
                out.append(_record(0x0205, struct.pack("<HHHBB", r, c, 15,
                                                       _XLS_ERRORS[value.text], 1)))
            elif isinstance(value, bool):
                out.append(_record(0x0205, struct.pack("<HHHBB", r, c, 15, int(value), 0)))
            elif isinstance(value, (int, float)):
                out.append(_record(0x0203, struct.pack("<HHHd", r, c, 15, float(value))))
            else:
                text = str(value)
                out.append(_record(0x0204, struct.pack("<HHHHB", r, c, 15, len(text), 1)
                                   + text.encode("utf-16-le")))
    if merges:
        spans = [_ref_span(ref) for ref in merges]
        out.append(_record(0x00E5, struct.pack("<H", len(spans)) + b"".join(
            struct.pack("<HHHH", r0, r1, c0, c1) for r0, c0, r1, c1 in spans)))
    out.append(_record(0x000A))
    return b"".join(out)


def _xls_stream(sheets: Mapping[str, Rows], merges: Mapping[str, Sequence[str]]) -> bytes:
    def globals_part(offsets: Sequence[int]) -> bytes:
        out = [_bof(0x0005), _record(0x0042, struct.pack("<H", 1200))]
        for name, offset in zip(sheets, offsets, strict=True):
            out.append(_record(0x0085, struct.pack("<IBBBB", offset, 0, 0, len(name), 1)
                               + name.encode("utf-16-le")))
        out.append(_record(0x000A))
        return b"".join(out)

    parts = [_xls_sheet(rows, merges.get(name, ())) for name, rows in sheets.items()]
    offsets, position = [], len(globals_part([0] * len(sheets)))
    for part in parts:
        offsets.append(position)
        position += len(part)
    return globals_part(offsets) + b"".join(parts)


def _compound_file(stream: bytes, name: str = "Workbook") -> bytes:
    """Wrap one stream in a Compound File Binary container (version 3, 512-byte sectors)."""
    sector = 512
    end, free, fat_mark, no_entry = 0xFFFFFFFE, 0xFFFFFFFF, 0xFFFFFFFD, 0xFFFFFFFF
    # Streams under 4096 bytes would go to the mini stream; padding keeps this writer simple.
    stream = stream.ljust(4096, b"\0")
    n_data = -(-len(stream) // sector)
    n_fat = 1
    while n_data + 1 + n_fat > 128 * n_fat:
        n_fat += 1
    fat = [i + 1 for i in range(n_data - 1)] + [end, end] + [fat_mark] * n_fat
    fat += [free] * (128 * n_fat - len(fat))

    def entry(entry_name: str, kind: int, child: int, start: int, size: int) -> bytes:
        raw = entry_name.encode("utf-16-le") + b"\0\0"
        return (raw.ljust(64, b"\0") + struct.pack("<HBB", len(raw), kind, 1)
                + struct.pack("<III", no_entry, no_entry, child) + b"\0" * 36
                + struct.pack("<IQ", start, size))

    empty = (b"\0" * 64 + struct.pack("<HBB", 0, 0, 0)
             + struct.pack("<III", no_entry, no_entry, no_entry) + b"\0" * 36
             + struct.pack("<IQ", 0, 0))
    directory = entry("Root Entry", 5, 1, end, 0) + entry(name, 2, no_entry, 0, len(stream))
    directory += empty * 2
    difat = [n_data + 1 + i for i in range(n_fat)] + [free] * (109 - n_fat)
    header = (bytes.fromhex("D0CF11E0A1B11AE1") + b"\0" * 16
              + struct.pack("<HHHHH", 0x3E, 3, 0xFFFE, 9, 6) + b"\0" * 6
              + struct.pack("<IIIIIIIII", 0, n_fat, n_data, 0, 4096, end, 0, end, 0)
              + struct.pack("<109I", *difat))
    body = stream.ljust(n_data * sector, b"\0")
    return header + body + directory + struct.pack(f"<{len(fat)}I", *fat)


def write_xls(path: Path, sheets: Mapping[str, Rows], *,
              merges: Mapping[str, Sequence[str]] | None = None) -> Path:
    """Write an Excel 97-2003 workbook (BIFF8 in a compound file) by hand."""
    path.write_bytes(_compound_file(_xls_stream(sheets, merges or {})))
    return path


def write_text(path: Path, rows: Rows, *, delimiter: str, encoding: str,
               newline: str = "\r\n") -> Path:
    """Write rows as delimited text, quoting cells that hold the delimiter or a quote."""
    lines = []
    for row in rows:
        cells = []
        for value in row:
            text = "" if value is None else str(value)
            if delimiter in text or '"' in text:
                text = '"' + text.replace('"', '""') + '"'
            cells.append(text)
        lines.append(delimiter.join(cells))
    data = (newline.join(lines) + newline).encode(encoding)
    path.write_bytes(data)
    return path


# --- scenarios ----------------------------------------------------------------------------------


def _fernbrook_lines(method: str, instrument: str, date: str) -> list[list[object]]:
    return [
        ["Fernbrook Water Laboratory (fictional)"],
        ["Method:", method],
        ["Instrument:", instrument],
        ["Run date:", date],
        ["Operator:", "R. Okafor"],
        [],
    ]


ANIONS = {  # analyte: (levels in mg/L, slope in µS*min per mg/L)
    "Fluoride": ((0.1, 0.2, 0.5, 1.0, 1.5, 2.0), 0.215),
    "Chloride": ((1.0, 2.0, 5.0, 10.0, 25.0, 50.0), 0.118),
    "Nitrate-N": ((0.5, 1.0, 2.0, 4.0, 6.0, 10.0), 0.0842),
    "Sulfate": ((2.0, 5.0, 10.0, 25.0, 50.0, 100.0), 0.0931),
}


def anions_wide(rng: np.random.Generator) -> list[list[object]]:
    """Mixed anion standards, two injections each: a concentration and an area per analyte."""
    heading: list[object] = ["Sample", "Type", "Injection"]
    for analyte in ANIONS:
        heading += [f"{analyte} conc (mg/L)", f"{analyte} area (µS*min)"]
    rows = _fernbrook_lines("FWL-IC-11 anions in drinking water", "IC-2 (conductivity)",
                            "2026-12-01") + [heading]
    blank: list[object] = ["Reagent blank", "Blank", 1]
    for _ in ANIONS:
        blank += [0, "n.d."]
    rows.append(blank)
    for level in range(6):
        for injection in (1, 2):
            row: list[object] = [f"Std {level + 1}", "Standard", injection]
            for levels, slope in ANIONS.values():
                conc = levels[level]
                row += [conc, round(slope * conc * (1 + rng.normal(0, 0.01)), 5)]
            rows.append(row)
    return rows


CATIONS = {"Sodium": 0.0412, "Potassium": 0.0275, "Calcium": 0.0338, "Magnesium": 0.0561}


def cations_grouped(rng: np.random.Generator) -> tuple[list[list[object]], list[str]]:
    """Analyte names in merged cells above repeated ``Conc (mg/L) | Area`` sub-headings."""
    rows = _fernbrook_lines("FWL-IC-14 cations", "IC-3 (conductivity)", "2026-12-02")
    group: list[object] = ["", ""]
    sub: list[object] = ["Sample", "Rep"]
    merges = []
    for number, analyte in enumerate(CATIONS):
        column = 2 + 2 * number
        group += [analyte, None]
        sub += ["Conc (mg/L)", "Area"]
        merges.append(f"{chr(65 + column)}7:{chr(66 + column)}7")
    rows += [group, sub]
    for level, conc in enumerate((0.5, 1.0, 2.5, 5.0, 10.0), start=1):
        for rep in (1, 2):
            row: list[object] = [f"Cal {level}", rep]
            for slope in CATIONS.values():
                row += [conc, round(slope * conc * (1 + rng.normal(0, 0.012)), 5)]
            rows.append(row)
    return rows, merges


METALS = {"Plomo": ((1.0, 2.0, 5.0, 10.0, 20.0), 5210.0),
          "Cobre": ((5.0, 10.0, 25.0, 50.0, 100.0), 3120.0),
          "Arsénico": ((0.5, 1.0, 2.0, 5.0, 10.0), 1880.0)}


def metals_stacked(rng: np.random.Generator) -> list[list[object]]:
    """Three tables in one text file, each under the analyte's name (Spanish headings)."""
    rows: list[list[object]] = [
        ["Laboratorio Fernbrook (ficticio)"],
        ["Método: FWL-MS-02 metales por ICP-MS"],
        ["Equipo: ICP-MS 1"],
        ["Fecha: 2026-12-03"],
        ["Analista: R. Okafor"],
    ]
    for analyte, (levels, slope) in METALS.items():
        rows += [[], [analyte], ["Muestra", "Tipo", "Concentración (µg/L)", "Intensidad (cps)"]]
        rows.append(["Blanco", "Blanco", "", f"{rng.normal(40, 4):,.1f}"])
        for level, conc in enumerate(levels, start=1):
            for _ in range(2):
                counts = slope * conc * (1 + rng.normal(0, 0.015)) + 40
                rows.append([f"Patrón {level}", "Patrón", conc, f"{counts:,.1f}"])
    rows += [[], ["Revisado por: J. Marsh"]]
    return rows


def anions_by_sheet(rng: np.random.Generator) -> dict[str, list[list[object]]]:
    """One sheet per analyte; a cell holding #DIV/0! where a formula failed."""
    sheets = {}
    for analyte in ("Fluoride", "Nitrate-N", "Sulfate"):
        levels, slope = ANIONS[analyte]
        rows = _fernbrook_lines("FWL-IC-11 anions", "IC-2 (conductivity)", "2026-12-04")
        rows += [["Units:", "mg/L"], [], ["Sample", "Level", "Concentration", "Peak area"]]
        for level, conc in enumerate(levels, start=1):
            for rep in range(3):
                area: object = round(slope * conc * (1 + rng.normal(0, 0.01)), 5)
                if analyte == "Sulfate" and level == 4 and rep == 2:
                    area = ErrorValue("#DIV/0!")
                rows.append([f"Cal-{level}", f"L{level}", conc, area])
        sheets[analyte] = rows
    return sheets


def nitrat_german(rng: np.random.Generator) -> list[list[object]]:
    """A German-language export: decimal commas, thousands points, n.n. for not detected."""
    rows: list[list[object]] = [
        ["Fernbrook Wasserlabor (fiktiv)"],
        ["Parameter", "Nitrat-N"],
        ["Methode", "FWL-IC-07 Nitrat-N"],
        ["Gerät", "IC-2"],
        ["Datum", "05.12.2026"],
        ["Bediener", "R. Okafor"],
        [],
        ["Probenname", "Probenart", "Stufe", "Konz. (mg/l)", "Fläche", "Bemerkung"],
        ["Leerwert", "Blindwert", "", "", "n.n.", ""],
    ]
    for level, conc in enumerate((0.5, 1.0, 2.0, 4.0, 6.0, 10.0), start=1):
        for _ in range(3):
            area = 10000 * 0.0842 * conc * (1 + rng.normal(0, 0.01))
            text = f"{area:,.3f}".replace(",", " ").replace(".", ",").replace(" ", ".")
            rows.append([f"Kal {level}", "Standard", f"K{level}", f"{conc:.1f}".replace(".", ","),
                         text, ""])
    rows.append(["Kontrolle 1", "Kontrolle", "", "3,0",
                 f"{10000 * 0.0842 * 3.0:,.3f}".replace(",", " ").replace(".", ",")
                 .replace(" ", "."), ""])
    return rows


def phosphate_french(rng: np.random.Generator) -> list[list[object]]:
    """A French-language export in UTF-16 with tab separators."""
    rows: list[list[object]] = [
        ["Laboratoire Fernbrook (fictif)"],
        ["Paramètre :", "Orthophosphate-P"],
        ["Méthode :", "FWL-UV-03 orthophosphate"],
        ["Appareil :", "UV-1"],
        ["Date d'analyse :", "2026-12-06"],
        ["Opérateur :", "R. Okafor"],
        [],
        ["Échantillon", "Type d'échantillon", "Concentration (mg/L)", "Absorbance (AU)"],
        ["Blanc", "Blanc", "", f"{rng.normal(0.002, 0.0005):.4f}"],
    ]
    for level, conc in enumerate((0.05, 0.1, 0.2, 0.4, 0.6, 0.8), start=1):
        for _ in range(2):
            absorbance = 0.002 + 0.912 * conc * (1 + rng.normal(0, 0.008))
            rows.append([f"Étalon {level}", "Étalon", conc, f"{absorbance:.4f}"])
    rows.append(["Contrôle", "Contrôle", 0.3, f"{0.002 + 0.912 * 0.3:.4f}"])
    return rows


def fluoride_macro(rng: np.random.Generator) -> tuple[list[list[object]], list[str], list[int]]:
    """Long layout with the analyte in one merged cell down the column, and a hidden row.

    Photometric fluoride: the dye's absorbance falls as fluoride rises (negative slope).
    """
    rows = _fernbrook_lines("FWL-UV-05 fluoride, photometric", "UV-1", "2026-12-07")
    rows.append(["Analyte", "Sample", "Conc (mg/L)", "Absorbance (AU)", "Include", "Reason"])
    first = len(rows) + 1
    for level, conc in enumerate((0.1, 0.2, 0.5, 1.0, 1.5, 2.0), start=1):
        for _ in range(2):
            signal = 0.552 - 0.214 * conc + rng.normal(0, 0.002)
            rows.append([None, f"Std {level}", conc, round(float(signal), 4), "yes", ""])
    rows[first - 1][0] = "Fluoride"
    last = len(rows)
    hidden = [first + 3]
    return rows, [f"A{first}:A{last}"], hidden


KX214_LEVELS = (1.0, 2.0, 5.0, 20.0, 100.0, 250.0, 800.0, 1000.0)
KX214_QCS = (("QC-LLOQ", 1.0), ("QC-L", 3.0), ("QC-M", 400.0), ("QC-H", 750.0))


def kestrel_rows(rng: np.random.Generator, *, type_column: bool,
                 date: str) -> list[list[object]]:
    """KX-214 in plasma, LC-MS/MS with an isotope-labelled internal standard (ratio response).

    Eight levels in duplicate (one excluded with its reason), a double blank,
    a zero sample, QCs at four levels in triplicate and unknowns, one with an
    internal-standard response far below the rest.
    """
    rows: list[list[object]] = [
        ["Kestrel Bioanalytical (fictional)"],
        ["Compound: KX-214"],
        ["Internal standard: KX-214-d5"],
        ["Method: KB-0417 KX-214 in human plasma by LC-MS/MS"],
        ["Instrument: LCMS-4"],
        [f"Acquisition date: {date}"],
        ["Analyst: T. Vance"],
        [],
    ]
    heading = ["Sample Name"] + (["Sample Type"] if type_column else []) + [
        "Nominal Conc. (ng/mL)", "Analyte Peak Area (counts)", "IS Peak Area (counts)",
        "Injection Order", "Include", "Comment"]
    rows.append(heading)
    order = 0

    def add(name: str, kind: str, conc: object, area: object, is_area: object,
            include: str = "yes", comment: str = "") -> None:
        nonlocal order
        order += 1
        rows.append([name] + ([kind] if type_column else []) + [conc, area, is_area, order,
                                                                 include, comment])

    def istd() -> float:
        return round(float(rng.normal(152000, 6000)), 0)

    def area(conc: float, is_area: float) -> float:
        ratio = 0.00118 * conc * (1 + rng.normal(0, 0.03)) + 0.00002
        return round(ratio * is_area, 0)

    add("Double blank", "Blank", "", "ND", "")
    zero_is = istd()
    add("Zero", "Zero", 0, round(0.00002 * zero_is, 0), zero_is)
    for level, conc in enumerate(KX214_LEVELS, start=1):
        for rep in (1, 2):
            is_area = istd()
            if level == 3 and rep == 2:
                add(f"Cal {level}", "Standard", conc, area(conc, is_area) * 1.6, is_area,
                    include="no", comment="carry-over from the preceding injection")
            else:
                add(f"Cal {level}", "Standard", conc, area(conc, is_area), is_area)
    for name, conc in KX214_QCS:
        for _ in range(3):
            is_area = istd()
            add(name, "QC", conc, area(conc, is_area), is_area)
    for number, conc in enumerate((12.0, 85.0, 430.0, 0.4, 61.0), start=1):
        is_area = istd() * (0.3 if number == 5 else 1.0)
        response: object = area(conc, is_area) if conc >= 1 else "<LLOQ"
        add(f"Subject {100 + number}", "Unknown", "", response, round(is_area, 0))
    return rows


def screen_names() -> list[str]:
    """Forty invented analyte codes of the multi-residue screen."""
    return [f"MRS-{n:03d}" for n in range(101, 141)]


def screen_rows(rng: np.random.Generator) -> list[list[object]]:
    """Wide screen: one column per analyte (its name only), shared levels and internal standard.

    Most analytes are straight lines; six bend at the top (detector saturation:
    a quadratic fits), three are noisy enough to fail acceptance.
    """
    names = screen_names()
    bending = set(names[5:11])
    noisy = set(names[-3:])
    rows: list[list[object]] = [
        ["Multi-residue screen (fictional)"],
        ["Method: MRS-40 screen in surface water, LC-MS/MS"],
        ["Instrument: LCMS-2"],
        ["Run date: 2026-12-10"],
        ["Operator: K. Ilves"],
        [],
        ["Level", "Replicate", "Conc (µg/L)", "IS area", *names],
    ]
    slopes = rng.uniform(800, 5000, size=len(names))
    for level, conc in enumerate((0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0), start=1):
        for replicate in (1, 2):
            is_area = float(rng.normal(98000, 2500))
            row: list[object] = [f"L{level}", replicate, conc, round(is_area, 0)]
            for name, slope in zip(names, slopes, strict=True):
                ratio_per_unit = slope / 98000
                curvature = -0.045 * conc if name in bending else 0.0
                noise = 0.18 if name in noisy else 0.02
                ratio = ratio_per_unit * conc * (1 + curvature) * (1 + rng.normal(0, noise))
                row.append(round(ratio * is_area, 1))
            rows.append(row)
    return rows


def write_all(folder: Path = HERE) -> list[Path]:
    """Write every example into ``folder``; returns the paths written."""
    rng = np.random.default_rng(SEED)
    written = [
        write_xlsx(folder / "fernbrook_anions_wide_2026-12-01.xlsx",
                   {"Anions": anions_wide(rng)}, merges={"Anions": ["A1:K1"]}),
    ]
    rows, merges = cations_grouped(rng)
    written.append(write_xlsx(folder / "fernbrook_cations_grouped_2026-12-02.xlsx",
                              {"Cations": rows}, merges={"Cations": merges}))
    written.append(write_text(folder / "fernbrook_metals_stacked_2026-12-03.csv",
                              metals_stacked(rng), delimiter=",", encoding="utf-8"))
    written.append(write_ods(folder / "fernbrook_anions_by_sheet_2026-12-04.ods",
                             anions_by_sheet(rng)))
    written.append(write_text(folder / "fernbrook_nitrat_2026-12-05.txt", nitrat_german(rng),
                              delimiter=";", encoding="cp1252"))
    written.append(write_text(folder / "fernbrook_phosphate_2026-12-06.tsv",
                              phosphate_french(rng), delimiter="\t", encoding="utf-16"))
    rows, merges, hidden = fluoride_macro(rng)
    written.append(write_xlsx(folder / "fernbrook_fluoride_macro_2026-12-07.xlsm",
                              {"ISE run": rows}, merges={"ISE run": merges},
                              hidden_rows={"ISE run": hidden}, macros=True))
    written.append(write_xlsx(folder / "kestrel_kx214_plasma_2026-12-08.xlsx",
                              {"Batch 1208": kestrel_rows(rng, type_column=False,
                                                          date="2026-12-08")}))
    written.append(write_xls(folder / "kestrel_kx214_plasma_2026-12-09.xls",
                             {"Batch1209": kestrel_rows(rng, type_column=True,
                                                        date="2026-12-09")}))
    written.append(write_xlsx(folder / "multiresidue_screen_40_2026-12-10.xlsx",
                              {"Screen": screen_rows(rng)}))
    return written


if __name__ == "__main__":
    for path in write_all():
        print(f"wrote {path.name}")
