"""Rows a spreadsheet adds under its data: means, totals, standard deviations.

Analysts and data systems write summary rows below a table (``Mean``,
``Average``, ``SD``, ``%RSD``, ``Total``).  Read as data, a mean row is a
standard lying exactly on the line: it adds a level and a degree of freedom
and no residual check can see it.  So:

- a row labelled with a summary word (in any text column that is not a
  measurement, include or reason column) is set aside, with a note naming
  its cell;
- a row with a concentration but no sample name (or no level label) where
  at least :data:`_NAMED_ROWS` other rows have one, and nothing else saying
  what it is, is refused: it may be an unlabelled total;
- in a table with no names or labels at all, a last standard equal in
  concentration and response to the mean or sum of those above it is refused.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from calib.errors import InputError
from calib.io.cells import Cell, is_blank
from calib.io.columns import squash
from calib.io.fastrows import BodyColumns
from calib.io.layout import Table
from calib.io.table import Grid
from calib.options import SampleType
from calib.run import Point, point_values

__all__ = ["check_unlabelled_summary", "find_summary_rows"]

_SUMMARY_WORDS: frozenset[str] = frozenset(squash(word) for word in (
    "mean", "average", "avg", "mittelwert", "moyenne", "media", "promedio",
    "sd", "s.d.", "stdev", "std dev", "standard deviation", "stabw", "standardabweichung",
    "écart type", "desviación estándar", "rsd", "%rsd", "rsd%", "rsd %", "% rsd", "cv", "%cv",
    "cv%", "total", "sum", "summe", "somme", "suma", "median", "min", "max", "minimum",
    "maximum", "count", "range",
))
"""Cell texts (compared after folding) that label a summary row, not an injection."""

_NAMED_ROWS = 3
"""Fewest named rows from which an unnamed row with a concentration is suspect."""

_NOT_LABELS = ("include", "exclusion_reason", "sample_type")


def _label_columns(grid: Grid, table: Table) -> list[int]:
    """Columns that may carry a summary word: labels, and the measurement columns too (a
    spreadsheet often writes "Mean" where the concentration would stand)."""
    header = table.header
    skip = {c.index for n, c in header.shared.items() if n in _NOT_LABELS}
    width = len(grid.rows[header.row])
    return [i for i in range(width) if i not in skip and i not in grid.hidden_columns]


def _cell(row: Sequence[Cell], index: int) -> Cell:
    return row[index] if index < len(row) else None


def find_summary_rows(grid: Grid, table: Table, *, cut: BodyColumns | None = None
                      ) -> dict[int, str]:
    """The summary rows of a table: ``{row: note}`` (0-based rows), each to be set aside.

    ``cut`` holds the columns of the table's body rows when the caller has them already.

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
    body = table.body
    # Column by column, each distinct text folded once (exports run to 10^5 rows); a row's
    # note names the leftmost label cell that marks it.
    marked: dict[int, tuple[int, str]] = {}
    if cut is None:
        cut = BodyColumns([rows[index] for index in body])
    for column in labels:
        values = cut(column)
        if str not in set(map(type, values)):
            continue  # a column of numbers (the usual measurement column) holds no word
        words = {v for v in set(values) if type(v) is str and squash(v) in _SUMMARY_WORDS}
        if not words:
            continue
        for index, value in zip(body, values):
            if type(value) is str and value in words and index not in marked:
                marked[index] = (column, value)
    found: dict[int, str] = {}
    for index in sorted(marked):
        column, value = marked[index]
        found[index] = (f"{grid.reference(column, index)}: row {index + 1} is a summary "
                        f"row ({value.strip()!r}), not an injection; it was set aside")
    data = [index for index in body if index not in marked] if marked else list(body)
    shared = table.header.shared
    for name in ("sample_id", "level"):
        if name in shared:
            _unnamed(grid, table, data, name, cut if len(data) == len(body) else None)
    return found


