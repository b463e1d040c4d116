"""Limits that keep an untrusted spreadsheet from exhausting the machine.

An ``.xlsx``, ``.xlsm`` or ``.ods`` file is a zip archive of XML.  A small
file can expand to gigabytes (a "zip bomb"), declare millions of rows, or
name one stray cell at the last row and column, for which a reader would
build a grid of billions of cells.  Before a workbook is parsed,
:func:`inspect_archive` decompresses every member as a stream, counting bytes
against :data:`MAX_UNZIPPED_BYTES` (the sizes an archive declares can lie),
and reads how far each sheet reaches from its XML attributes
(:mod:`calib.io.sheetscan`: the ``r`` positions of ``.xlsx`` rows and cells
in any attribute order, quoting or namespace prefix, the repeat counts of
``.ods`` rows and cells) against :data:`MAX_ROWS` and :data:`MAX_CELLS`.
The same pass notes whether any sheet hides rows, merges cells, holds error
values or carries macros, so that the slower cell-detail reader runs only for
workbooks that need it.  Sheets are held to the same limits once parsed, text
files to :data:`MAX_ROWS` lines of at most :data:`_MAX_COLUMNS` cells, and
values to :data:`LARGEST_VALUE` in magnitude.

The parser itself (python-calamine, which expands no entities) runs in a
child process with a time and a memory limit (:mod:`calib.io.sandbox`);
openpyxl parses through :mod:`defusedxml` (installed with calib), and the
``.ods`` scan refuses any document type declaration.  Formulas are never
evaluated and macros never run: calib reads the values the spreadsheet
program saved.
"""

from __future__ import annotations

import io
import struct
import zipfile
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from calib.errors import InputError
from calib.io.files import RawFile
from calib.io.sheetscan import XLSX_COLUMNS, Extent, OdsScanner, XlsxScanner
from calib.run import PointColumns, point_values

__all__ = ["LARGEST_VALUE", "MAX_CELLS", "MAX_ROWS", "MAX_UNZIPPED_BYTES", "ArchiveFacts",
           "check_magnitudes", "check_sheet_size", "check_text_rows", "check_text_width",
           "check_xls", "inspect_archive"]

MAX_UNZIPPED_BYTES = 500_000_000
"""Largest decompressed size of a workbook archive (500 MB)."""

MAX_ROWS = 2_000_000
"""Most rows read from one sheet or text file (2 million)."""

MAX_CELLS = 40_000_000
"""Most cells (rows × columns of the used range) read from one sheet."""

_MAX_COLUMNS = 16_384
"""Most cells in one line of a text file (as many columns as an .xlsx sheet holds)."""

LARGEST_VALUE = 1e30
"""Largest magnitude of a concentration or response; non-zero values must exceed its inverse.

Weighted least squares squares responses and multiplies them by weights such as
1/x², so a value of 1e308 (or 1e-300 as a weight's base) overflows floating point.
No measurement in a laboratory comes within many decades of these bounds.
"""

_CHUNK = 1 << 20
_OVERLAP = 64
# What marks each feature, in an .xlsx sheet part and in an .ods content.xml: a first search,
# then the marks themselves where it finds something (each part is searched for its own
# format's marks only: every search is a pass over the part).
_FEATURES = {
    "hidden": ((b'hidden="', (b'hidden="1"', b'hidden="true"')),
               (b'table:visibility="', (b'table:visibility="collapse"',
                                        b'table:visibility="filter"'))),
    "errors": ((b't="e"', (b't="e"',)),
               (b'calcext:value-type="error"', (b'calcext:value-type="error"',))),
    "merged": ((b"<mergeCell ", (b"<mergeCell ",)),
               (b"-spanned=", (b"number-rows-spanned=", b"number-columns-spanned="))),
}
_UNICODE_MARKS = (b"\xff\xfe", b"\xfe\xff", b"\x00<", b"<\x00")


@dataclass(frozen=True)
class ArchiveFacts:
    """What one pass over a workbook archive found.

    Attributes
    ----------
    unzipped_bytes : int
        Total decompressed size.
    rows : int
        Row elements in the largest sheet.
    hidden, errors, merged : bool
        Whether any sheet hides rows or columns, holds error values, or merges cells.
    macros : bool
        Whether the archive carries a macro project (never run).
    """

    unzipped_bytes: int
    rows: int
    hidden: bool = False
    errors: bool = False
    merged: bool = False
    macros: bool = False


def _is_sheet(name: str) -> bool:
    return name.startswith("xl/worksheets/") or name == "content.xml"


