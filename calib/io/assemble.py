"""Putting the tables of one or more grids together into a checked :class:`~calib.run.Run`.

After every table is read, the run as a whole is checked:

- every analyte has standards at 3 or more distinct concentrations (fewer
  cannot make a calibration curve), or the file is refused saying which;
- a row repeated exactly (same analyte, sample, concentration, response,
  replicate and injection order) is set aside as a copy, with a warning
  naming both cells;
- internal-standard responses more than 50 % away from the mean of their
  internal standard's responses in the run are named in the run's warnings
  (a common-practice screen for failed spiking or ion suppression; the
  points are not excluded).

The run's layout says how the file was arranged: ``long``, ``wide``,
``stacked`` (several tables in one sheet) or ``sheet-per-analyte``.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import MutableSequence, Sequence
from operator import itemgetter
from pathlib import PurePath
from typing import Any

import numpy as np

from calib.errors import InputError
from calib.io.ambiguity import (
    check_populations,
    check_replicates,
    ignored_columns,
    promote,
    split_column,
)
from calib.io.columns import column_letter, squash
from calib.io.importmap import ImportMap
from calib.io.layout import Table, find_tables
from calib.io.levels import check_level_labels, merge_close_levels
from calib.io.metadata import metadata_units
from calib.io.names import normalise_analytes
from calib.io.rows import TableRead, read_table
from calib.io.sampletypes import SAMPLE_TYPE_WORDS, SampleTyper
from calib.io.summary_rows import check_unlabelled_summary
from calib.io.table import Grid, reference_prefix
from calib.options import SampleType
from calib.run import Point, PointColumns, Run, SourceInfo, point_values

__all__ = ["MIN_LEVELS", "assemble"]

MIN_LEVELS = 3
"""Fewest distinct standard concentrations an analyte needs."""

_COPY_DIGITS = 6
"""Significant digits from which two equal responses without replicate numbers are a copy."""

_IS_OUTLIER_FRACTION = 0.5
"""Internal-standard responses further than this fraction from their mean are flagged
(common practice: 50 %)."""

_TYPE_WORDS = frozenset(
    squash(w) for words in SAMPLE_TYPE_WORDS.values() for w in words
) | frozenset(squash(w) + "s" for words in SAMPLE_TYPE_WORDS.values() for w in words) | {
    "standards", "calibration", "calibrationcurve", "qcs", "samples", "unknowns", "results",
}


def _is_type_word(text: str) -> bool:
    return squash(text) in _TYPE_WORDS


def _analyte_of(grid: Grid, table: Table, *, several: bool, per_sheet: bool,
                given: str | None, previous: str | None, stem: str) -> str | None:
    """The analyte of a long table without an analyte column (None when the table names it)."""
    header = table.header
    if "analyte" in header.shared or header.layout == "wide":
        if given is not None:
            where = (f"an analyte column {header.shared['analyte'].label}"
                     if "analyte" in header.shared else "analyte names in its headings")
            raise grid.error(
                f"the table has {where}; the analyte name given ({given!r}) is only for "
                f"tables without one",
                row=header.row,
            )
        return None
    if given is not None:
        return given
    if table.metadata.get("analyte"):
        return table.metadata["analyte"]
    if several and table.label and not _is_type_word(table.label):
        return table.label
    if several and previous is not None:
        return previous
    if per_sheet and grid.sheet:
        return grid.sheet
    return stem


def _default_units(table: Table, imap: ImportMap | None) -> dict[str, tuple[str, str]]:
    units = {name: (unit, "metadata line above the table")
             for name, unit in metadata_units(table.metadata).items()}
    if imap is not None:
        units.update({name: (unit, "import map") for name, unit in imap.units.items()})
    return units


def _range(grid: Grid, table: Table) -> str:
    indices = [c.index for c in table.header.all_columns()]
    last = max(table.body.stop, table.header.row + 1)
    return (f"{reference_prefix(grid.label)}{column_letter(min(indices))}"
            f"{table.header.first_row + 1}:{column_letter(max(indices))}{last}")


def _check_levels(points: Sequence[Point], grids: Sequence[Grid], units: dict[str, dict[str, str]],
                  counts: dict[str, int]) -> None:
    # ``counts``: distinct concentrations of each analyte's standards (merge_close_levels);
    # an analyte short of levels is looked at again.
    grid = grids[0]
    sheet = grid.sheet if len(grids) == 1 else None
    for analyte in dict.fromkeys(point_values(points, "analyte")):
        if counts.get(analyte, 0) >= MIN_LEVELS:
            continue
        own = [p for p in points if p.analyte == analyte]
        standards = [p for p in own if p.sample_type is SampleType.STANDARD]
        levels = sorted({p.concentration for p in standards})
        if len(levels) >= MIN_LEVELS:
            continue
        unit = units.get(analyte, {}).get("concentration")
        if not standards:
            kinds = ", ".join(dict.fromkeys(p.sample_type.value for p in own))
            found = f"no calibration standard among its {len(own)} row" + (
                "s" if len(own) != 1 else "") + f" (sample types: {kinds})"
        else:
            shown = ", ".join(f"{c:g}" for c in levels) + (f" {unit}" if unit else "")
            found = (f"standards at {len(levels)} concentration"
                     f"{'s' if len(levels) != 1 else ''} only ({shown}; cells "
                     f"{standards[0].source_cell} to {standards[-1].source_cell})")
        raise InputError(
            f"{analyte} has {found}; expected standards at {MIN_LEVELS} or more distinct "
            f"concentrations for a calibration curve (a row is a standard when its sample "
            f"type says so, or when it has a concentration and its name says no other type)",
            file=grid.file, sheet=sheet,
        )


def _significant_digits(value: float) -> int:
    digits = f"{abs(value):.15g}".split("e")[0].replace(".", "").lstrip("0").rstrip("0")
    return len(digits)


def _set_aside_copies(points: MutableSequence[Point], warnings: list[str]) -> None:
    """Set aside rows that repeat an earlier row exactly.

    Replicates may agree when responses are written with few digits (an
    absorbance of 0.213 twice), so rows count as copies only when they also
    agree on a replicate number or injection order, or their response has
    :data:`_COPY_DIGITS` or more significant digits.
    """
    # Responses rarely repeat: look at whole rows only where one does (one sort of the
    # responses finds them; runs reach 10^5 points).
    values = np.array(point_values(points, "response"), dtype=float)
    order = np.argsort(values, kind="stable")
    ranked = values[order]
    same = ranked[1:] == ranked[:-1]  # NaN marks a missing response: never equal
    if not same.any():
        return
    starts = np.flatnonzero(np.r_[True, ~same])
    sizes = np.diff(np.r_[starts, values.size])
    repeated = sizes > 1
    groups = [order[start:start + size].tolist()  # each in file order (a stable sort)
              for start, size in zip(starts[repeated].tolist(), sizes[repeated].tolist())]
    columns = {name: point_values(points, name) for name in _COPY_KEY}
    for indices in sorted(groups, key=itemgetter(0)):  # in the order of the file
        _copies_among(points, columns, indices, warnings)


_COPY_KEY = ("analyte", "sample_type", "concentration", "response", "analyte_response",
             "is_response", "sample_id", "replicate", "injection_order", "level")


def _copies_among(points: MutableSequence[Point], columns: dict[str, list[Any]],
                  indices: list[int], warnings: list[str]) -> None:
    replicates, orders = columns["replicate"], columns["injection_order"]
    responses, own = columns["response"], columns["analyte_response"]
    first: dict[tuple[object, ...], int] = {}
    for index in indices:
        if replicates[index] is None and orders[index] is None and _significant_digits(
            own[index] if own[index] is not None else responses[index]
        ) < _COPY_DIGITS:
            continue
        original = first.setdefault(tuple(column[index] for column in columns.values()), index)
        if original == index:
            continue
        point = points[index]
        reason = (f"repeats the row of {points[original].source_cell} exactly (same sample, "
                  f"concentration and response): a copied row")
        warnings.append(f"{point.source_cell}: {reason}; set aside")
        reasons = [r for r in (point.exclusion_reason, reason) if r]
        points[index] = dataclasses.replace(point, included=False,
                                            exclusion_reason="; ".join(reasons))


def _screen_internal_standards(reads: Sequence[TableRead], warnings: list[str]) -> None:
    groups: dict[str, dict[str, tuple[float, str | None]]] = {}
    for read in reads:
        for group, cell, value, sample in read.internal_standards:
            groups.setdefault(group, {})[cell] = (value, sample)
    for group, cells in groups.items():
        if len(cells) < 3:
            continue
        mean = math.fsum(v for v, _ in cells.values()) / len(cells)
        for cell, (value, sample) in cells.items():
            off = (value - mean) / mean
            if abs(off) > _IS_OUTLIER_FRACTION:
                who = f" ({sample})" if sample else ""
                warnings.append(
                    f"{cell}{who}: {group} responded {value:,.6g}, {100 * abs(off):.0f} % "
                    f"{'above' if off > 0 else 'below'} the run's mean of {mean:,.6g}; common "
                    f"practice flags internal-standard responses more than "
                    f"{100 * _IS_OUTLIER_FRACTION:.0f} % from the mean (check spiking and "
                    f"matrix suppression)"
                )


def _shared_units(units: dict[str, dict[str, str]], analytes: Sequence[str]
                  ) -> tuple[dict[str, str], dict[str, dict[str, str]]]:
    if not analytes:
        return {}, {}
    keys = set().union(*(units.get(a, {}) for a in analytes))
    shared = {}
    for key in sorted(keys):
        values = {units.get(a, {}).get(key) for a in analytes}
        if len(values) == 1 and None not in values:
            shared[key] = values.pop()
    own = {a: {k: v for k, v in units.get(a, {}).items() if shared.get(k) != v}
           for a in analytes}
    return shared, {a: u for a, u in own.items() if u}


def assemble(grids: Sequence[Grid], *, source: SourceInfo, analyte: str | None = None,
             imap: ImportMap | None = None, per_sheet: bool = False,
             warnings: Sequence[str] = ()) -> Run:
    """Build one run from the tables of one grid, or of several sheets (one per analyte).

    Parameters
    ----------
    grids : sequence of Grid
        One grid, or one per sheet for a workbook with a sheet per analyte.
    source : SourceInfo
        File name, SHA-256 and what the reader knows (sheet, encoding...);
        layout, tables and columns are filled in here.
    analyte : str, optional
        Analyte of long tables without an analyte column; by default the
        ``Analyte:`` line above the table, the line naming a stacked table,
        the sheet name (one sheet per analyte) or the file name.
    imap : ImportMap, optional
        Column names, header row, sample-type patterns and units to use.
    per_sheet : bool
        True when ``grids`` are sheets of one analyte each.
    warnings : sequence of str
        Warnings the reader already has (macros, other sheets not read).

    Raises
    ------
    InputError
        When a grid has no header row, a cell cannot be used, or an analyte
        has standards at fewer than :data:`MIN_LEVELS` concentrations.
    """
    typer = SampleTyper(imap.sample_types if imap is not None else {})
    given = analyte if analyte is not None else (imap.analyte if imap is not None else None)
    stem = PurePath(source.file).stem
    reads: list[TableRead] = []
    points = PointColumns()
    metadata: dict[str, str] = {}
    ranges: list[str] = []
    columns: list[str] = []
    stacked = False
    layouts: list[str] = []
    all_warnings = list(warnings)
    decimal = None
    triples: list[tuple[Grid, Table, TableRead]] = []
    ignored: list[str] = []
    for grid in grids:
        tables = find_tables(grid, imap=imap)
        stacked = stacked or len(tables) > 1
        previous: str | None = None
        for table in tables:
            name = _analyte_of(grid, table, several=len(tables) > 1, per_sheet=per_sheet,
                               given=given, previous=previous, stem=stem)
            previous = name or previous
            read = read_table(grid, table, analyte=name, typer=typer,
                              default_units=_default_units(table, imap))
            may_promote = ("analyte" not in table.header.shared and given is None
                           and not table.metadata.get("analyte"))
            column = split_column(grid, table, read, imap=imap, may_promote=may_promote,
                                  min_levels=MIN_LEVELS)
            if column is not None:
                table = promote(table, column)
                read = read_table(grid, table, analyte=None, typer=typer,
                                  default_units=_default_units(table, imap))
                split_column(grid, table, read, imap=imap, may_promote=False,
                             min_levels=MIN_LEVELS)
                found = list(dict.fromkeys(point_values(read.points, "analyte")))
                read.warnings.append(
                    f"{grid.reference(column.index, table.header.row)}: column {column.label} "
                    f"was read as the analyte column, since its values split the standards "
                    f"into {len(found)} curves ({', '.join(found[:6])}"
                    f"{', ...' if len(found) > 6 else ''})")
            triples.append((grid, table, read))
            ignored.extend(ignored_columns(grid, table, imap))
            if not read.points:
                raise grid.error(
                    f"the table under the header in row {table.header.row + 1} has no rows; "
                    f"expected at least one calibration standard",
                )
            reads.append(read)
            points.extend(read.points)
            layouts.append(table.header.layout)
            ranges.append(_range(grid, table))
            columns.extend(read.columns)
            all_warnings.extend(read.warnings)
            all_warnings.extend(table.warnings)
            decimal = decimal or read.decimal
            for key, value in table.metadata.items():
                if key == "analyte" and (len(tables) > 1 or per_sheet):
                    continue
                if key == "title" and metadata and table is not tables[0]:
                    continue
                metadata.setdefault(key, value)
    units: dict[str, dict[str, str]] = {}
    for read in reads:
        for name, own in read.units.items():
            units.setdefault(name, {}).update({k: v for k, v in own.items()
                                               if k not in units.get(name, {})})
    sheet = grids[0].sheet if len(grids) == 1 else None
    renamed = normalise_analytes(triples, points, all_warnings, file=grids[0].file, sheet=sheet)
    units = {renamed.get(name, name): own for name, own in units.items()}
    check_unlabelled_summary(points, file=grids[0].file, sheet=sheet)
    levels = merge_close_levels(points, all_warnings)
    check_level_labels(points, file=grids[0].file, sheet=sheet)
    _check_levels(points, grids, units, levels)
    _set_aside_copies(points, all_warnings)
    check_replicates(triples, points, imap=imap)
    check_populations(points, file=grids[0].file, sheet=sheet, min_levels=MIN_LEVELS)
    _screen_internal_standards(reads, all_warnings)
    if per_sheet:
        layout = "sheet-per-analyte"
    elif stacked:
        layout = "stacked"
    else:
        layout = layouts[0]
    analytes = list(dict.fromkeys(points.column("analyte")))
    shared, own_units = _shared_units(units, analytes)
    info = dataclasses.replace(
        source, layout=layout, tables=tuple(ranges), columns=tuple(columns),
        decimal_mark=source.decimal_mark or decimal,
        import_map=imap.file if imap is not None else source.import_map,
        ignored_columns=tuple(ignored),
    )
    return Run(source=info, points=points, metadata=metadata, units=shared,
               analyte_units=own_units, warnings=tuple(all_warnings))


def _build_run(grid: Grid, *, source: SourceInfo, analyte: str | None = None,
              imap: ImportMap | None = None) -> Run:
    """Build the run held in one grid of raw cells.

    Examples
    --------
    >>> rows = [
    ...     ["Fernbrook Water Laboratory"],
    ...     ["Method:", "Nitrate-N by IC"],
    ...     ["Sample", "Conc (mg/L)", "Peak area", "Include", "Reason"],
    ...     ["Cal-1", 0.5, 1010.0, "yes", ""],
    ...     ["Cal-2", "1,0", 2032.0, "no", "vial cracked"],
    ...     ["Cal-3", 2.0, 4051.0, "", ""],
    ... ]
    >>> grid = Grid(rows, file="nitrate.csv", label="nitrate.csv")
    >>> run = _build_run(grid, source=SourceInfo("nitrate.csv", "0" * 64))
    >>> run.metadata
    {'title': 'Fernbrook Water Laboratory', 'method': 'Nitrate-N by IC'}
    >>> run.units, run.analytes, run.source.layout, run.source.tables
    ({'concentration': 'mg/L'}, ('nitrate',), 'long', ('nitrate.csv!A3:E6',))
    >>> p = run.points[1]
    >>> p.concentration, p.source_cell, p.included, p.exclusion_reason
    (1.0, 'nitrate.csv!C5', False, 'vial cracked')
    """
    return assemble([grid], source=source, analyte=analyte, imap=imap)
