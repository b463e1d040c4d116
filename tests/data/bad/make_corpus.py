"""Generate the bad-input corpus: run files that are broken, hostile or degenerate.

Every file is named for what is wrong with it.  Run from anywhere::

    python tests/data/bad/make_corpus.py            # writes the small files beside this script
    python tests/data/bad/make_corpus.py OUT_DIR    # writes them (and the large ones) elsewhere

Files that would be larger than about 200 kB on disk (the zip bomb, the sheet with two
million empty rows, the text file with two million empty lines, the header of a million
cells) are listed in
:data:`LARGE` and built at test time by :func:`write_large`; the small ones are committed.
Nothing here is random: the same script writes the same bytes (zip timestamps are fixed,
and XML written by openpyxl is put in canonical form, whether or not lxml is installed).
"""

from __future__ import annotations

import io
import sys
import zipfile
from collections.abc import Callable
from xml.etree.ElementTree import canonicalize
from pathlib import Path

HERE = Path(__file__).resolve().parent
STAMP = (2026, 11, 30, 9, 0, 0)
HEADER = "Analyte,Sample,Concentration (mg/L),Response,Replicate"
LEVELS = (0.5, 1.0, 2.0, 5.0, 10.0)


def _csv(rows: list[str], *, header: str = HEADER, eol: str = "\n") -> bytes:
    return eol.join([header, *rows, ""]).encode("utf-8")


def _curve(analyte: str = "Nitrate-N", levels=LEVELS, *, reps: int = 2,
           response: Callable[[float, int], str] | None = None) -> list[str]:
    """Rows of an ordinary curve; ``response`` replaces the response text."""
    rows = []
    for i, conc in enumerate(levels):
        for rep in range(1, reps + 1):
            value = response(conc, rep) if response else f"{0.2 * conc + 0.002 * rep:.5f}"
            rows.append(f"{analyte},Cal-{i + 1},{conc},{value},{rep}")
    return rows


def _zip(members: dict[str, bytes], *, method: int = zipfile.ZIP_DEFLATED) -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", method) as zf:
        for name, data in members.items():
            info = zipfile.ZipInfo(name, STAMP)
            info.compress_type = method
            zf.writestr(info, data)
    return buf.getvalue()


_CONTENT_TYPES = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>'
    b'<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
    b'<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
    b'<Default Extension="xml" ContentType="application/xml"/>'
    b'<Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-'
    b'officedocument.spreadsheetml.sheet.main+xml"/>'
    b'<Override PartName="/xl/worksheets/sheet1.xml" ContentType="application/vnd.openxmlformats-'
    b'officedocument.spreadsheetml.worksheet+xml"/></Types>'
)
_ROOT_RELS = (
    b'<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/'
    b'package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/'
    b'officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/></Relationships>'
)
_WORKBOOK = (
    b'<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="http://schemas.openxmlformats.org/'
    b'spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/'
    b'relationships"><sheets><sheet name="Run" sheetId="1" r:id="rId1"/></sheets></workbook>'
)
_WORKBOOK_RELS = (
    b'<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/'
    b'package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/'
    b'officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.xml"/></Relationships>'
)
_SHEET_OPEN = (b'<?xml version="1.0" encoding="UTF-8"?><worksheet xmlns="http://schemas.'
               b'openxmlformats.org/spreadsheetml/2006/main">')


def _hand_xlsx(sheet_xml: bytes, *, extra: dict[str, bytes] | None = None) -> bytes:
    """A minimal workbook written by hand, so the sheet XML can be anything."""
    return _zip({"[Content_Types].xml": _CONTENT_TYPES, "_rels/.rels": _ROOT_RELS,
                 "xl/workbook.xml": _WORKBOOK, "xl/_rels/workbook.xml.rels": _WORKBOOK_RELS,
                 "xl/worksheets/sheet1.xml": sheet_xml, **(extra or {})})