def inspect_archive(raw: RawFile, *, what: str) -> ArchiveFacts | None:
    """Check a workbook archive against the limits; None for files that are not zip archives.

    Raises
    ------
    InputError
        When the archive expands past :data:`MAX_UNZIPPED_BYTES`, a sheet has
        more than :data:`MAX_ROWS` rows, or the archive is damaged.
    """
    if not raw.data.startswith(b"PK"):
        return None
    try:
        archive = zipfile.ZipFile(io.BytesIO(raw.data))
    except (zipfile.BadZipFile, NotImplementedError, ValueError, OSError, EOFError) as exc:
        raise InputError(f"cannot be read as a workbook (damaged zip archive: {exc}); "
                         f"expected {what} saved by a spreadsheet program",
                         file=raw.given) from None
    total = 0
    most_rows = 0
    found = dict.fromkeys(_FEATURES, False)
    macros = False
    with archive:
        for info in archive.infolist():
            macros = macros or "vbaproject" in info.filename.casefold()
            sheet = _is_sheet(info.filename)
            rows = 0
            scanner = _scanner(info.filename) if sheet else None
            ods = isinstance(scanner, OdsScanner)
            tail = b""
            try:
                with archive.open(info) as member:
                    while chunk := member.read(_CHUNK):
                        if scanner is not None and not tail and chunk.startswith(_UNICODE_MARKS):
                            raise InputError(
                                f"cannot be read as a workbook (the sheet {info.filename} is "
                                f"not stored as UTF-8 XML); expected {what} saved by a "
                                f"spreadsheet program", file=raw.given)
                        total += len(chunk)
                        if total > MAX_UNZIPPED_BYTES:
                            raise _too_big(raw, what)
                        if scanner is None:
                            continue
                        window = tail + chunk
                        for feature, marks in _FEATURES.items():
                            first, needles = marks[ods]
                            if not found[feature] and first in window and any(
                                    n in window for n in needles):
                                found[feature] = True
                        scanner.feed(chunk)
                        tail = chunk[-_OVERLAP:]
                    extent = scanner.close() if scanner is not None else Extent()
            except InputError:
                raise
            except ValueError as exc:  # the .ods scanner: XML not well formed, or a DTD
                raise InputError(
                    f"cannot be read as a workbook ({info.filename}: {exc}; the file is damaged "
                    f"or was not written by a spreadsheet program); expected {what} saved by a "
                    f"spreadsheet program",
                    file=raw.given,
                ) from None
            except Exception as exc:  # noqa: BLE001 - zlib.error, BadZipFile, unsupported methods
                raise InputError(
                    f"cannot be read as a workbook (damaged member {info.filename}: {exc}); "
                    f"expected {what} saved by a spreadsheet program",
                    file=raw.given,
                ) from None
            rows = max(rows, extent.rows)
            if rows > MAX_ROWS:
                raise InputError(
                    f"a sheet of the workbook has {rows:,} rows; calib reads at most "
                    f"{MAX_ROWS:,} rows per sheet (split the export)",
                    file=raw.given,
                )
            if isinstance(scanner, XlsxScanner) and extent.columns > XLSX_COLUMNS:
                raise InputError(
                    f"the sheet {info.filename} names column {extent.columns:,} (cell "
                    f"{extent.corner}), past the {XLSX_COLUMNS:,} columns an .xlsx sheet can "
                    f"hold; expected {what} saved by a spreadsheet program",
                    file=raw.given,
                )
            if rows * max(extent.columns, 1) > MAX_CELLS:
                raise _too_many_cells(raw, Extent(rows, max(extent.columns, 1)))
            most_rows = max(most_rows, rows)
    return ArchiveFacts(total, most_rows, macros=macros, **found)


def _scanner(name: str) -> XlsxScanner | OdsScanner:
    return OdsScanner() if name == "content.xml" else XlsxScanner(rows=MAX_ROWS, cells=MAX_CELLS)


def _too_many_cells(raw: RawFile, extent: Extent) -> InputError:
    rows, columns = extent.rows, extent.columns
    return InputError(
        f"a sheet of the workbook reaches row {rows:,} and column {columns:,} (cell "
        f"{extent.corner}); calib reads at "
        f"most {MAX_CELLS:,} cells per sheet (delete stray cells far from the table, or split "
        f"the export)",
        file=raw.given,
    )


def _too_big(raw: RawFile, what: str) -> InputError:
    return InputError(
        f"the workbook expands to more than {MAX_UNZIPPED_BYTES:,} bytes when unzipped; "
        f"calib refuses larger archives (a damaged or malicious file?); expected {what} "
        f"of ordinary size",
        file=raw.given,
    )


