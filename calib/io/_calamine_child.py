"""The child process that parses one untrusted workbook with python-calamine.

Run by :mod:`calib.io.sandbox` as a script (never imported by calib): it sets
its own memory and processor-time limits, reads the workbook's bytes from
standard input, parses every sheet and writes what it found to standard
output as one pickle of plain values (lists, strings, numbers, dates).  It
imports nothing from calib, so it starts in a few hundredths of a second.

A workbook that makes the parser spin, ask for more memory than allowed or
panic ends this process only; the parent turns that into a one-line message.
Whatever the parser prints (a Rust panic message) goes to standard error,
which the parent reads but never shows.

Arguments: ``MEMORY_BYTES CPU_SECONDS MAX_ROWS MAX_CELLS``.
"""

import io
import pickle
import sys


def _limit(memory: int, seconds: int) -> None:
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


def _sheet(book, name: str, max_rows: int, max_cells: int) -> dict:
    sheet = book.get_sheet_by_name(name)
    end = sheet.end
    found = {"end": tuple(end) if end is not None else None}
    if end is not None and (end[0] + 1 > max_rows or (end[0] + 1) * (end[1] + 1) > max_cells):
        return found  # the parent refuses it from "end" without the cells
    # skip_empty_area=False keeps row 0 = spreadsheet row 1, so source cells are right.
    found["rows"] = sheet.to_python(skip_empty_area=False)
    found["merges"] = [tuple(map(tuple, pair)) for pair in (sheet.merged_cell_ranges or [])]
    return found


def main(argv: list[str]) -> int:
    memory, seconds, max_rows, max_cells = map(int, argv)
    _limit(memory, seconds)
    data = sys.stdin.buffer.read()
    import python_calamine as calamine

    result: dict = {}
    try:
        book = calamine.CalamineWorkbook.from_filelike(io.BytesIO(data))
        result["names"] = list(book.sheet_names)
        result["worksheets"] = [
            meta.name for meta in book.sheets_metadata
            if meta.visible == calamine.SheetVisibleEnum.Visible
            and meta.typ == calamine.SheetTypeEnum.WorkSheet
        ]
        sheets = {}
        for name in result["names"]:
            try:
                sheets[name] = _sheet(book, name, max_rows, max_cells)
            except BaseException as exc:  # noqa: BLE001 - reported to the parent, per sheet
                sheets[name] = {"failure": _failure(exc, calamine)}
        result["sheets"] = sheets
    except BaseException as exc:  # noqa: BLE001 - reported to the parent
        result = {"failure": _failure(exc, calamine)}
    pickler = pickle.Pickler(sys.stdout.buffer, protocol=pickle.HIGHEST_PROTOCOL)
    # Without the memo the cells (a tree of plain lists, nothing shared) pickle 3 to 4
    # times faster, measured on a 60,000-row sheet.
    pickler.fast = True
    pickler.dump(result)
    sys.stdout.buffer.flush()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