def _unnamed(grid: Grid, table: Table, data: list[int], name: str,
             cut: BodyColumns | None) -> None:
    shared = table.header.shared
    column = shared[name]
    rows = grid.rows
    at = column.index
    values = cut(at) if cut is not None else [
        row[at] if at < len(row) else None for row in map(rows.__getitem__, data)]
    blank = {value: is_blank(value) for value in set(values)}  # each distinct cell tested once
    if not any(blank.values()):
        return  # every row is named (the usual table)
    named = [i for i, value in zip(data, values) if not blank[value]]
    if len(named) < _NAMED_ROWS or len(named) == len(data):
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
        given = [_cell(row, i) for i in concs if not is_blank(_cell(row, i))]
        if not given or all(v == 0 or (isinstance(v, str) and v.strip() in ("0", "0.0", "0,0"))
                            for v in given):
            continue  # no concentration, or a blank's 0: never a mean or a total
        what = "sample name" if name == "sample_id" else "level label"
        first, last = named[0], named[-1]
        raise grid.error(
            f"the row has a concentration but no {what} in {grid.reference(column.index, index)}, "
            f"where the other rows have one ({grid.reference(column.index, first)} to "
            f"{grid.reference(column.index, last)}); it may be a total or mean row: delete it "
            f"from the export, or write its {what} (or its sample type) if it is an injection",
            row=index, column=column.label,
        )


_SUMMARY_TOLERANCE = 1e-4
"""Relative agreement at which a row's concentration and response equal the others' mean or sum
(a summary row is usually written rounded, to 4 or 5 significant digits)."""


def check_unlabelled_summary(points: Sequence[Point], *, file: str, sheet: str | None) -> None:
    """Refuse a last standard whose concentration and response are the others' mean or sum.

    A table without sample names or level labels cannot say that its last row
    is a summary; but a row equal in both concentration and response to the
    mean (or the sum) of the four or more rows above it is one: a measured
    response does not land on the mean of the others to 1 part in 10^4 by
    chance.

    Raises
    ------
    InputError
        Naming the row's cell and what to do.

    Examples
    --------
    >>> pts = [Point("N", c, r, f"n.csv!B{i + 2}") for i, (c, r) in
    ...        enumerate([(1, 0.2), (2, 0.41), (5, 0.99), (10, 2.01), (4.5, 0.9025)])]
    >>> check_unlabelled_summary(pts, file="n.csv", sheet=None)
    Traceback (most recent call last):
    ...
    calib.errors.InputError: n.csv: N: the row of n.csv!B6 holds the mean of the standards above \
it (concentration 4.5, response 0.9025): a summary row, not an injection; delete it from the \
export
    """
    names = point_values(points, "sample_id")
    if None not in set(names):
        return  # every row has a sample name (each distinct name tested once)
    standard, finite = SampleType.STANDARD, math.isfinite
    kinds, levels = point_values(points, "sample_type"), point_values(points, "level")
    concentrations = point_values(points, "concentration")
    responses = point_values(points, "response")
    by_analyte: dict[str, list[int]] = {}
    for at, analyte in enumerate(point_values(points, "analyte")):
        if names[at] is None and kinds[at] is standard and levels[at] is None and \
                finite(responses[at]):
            by_analyte.setdefault(analyte, []).append(at)
    for analyte, own in by_analyte.items():
        if len(own) < 5:  # a summary of fewer rows could be a real level on a clean line
            continue
        last, others = own[-1], own[:-1]
        concs = [concentrations[at] for at in others]
        values = [responses[at] for at in others]
        for what, conc, response in (
            ("mean", math.fsum(concs) / len(concs), math.fsum(values) / len(values)),
            ("sum", math.fsum(concs), math.fsum(values)),
        ):
            if math.isclose(concentrations[last], conc, rel_tol=_SUMMARY_TOLERANCE) and \
                    math.isclose(responses[last], response, rel_tol=_SUMMARY_TOLERANCE):
                last_point = points[last]
                raise InputError(
                    f"{analyte}: the row of {last_point.source_cell} holds the {what} of the "
                    f"standards above it (concentration {last_point.concentration:g}, response "
                    f"{last_point.response:g}): a summary row, not an injection; delete it from the "
                    f"export", file=file, sheet=sheet)