def _inline_rows(rows: list[list[object]]) -> bytes:
    """Sheet rows as XML, strings inline, numbers as values."""
    out = []
    for r, row in enumerate(rows, start=1):
        cells = []
        for c, value in enumerate(row):
            ref = f"{chr(65 + c)}{r}"
            if isinstance(value, str):
                cells.append(f'<c r="{ref}" t="inlineStr"><is><t>{value}</t></is></c>')
            else:
                cells.append(f'<c r="{ref}"><v>{value}</v></c>')
        out.append(f'<row r="{r}">{"".join(cells)}</row>')
    return "".join(out).encode()


def _openpyxl(rows: list[list[object]], *, edit: Callable | None = None) -> bytes:
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = "Run"
    for row in rows:
        ws.append(row)
    if edit:
        edit(ws)
    buf = io.BytesIO()
    wb.save(buf)
    return _restamp(buf.getvalue())


def _restamp(data: bytes) -> bytes:
    """Rewrite a zip with fixed timestamps, metadata and XML spelling so the bytes are reproducible.

    openpyxl spells the same XML differently with and without lxml installed (``<a/>`` or
    ``<a />``, where namespaces are declared), so every XML member is rewritten in its
    canonical form (W3C Canonical XML 2.0, :func:`xml.etree.ElementTree.canonicalize`).
    """
    src = zipfile.ZipFile(io.BytesIO(data))
    members = {}
    for info in src.infolist():
        body = src.read(info)
        if info.filename == "docProps/core.xml":
            body = b""
        elif info.filename.endswith((".xml", ".rels")):
            body = canonicalize(body.decode("utf-8")).encode("utf-8")
        members[info.filename] = body
    members = {k: v for k, v in members.items() if v}
    return _zip(members)


def _table(levels=LEVELS, analyte: str = "Nitrate-N") -> list[list[object]]:
    rows: list[list[object]] = [["Analyte", "Sample", "Concentration (mg/L)", "Response",
                                 "Replicate"]]
    for i, conc in enumerate(levels):
        for rep in (1, 2):
            rows.append([analyte, f"Cal-{i + 1}", conc, round(0.2 * conc + 0.002 * rep, 5), rep])
    return rows


def _good_xlsx() -> bytes:
    return _openpyxl(_table())


def _compound_file(names: tuple[str, ...]) -> bytes:
    """A small, well-formed compound (OLE) file with empty streams of the given names."""
    import struct

    header = bytearray(512)
    header[:8] = bytes.fromhex("D0CF11E0A1B11AE1")
    struct.pack_into("<HHHHH", header, 0x18, 0x3E, 3, 0xFFFE, 9, 6)
    struct.pack_into("<IIII", header, 44, 1, 1, 0, 4096)  # 1 FAT sector; directory in sector 1
    struct.pack_into("<IIII", header, 60, 0xFFFFFFFE, 0, 0xFFFFFFFE, 0)
    struct.pack_into("<109I", header, 76, 0, *([0xFFFFFFFF] * 108))
    fat = struct.pack("<128I", 0xFFFFFFFD, 0xFFFFFFFE, *([0xFFFFFFFF] * 126))
    entries = []
    for i, name in enumerate(("Root Entry", *names)):
        entry = bytearray(128)
        encoded = name.encode("utf-16-le") + b"\0\0"
        entry[: len(encoded)] = encoded
        struct.pack_into("<HBB", entry, 64, len(encoded), 5 if i == 0 else 2, 1)
        # left, right, child: the root's child is entry 1; the rest hang to the right
        child = 1 if i == 0 else 0xFFFFFFFF
        right = i + 1 if 0 < i < len(names) else 0xFFFFFFFF
        struct.pack_into("<III", entry, 68, 0xFFFFFFFF, right, child)
        struct.pack_into("<IQ", entry, 116, 0xFFFFFFFE, 0)
        entries.append(bytes(entry))
    directory = b"".join(entries).ljust(512, b"\0")
    return bytes(header) + fat + directory


def _ole_encrypted() -> bytes:
    """A compound file holding an encrypted package: how Office saves a password-protected .xlsx."""
    return _compound_file(("EncryptionInfo", "EncryptedPackage"))


def _ole_damaged() -> bytes:
    """A compound file header whose sector allocation table points nowhere."""
    header = bytearray(_compound_file(("Workbook",))[:512])
    header[44:48] = b"\0\0\0\0"
    return bytes(header) + b"\0" * 512


