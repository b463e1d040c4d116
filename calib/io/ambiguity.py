"""Curves that may hold more than one analyte: refuse rather than merge.

An export whose analyte column calib does not recognise (``Element /
wavelength (nm)`` before it was known, an ``Emission`` column) used to be
read as one curve named after the file, with every analyte's standards in
it.  Two emission lines of one element 6 % apart then made one curve that
passed its checks.  After a table is read, three things are looked at:

- a column calib does not read whose values each recur at
  :data:`~calib.io.assemble.MIN_LEVELS` or more concentrations of one curve
  splits that curve: when its heading names an analyte-like thing
  (``Line``, ``Label``, ``Wavelength``...) and the table has no analyte
  column, it is read as the analyte column, with a note; otherwise the run
  stops, naming the column and what to do;
- a replicate number that repeats within one level of one sample (same
  concentration, same injection order or none) stops the run;
- responses that fall into two clearly separate groups at every level, the
  groups' ratio the same at each (the mark of two analytes with different
  sensitivities), stop the run.

Columns listed under ``ignore`` in an import map are taken as the analyst
says: not the analyte.  :func:`ignored_columns` says which headings were not
used, and why, for ``--show-import``.
"""

from __future__ import annotations

import dataclasses
import math
import statistics
from collections.abc import Iterator, Sequence
from itertools import groupby, repeat
from operator import is_, itemgetter

import numpy as np

from calib.errors import InputError
from calib.io.cells import Cell, to_text
from calib.io.columns import Column, read_heading, split_unit, squash
from calib.io.importmap import ImportMap
from calib.io.layout import Table
from calib.io.rows import TableRead
from calib.io.table import Grid
from calib.options import SampleType
from calib.run import Point, point_values

__all__ = ["check_populations", "check_replicates", "ignored_columns", "promote", "split_column"]

_ANALYTE_LIKE: frozenset[str] = frozenset(squash(word) for word in (
    "line", "label", "emission line", "wavelength", "mass", "isotope", "channel", "detector",
    "lambda", "wellenlänge", "linie", "longueur d'onde", "raie", "longitud de onda", "línea",
    "etiqueta", "etikett", "libellé", "masse", "masa", "isotop", "isotope",
))
"""Headings (folded, unit left out) of a column that may name the analyte or its line."""

_BENIGN: frozenset[str] = frozenset(squash(word) for word in (
    "time", "date", "acquisition date", "acquisition time", "acquired", "injection date",
    "injection time", "date time", "vial", "vial position", "position", "pos", "tray",
    "data file", "file", "file name", "operator", "analyst", "status", "row", "#", "no", "nr",
    "datum", "uhrzeit", "zeit", "heure", "fecha", "hora",
))
"""Headings of columns that vary from row to row without splitting a curve."""

_GAP_RATIO = 4.0
"""Two groups of responses at one level are separate when the gap between them is this many
pooled standard deviations of the groups or more (it must hold at every level)."""

_RATIO_AGREEMENT = 0.02
_COPIED = "a copied row"


def _heading_key(text: str) -> str:
    return squash(split_unit(text)[0])


def _cell(row: Sequence[Cell], index: int) -> Cell:
    return row[index] if index < len(row) else None


def _value(row: Sequence[Cell], index: int) -> str | None:
    text = to_text(_cell(row, index))
    return " ".join(text.split()) if text is not None else None


def _unused(grid: Grid, table: Table) -> list[tuple[int, str]]:
    """Headings of the header row that name no column calib reads."""
    used = {c.index for c in table.header.all_columns()}
    cells = grid.rows[table.header.row]
    found = []
    for index, cell in enumerate(cells):
        text = to_text(cell) if isinstance(cell, str) else None
        if text is not None and index not in used:
            found.append((index, text))
    return found


def ignored_columns(grid: Grid, table: Table, imap: ImportMap | None = None) -> list[str]:
    """Every heading of a table's header row calib does not use, and why.

    Examples
    --------
    >>> from calib.io.layout import find_tables
    >>> rows = [["Sample", "Element / lamp", "RT (min)", "Conc", "Area"], ["S1", "Pb", 1.2, 1, 9.0]]
    >>> grid = Grid(rows, file="icp.csv", label="icp.csv")
    >>> for line in ignored_columns(grid, find_tables(grid)[0]):
    ...     print(line)
    icp.csv!B1 'Element / lamp': heading not recognised
    icp.csv!C1 'RT (min)': known not to be calibration data
    """
    lines = []
    skip = _map_ignores(imap)
    for index, text in _unused(grid, table):
        if squash(text) in skip or _heading_key(text) in skip:
            why = "listed under ignore in the import map"
        elif index in grid.hidden_columns:
            why = "the column is hidden in the workbook"
        elif read_heading(text).ignored:
            why = "known not to be calibration data"
        elif read_heading(text).name is not None:
            why = "names a column the table has already (or one this layout does not use)"
        else:
            why = "heading not recognised"
        lines.append(f"{grid.reference(index, table.header.row)} {text!r}: {why}")
    return lines


