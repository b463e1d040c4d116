"""Rows a spreadsheet adds under its data: means, totals, standard deviations.

Analysts and data systems write summary rows below a table (``Mean``,
``Average``, ``SD``, ``%RSD``, ``Total``).  Read as data, a mean row is a
standard lying exactly on the line: it adds a level and a degree of freedom
and no residual check can see it.  So:

- a row labelled with a summary word (in any text column that is not a
  measurement, include or reason column) is set aside, with a note naming
  its cell;
- a row with a concentration but no sample name (or no level label) where
  at least :data:`NAMED_ROWS` other rows have one, and nothing else saying
  what it is, is refused: it may be an unlabelled total.
"""

from __future__ import annotations

from collections.abc import Sequence

from calib.io.cells import Cell, is_blank
from calib.io.columns import squash
from calib.io.layout import Table
from calib.io.table import Grid

__all__ = ["NAMED_ROWS", "SUMMARY_WORDS", "find_summary_rows"]

SUMMARY_WORDS: frozenset[str] = frozenset(squash(word) for word in (
    "mean", "average", "avg", "mittelwert", "moyenne", "media", "promedio",
    "sd", "s.d.", "stdev", "std dev", "standard deviation", "stabw", "standardabweichung",
    "écart type", "desviación estándar", "rsd", "%rsd", "rsd%", "rsd %", "% rsd", "cv", "%cv",
    "cv%", "total", "sum", "summe", "somme", "suma", "median", "min", "max", "minimum",
    "maximum", "count", "range",
))
"""Cell texts (compared after folding) that label a summary row, not an injection."""

NAMED_ROWS = 3
"""Fewest named rows from which an unnamed row with a concentration is suspect."""

_NOT_LABELS = ("include", "exclusion_reason", "sample_type")


def _label_columns(grid: Grid, table: Table) -> list[int]:
    header = table.header
    skip = set(header.measurement_indices())
    skip.update(c.index for n, c in header.shared.items() if n in _NOT_LABELS)
    width = len(grid.rows[header.row])
    return [i for i in range(width) if i not in skip and i not in grid.hidden_columns]


def _cell(row: Sequence[Cell], index: int) -> Cell:
    return row[index] if index < len(row) else None


def find_summary_rows(grid: Grid, table: Table) -> dict[int, str]:
    """The summary rows of a table: ``{row: note}`` (0-based rows), each to be set aside.

    Raises
    ------
    InputError
        For a row with a concentration but no sample name or level label where
        other rows have one (and no sample type saying what it is).

    Examples
    --------
    >>> from calib.io.layout import find_tables
    >>> rows = [["Sample", "Conc", "Area"], ["S1", 1, 10.0], ["S2", 2, 20.0],
    ...         ["S3", 4, 40.0], ["Mean", 2.333, 23.33]]
    >>> grid = Grid(rows, file="n.csv", label="n.csv")
    >>> find_summary_rows(grid, find_tables(grid)[0])
    {4: "n.csv!A5: row 5 is a summary row ('Mean'), not an injection; it was set aside"}
    """
    labels = _label_columns(grid, table)
    rows = grid.rows
    found: dict[int, str] = {}
    data: list[int] = []
    for index in table.body:
        row = rows[index]
        if all(map(is_blank, row)):
            continue
        for column in labels:
            value = _cell(row, column)
            if type(value) is str and squash(value) in SUMMARY_WORDS:
                found[index] = (f"{grid.reference(column, index)}: row {index + 1} is a summary "
                                f"row ({value.strip()!r}), not an injection; it was set aside")
                break
        else:
            data.append(index)
    shared = table.header.shared
    for name in ("sample_id", "level"):
        if name in shared:
            _unnamed(grid, table, data, name)
    return found


def _unnamed(grid: Grid, table: Table, data: list[int], name: str) -> None:
    shared = table.header.shared
    column = shared[name]
    rows = grid.rows
    named = [i for i in data if not is_blank(_cell(rows[i], column.index))]
    if len(named) < NAMED_ROWS or len(named) == len(data):
        return
    conc = shared.get("concentration")
    concs = [conc.index] if conc is not None else [
        own["concentration"].index for own in table.header.analytes.values()
        if "concentration" in own]
    kind = shared.get("sample_type")
    others = [c.index for n, c in shared.items() if n in ("sample_id", "level") and n != name]
    for index in data:
        row = rows[index]
        if not is_blank(_cell(row, column.index)):
            continue
        if kind is not None and not is_blank(_cell(row, kind.index)):
            continue
        if any(not is_blank(_cell(row, i)) for i in others):
            continue
        if not any(not is_blank(_cell(row, i)) for i in concs):
            continue
        what = "sample name" if name == "sample_id" else "level label"
        first, last = named[0], named[-1]
        raise grid.error(
            f"the row has a concentration but no {what} in {grid.reference(column.index, index)}, "
            f"where the other rows have one ({grid.reference(column.index, first)} to "
            f"{grid.reference(column.index, last)}); it may be a total or mean row: delete it "
            f"from the export, or write its {what} (or its sample type) if it is an injection",
            row=index, column=column.label,
        )