def check_sheet_size(rows: int, columns: int, *, file: str, sheet: str) -> None:
    """Refuse a parsed sheet with more than :data:`MAX_ROWS` rows or :data:`MAX_CELLS` cells.

    Examples
    --------
    >>> check_sheet_size(2_500_000, 3, file="big.xlsx", sheet="Run")
    Traceback (most recent call last):
    ...
    calib.errors.InputError: big.xlsx, sheet Run: the sheet has 2,500,000 rows; calib reads at \
most 2,000,000 rows per sheet (split the export)
    """
    if rows > MAX_ROWS:
        raise InputError(
            f"the sheet has {rows:,} rows; calib reads at most {MAX_ROWS:,} rows per sheet "
            f"(split the export)",
            file=file, sheet=sheet,
        )
    if rows * columns > MAX_CELLS:
        raise InputError(
            f"the sheet's used range is {rows:,} rows by {columns:,} columns; calib reads at "
            f"most {MAX_CELLS:,} cells per sheet (delete stray cells far from the table, or "
            f"split the export)",
            file=file, sheet=sheet,
        )


def check_text_rows(lines: int, *, file: str) -> None:
    """Refuse a text file with more than :data:`MAX_ROWS` lines."""
    if lines > MAX_ROWS:
        raise InputError(
            f"the file has {lines:,} lines; calib reads at most {MAX_ROWS:,} rows (split the "
            f"export)",
            file=file,
        )


def check_text_width(text: str, delimiter: str, *, file: str) -> None:
    """Refuse a text file with a line of more than :data:`_MAX_COLUMNS` cells, before splitting it.

    Counting delimiters costs little; splitting a line of a million cells would
    build a million strings.  Delimiters inside quotes are counted too, so the
    check may refuse early, never late.

    Examples
    --------
    >>> check_text_width("a,b" + chr(10) + "," * 20_000, ",", file="wide.csv")
    Traceback (most recent call last):
    ...
    calib.errors.InputError: wide.csv, row 2: the line holds 20,001 cells separated by ','; \
calib reads at most 16,384 columns (a damaged file, or not a table?)
    """
    if text.count(delimiter) < _MAX_COLUMNS:
        return
    for number, line in enumerate(text.split("\n"), start=1):
        if len(line) >= _MAX_COLUMNS and (cells := line.count(delimiter) + 1) > _MAX_COLUMNS:
            raise InputError(
                f"the line holds {cells:,} cells separated by {delimiter!r}; calib reads at "
                f"most {_MAX_COLUMNS:,} columns (a damaged file, or not a table?)",
                file=file, row=number,
            )


_VALUES = (("concentration", "concentration"), ("response", "response"),
           ("is_response", "internal-standard response"),
           ("analyte_response", "analyte response"))


def check_magnitudes(points: object, *, file: str) -> None:
    """Refuse a concentration or response that is infinite or outside the range the fit can use.

    Parameters
    ----------
    points : iterable of Point
        The points read.
    file : str
        The file, for messages.

    Raises
    ------
    InputError
        Naming the value and its cell, when a value is infinite, larger than
        :data:`LARGEST_VALUE` or non-zero and smaller than its inverse.
    """
    low = 1.0 / LARGEST_VALUE
    if not isinstance(points, (list, tuple, PointColumns)):
        points = list(points)  # type: ignore[call-overload]
    if _all_in_range(points, low):
        return  # the usual run: one pass per value over arrays, no point looked at alone
    for point in points:
        for name, words in _VALUES:
            value = getattr(point, name, None)
            if value is None or value != value:
                continue  # no value (NaN marks a missing one, judged elsewhere)
            size = abs(value)
            if size <= LARGEST_VALUE and (size >= low or size == 0.0):
                continue
            where = f"in the row of {point.source_cell}" if name != "response" else (
                f"in {point.source_cell}")
            raise InputError(
                f"found the {words} {value:g} {where}; expected a finite value of magnitude "
                f"between {low:g} and {LARGEST_VALUE:g} (or zero): larger or smaller values "
                f"overflow the fit (check the cell, or change the unit)",
                file=file,
            )


# --- Excel 97-2003 (.xls): a compound file holding a BIFF8 record stream ---------------------

_CELL_RECORDS = frozenset({0x0006, 0x00BD, 0x00BE, 0x00D6, 0x00FD, 0x0201, 0x0203, 0x0204,
                           0x0205, 0x027E})