def _map_ignores(imap: ImportMap | None) -> set[str]:
    if imap is None:
        return set()
    return {squash(h) for h in imap.ignore} | {_heading_key(h) for h in imap.ignore}


def _candidates(grid: Grid, table: Table, imap: ImportMap | None) -> list[tuple[int, str]]:
    skip = _map_ignores(imap)
    return [(index, text) for index, text in _unused(grid, table)
            if index not in grid.hidden_columns and _heading_key(text) not in _BENIGN
            and squash(text) not in _BENIGN and squash(text) not in skip
            and _heading_key(text) not in skip]


def _standards_by_analyte(read: TableRead) -> dict[str, list[tuple[float, int]]]:
    """(concentration, row) of each standard, by analyte."""
    found: dict[str, list[tuple[float, int]]] = {}
    standard = SampleType.STANDARD
    for kind, analyte, concentration, row in zip(
            point_values(read.points, "sample_type"), point_values(read.points, "analyte"),
            point_values(read.points, "concentration"), read.rows, strict=True):
        if kind is standard:
            found.setdefault(analyte, []).append((concentration, row))
    return found


def _split(grid: Grid, index: int, standards: list[tuple[float, int]], *, analyte_like: bool,
           min_levels: int) -> dict[str, set[float]] | None:
    """The column's values, each with its concentrations, when they split one curve."""
    groups: dict[str, set[float]] = {}
    for concentration, row in standards:
        value = _value(grid.rows[row], index)
        if value is not None:
            groups.setdefault(value, set()).add(concentration)
    if len(groups) < 2:
        return None
    if not analyte_like and not any(ch.isalpha() for value in groups for ch in value):
        return None  # numbers (retention times, vial numbers) are not names
    full = {v: c for v, c in groups.items() if len(c) >= min_levels}
    if len(full) >= 2:
        return groups
    # A line or label that changes inside a curve (one emission line for the low standards,
    # another for the high ones) merges two calibrations as surely as two full curves do;
    # a value per level (a sample label) does not.
    if analyte_like and any(len(c) >= 2 for c in groups.values()):
        return groups
    return None


def split_column(grid: Grid, table: Table, read: TableRead, *, imap: ImportMap | None,
                 may_promote: bool, min_levels: int) -> Column | None:
    """The column to read as the analyte column, None when no column splits a curve.

    Parameters
    ----------
    may_promote : bool
        True when the table has no analyte column and no analyte name was
        given: an analyte-like heading that splits the curve is then read as
        the analyte column.

    Raises
    ------
    InputError
        When a column splits a curve and cannot be taken as the analyte column.
    """
    candidates = _candidates(grid, table, imap)
    if not candidates:
        return None
    for analyte, standards in _standards_by_analyte(read).items():
        for index, text in candidates:
            analyte_like = _heading_key(text) in _ANALYTE_LIKE or squash(text) in _ANALYTE_LIKE
            groups = _split(grid, index, standards, analyte_like=analyte_like,
                            min_levels=min_levels)
            if groups is None:
                continue
            every = all(len(c) >= min_levels for c in groups.values())
            if every and analyte_like and may_promote and table.header.layout == "long":
                return Column("analyte", text, index)
            shown = ", ".join(repr(v) for v in list(groups)[:4]) + (
                ", ..." if len(groups) > 4 else "")
            column = Column("analyte", text, index)
            if sum(len(c) >= min_levels for c in groups.values()) >= 2:
                how = f"that each recur at {min_levels} or more concentrations"
            else:
                how = "that change from level to level"
                shown = ", ".join(f"{v!r} at {_span(c)}" for v, c in list(groups.items())[:4]) \
                    + (", ..." if len(groups) > 4 else "")
            raise grid.error(
                f"the column holds {len(groups)} values ({shown}) {how} of what would be one "
                f"curve of {analyte}; "
                f"calib does not merge them: if they are different analytes or lines, name the "
                f"column as the analyte column in an import map ([columns] analyte = {text!r}) "
                f"and pass it with --map; if they are one curve, list it in the map "
                f"(ignore = [{text!r}])",
                row=table.header.row, column=column.label,
            )
    return None