def _ole_circular() -> bytes:
    """A compound file whose directory chain points back at itself."""
    import struct

    data = bytearray(_compound_file(("Workbook",)))
    struct.pack_into("<I", data, 512 + 4, 1)  # FAT entry of sector 1 (the directory) -> 1
    return bytes(data)


def _entity_bomb() -> bytes:
    entities = ['<!ENTITY a0 "calibcalibcalibcalib">']
    entities += [f'<!ENTITY a{i} "{("&a" + str(i - 1) + ";") * 10}">' for i in range(1, 10)]
    sheet = (b'<?xml version="1.0" encoding="UTF-8"?><!DOCTYPE worksheet ['
             + "".join(entities).encode() + b']>' + _SHEET_OPEN[38:]
             + b'<sheetData><row r="1"><c r="A1" t="inlineStr"><is><t>&a9;</t></is></c></row>'
             b'</sheetData></worksheet>')
    return _hand_xlsx(sheet)


def _merged_header() -> bytes:
    rows = _table()
    rows[0] = ["Standards", None, None, "Response", "Replicate"]
    rows.insert(1, ["Analyte", "Sample", "Concentration (mg/L)", None, None])

    def merge(ws) -> None:
        ws.merge_cells("A1:C1")
        ws.merge_cells("D1:D2")
        ws.merge_cells("E1:E2")

    return _openpyxl(rows, edit=merge)


def _formulas() -> bytes:
    rows = _table()
    for r, row in enumerate(rows[1:], start=2):
        row[3] = f"=C{r}*0.2"
    return _openpyxl(rows)


def _dates() -> bytes:
    import datetime

    rows = _table()
    for r, row in enumerate(rows[1:]):
        row[3] = datetime.datetime(2026, 11, 1 + r, 9, 0)
    return _openpyxl(rows)


def _text_numbers_xlsx() -> bytes:
    rows = _table()
    for row in rows[1:]:
        row[2] = "high"
        row[3] = "n/a"
    return _openpyxl(rows)


def _errors_xlsx() -> bytes:
    rows = _table()
    sheet = _SHEET_OPEN + b"<sheetData>" + _inline_rows(rows[:1])
    body = []
    for r, row in enumerate(rows[1:], start=2):
        body.append(f'<row r="{r}"><c r="A{r}" t="inlineStr"><is><t>{row[0]}</t></is></c>'
                    f'<c r="B{r}" t="inlineStr"><is><t>{row[1]}</t></is></c>'
                    f'<c r="C{r}"><v>{row[2]}</v></c><c r="D{r}" t="e"><v>#DIV/0!</v></c>'
                    f'<c r="E{r}"><v>{row[4]}</v></c></row>')
    sheet += "".join(body).encode() + b"</sheetData></worksheet>"
    return _hand_xlsx(sheet)


def _stray_cell() -> bytes:
    rows = _table()
    sheet = (_SHEET_OPEN + b"<sheetData>" + _inline_rows(rows)
             + b'<row r="1048576"><c r="XFD1048576"><v>1</v></c></row></sheetData></worksheet>')
    return _hand_xlsx(sheet)


def _stray_cell_written(tail: bytes, *, prefix: bytes = b"") -> bytes:
    """The ordinary table plus one stray cell spelled ``tail`` (elements under ``prefix``)."""
    rows = _inline_rows(_table())
    if prefix:
        for tag in (b"row", b"c ", b"c>", b"v>", b"is>", b"t>"):
            rows = rows.replace(b"<" + tag, b"<" + prefix + tag)
            rows = rows.replace(b"</" + tag, b"</" + prefix + tag)
        opening = (b'<?xml version="1.0" encoding="UTF-8"?><x:worksheet xmlns:x="http://schemas.'
                   b'openxmlformats.org/spreadsheetml/2006/main"><x:sheetData>')
        return _hand_xlsx(opening + rows + tail + b"</x:sheetData></x:worksheet>")
    return _hand_xlsx(_SHEET_OPEN + b"<sheetData>" + rows + tail + b"</sheetData></worksheet>")