_END, _FREE = 0xFFFFFFFE, 0xFFFFFFFF
_COMPOUND = bytes.fromhex("D0CF11E0A1B11AE1")


def _chain(fat: list[int], start: int, limit: int) -> list[int]:
    sectors, seen = [], set()
    while start < len(fat) and start not in seen and len(sectors) < limit:
        seen.add(start)
        sectors.append(start)
        start = fat[start]
    return sectors


def _xls_stream(data: bytes) -> bytes | None:
    """The Workbook stream of a compound file, or None when the container cannot be followed."""
    if len(data) < 512 or not data.startswith(bytes.fromhex("D0CF11E0A1B11AE1")):
        return None
    size = 1 << struct.unpack_from("<H", data, 30)[0]
    mini_size = 1 << struct.unpack_from("<H", data, 32)[0]
    n_fat, first_dir = struct.unpack_from("<II", data, 44)
    cutoff, first_mini, n_mini, first_difat, n_difat = struct.unpack_from("<IIIII", data, 56)
    if size not in (512, 4096):
        return None
    n_sectors = (len(data) - 512) // size + 1

    def sector(number: int) -> bytes:
        start = (number + 1) * size
        return data[start : start + size]

    fat_sectors = [n for n in struct.unpack_from("<109I", data, 76) if n != _FREE]
    difat = first_difat
    for _ in range(min(n_difat, n_sectors)):
        if difat >= n_sectors:
            break
        entries = struct.unpack(f"<{size // 4}I", sector(difat))
        fat_sectors += [n for n in entries[:-1] if n != _FREE]
        difat = entries[-1]
    fat: list[int] = []
    for number in fat_sectors[: max(n_fat, 1)]:
        chunk = sector(number)
        fat += struct.unpack(f"<{len(chunk) // 4}I", chunk)

    def read(start: int, length: int) -> bytes:
        return b"".join(sector(n) for n in _chain(fat, start, n_sectors))[:length]

    directory = read(first_dir, n_sectors * size)
    entries = [directory[i : i + 128] for i in range(0, len(directory) - 127, 128)]
    if not entries:
        return None
    root_start, root_size = struct.unpack_from("<IQ", entries[0], 116)
    for entry in entries:
        length = struct.unpack_from("<H", entry, 64)[0]
        name = entry[: max(0, length - 2)].decode("utf-16-le", "replace")
        if entry[66] != 2 or name not in ("Workbook", "Book"):
            continue
        start, stream_size = struct.unpack_from("<IQ", entry, 116)
        stream_size &= 0xFFFFFFFF if size == 512 else stream_size
        if stream_size >= cutoff:
            return read(start, stream_size)
        mini_stream = read(root_start, root_size)
        mini_fat_bytes = read(first_mini, n_mini * size)
        mini_fat = list(struct.unpack(f"<{len(mini_fat_bytes) // 4}I", mini_fat_bytes))
        chunks = [mini_stream[n * mini_size : (n + 1) * mini_size]
                  for n in _chain(mini_fat, start, len(mini_fat))]
        return b"".join(chunks)[:stream_size]
    return None


def _damaged_xls(raw: RawFile, what: str) -> InputError:
    return InputError(
        f"{what} (the file is damaged); expected an .xls workbook saved by a spreadsheet program",
        file=raw.given,
    )


def _compound_problem(data: bytes) -> str | None:
    """What makes a compound file's sector tables unusable, or None when they can be followed.

    calamine loops forever on a compound file whose allocation table is missing or
    whose directory chain runs in a circle, so those are refused before it sees them.
    """
    if len(data) < 512:
        return "the compound file header is cut short"
    shift, mini_shift = struct.unpack_from("<HH", data, 30)
    if shift not in (9, 12) or mini_shift != 6:
        return "the compound file header gives an impossible sector size"
    size = 1 << shift
    n_sectors = (len(data) - 512) // size + 1
    n_fat, first_dir = struct.unpack_from("<II", data, 44)
    listed = [n for n in struct.unpack_from("<109I", data, 76) if n != _FREE]
    if n_fat == 0 or not listed or any(n >= n_sectors for n in listed[:n_fat]):
        return "the compound file's sector allocation table is missing or outside the file"
    fat: list[int] = []
    for number in listed[:n_fat]:
        chunk = data[(number + 1) * size : (number + 2) * size]
        fat += struct.unpack(f"<{len(chunk) // 4}I", chunk)
    sector, seen = first_dir, set()
    while sector != _END:
        if sector >= min(n_sectors, len(fat)) or sector in seen:
            return "the compound file's directory chain is broken or runs in a circle"
        seen.add(sector)
        sector = fat[sector]
    return None


