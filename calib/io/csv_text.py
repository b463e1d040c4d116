"""Reading a run from a delimited text file (``.csv``, ``.tsv``, ``.txt``).

Encoding: a byte-order mark decides (UTF-8, UTF-16 little- or big-endian);
UTF-16 without a mark is recognised by its zero bytes; otherwise the text
is UTF-8 if it decodes as UTF-8 and Windows-1252 (the Western European
Windows code page office programs save "CSV" in) if not.  An import map may
name the encoding.

Delimiter: comma, semicolon, tab or vertical bar, guessed with
:class:`csv.Sniffer` and confirmed by the header: the delimiter kept is the
first under which a row makes a header row.  Title lines above the table
often fool a guess made from the text alone; the header does not.  ``.tsv``
files try the tab first.

Decimal mark: settled by the file's own unambiguous numbers (``0,5``,
``12.75``); if none settles it, a semicolon-separated file is taken to write
decimal commas, as the programs that write such files do.  An import map
may name it.
"""

from __future__ import annotations

import csv
import io
import itertools
import os
from pathlib import Path

from calib.errors import InputError
from calib.io.assemble import assemble
from calib.io.cells import Cell
from calib.io.files import RawFile, load_file
from calib.io.importmap import ImportMap
from calib.io.layout import find_first_header
from calib.io.limits import check_text_rows, check_text_width
from calib.io.table import HEADER_SEARCH_ROWS, Grid
from calib.run import Run, SourceInfo

__all__ = ["DELIMITERS", "CsvReader", "decode_text", "delimiters_for", "split_rows"]

DELIMITERS = (",", ";", "\t", "|")
"""Delimiters tried, in this order after the sniffed one."""

_WHAT = "a delimited text file (CSV)"
_SNIFF_CHARS = 64 * 1024
_BOMS = ((b"\xef\xbb\xbf", "utf-8-sig"), (b"\xff\xfe", "utf-16"), (b"\xfe\xff", "utf-16"))
_NAMES = {"utf-8-sig": "UTF-8 with BOM", "utf-16": "UTF-16", "utf-16-le": "UTF-16LE",
          "utf-16-be": "UTF-16BE", "utf-8": "UTF-8", "cp1252": "Windows-1252"}


def _utf16_without_bom(data: bytes) -> str | None:
    """``"utf-16-le"`` or ``"utf-16-be"`` when every other byte of a text sample is zero."""
    sample = data[:4096]
    if len(sample) < 4 or len(sample) % 2:
        sample = sample[: len(sample) - len(sample) % 2]
    if len(sample) < 4:
        return None
    even, odd = sample[0::2], sample[1::2]
    if odd.count(0) >= 0.9 * len(odd) and even.count(0) < 0.1 * len(even):
        return "utf-16-le"
    if even.count(0) >= 0.9 * len(even) and odd.count(0) < 0.1 * len(odd):
        return "utf-16-be"
    return None


def _undecodable(raw: RawFile, exc: UnicodeDecodeError, encoding: str) -> InputError:
    line = raw.data.count(b"\n", 0, exc.start) + 1
    return InputError(
        f"found the byte 0x{raw.data[exc.start]:02X}, which is not {_NAMES.get(encoding, encoding)} "
        f"text; expected {_WHAT} in UTF-8, UTF-16 or Windows-1252 (or an import map naming the "
        f"encoding)",
        file=raw.given,
        row=line,
    )


def decode_text(raw: RawFile, *, encoding: str | None = None) -> tuple[str, str]:
    """Decode a text file's bytes; returns the text and the encoding used.

    Raises
    ------
    InputError
        When the bytes hold NUL bytes that are not UTF-16, or cannot be
        decoded (naming the line).

    Examples
    --------
    >>> from pathlib import Path
    >>> decode_text(RawFile(Path("run.csv"), b"\\xef\\xbb\\xbfConc,Area\\n", ""))
    ('Conc,Area\\n', 'utf-8-sig')
    >>> decode_text(RawFile(Path("run.csv"), "Fläche".encode("cp1252"), ""))
    ('Fläche', 'cp1252')
    >>> decode_text(RawFile(Path("run.csv"), "\\ufeffConc".encode("utf-16-le"), ""))
    ('Conc', 'utf-16')
    """
    data = raw.data
    if encoding is not None:
        try:
            return data.decode(encoding), encoding
        except UnicodeDecodeError as exc:
            raise _undecodable(raw, exc, encoding) from None
    for bom, name in _BOMS:
        if data.startswith(bom):
            try:
                text = data.decode(name)
            except UnicodeDecodeError as exc:
                raise _undecodable(raw, exc, name) from None
            return text.removeprefix("\ufeff"), name
    nul = data.find(b"\x00")
    if nul >= 0:
        wide = _utf16_without_bom(data)
        if wide is None:
            raise InputError(
                f"found a NUL byte, which text does not hold (the file is not text); "
                f"expected {_WHAT}",
                file=raw.given,
                row=data.count(b"\n", 0, nul) + 1,
            )
        try:
            return data.decode(wide), wide
        except UnicodeDecodeError as exc:
            raise _undecodable(raw, exc, wide) from None
    try:
        return data.decode("utf-8"), "utf-8"
    except UnicodeDecodeError:
        pass
    try:
        return data.decode("cp1252"), "cp1252"
    except UnicodeDecodeError as exc:
        raise _undecodable(raw, exc, "cp1252") from None