def _span(concentrations: set[float]) -> str:
    low, high = min(concentrations), max(concentrations)
    return f"{low:g}" if low == high else f"{low:g} to {high:g}"


def promote(table: Table, column: Column) -> Table:
    """The table with ``column`` read as its analyte column."""
    shared = {**table.header.shared, "analyte": column}
    return dataclasses.replace(table, header=dataclasses.replace(table.header, shared=shared))


def _telling_apart(grid: Grid, table: Table, rows: Sequence[int],
                   imap: ImportMap | None) -> str | None:
    for index, text in _candidates(grid, table, imap):
        values = {_value(grid.rows[r], index) for r in rows}
        if len(values) == len(rows):
            return f"column {Column('x', text, index).label} tells them apart"
    return None


def check_replicates(reads: Sequence[tuple[Grid, Table, TableRead]], points: Sequence[Point],
                     *, imap: ImportMap | None) -> None:
    """Refuse a replicate number repeated within one level of one sample.

    Rows copied exactly are set aside before (and skipped here); rows with
    different injection orders are re-injections, not repeats.

    Parameters
    ----------
    reads : sequence of (Grid, Table, TableRead)
        Every table read, in order.
    points : sequence of Point
        The run's points (those of ``reads`` one after the other, copies set aside).

    Raises
    ------
    InputError
        Naming the analyte, the level, the cells and what to do.
    """
    stop = 0
    columns = {name: point_values(points, name) for name in (
        "analyte", "concentration", "replicate", "sample_id", "injection_order", "sample_type",
        "exclusion_reason")}
    standard = SampleType.STANDARD
    for grid, table, read in reads:
        start, stop = stop, stop + len(read.points)
        orders = columns["injection_order"][start:stop]
        if None not in orders and len(set(orders)) == len(orders):
            continue  # every row has its own injection order: no replicate can repeat
        first: dict[tuple[object, ...], int] = {}
        repeats: dict[tuple[object, ...], list[int]] = {}
        for at in range(start, stop):
            replicate, reason = columns["replicate"][at], columns["exclusion_reason"][at]
            if replicate is None or columns["sample_type"][at] is not standard:
                continue
            if reason and _COPIED in reason:
                continue
            key = (columns["analyte"][at], columns["concentration"][at], replicate,
                   columns["sample_id"][at], columns["injection_order"][at])
            earlier = first.setdefault(key, at)
            if earlier != at:
                repeats.setdefault(key, [earlier]).append(at)
        for (analyte, conc, replicate, sample, _), found in repeats.items():
            cells = ", ".join(points[at].source_cell for at in found[:4])
            who = f" (sample {sample!r})" if sample else ""
            apart = _telling_apart(grid, table, [read.rows[at - start] for at in found], imap)
            hint = (f"{apart}: if it names the analyte or line, name it as the analyte column in "
                    f"an import map ([columns] analyte = ...) and pass it with --map"
                    if apart else "if the rows hold different analytes or lines, give the file "
                    "an analyte column")
            raise InputError(
                f"{analyte}: replicate {replicate} of the standard at {conc:g}{who} appears "
                f"{len(found)} times ({cells}), so the rows may hold more than one analyte or "
                f"line in one curve; {hint}; if they are re-injections, number the replicates "
                f"1, 2, 3... within each level or add an injection order column",
                file=grid.file, sheet=grid.sheet,
            )


def _sum_of_squares(values: Sequence[float]) -> float:
    mean = math.fsum(values) / len(values)
    return math.fsum((v - mean) ** 2 for v in values)


def _best_split(values: list[float]) -> tuple[float, float, float] | None:
    """(gap in pooled SDs, mean of the low group, mean of the high group) of the widest split.

    Only the widest gap of the sorted values is tried: a split anywhere else
    leaves a wider gap inside one group.
    """
    values = sorted(values)
    if len(values) < 4:
        return None
    k = max(range(2, len(values) - 1), key=lambda i: values[i] - values[i - 1])
    low, high = values[:k], values[k:]
    pooled = math.sqrt((_sum_of_squares(low) + _sum_of_squares(high)) / (len(values) - 2))
    gap = high[0] - low[-1]
    score = math.inf if pooled == 0 else gap / pooled
    return score, math.fsum(low) / len(low), math.fsum(high) / len(high)