def _compound_names(data: bytes) -> set[str]:
    """Names of the directory entries in the first directory sector of a compound file."""
    size = 1 << struct.unpack_from("<H", data, 30)[0]
    first_dir = struct.unpack_from("<I", data, 48)[0]
    directory = data[(first_dir + 1) * size : (first_dir + 2) * size]
    names = set()
    for i in range(0, len(directory) - 127, 128):
        length = min(struct.unpack_from("<H", directory, i + 64)[0], 64)
        names.add(directory[i : i + max(0, length - 2)].decode("utf-16-le", "replace"))
    return names


def _check_compound(raw: RawFile, *, what: str) -> None:
    """Refuse a compound (OLE) file the workbook reader cannot safely open.

    Office stores a password-protected ``.xlsx`` as a compound file holding an
    encrypted package; a damaged compound file would hang the reader.  Files that
    are not compound files are left alone.

    Raises
    ------
    InputError
        When the container is damaged or holds an encrypted workbook.
    """
    if not raw.data.startswith(_COMPOUND):
        return
    problem = _compound_problem(raw.data)
    if problem is not None:
        raise InputError(f"cannot be read as a workbook ({problem}; the file is damaged); "
                         f"expected {what} saved by a spreadsheet program", file=raw.given)
    if "EncryptedPackage" in _compound_names(raw.data):
        raise InputError(f"the workbook is password-protected (encrypted); expected {what} "
                         f"without a password (save an unprotected copy)", file=raw.given)


def check_xls(raw: RawFile, *, what: str = "an .xls workbook") -> None:
    """Refuse an ``.xls`` whose cell records reach past BIFF8's 65,536 rows and 256 columns.

    A damaged or crafted record naming column 20,000 would make the reader build
    a grid of billions of cells; a well-formed file never names such a cell.
    A compound file whose sector tables cannot be followed, or that holds an
    encrypted workbook, is refused first (:func:`_check_compound`).
    """
    _check_compound(raw, what=what)
    try:
        stream = _xls_stream(raw.data)
    except (struct.error, ValueError, IndexError):
        stream = None  # a container this walk cannot follow: the reader will say so
    if stream is None:
        return
    position, length = 0, len(stream)
    rows = columns = 0
    while position + 4 <= length:
        kind, size = struct.unpack_from("<HH", stream, position)
        body = position + 4
        if kind == 0x0200 and size == 14 and body + size <= length:
            # DIMENSIONS: the reader sizes its grid from it, so a reversed or oversized range
            # (first row after last row) would make it ask for terabytes.
            first_row, last_row, first_col, last_col = struct.unpack_from("<IIHH", stream, body)
            if not (first_row <= last_row <= 65536 and first_col <= last_col <= 256):
                raise _damaged_xls(raw, f"a sheet declares rows {first_row:,} to {last_row:,} "
                                        f"and columns {first_col:,} to {last_col:,}")
        if kind in _CELL_RECORDS and size >= 4 and body + size <= length:
            row, column = struct.unpack_from("<HH", stream, body)
            if kind in (0x00BD, 0x00BE) and size >= 6:  # MULRK, MULBLANK: last column at the end
                column = max(column, struct.unpack_from("<H", stream, body + size - 2)[0])
            rows, columns = max(rows, row + 1), max(columns, column + 1)
        position = body + size
    if columns > 256:
        raise _damaged_xls(raw, f"a cell record names column {columns:,}, past the 256 columns "
                                f"an .xls sheet can hold")
    if rows * columns > MAX_CELLS:
        raise _too_many_cells(raw, Extent(rows, columns))


def _all_in_range(points: Sequence[Any], low: float) -> bool:
    """True when every value of every point is missing, NaN, zero or of a usable magnitude.

    Each kind of value is tested over an array of all the points (runs reach 10^5 of them);
    False (look point by point) also when a value is not a plain number (an integer too large
    for a float, say).
    """
    for name, _ in _VALUES:
        try:
            values = point_values(points, name)
            if None in values:
                values = [value for value in values if value is not None]
            sizes = np.abs(np.array(values, dtype=float))
        except (AttributeError, OverflowError, TypeError, ValueError):
            return False
        sizes = sizes[~np.isnan(sizes)]  # NaN marks a missing value: leave it out
        if sizes.size and (sizes.max() > LARGEST_VALUE or (
                sizes.min() < low and sizes[sizes != 0].min(initial=low) < low)):
            return False
    return True