def _utf16_sheet() -> bytes:
    sheet = (_SHEET_OPEN.replace(b"UTF-8", b"UTF-16") + b"<sheetData>" + _inline_rows(_table())
             + b"</sheetData></worksheet>")
    return _hand_xlsx(b"\xff\xfe" + sheet.decode().encode("utf-16-le"))


def _missing_shared_string() -> bytes:
    rows = _table()
    sheet = (_SHEET_OPEN + b"<sheetData>" + _inline_rows(rows)[:-6]
             + b'<c r="F11" t="s"><v>99999</v></c></row></sheetData></worksheet>')
    return _hand_xlsx(sheet)


def _truncated_xlsx() -> bytes:
    data = _good_xlsx()
    return data[: len(data) // 2]


def _corrupted_member() -> bytes:
    data = bytearray(_good_xlsx())
    start = data.find(b"xl/worksheets/sheet1.xml") + 40
    for i in range(start, start + 64):
        data[i] ^= 0x5A
    return bytes(data)


def _zip_without_workbook() -> bytes:
    return _zip({"notes.txt": b"This archive holds no workbook.\n"})


def _sheet_xml_not_xml() -> bytes:
    return _hand_xlsx(b"this is not XML at all <<<")


def _ods_truncated() -> bytes:
    data = (HERE.parents[2] / "sample_runs" / "fernbrook_anions_by_sheet_2026-12-04.ods").read_bytes()
    return data[: len(data) // 2]


def _xls_truncated() -> bytes:
    xls = HERE.parents[2] / "sample_runs" / "kestrel_kx214_plasma_2026-12-09.xls"
    return xls.read_bytes()[:4096]


_ODS_NS = (b'xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
           b'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
           b'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" office:version="1.2"')


def _ods_cell(value: object) -> str:
    if isinstance(value, str):
        return (f'<table:table-cell office:value-type="string"><text:p>{value}</text:p>'
                f'</table:table-cell>')
    return (f'<table:table-cell office:value-type="float" office:value="{value}">'
            f'<text:p>{value}</text:p></table:table-cell>')


def _hand_ods(body: bytes) -> bytes:
    """A minimal OpenDocument spreadsheet written by hand, so content.xml can be anything."""
    content = (b'<?xml version="1.0" encoding="UTF-8"?><office:document-content ' + _ODS_NS
               + b'><office:body><office:spreadsheet>' + body)
    manifest = (b'<?xml version="1.0" encoding="UTF-8"?><manifest:manifest xmlns:manifest="urn:'
                b'oasis:names:tc:opendocument:xmlns:manifest:1.0" manifest:version="1.2">'
                b'<manifest:file-entry manifest:full-path="/" manifest:media-type="application/'
                b'vnd.oasis.opendocument.spreadsheet"/><manifest:file-entry manifest:full-path='
                b'"content.xml" manifest:media-type="text/xml"/></manifest:manifest>')
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        stored = zipfile.ZipInfo("mimetype", STAMP)  # first and uncompressed, as the format asks
        zf.writestr(stored, b"application/vnd.oasis.opendocument.spreadsheet")
        for name, data in (("content.xml", content), ("META-INF/manifest.xml", manifest)):
            info = zipfile.ZipInfo(name, STAMP)
            info.compress_type = zipfile.ZIP_DEFLATED
            zf.writestr(info, data)
    return buf.getvalue()


def _ods_rows(rows: list[list[object]]) -> bytes:
    return "".join("<table:table-row>" + "".join(_ods_cell(v) for v in row) + "</table:table-row>"
                   for row in rows).encode()


def _ods_unterminated() -> bytes:
    """A sheet whose table is never closed (``</table:table>`` missing); the document ends."""
    return _hand_ods(b'<table:table table:name="Run">' + _ods_rows(_table() * 4)
                     + b"</office:spreadsheet></office:body></office:document-content>")


def _ods_repeated() -> bytes:
    """One number repeated over 100,000 columns of 1,000,000 rows: 10^11 cells in 1 kB."""
    return _hand_ods(b'<table:table table:name="Run">' + _ods_rows(_table())
                     + b'<table:table-row table:number-rows-repeated="1000000">'
                       b'<table:table-cell table:number-columns-repeated="100000" '
                       b'office:value-type="float" office:value="1"><text:p>1</text:p>'
                       b'</table:table-cell></table:table-row>'
                       b"</table:table></office:spreadsheet></office:body>"
                       b"</office:document-content>")


def _ods_good() -> bytes:
    return _hand_ods(b'<table:table table:name="Run">' + _ods_rows(_table())
                     + b"</table:table></office:spreadsheet></office:body>"
                       b"</office:document-content>")


def _xls_panicking() -> bytes:
    """The sample .xls cut at 6,656 bytes: the reader panics on it (found by cutting at 512s)."""
    xls = HERE.parents[2] / "sample_runs" / "kestrel_kx214_plasma_2026-12-09.xls"
    return xls.read_bytes()[:6656]


def _bom_in_middle() -> bytes:
    rows = _curve()
    rows[4] = "\ufeff" + rows[4]
    rows[6] = rows[6].replace(",1.0", ",\ufeff2.0", 1).replace(",2.0,", ",2.0\ufeff,", 1)
    return _csv(rows)


def _nested_bomb_header() -> bytes:
    return b"\x1f\x8b\x08\x00" + b"\0" * 60


SMALL: dict[str, Callable[[], bytes]] = {
    "empty_file.csv": lambda: b"",
    "empty_file.xlsx": lambda: b"",
    "empty_file.ods": lambda: b"",
    "only_whitespace.csv": lambda: b"  \n\t\n\n   \n",
    "wrong_extension_workbook_named_csv.csv": _good_xlsx,
    "wrong_extension_text_named_xlsx.xlsx": lambda: _csv(_curve()),
    "wrong_extension_text_named_xls.xls": lambda: _csv(_curve()),
    "unsupported_extension.docx": lambda: _csv(_curve()),
    "html_page_saved_as_xls.xls": lambda: b"<html><body><table><tr><td>Nitrate-N</td></tr>"
                                         b"</table></body></html>",
    "gzip_data_named_csv.csv": _nested_bomb_header,
    "truncated_workbook.xlsx": _truncated_xlsx,
    "corrupted_sheet_member.xlsx": _corrupted_member,
    "zip_without_a_workbook.xlsx": _zip_without_workbook,
    "sheet_xml_is_not_xml.xlsx": _sheet_xml_not_xml,
    "shared_string_index_out_of_range.xlsx": _missing_shared_string,
    "password_protected_workbook.xlsx": _ole_encrypted,
    "truncated_ods.ods": _ods_truncated,
    "damaged_compound_file_header.xls": _ole_damaged,
    "compound_file_directory_in_a_circle.xls": _ole_circular,
    "password_protected_workbook_named_xls.xls": _ole_encrypted,
    "truncated_xls.xls": _xls_truncated,
    "truncated_xls_where_the_reader_panics.xls": _xls_panicking,
    "stray_cell_attributes_in_another_order.xlsx": lambda: _stray_cell_written(
        b'<row spans="1:1" r="1048576"><c t="n" r="XFD1048576"><v>1</v></c></row>'),
    "stray_cell_with_namespace_prefix.xlsx": lambda: _stray_cell_written(
        b'<x:row spans="1:1" r="1048576"><x:c t="n" r="XFD1048576"><x:v>1</x:v></x:c></x:row>',
        prefix=b"x:"),
    "stray_cell_in_single_quotes_with_spaces.xlsx": lambda: _stray_cell_written(
        b"<row r = '1048576' ><c t='n'\n r\t=\t'XFD1048576'><v>1</v></c></row>"),
    "stray_cell_written_with_a_character_reference.xlsx": lambda: _stray_cell_written(
        b'<row r="&#49;048576"><c t="n" r="&#88;FD&#49;048576"><v>1</v></c></row>'),
    "stray_cell_after_a_quoted_closing_bracket.xlsx": lambda: _stray_cell_written(
        b'<row r="12"><c t="n" s=">" r="XFD1048576"><v>1</v></c></row>'),
    "sheet_xml_in_utf16.xlsx": _utf16_sheet,
    "ods_table_never_closed.ods": _ods_unterminated,
    "ods_one_cell_repeated_over_a_billion_cells.ods": _ods_repeated,
    "xml_entity_expansion_bomb.xlsx": _entity_bomb,
    "stray_cell_in_last_row_and_column.xlsx": _stray_cell,
    "headers_only.csv": lambda: _csv([]),
    "headers_only.xlsx": lambda: _openpyxl(_table()[:1]),
    "every_value_text.csv": lambda: _csv([f"Nitrate-N,Cal-{i},high,big,one" for i in range(8)]),
    "every_value_text.xlsx": _text_numbers_xlsx,
    "mixed_units_in_one_column.csv": lambda: _csv(
        [f"Nitrate-N,Cal-{i},{c} {u},{0.2 * i:.3f},1" for i, (c, u) in enumerate(
            [(0.5, "mg/L"), (1, "mg/L"), (2000, "µg/L"), (5, "mg/L"), (10000, "µg/L")], 1)],
        header="Analyte,Sample,Concentration,Response,Replicate"),
    "negative_concentrations.csv": lambda: _csv(_curve(levels=(-1.0, 0.5, 1.0, 2.0, 5.0))),
    "zero_concentrations_only.csv": lambda: _csv(_curve(levels=(0.0,), reps=6)),
    "duplicated_standards.csv": lambda: _csv(_curve() + _curve()),
    "one_level.csv": lambda: _csv(_curve(levels=(1.0,), reps=4)),
    "two_levels.csv": lambda: _csv(_curve(levels=(1.0, 2.0), reps=3)),
    "nan_responses.csv": lambda: _csv(_curve(response=lambda c, r: "NaN" if c == 2.0 else
                                             f"{0.2 * c:.4f}")),
    "infinite_responses.csv": lambda: _csv(_curve(response=lambda c, r: "inf" if c == 5.0 else
                                                  f"{0.2 * c:.4f}")),
    "infinite_concentration.csv": lambda: _csv(_curve(levels=(0.5, 1.0, 2.0, 5.0, float("inf")))),
    "huge_exponent_response.csv": lambda: _csv(_curve(response=lambda c, r: "1e999" if c == 1.0
                                                      else f"{0.2 * c:.4f}")),
    "response_of_1e308_overflows_the_fit.csv": lambda: _csv(_curve(
        response=lambda c, r: "1e308" if c == 1.0 else f"{0.2 * c:.4f}")),
    "concentration_of_1e-300.csv": lambda: _csv(_curve(levels=(1e-300, 0.5, 1.0, 2.0, 5.0))),
    "response_column_of_dates.xlsx": _dates,
    "merged_header_cells.xlsx": _merged_header,
    "formula_cells_without_cached_values.xlsx": _formulas,
    "error_values_in_responses.xlsx": _errors_xlsx,
    "analyte_name_300_characters.csv": lambda: _csv(_curve(analyte="N" * 300)),
    "control_characters_in_analyte_name.csv": lambda: _csv(_curve(analyte="Nitr\x07ate\x1b[2J-N")),
    "right_to_left_mark_in_analyte_name.csv": lambda: _csv(_curve(analyte="Nitrate\u202e-N\u200f")),
    "nul_bytes_in_text.csv": lambda: _csv(_curve()).replace(b"Cal-3", b"Ca\0-3"),
    "binary_garbage.csv": lambda: bytes((i * 73 + 41) % 256 for i in range(4096)),
    "invalid_utf8.csv": lambda: _csv(_curve()).replace(b"Cal-2", b"Cal\xff\xfe-2"),
    "windows_line_endings.csv": lambda: _csv(_curve(), eol="\r\n"),
    "bom_in_the_middle.csv": _bom_in_middle,
    "no_concentration_column.csv": lambda: _csv([f"Nitrate-N,Cal-{i},{0.2 * i:.3f},1"
                                                 for i in range(1, 6)],
                                                header="Analyte,Sample,Response,Replicate"),
    "no_response_column.csv": lambda: _csv([f"Nitrate-N,Cal-{i},{i},1" for i in range(1, 6)],
                                           header="Analyte,Sample,Concentration (mg/L),Replicate"),
    "all_responses_equal.csv": lambda: _csv(_curve(response=lambda c, r: "0.25000")),
    "exact_fit_no_residual.csv": lambda: _csv(_curve(response=lambda c, r: f"{0.25 * c:.4f}")),
    "single_replicate_everywhere.csv": lambda: _csv(_curve(reps=1)),
    "one_cell_of_150_kb.csv": lambda: b"Analyte," + b"x" * 150_000 + b"\n",
    "ten_thousand_columns.csv": lambda: (",".join(f"C{i}" for i in range(10_000)) + "\n"
                                         + ",".join("1" for _ in range(10_000)) + "\n").encode(),
}
"""Committed files: name → builder of the bytes."""


def _zip_bomb() -> bytes:
    """A workbook whose sheet inflates to 600 MB of one repeated row (about 600 kB on disk)."""
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED, compresslevel=9) as zf:
        for name, data in (("[Content_Types].xml", _CONTENT_TYPES), ("_rels/.rels", _ROOT_RELS),
                           ("xl/workbook.xml", _WORKBOOK),
                           ("xl/_rels/workbook.xml.rels", _WORKBOOK_RELS)):
            zf.writestr(zipfile.ZipInfo(name, STAMP), data)
        info = zipfile.ZipInfo("xl/worksheets/sheet1.xml", STAMP)
        info.compress_type = zipfile.ZIP_DEFLATED
        with zf.open(info, "w", force_zip64=True) as fh:
            fh.write(_SHEET_OPEN + b"<sheetData>")
            block = b" " * (1 << 20)
            for _ in range(600):
                fh.write(block)
            fh.write(b"</sheetData></worksheet>")
    return buf.getvalue()


def _empty_rows_xlsx() -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED, compresslevel=9) as zf:
        for name, data in (("[Content_Types].xml", _CONTENT_TYPES), ("_rels/.rels", _ROOT_RELS),
                           ("xl/workbook.xml", _WORKBOOK),
                           ("xl/_rels/workbook.xml.rels", _WORKBOOK_RELS)):
            zf.writestr(zipfile.ZipInfo(name, STAMP), data)
        info = zipfile.ZipInfo("xl/worksheets/sheet1.xml", STAMP)
        info.compress_type = zipfile.ZIP_DEFLATED
        with zf.open(info, "w", force_zip64=True) as fh:
            fh.write(_SHEET_OPEN + b"<sheetData>" + _inline_rows(_table()))
            fh.write(b"".join(b'<row r="%d"/>' % r for r in range(12, 2_000_012)))
            fh.write(b"</sheetData></worksheet>")
    return buf.getvalue()


