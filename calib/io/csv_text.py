"""Reading a run from a delimited text file (``.csv``).

The delimiter (comma, semicolon or tab) is guessed with :class:`csv.Sniffer`
and confirmed by the header: the delimiter kept is the first one under which
a row names both a concentration and a response column.  Title lines above
the table often fool a guess made from the text alone; the header does not.
A semicolon-separated file is taken to write decimal commas, as the
programs that write such files do.

Text must be UTF-8, with or without a byte-order mark; other encodings are
refused with a message saying so.
"""

from __future__ import annotations

import csv
import io
import itertools
import os
from pathlib import Path

from calib.errors import InputError
from calib.io.cells import Cell
from calib.io.files import RawFile, load_file
from calib.io.table import HEADER_SEARCH_ROWS, Grid, build_run, find_header
from calib.run import Run, SourceInfo

__all__ = ["DELIMITERS", "CsvReader", "decode_text"]

DELIMITERS = (",", ";", "\t")
"""Delimiters tried, in this order after the sniffed one."""

_WHAT = "a CSV text file (UTF-8)"
_SNIFF_CHARS = 64 * 1024


def decode_text(raw: RawFile) -> str:
    """Decode a text file's bytes as UTF-8, dropping a byte-order mark.

    Raises
    ------
    InputError
        When the bytes are UTF-16, hold NUL bytes or are not valid UTF-8
        (naming the line).

    Examples
    --------
    >>> from pathlib import Path
    >>> decode_text(RawFile(Path("run.csv"), b"\\xef\\xbb\\xbfConc,Area\\n", ""))
    'Conc,Area\\n'
    """
    data = raw.data
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputError(
            f"the file is UTF-16 text; expected {_WHAT}: save it as UTF-8 (CSV UTF-8)",
            file=raw.given,
        )
    nul = data.find(b"\x00")
    if nul >= 0:
        raise InputError(
            f"found a NUL byte, which text does not hold (the file is UTF-16 without a "
            f"byte-order mark, or not text at all); expected {_WHAT}",
            file=raw.given,
            row=data.count(b"\n", 0, nul) + 1,
        )
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise InputError(
            f"found the byte 0x{data[exc.start]:02X}, which is not UTF-8 text; expected "
            f"{_WHAT}: save it as UTF-8 (CSV UTF-8)",
            file=raw.given,
            row=line,
        ) from None


def _rows(text: str, delimiter: str, *, raw: RawFile, limit: int | None) -> list[list[Cell]]:
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        return list(itertools.islice(reader, limit))  # type: ignore[arg-type]
    except csv.Error as exc:
        raise InputError(
            f"cannot be split into cells ({exc}); expected {_WHAT}",
            file=raw.given,
            row=reader.line_num or None,
        ) from None


def _candidates(text: str) -> list[str]:
    try:
        sniffed = csv.Sniffer().sniff(text[:_SNIFF_CHARS], delimiters="".join(DELIMITERS))
        first = [sniffed.delimiter]
    except csv.Error:
        first = []
    return list(dict.fromkeys([*first, *DELIMITERS]))


class CsvReader:
    """Reader for delimited text files (``.csv``)."""

    suffixes: tuple[str, ...] = (".csv",)

    def read(
        self,
        path: str | os.PathLike[str],
        *,
        sheet: str | int | None = None,
        analyte: str | None = None,
    ) -> Run:
        """Read the run in a CSV file.

        Parameters
        ----------
        path : str or path-like
            The file.
        sheet : None
            Text files have no sheets; anything but None is refused.
        analyte : str, optional
            Analyte name for a table without an analyte column.

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
        text = decode_text(raw)
        source = SourceInfo(file=raw.name, sha256=raw.sha256, sheet=None, layout="long")
        candidates = _candidates(text)
        for delimiter in candidates:
            head = _rows(text, delimiter, raw=raw, limit=HEADER_SEARCH_ROWS)
            header = find_header(self._grid(head, raw, delimiter))
            if header is not None:
                grid = self._grid(_rows(text, delimiter, raw=raw, limit=None), raw, delimiter)
                return build_run(grid, source=source, analyte=analyte, header=header)
        # No delimiter gives a header: let the table builder say what it found.
        head = _rows(text, candidates[0], raw=raw, limit=HEADER_SEARCH_ROWS)
        return build_run(self._grid(head, raw, candidates[0]), source=source, analyte=analyte)

    @staticmethod
    def _grid(rows: list[list[Cell]], raw: RawFile, delimiter: str) -> Grid:
        return Grid(rows, file=raw.given, label=raw.name, decimal_comma=delimiter == ";")