def split_rows(text: str, delimiter: str, *, raw: RawFile, limit: int | None
               ) -> list[list[Cell]]:
    """The first ``limit`` rows of the text (all when None) split at ``delimiter``."""
    check_text_width(text, delimiter, file=raw.given)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        return list(itertools.islice(reader, limit))  # type: ignore[arg-type]
    except csv.Error as exc:
        raise InputError(
            f"cannot be split into cells ({exc}); expected {_WHAT}",
            file=raw.given,
            row=reader.line_num or None,
        ) from None


def _candidates(text: str, *, first: str | None) -> list[str]:
    try:
        sniffed = [csv.Sniffer().sniff(text[:_SNIFF_CHARS], delimiters="".join(DELIMITERS))
                   .delimiter]
    except csv.Error:
        sniffed = []
    return list(dict.fromkeys([*([first] if first else []), *sniffed, *DELIMITERS]))


def delimiters_for(raw: RawFile, text: str, *, given: str | None = None) -> list[str]:
    """The delimiters to try, in order: ``given`` (an import map's) alone, else the sniffed
    one (a ``.tsv`` file's tab before it), then :data:`DELIMITERS`.

    The caller keeps the first under which a row makes a header row.
    """
    if given:
        return [given]
    return _candidates(text, first="\t" if raw.path.suffix.lower() == ".tsv" else None)


class CsvReader:
    """Reader for delimited text files (``.csv``, ``.tsv``, ``.txt``)."""

    suffixes: tuple[str, ...] = (".csv", ".tsv", ".txt")

    def read(
        self,
        path: str | os.PathLike[str],
        *,
        sheet: str | int | None = None,
        analyte: str | None = None,
        map: ImportMap | None = None,
    ) -> Run:
        """Read the run in a delimited text file.

        Parameters
        ----------
        path : str or path-like
            The file.
        sheet : None
            Text files have no sheets; anything but None is refused.
        analyte : str, optional
            Analyte name for a table without an analyte column.
        map : ImportMap, optional
            How this kind of export is laid out (encoding, delimiter,
            decimal mark, columns...).

        Returns
        -------
        Run

        Raises
        ------
        InputError
            When the file cannot be read or used (the message says why).
        """
        raw = load_file(Path(path), what=_WHAT)
        if sheet is not None:
            raise InputError(
                f"a text file has no sheets; got sheet {sheet!r} (leave the sheet out)",
                file=raw.given,
            )
        imap = map
        text, encoding = decode_text(raw, encoding=imap.encoding if imap else None)
        check_text_rows(text.count("\n"), file=raw.given)
        candidates = delimiters_for(raw, text, given=imap.delimiter if imap else None)
        decimal = imap.decimal if imap is not None else None
        for delimiter in candidates:
            head = split_rows(text, delimiter, raw=raw, limit=HEADER_SEARCH_ROWS)
            if find_first_header(self._grid(head, raw, delimiter, decimal), imap=imap) is None:
                continue
            grid = self._grid(split_rows(text, delimiter, raw=raw, limit=None), raw, delimiter,
                              decimal)
            source = SourceInfo(file=raw.name, sha256=raw.sha256, encoding=encoding,
                                delimiter=delimiter, decimal_mark=decimal)
            return assemble([grid], source=source, analyte=analyte, imap=imap)
        # No delimiter gives a header: let the table builder say what it found.
        delimiter = candidates[0]
        grid = self._grid(split_rows(text, delimiter, raw=raw, limit=HEADER_SEARCH_ROWS), raw,
                          delimiter, decimal)
        source = SourceInfo(file=raw.name, sha256=raw.sha256, encoding=encoding,
                            delimiter=delimiter)
        return assemble([grid], source=source, analyte=analyte, imap=imap)

    @staticmethod
    def _grid(rows: list[list[Cell]], raw: RawFile, delimiter: str,
              decimal: str | None) -> Grid:
        return Grid(rows, file=raw.given, label=raw.name,
                    decimal=decimal,  # type: ignore[arg-type]
                    decimal_hint="," if delimiter == ";" else None)
