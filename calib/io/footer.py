"""Note lines written straight under a table's last row, with no blank row between.

Reports often end a long table with a line of their own (``Printed 2026-12-01 by
A. Analyst``, ``End of report``) in the row right under the data.  Such a line is
taken as a note that ends the table when all of these hold:

- it is the last table of the sheet, and the line comes after its last data
  row with nothing below it but other such lines and blank rows;
- the line holds text in one cell and nothing else: every measurement cell of
  its row is empty;
- that cell is not in a column the table fills with its own settings (include,
  exclusion reason, replicate, injection order): a lone ``yes`` there is a
  standard whose values are missing;
- in a name column (sample, level, analyte, sample type) the text does not look
  like the names above it once digits, spaces and punctuation are set aside
  (``Cal-7`` under ``Cal-1`` … ``Cal-6`` is a standard without its values).

Anything else stays in the table, where an empty response is refused as before,
and so is a note line with data rows after it.  The line is kept in the run's
metadata notes, and the table's ``warnings`` name its cell, since calib decided it.
"""

from __future__ import annotations

import re
from collections.abc import Container, Mapping, Sequence

from calib.io.cells import Cell, is_blank, is_empty_row
from calib.io.columns import Column
from calib.io.table import Grid

__all__ = ["end_before_notes"]

#: Columns of a table whose values name a row; a note line may stand in them.
_NAME_COLUMNS = ("sample_id", "level", "analyte", "sample_type")

_NOT_A_NAME = re.compile(r"[\d\s.,;:_\-+/()#]+")


def _shape(text: str) -> str:
    """A name with digits, spaces and punctuation set aside: ``Cal-7`` → ``cal``."""
    return _NOT_A_NAME.sub("", text.casefold())


def _lone_text(row: Sequence[Cell]) -> tuple[int, str] | None:
    """Column and text of the one filled cell of ``row``, when that cell holds text."""
    if is_empty_row(row):
        return None
    found = None
    for index, cell in enumerate(row):
        if is_blank(cell):
            continue
        if found is not None or not isinstance(cell, str):
            return None
        found = (index, cell.strip())
    return found


def _note_lines(rows: Sequence[Sequence[Cell]], start: int, end: int, *,
                     measures: Container[int], shared: Mapping[str, Column]) -> list[int]:
    """The note lines at the end of the body ``rows[start:end]``, top to bottom.

    Parameters
    ----------
    rows : sequence of rows
        The grid's rows.
    start, end : int
        The body as found so far (blank rows after it already left out).
    measures : container of int
        Columns of concentrations and responses.
    shared : mapping of str to Column
        The table's columns by canonical name.

    Returns
    -------
    list of int
        0-based rows; the body ends at the first (blank rows between them included).

    Examples
    --------
    >>> from calib.io.columns import Column
    >>> rows = [["Cal-1", 1.0, 2.0], ["Cal-2", 2.0, 4.1], ["End of report"], []]
    >>> shared = {"sample_id": Column("sample_id", "Sample", 0, None, None)}
    >>> _note_lines(rows, 0, 3, measures={1, 2}, shared=shared)
    [2]
    >>> _note_lines(rows[:2] + [["Cal-3"]], 0, 3, measures={1, 2}, shared=shared)
    []
    """
    role = {c.index: name for name, c in shared.items()}

    def blank(index: int) -> bool:
        return is_empty_row(rows[index]) or all(map(is_blank, rows[index]))

    found: list[tuple[int, int, str]] = []
    cut = end
    while cut > start:
        if blank(cut - 1):
            cut -= 1
            continue
        lone = _lone_text(rows[cut - 1])
        if lone is None or lone[0] in measures or role.get(lone[0], "") not in (
                "", *_NAME_COLUMNS):
            break
        found.append((cut - 1, *lone))
        cut -= 1
    while cut > start and blank(cut - 1):
        cut -= 1
    for _, column, text in found:
        if column not in role:
            continue
        names = {_shape(str(row[column])) for row in rows[start:cut]
                 if column < len(row) and not is_blank(row[column])}
        if _shape(text) in names:
            return []  # a row of the table whose values are missing: refused where read
    return sorted(index for index, _, _ in found)


def end_before_notes(grid: Grid, start: int, end: int, *, measures: Container[int],
                     shared: Mapping[str, Column]) -> tuple[int, tuple[str, ...]]:
    """Where the last table's body ends once note lines under it are left out, and a
    warning naming each such line's cell.

    Examples
    --------
    >>> from calib.io.columns import Column
    >>> rows = [["Sample", "Conc", "Area"], ["Cal-1", 1.0, 2.0], ["Cal-2", 2.0, 4.1],
    ...         ["Printed 2026-12-01 by A. Analyst"]]
    >>> shared = {"sample_id": Column("sample_id", "Sample", 0, None, None)}
    >>> end, warnings = end_before_notes(Grid(rows, file="r.csv", label="r.csv"), 1, 4,
    ...                                  measures={1, 2}, shared=shared)
    >>> end, warnings[0][:44]
    (3, "r.csv!A4: 'Printed 2026-12-01 by A. Analyst'")
    """
    lines = _note_lines(grid.rows, start, end, measures=measures, shared=shared)
    warnings = []
    for index in lines:
        column, text = _lone_text(grid.rows[index])  # type: ignore[misc]
        warnings.append(f"{grid.reference(column, index)}: {text!r}, alone in its row right "
                        f"under the table with no concentration or response, was read as a note "
                        f"that ends the table, not as a standard")
    return (lines[0] if lines else end), tuple(warnings)
