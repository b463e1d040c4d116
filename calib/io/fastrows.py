"""The plain rows of a long table, read a column at a time.

Instrument exports run to 10^5 rows, and nearly all of them are plain: a
number for the concentration and the response, a sample name, type, analyte
and replicate written the same way many times over.  :func:`plan_rows`
reads such a table column by column: each column's distinct values are
classified once (a sample-type word, an include flag, a whole number), the
numeric columns are tested in bulk, and every row whose cells are all plain
gets its point's values ready.  The other rows (text numbers, markers,
exclusions, hidden rows, anything that could be refused) are left to the
row-by-row reader of :mod:`calib.io.rows`, which gives their points and
messages; the two readers agree on every plain row, so the points and their
order are the same whichever reads them.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

from calib.io.cells import Cell, is_blank, to_flag, to_integer, to_name, to_text
from calib.options import SampleType

if TYPE_CHECKING:
    from calib.io.columns import Column
    from calib.io.sampletypes import SampleTyper

__all__ = ["PlainRow", "plan_rows"]

_BAD = object()
"""A cell the column-wise reader leaves to the row reader."""

PlainRow = tuple[str, float, float, "float | None", SampleType, "int | None", "str | None",
                 "int | None", "str | None"]
"""``(analyte, concentration, response, internal-standard response, sample type,
replicate, sample name, injection order, level)`` of a plain row."""


def _column(block: Sequence[Sequence[Cell]], index: int | None, width: int) -> list[Cell]:
    """One column of the rows (None where a short row ends or the table has no such column)."""
    if index is None:
        return [None] * len(block)
    if width > index:
        return [row[index] for row in block]
    return [row[index] if index < len(row) else None for row in block]


def _classify(values: list[Cell], parser: Callable[[Cell], Any]) -> list[Any]:
    """``parser`` of every cell, each distinct cell parsed once; :data:`_BAD` where it fails."""
    keys = list(zip(map(type, values), values))  # type() keeps True apart from 1
    seen: dict[tuple[type, Cell], Any] = {}
    for key in set(keys):
        try:
            seen[key] = parser(key[1])
        except Exception:  # noqa: BLE001 - the row reader raises the same, placed in its row
            seen[key] = _BAD
    return list(map(seen.__getitem__, keys))


def _whole(value: Cell) -> int | None:
    # The rows reader's whole_number(), for one cell.
    if type(value) is float and value.is_integer():
        return int(value)
    if is_blank(value):
        return None
    return to_integer(value)


def _plain_number(value: Cell) -> float | object:
    kind = type(value)
    if (kind is float or kind is int) and math.isfinite(value):  # type: ignore[arg-type]
        return float(value)  # type: ignore[arg-type]
    return _BAD


def _plain_concentration(value: Cell) -> float | object:
    if type(value) is float and 0 <= value < math.inf:
        return value
    return _BAD


def plan_rows(block: Sequence[Sequence[Cell]], *, index: dict[str, int],
              columns: tuple[Column, Column, Column | None], analyte: str | None,
              typer: SampleTyper, skip: frozenset[int] | set[int] | dict[int, str],
              first_row: int) -> list[PlainRow | None]:
    """The values of each plain row of a long table; None for rows to read one by one.

    Parameters
    ----------
    block : sequence of rows
        The body rows of the table, in order.
    index : dict
        0-based column of each canonical column name the table has.
    columns : tuple
        The concentration, response and internal-standard (or None) columns.
    analyte : str or None
        The analyte of a table without an analyte column.
    typer : SampleTyper
        Reads sample types.
    skip : set of int
        0-based rows never plain (hidden rows, summary rows).
    first_row : int
        0-based row of ``block[0]``.

    Examples
    --------
    >>> from calib.io.columns import Column
    >>> from calib.io.sampletypes import SampleTyper
    >>> conc, area = Column("concentration", "Conc", 1), Column("response", "Area", 2)
    >>> rows = [["Cal 1", 0.5, 1010.0], ["Cal 2", "1,0", 2032.0], ["Blank", 0.0, 3.0]]
    >>> plan = plan_rows(rows, index={"sample_id": 0, "concentration": 1, "response": 2},
    ...                  columns=(conc, area, None), analyte="Nitrate", typer=SampleTyper(),
    ...                  skip=set(), first_row=3)
    >>> plan[0][:5], plan[1], plan[2][4].value
    (('Nitrate', 0.5, 1010.0, None, <SampleType.STANDARD: 'standard'>), None, 'blank')
    """
    n = len(block)
    if n == 0:
        return []
    width = min(map(len, block))
    conc_column, response_column, is_column = columns
    concentration = list(map(_plain_concentration, _column(block, conc_column.index, width)))
    response = list(map(_plain_number, _column(block, response_column.index, width)))
    standard = (list(map(_plain_number, _column(block, is_column.index, width)))
                if is_column is not None else [None] * n)

    def named(name: str, parser: Callable[[Cell], Any]) -> list[Any]:
        if name not in index:
            return [None] * n
        return _classify(_column(block, index[name], width), parser)

    names = named("sample_id", to_name)
    if "analyte" in index:
        analytes = [_BAD if a is None else a for a in named("analyte", to_name)]
    else:
        analytes = [analyte] * n
    included = named("include", to_flag) if "include" in index else [True] * n
    reasons = (_column(block, index["exclusion_reason"], width)
               if "exclusion_reason" in index else [None] * n)
    replicates = named("replicate", _whole)
    orders = named("injection_order", _whole)
    levels = named("level", to_text)
    cell_kinds = named("sample_type", lambda v: typer.from_cell(to_text(v)))
    by_name: dict[str | None, Any] = {}

    def from_name(name: str | None) -> Any:
        # Plain rows have a concentration, so a name that says no type makes a standard.
        if name not in by_name:
            try:
                by_name[name] = typer.from_name(name, has_concentration=True)
            except Exception:  # noqa: BLE001 - the row reader raises it in its row
                by_name[name] = _BAD
        return by_name[name]

    plan: list[PlainRow | None] = [None] * n
    for at, values in enumerate(zip(analytes, concentration, response, standard, cell_kinds,
                                    replicates, names, orders, levels, included, reasons)):
        row = first_row + at
        (name_of, conc, found, is_found, kind, replicate, name, order, level, flag,
         reason) = values
        if (conc is _BAD or found is _BAD or is_found is _BAD or name_of is _BAD
                or name is _BAD or kind is _BAD or replicate is _BAD or order is _BAD
                or level is _BAD or flag is not True or row in skip
                or not (reason is None or reason == "")
                or (is_found is not None and is_found <= 0)):
            continue
        if kind is None:
            kind = from_name(name)
            if kind is _BAD:
                continue
        plan[at] = (name_of, conc, found, is_found, kind, replicate, name, order, level)
    return plan