def _in_time(orders: list[int | None], responses: list[float],
             split: tuple[float, float, float]) -> bool:
    """True when the two groups were injected one after the other (drift, not two analytes)."""
    if None in orders:
        return False
    cut = (split[1] + split[2]) / 2
    low = [order for order, response in zip(orders, responses) if response < cut]
    high = [order for order, response in zip(orders, responses) if response >= cut]
    return max(low) < min(high) or max(high) < min(low)  # type: ignore[type-var]


def _crowded_levels(points: Sequence[Point], min_levels: int
                    ) -> Iterator[tuple[str, dict[float, np.ndarray]]]:
    """The rows of each level holding 4 or more included standards (finite response, positive
    concentration), by analyte; only analytes with ``min_levels`` or more such levels.

    Grouped with one sort of the columns (runs reach 10^5 points); analytes in order of
    first appearance, levels by concentration, rows in file order (an array of each).
    """
    analytes = point_values(points, "analyte")
    n = len(analytes)
    code_of = {name: code for code, name in enumerate(dict.fromkeys(analytes))}
    codes = np.fromiter(map(code_of.__getitem__, analytes), np.intp, n)
    concentration = np.fromiter(point_values(points, "concentration"), float, n)
    keep = np.isfinite(np.fromiter(point_values(points, "response"), float, n))
    keep &= concentration > 0
    kinds, included = point_values(points, "sample_type"), point_values(points, "included")
    if not all(map(is_, kinds, repeat(SampleType.STANDARD))):
        keep &= np.fromiter(map(is_, kinds, repeat(SampleType.STANDARD)), bool, n)
    if not all(included):
        keep &= np.fromiter(map(bool, included), bool, n)
    rows = np.flatnonzero(keep)
    if not rows.size:
        return
    rows = rows[np.lexsort((rows, concentration[rows], codes[rows]))]
    code, level = codes[rows], concentration[rows]
    starts = np.flatnonzero(np.r_[True, (code[1:] != code[:-1]) | (level[1:] != level[:-1])])
    sizes = np.diff(np.r_[starts, rows.size])
    crowded = sizes >= 4
    counts = np.bincount(code[starts[crowded]], minlength=len(code_of))
    chosen = np.flatnonzero(crowded & (counts[code[starts]] >= min_levels))
    names = list(code_of)
    owners = code[starts[chosen]].tolist()
    for owner, groups in groupby(zip(owners, chosen.tolist()), key=itemgetter(0)):
        yield names[owner], {
            float(level[starts[g]]): rows[starts[g]:starts[g] + sizes[g]] for _, g in groups}


def check_populations(points: Sequence[Point], *, file: str, sheet: str | None,
                      min_levels: int) -> None:
    """Refuse a curve whose every level holds two separate groups of responses.

    Looked at only where :data:`min_levels` or more levels have 4 or more
    included standards: at every such level the widest split of the sorted
    responses must leave a gap of :data:`_GAP_RATIO` pooled standard
    deviations or more, and the ratio of the groups' means must agree
    within 2 % from level to level (a constant ratio is what two analytes
    of different sensitivity give; chance splits do not repeat it).  Groups
    injected one after the other (by injection order) are drift, which the
    drift check judges, not two analytes.

    Raises
    ------
    InputError
        Naming the analyte, the levels and what to do.
    """
    responses = point_values(points, "response")
    orders = point_values(points, "injection_order")
    for analyte, crowded in _crowded_levels(points, min_levels):
        ratios = []
        for rows in crowded.values():
            own = rows.tolist()
            values = [responses[at] for at in own]
            split = _best_split(values)
            if split is None or split[0] < _GAP_RATIO or split[1] <= 0 or _in_time(
                    [orders[at] for at in own], values, split):
                break
            ratios.append(split[2] / split[1])
        else:
            middle = statistics.median(ratios)
            if all(abs(r / middle - 1) <= _RATIO_AGREEMENT for r in ratios) and middle > 1.01:
                first = min(crowded)
                cells = ", ".join(points[at].source_cell for at in crowded[first][:6].tolist())
                raise InputError(
                    f"{analyte}: at each of its {len(crowded)} levels the standards' responses "
                    f"fall into two separate groups whose means differ by a factor of "
                    f"{middle:.3g} (at {first:g}: {cells}), so the curve may hold two analytes "
                    f"or lines; give the file an analyte column (or name the column that tells "
                    f"them apart in an import map: [columns] analyte = ...) and pass it with "
                    f"--map",
                    file=file, sheet=sheet,
                )