def _million_columns_csv() -> bytes:
    """A header of a million cells (about 7 MB): refused before it is split."""
    return (",".join(f"C{i}" for i in range(1_000_000)) + "\n1,2\n").encode()


def _empty_lines_csv() -> bytes:
    return _csv(_curve()) + b",,,,\n" * 2_000_000


LARGE: dict[str, Callable[[], bytes]] = {
    "zip_bomb_600_mb_sheet.xlsx": _zip_bomb,
    "two_million_empty_rows.xlsx": _empty_rows_xlsx,
    "two_million_empty_lines.csv": _empty_lines_csv,
    "one_million_columns.csv": _million_columns_csv,
}
"""Files built at test time (too large to commit): name → builder."""


def write_small(folder: Path) -> list[Path]:
    """Write every committed corpus file into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    return [_write(folder / name, build) for name, build in SMALL.items()]


def write_large(folder: Path) -> list[Path]:
    """Write the corpus files too large to commit into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    return [_write(folder / name, build) for name, build in LARGE.items()]


def _write(path: Path, build: Callable[[], bytes]) -> Path:
    path.write_bytes(build())
    return path


if __name__ == "__main__":
    target = Path(sys.argv[1]) if len(sys.argv) > 1 else HERE
    for written in write_small(target) + (write_large(target) if len(sys.argv) > 1 else []):
        print(f"{written.stat().st_size:>10,}  {written.name}")
