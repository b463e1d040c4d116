"""The child process that parses one untrusted workbook with python-calamine.

:mod:`calib.io.sandbox` runs it in one of two ways: where it can, it forks
itself and calls :func:`serve` in the copy (no interpreter to start: the
copy has python-calamine loaded already); elsewhere it runs this file as a
script, which reads the workbook's bytes from standard input.  Either way
the child sets its own memory and processor-time limits, parses every sheet
and writes what it found as a stream of pickles of plain values (lists,
strings, numbers, dates; see :func:`_stream_book`): the parent reads the
first rows while the child is still making the last ones.  The module imports nothing from calib, so the script
starts in a few hundredths of a second.

A workbook that makes the parser spin, ask for more memory than allowed or
panic ends this process only; the parent turns that into a one-line message.
Whatever the parser prints (a Rust panic message) goes to standard error,
which the parent reads but never shows.

Script arguments: ``MEMORY_BYTES CPU_SECONDS MAX_ROWS MAX_CELLS [SHEET]`` (``SHEET``:
``#`` and a 0-based index, or ``=`` and a name; only that sheet is parsed).
"""

import gc
import io
import pickle
import sys
from itertools import islice


def limit(memory: int, seconds: int) -> None:
    """Cap this process's address space at ``memory`` bytes and its processor time."""
    try:
        import resource
    except ImportError:  # not on this platform: the parent's wall-clock limit still holds
        return
    for kind, wanted in ((resource.RLIMIT_AS, memory), (resource.RLIMIT_CPU, seconds)):
        soft, hard = resource.getrlimit(kind)
        value = wanted if hard == resource.RLIM_INFINITY else min(wanted, hard)
        resource.setrlimit(kind, (value, hard))


def _failure(exc: BaseException, calamine) -> tuple[str, str]:
    if isinstance(exc, calamine.PasswordError):
        return ("password", "")
    if isinstance(exc, MemoryError):
        return ("memory", "")
    if not isinstance(exc, Exception):  # a Rust panic arrives as a BaseException
        return ("panic", "")
    return ("error", str(exc).strip() or type(exc).__name__)


_ROWS_PER_MESSAGE = 4096
"""Rows sent in one message: the parent reads one while the next is being made."""


def _rows(sheet):
    """Every row from A1 (row 0 is spreadsheet row 1, so that source cells are right)."""
    start = sheet.start
    if start is not None and tuple(start) == (0, 0):
        return sheet.iter_rows()  # made one at a time: sent while the rest are being made
    return iter(sheet.to_python(skip_empty_area=False))  # padded up to A1


def _send_sheet(book, name: str, max_rows: int, max_cells: int, send) -> None:
    sheet = book.get_sheet_by_name(name)
    end = sheet.end
    end = tuple(end) if end is not None else None
    if end is not None and (end[0] + 1 > max_rows or (end[0] + 1) * (end[1] + 1) > max_cells):
        send("sheet", name, end, [], False)  # the parent refuses it from "end" without the cells
        return
    merges = [tuple(map(tuple, pair)) for pair in (sheet.merged_cell_ranges or [])]
    send("sheet", name, end, merges, True)
    rows = _rows(sheet)
    while chunk := list(islice(rows, _ROWS_PER_MESSAGE)):
        send("rows", chunk)


def _wanted(names: list, sheet) -> set | None:
    """The sheets whose cells are sent: all (None), or the one ``sheet`` names: a 0-based
    index, a name, or a name written in another case (the parent says which, or why none)."""
    if sheet is None:
        return None
    if isinstance(sheet, int):
        return {names[sheet]} if 0 <= sheet < len(names) else set()
    if sheet in names:
        return {sheet}
    return {name for name in names if name.casefold() == sheet.strip().casefold()}


def _stream_book(data: bytes, max_rows: int, max_cells: int, out, sheet=None) -> None:
    """Parse the workbook in ``data`` and write what was found to the binary file ``out``.

    One pickle per message, each a tuple of plain values: ``("book", names,
    worksheets)``; per sheet ``("sheet", name, end, merges, has_rows)`` then
    ``("rows", [row, ...])`` messages; ``("failure", sheet or None, (kind,
    detail))`` where a sheet or the whole workbook could not be read (rows
    already sent for that sheet do not count); ``("done",)`` last.
    """
    import python_calamine as calamine

    pickler = pickle.Pickler(out, protocol=pickle.HIGHEST_PROTOCOL)
    # Without the memo the cells (a tree of plain lists, nothing shared) pickle 3 to 4
    # times faster, measured on a 60,000-row sheet.
    pickler.fast = True

    def send(*message) -> None:
        pickler.dump(message)
        out.flush()

    try:
        book = calamine.CalamineWorkbook.from_filelike(io.BytesIO(data))
        names = list(book.sheet_names)
        worksheets = [
            meta.name for meta in book.sheets_metadata
            if meta.visible == calamine.SheetVisibleEnum.Visible
            and meta.typ == calamine.SheetTypeEnum.WorkSheet
        ]
    except BaseException as exc:  # noqa: BLE001 - reported to the parent
        send("failure", None, _failure(exc, calamine))
        send("done")
        return
    send("book", names, worksheets)
    wanted = _wanted(names, sheet)
    for name in names:
        if wanted is not None and name not in wanted:
            send("sheet", name, None, [], False)  # not asked for: not even parsed
            continue
        try:
            _send_sheet(book, name, max_rows, max_cells, send)
        except BaseException as exc:  # noqa: BLE001 - reported to the parent, per sheet
            send("failure", name, _failure(exc, calamine))
    send("done")


def serve(data: bytes, memory: int, seconds: int, max_rows: int, max_cells: int, out,
          sheet=None) -> None:
    """Limit this process, parse ``data`` (every sheet, or the one ``sheet`` names) and send
    what was found to ``out``."""
    # The cells are a tree of new objects freed all at once when the process ends: the
    # cycle collector would only scan them again and again (a tenth of the time).
    gc.disable()
    limit(memory, seconds)
    _stream_book(data, max_rows, max_cells, out, sheet)


def _sheet_argument(text: str):
    """The sheet a script argument names: ``#3`` the 0-based index 3, ``=Run 2`` the name."""
    return int(text[1:]) if text.startswith("#") else text[1:]


def main(argv: list[str]) -> int:
    memory, seconds, max_rows, max_cells = map(int, argv[:4])
    sheet = _sheet_argument(argv[4]) if len(argv) > 4 else None
    limit(memory, seconds)
    gc.disable()
    data = sys.stdin.buffer.read()
    _stream_book(data, max_rows, max_cells, sys.stdout.buffer, sheet)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
