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
from collections.abc import Callable, Iterable, Sequence
from operator import itemgetter
from typing import TYPE_CHECKING, Any

import numpy as np

from calib.io.cells import Cell, is_blank, to_flag, to_integer, to_name, to_text
from calib.run import Point, PointColumns

if TYPE_CHECKING:
    from calib.io.columns import Column
    from calib.io.sampletypes import SampleTyper

__all__ = ["BodyColumns", "column_of", "plan_rows"]

_BAD = object()
"""A cell the column-wise reader leaves to the row reader."""

_NUMBERS = frozenset((bool, int, float))


def column_of(block: Sequence[Sequence[Cell]], index: int | None, width: int) -> list[Cell]:
    """One column of the rows (None where a short row ends or the table has no such column)."""
    if index is None:
        return [None] * len(block)
    if width > index:
        return list(map(itemgetter(index), block))
    return [row[index] if index < len(row) else None for row in block]


class BodyColumns:
    """The columns of a table's body rows, each cut out of the rows once however often asked.

    The lists handed out are shared: callers read them and never change them.
    """

    def __init__(self, block: Sequence[Sequence[Cell]]) -> None:
        self.block = block
        self.width = min(map(len, block), default=0)
        self._cut: dict[int, list[Cell]] = {}

    def __call__(self, index: int | None) -> list[Cell]:
        """Column ``index`` (0-based; all None for a column the table lacks)."""
        if index is None:
            return [None] * len(self.block)
        found = self._cut.get(index)
        if found is None:
            found = self._cut[index] = column_of(self.block, index, self.width)
        return found


class _Read(list):  # type: ignore[type-arg]
    """A column's cells as read, with the set of distinct results (:data:`_BAD` among them
    where a cell failed), so that "is any cell bad, or None?" costs no pass over the rows."""

    outcomes: set[Any]


def _read(results: Iterable[Any], outcomes: Iterable[Any]) -> _Read:
    read = _Read(results)
    read.outcomes = set(outcomes)
    return read


def _classify(values: list[Cell], parser: Callable[[Cell], Any]) -> _Read:
    """``parser`` of every cell, each distinct cell parsed once; :data:`_BAD` where it fails."""
    distinct = set(values)
    if len(_NUMBERS.intersection(map(type, distinct))) > 1:
        # True == 1 == 1.0: key by type too, so that each is read as what it is.
        keys = list(zip(map(type, values), values))
        typed: dict[tuple[type, Cell], Any] = {}
        for key in set(keys):
            typed[key] = _parse(parser, key[1])
        return _read(map(typed.__getitem__, keys), typed.values())
    seen = {value: _parse(parser, value) for value in distinct}
    return _read(map(seen.__getitem__, values), seen.values())


def _parse(parser: Callable[[Cell], Any], value: Cell) -> Any:
    try:
        return parser(value)
    except Exception:  # noqa: BLE001 - the row reader raises the same, placed in its row
        return _BAD


def _all_floats(values: list[Cell]) -> bool:
    """True when every cell is a float (the usual numeric column of a workbook)."""
    return set(map(type, values)) == {float}


def _whole_numbers(values: list[Cell]) -> _Read:
    """Replicate numbers or injection orders as the row reader reads them."""
    if _all_floats(values):
        array = np.array(values, dtype=float)
        if np.isfinite(array).all() and (array == np.floor(array)).all() and (
                np.abs(array) < 2.0**53).all():
            return _read(array.astype(np.int64).tolist(), ())  # whole numbers: none bad
    return _classify(values, _whole)


def _whole(value: Cell) -> int | None:
    # The rows reader's whole_number(), for one cell.
    if type(value) is float and value.is_integer():
        return int(value)
    if is_blank(value):
        return None
    return to_integer(value)


def _numbers(values: list[Cell], *, least: float | None = None) -> tuple[list[Any], set[int]]:
    """The cells read as plain finite numbers (at least ``least``), and the rows that are not."""
    if _all_floats(values) and all(map(math.isfinite, values)) and (  # type: ignore[arg-type]
            least is None or min(values, default=0.0) >= least):  # type: ignore[type-var]
        return values, set()
    out: list[Any] = []
    bad: set[int] = set()
    for at, value in enumerate(values):
        kind = type(value)
        if (kind is float or (kind is int and least is None)) and math.isfinite(
                value) and (least is None or value >= least):  # type: ignore[arg-type,operator]
            out.append(float(value))  # type: ignore[arg-type]
        else:
            out.append(None)
            bad.add(at)
    return out, bad


def _bad_rows(values: _Read) -> set[int]:
    if _BAD not in values.outcomes:
        return set()
    return {at for at, value in enumerate(values) if value is _BAD}


def plan_rows(block: Sequence[Sequence[Cell]], *, index: dict[str, int],
              columns: tuple[Column, Column, Column | None], analyte: str | None,
              typer: SampleTyper, skip: set[int], first_row: int, prefix: str,
              cut: BodyColumns | None = None
              ) -> tuple[PointColumns | list[Point | None], bool]:
    """The point of each plain row of a long table (None for rows to read one by one).

    Returns the points, and whether every row is plain (the points are then
    held as :class:`~calib.run.PointColumns`, their source cells made when read).

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
    prefix : str
        Source cells of the response column start so, ``"Run!C"``.
    cut : BodyColumns, optional
        The columns of ``block``, when the caller has cut some out already.

    Examples
    --------
    >>> from calib.io.columns import Column
    >>> from calib.io.sampletypes import SampleTyper
    >>> conc, area = Column("concentration", "Conc", 1), Column("response", "Area", 2)
    >>> rows = [["Cal 1", 0.5, 1010.0], ["Cal 2", "1,0", 2032.0], ["Blank", 0.0, 3.0]]
    >>> plan, every = plan_rows(rows, index={"sample_id": 0, "concentration": 1, "response": 2},
    ...                         columns=(conc, area, None), analyte="Nitrate",
    ...                         typer=SampleTyper(), skip=set(), first_row=3, prefix="Run!C")
    >>> plan[0].source_cell, plan[0].sample_type.value, plan[1], plan[2].sample_type.value, every
    ('Run!C4', 'standard', None, 'blank', False)
    """
    n = len(block)
    if n == 0:
        return [], True
    column = cut if cut is not None else BodyColumns(block)
    conc_column, response_column, is_column = columns
    bad = {row - first_row for row in skip if first_row <= row < first_row + n}
    # The row reader takes a float concentration of 0 or more as it is, any finite
    # number (not a bool) as a response, and an internal-standard response above 0.
    concentration, wrong = _numbers(column(conc_column.index), least=0.0)
    bad |= wrong
    found, wrong = _numbers(column(response_column.index))
    bad |= wrong

    def named(name: str, parser: Callable[[Cell], Any]) -> _Read:
        if name not in index:
            return _read([None] * n, (None,))
        values = _classify(column(index[name]), parser)
        bad.update(_bad_rows(values))
        return values

    names = named("sample_id", to_name)
    if "analyte" in index:
        analytes = named("analyte", to_name)
        if None in analytes.outcomes:
            bad.update(at for at, value in enumerate(analytes) if value is None)
    else:
        analytes = [analyte] * n
    if "include" in index:
        flags = named("include", to_flag)
        if False in flags.outcomes:
            bad.update(at for at, value in enumerate(flags) if value is not True)
    if "exclusion_reason" in index:
        reasons = column(index["exclusion_reason"])
        if set(reasons) - {None, ""}:  # each distinct cell looked at once
            bad.update(at for at, value in enumerate(reasons)
                       if not (value is None or value == ""))
    replicates = orders = [None] * n
    if "replicate" in index:
        replicates = _whole_numbers(column(index["replicate"]))
        bad.update(_bad_rows(replicates))
    if "injection_order" in index:
        orders = _whole_numbers(column(index["injection_order"]))
        bad.update(_bad_rows(orders))
    levels = named("level", to_text)
    kinds = named("sample_type", lambda v: typer.from_cell(to_text(v)))
    if None in kinds.outcomes:
        # Plain rows have a concentration, so a name that says no type makes a standard.
        from_names = _classify(names, lambda v: typer.from_name(v, has_concentration=True))
        kinds = _read([from_names[at] if kind is None else kind
                       for at, kind in enumerate(kinds)],
                      (kinds.outcomes - {None}) | from_names.outcomes)
        bad.update(_bad_rows(kinds))
    standards: list[Any] = [None] * n
    ratios: list[Any] = found
    own: list[Any] = [None] * n
    if is_column is not None:
        standards, wrong = _numbers(column(is_column.index))
        bad |= wrong
        bad.update(at for at, value in enumerate(standards) if value is not None and value <= 0)
        ratios = [r / s if r is not None and s is not None and s > 0 else math.nan
                  for r, s in zip(found, standards)]
        own = found
    held = {
        "analyte": analytes, "concentration": concentration, "response": ratios,
        "sample_type": kinds, "replicate": replicates, "included": [True] * n,
        "exclusion_reason": [None] * n, "sample_id": names, "injection_order": orders,
        "is_response": standards, "analyte_response": own, "level": levels,
    }
    if not bad:  # the usual export: the run holds the columns as they are
        return PointColumns(held, cells=(prefix, first_row + 1)), True
    points: list[Point | None] = list(PointColumns(held, cells=(prefix, first_row + 1)))
    for at in bad:
        points[at] = None
    return points, False
