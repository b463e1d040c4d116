"""Reading the body rows of one table into points.

Each non-blank row below a header gives one point (long layout) or one point
per analyte (wide layout).  The rules, in the order a row is read:

- the sample type comes from the type column, or else from the sample name
  (``Std 3``, ``Blank``, ``QC-L``); a name that says nothing makes a
  standard of a row with a concentration and an unknown of one without;
- a standard's or QC's concentration must be a number of 0 or more; a
  blank's or zero sample's empty concentration is 0 and an unknown's is NaN;
- a response that is a non-detect or over-range marker or a spreadsheet
  error value makes an excluded point with that reason; an empty response is
  refused, unless the analyst already excluded the row;
- with an internal-standard column the response is the ratio of the
  analyte's response to the internal standard's, both kept on the point;
- a unit written after a number (``12.5 ng/mL``) must agree with the
  heading's unit, or with the other cells of its column;
- a row the workbook hides becomes an excluded point saying so.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, MutableSequence, Sequence
from dataclasses import dataclass, field
from typing import TypeVar

from calib.errors import InputError
from calib.io.cells import (
    Cell,
    CellError,
    describe,
    is_blank,
    to_flag,
    to_integer,
    to_name,
    to_text,
)
from calib.io.columns import Column, squash
from calib.io.decimals import DecimalReader
from calib.io.fastrows import BodyColumns, plan_rows
from calib.io.layout import Table
from calib.io.numbers import (
    Marker,
    NumberTextError,
    find_marker,
    normalise_unit,
    split_unit_suffix,
)
from calib.io.sampletypes import SampleTyper
from calib.io.summary_rows import find_summary_rows
from calib.io.table import Grid, reference_prefix
from calib.options import SampleType
from calib.run import Point, PointColumns, point_values

__all__ = ["TableRead", "read_table"]

_T = TypeVar("_T")
_MEASURES = ("concentration", "response", "is_response")
_HIDDEN = "the row is hidden in the workbook"
_MARKER_HINT = "a marker such as ND or <LOD sets the point aside"
# Headings of a free remark rather than a reason to exclude: text there on a row whose include
# cell says yes is a remark; on a row whose include cell is empty it is ambiguous.
_REMARK_HEADINGS = frozenset(squash(word) for word in (
    "comment", "comments", "remark", "remarks", "note", "notes", "bemerkung", "kommentar",
    "anmerkung", "commentaire", "remarque", "comentario", "observaciones", "nota"))


@dataclass
class TableRead:
    """The points of one table and what was learnt reading them.

    Attributes
    ----------
    points : list of Point, or PointColumns
        In row order (wide tables: each row's analytes left to right); held as
        :class:`~calib.run.PointColumns` when every row of a long table is plain.
    rows : list of int
        0-based row of each point.
    units : dict
        Units per analyte and column, ``{"Nitrate": {"concentration": "mg/L"}}``.
    columns : list of str
        How each heading was recognised, for the run's source.
    warnings : list of str
        Hidden rows that could not be read, and similar.
    decimal : str or None
        The decimal mark the numbers showed, if any text number needed one.
    internal_standards : list of tuple
        ``(group, cell, response, sample name)`` of every internal-standard
        response read; one group per internal standard (per analyte in a long
        table, per column in a wide one).
    """

    points: MutableSequence[Point] = field(default_factory=list)
    rows: list[int] = field(default_factory=list)
    units: dict[str, dict[str, str]] = field(default_factory=dict)
    columns: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    decimal: str | None = None
    internal_standards: list[tuple[str, str, float, str | None]] = field(default_factory=list)


class _Units:
    """The unit each measurement column is in: from its heading, the map or its cells."""

    def __init__(self, defaults: Mapping[str, tuple[str, str]]) -> None:
        self.defaults = defaults
        self.expected: dict[int, tuple[str, str]] = {}
        self.seen: dict[int, tuple[str, int]] = {}

    def expect(self, column: Column) -> None:
        if column.unit is not None:
            self.expected[column.index] = (column.unit, "heading")
        elif column.name in self.defaults:
            self.expected[column.index] = self.defaults[column.name]

    def check(self, column: Column, unit: str, text: str, row: int) -> str | None:
        """None when ``unit`` fits the column; otherwise the problem."""
        expected = self.expected.get(column.index)
        if expected is not None:
            if normalise_unit(unit) != normalise_unit(expected[0]):
                return (f"found {text!r}, in {unit}; expected a value in {expected[0]} as the "
                        f"{expected[1]} says (calib does not convert units)")
            return None
        first = self.seen.get(column.index)
        if first is None:
            self.seen[column.index] = (unit, row)
        elif normalise_unit(first[0]) != normalise_unit(unit):
            return (f"found {text!r}, in {unit}; expected {first[0]} as in row {first[1] + 1} "
                    f"(calib does not convert units)")
        return None

    def of(self, column: Column) -> str | None:
        if column.index in self.expected:
            return self.expected[column.index][0]
        seen = self.seen.get(column.index)
        return seen[0] if seen else None


@dataclass(frozen=True)
class _Measure:
    value: float
    marker: Marker | None = None
    blank: bool = False


_BLANK = _Measure(math.nan, blank=True)


class _TableReader:
    """Reads the body rows of one table (written for speed: exports run to 10^5 rows)."""

    def __init__(self, grid: Grid, table: Table, *, analyte: str | None, typer: SampleTyper,
                 default_units: Mapping[str, tuple[str, str]]) -> None:
        self.grid = grid
        self.table = table
        header = table.header
        self.shared = dict(header.shared)
        self.index = {name: column.index for name, column in self.shared.items()}
        self.analyte = analyte
        self.typer = typer
        self.units = _Units(default_units)
        self.numbers = DecimalReader(grid, header.measurement_indices(), table.body)
        self.memo: dict[tuple[str, type, Cell], object] = {}
        self.prefix = reference_prefix(grid.label)
        self.current_analyte = analyte
        self.result = TableRead()
        self.internal_standards = self.result.internal_standards
        # (analyte, concentration column, response column, internal-standard column)
        self.targets: list[tuple[str | None, Column | None, Column, Column | None]] = []
        if header.layout == "long":
            self.targets.append((None, self.shared["concentration"], self.shared["response"],
                                 self.shared.get("is_response")))
        else:
            for name, own in header.analytes.items():
                self.targets.append((name, own.get("concentration", self.shared.get(
                    "concentration")), own["response"], own.get("is_response",
                                                               self.shared.get("is_response"))))
        for column in header.all_columns():
            if column.name in _MEASURES:
                self.units.expect(column)
        # "Run!C" for each column, so a source cell is one string join per point.
        self.cell_prefix = {c.index: f"{self.prefix}{c.letter}" for c in header.all_columns()}

    # -- cells -------------------------------------------------------------------------------

    def fail(self, row: int, column: Column, message: str) -> InputError:
        return self.grid.error(message, row=row, column=column.label)

    def raw(self, row: Sequence[Cell], name: str) -> Cell:
        index = self.index.get(name, -1)
        return row[index] if 0 <= index < len(row) else None

    def parse(self, name: str, row_index: int, row: Sequence[Cell],
              parser: Callable[[Cell], _T]) -> _T:
        value = self.raw(row, name)
        key = (name, type(value), value)  # type() keeps True apart from 1
        try:
            return self.memo[key]  # type: ignore[return-value]
        except KeyError:
            pass
        try:
            result = parser(value)
        except CellError as exc:
            raise self.fail(row_index, self.shared[name], str(exc)) from None
        self.memo[key] = result
        return result

    def whole_number(self, row_index: int, row: Sequence[Cell], name: str) -> int | None:
        """A replicate number or injection order; None for an empty cell or no such column."""
        index = self.index.get(name)
        if index is None or index >= len(row):
            return None
        value = row[index]
        if type(value) is float and value.is_integer():
            return int(value)
        if is_blank(value):
            return None
        return self.parse(name, row_index, row, to_integer)

    def measure(self, row_index: int, row: Sequence[Cell], column: Column,
                expected: str) -> _Measure:
        value = row[column.index] if column.index < len(row) else None
        kind = type(value)
        if kind is float or kind is int:
            number = float(value)  # type: ignore[arg-type]
            if math.isfinite(number):
                return _Measure(number)
            raise self.fail(row_index, column, f"found the number {value!r}; expected {expected}")
        if is_blank(value):
            return _BLANK
        if not isinstance(value, str):
            raise self.fail(row_index, column, f"found {describe(value)}; expected {expected}")
        text = value.strip()
        marker = find_marker(text)
        if marker is not None:
            return _Measure(math.nan, marker)
        number_text, unit = split_unit_suffix(text)
        try:
            number = self.numbers.parse(number_text)
        except NumberTextError as exc:
            raise self.fail(row_index, column, str(exc)) from None
        mixed = self.numbers.note_shape(column.index, row_index, number_text)
        if mixed is not None:
            raise self.fail(row_index, column, mixed)
        if number is None:
            raise self.fail(row_index, column, f"found {describe(value)}; expected {expected}")
        if unit is not None:
            problem = self.units.check(column, unit, text, row_index)
            if problem is not None:
                raise self.fail(row_index, column, problem)
        return _Measure(number)

    def is_group(self, column: Column) -> str:
        if self.table.header.layout == "long":
            return f"the internal standard of {self.current_analyte}"
        if column.analyte is not None:
            return f"the internal standard of {column.analyte}"
        return f"the internal standard in column {column.label}"

    def empty(self, row_index: int, column: Column) -> str:
        """What an empty-looking cell holds, for messages (a formula with no saved result)."""
        explain = self.grid.explain_empty
        explained = explain(row_index, column.index) if explain is not None else None
        return explained or "an empty cell"

    # -- rows --------------------------------------------------------------------------------

    def sample_type(self, row_index: int, row: Sequence[Cell], name: str | None) -> SampleType:
        if "sample_type" in self.index:
            kind = self.parse("sample_type", row_index, row,
                              lambda v: self.typer.from_cell(to_text(v)))
            if kind is not None:
                return kind
        try:
            return self.typer.from_name(name, has_concentration=self.has_concentration(row))
        except CellError as exc:
            raise self.fail(row_index, self.shared["sample_id"], str(exc)) from None

    def concentration(self, row_index: int, row: Sequence[Cell], column: Column,
                      kind: SampleType) -> float:
        value = row[column.index] if column.index < len(row) else None
        if type(value) is float and 0 <= value < math.inf:
            return value  # the common case, read without the general path
        expected = ("the nominal concentration of the "
                    f"{'QC' if kind is SampleType.QC else kind.value} (a number of 0 or more)")
        found = self.measure(row_index, row, column, expected)
        if found.blank or found.marker is not None:
            if kind is SampleType.STANDARD or kind is SampleType.QC:
                what = self.empty(row_index, column) if found.blank else describe(
                    row[column.index])
                raise self.fail(row_index, column, f"found {what}; expected {expected}")
            return math.nan if kind is SampleType.UNKNOWN else 0.0
        if found.value < 0:
            raise self.fail(row_index, column,
                            f"found the negative concentration {found.value:g}; expected "
                            f"{expected}")
        return found.value

    def has_concentration(self, row: Sequence[Cell]) -> bool:
        for _, conc, _, _ in self.targets:
            if conc is None:
                continue
            value = row[conc.index] if conc.index < len(row) else None
            if is_blank(value):
                continue
            marker = find_marker(value) if isinstance(value, str) else None
            # An error value stands where a concentration was meant to be; ND or "—" do not.
            if marker is None or marker.kind == "error":
                return True
        return False

    def row_points(self, row_index: int, row: Sequence[Cell]) -> None:
        name = self.parse("sample_id", row_index, row, to_name) if "sample_id" in self.index \
            else None
        kind = self.sample_type(row_index, row, name)
        included = True
        if "include" in self.index:
            included = self.parse("include", row_index, row, to_flag)
        reason = None
        if included and "exclusion_reason" in self.index:
            self.reason_on_included(row_index, row)
        if not included:
            reason = to_text(self.raw(row, "exclusion_reason"))
            if reason is None:
                flag = to_text(self.raw(row, "include"))
                raise self.fail(
                    row_index, self.shared["include"],
                    f"the point is excluded (include is {flag!r}) but gives no "
                    f"exclusion_reason; every exclusion needs a reason",
                )
        hidden = row_index in self.grid.hidden_rows
        replicate = self.whole_number(row_index, row, "replicate")
        order = self.whole_number(row_index, row, "injection_order")
        level = to_text(self.raw(row, "level"))
        row_analyte = self.analyte
        if "analyte" in self.index:
            row_analyte = self.parse("analyte", row_index, row, to_name)
            if row_analyte is None:
                raise self.fail(row_index, self.shared["analyte"],
                                "found an empty cell; expected the analyte name")
        for target, conc_column, response_column, is_column in self.targets:
            analyte = target or row_analyte
            assert analyte is not None
            self.current_analyte = analyte
            if target is not None and conc_column is not None and conc_column.analyte and \
                    is_blank(row[conc_column.index] if conc_column.index < len(row) else None) \
                    and is_blank(row[response_column.index]
                                 if response_column.index < len(row) else None):
                continue  # this standard mix holds no such analyte
            assert conc_column is not None
            concentration = self.concentration(row_index, row, conc_column, kind)
            reasons = [] if reason is None else [reason]
            response, analyte_response, is_response = self.responses(
                row_index, row, response_column, is_column, kind,
                lenient=not included or hidden, reasons=reasons, sample=name,
            )
            if hidden:
                reasons.append(_HIDDEN)
            self.result.points.append(Point(
                analyte=analyte,
                concentration=concentration,
                response=response,
                source_cell=f"{self.cell_prefix[response_column.index]}{row_index + 1}",
                sample_type=kind,
                replicate=replicate,
                included=not reasons,
                exclusion_reason="; ".join(reasons) if reasons else None,
                sample_id=name,
                injection_order=order,
                is_response=is_response,
                analyte_response=analyte_response,
                level=level,
            ))
            self.result.rows.append(row_index)

    def reason_on_included(self, row_index: int, row: Sequence[Cell]) -> None:
        """Refuse a reason to exclude on a row the file marks as included (never drop it)."""
        value = self.raw(row, "exclusion_reason")
        if value is None or value == "":
            return  # the common case, decided at once
        text = to_text(value)
        if text is None:
            return
        column = self.shared["exclusion_reason"]
        flag = self.raw(row, "include") if "include" in self.index else None
        remark = squash(column.header) in _REMARK_HEADINGS or squash(
            column.header.split("(")[0]) in _REMARK_HEADINGS
        if remark and ("include" not in self.index or not is_blank(flag)):
            # A remark beside an explicit yes, or a comments column without include: the row is
            # used as it stands, and the remark is said, never dropped.
            cell = f"{self.cell_prefix[column.index]}{row_index + 1}"
            self.result.warnings.append(
                f"{cell}: the remark {text!r} is shown here only; the row is used as it stands "
                f"(calib does not read remarks as exclusions; to leave a point out, say so in an "
                f"include column or with --exclude, by cell or sample name)")
            return
        if "include" not in self.index:
            marked = "the table has no include column, so the row counts as included"
        elif is_blank(flag):
            marked = f"its include cell {self.shared['include'].letter}{row_index + 1} is empty"
        else:
            marked = (f"its include cell {self.shared['include'].letter}{row_index + 1} says "
                      f"{to_text(flag)!r}")
        raise self.fail(
            row_index, column,
            f"found the exclusion reason {text!r} on a row marked included ({marked}); write "
            f"no in the include column to exclude the point, or clear the reason to keep it",
        )

    def responses(self, row_index: int, row: Sequence[Cell], column: Column,
                  is_column: Column | None, kind: SampleType, *, lenient: bool,
                  reasons: list[str], sample: str | None) -> tuple[float, float | None, float | None]:
        """``(response, analyte_response, is_response)``; reasons to exclude are appended."""
        expected = f"the response (a number; {_MARKER_HINT})"
        found = self.measure(row_index, row, column, expected)
        if found.blank and not lenient:
            raise self.fail(row_index, column,
                            f"found {self.empty(row_index, column)}; expected {expected}")
        if found.marker is not None:
            reasons.append(found.marker.reason("response"))
        elif found.blank and not reasons:
            reasons.append("no response in the file")
        if is_column is None:
            return found.value, None, None
        is_expected = f"the internal-standard response (a number; {_MARKER_HINT})"
        standard = self.measure(row_index, row, is_column, is_expected)
        ratio_note = "; the ratio cannot be formed"
        if standard.blank:
            if kind is SampleType.BLANK:
                reasons.append("no internal-standard response (a blank without internal "
                               "standard)" + ratio_note)
            elif lenient:
                reasons.append("no internal-standard response" + ratio_note)
            else:
                raise self.fail(row_index, is_column,
                                f"found {self.empty(row_index, is_column)}; expected "
                                f"{is_expected}")
            return math.nan, found.value, None
        if standard.marker is not None:
            reasons.append(standard.marker.reason("internal-standard response") + ratio_note)
            return math.nan, found.value, None
        if standard.value <= 0:
            reasons.append(f"internal-standard response is {standard.value:g}{ratio_note}")
            return math.nan, found.value, standard.value
        self.internal_standards.append(
            (self.is_group(is_column), f"{self.cell_prefix[is_column.index]}{row_index + 1}",
             standard.value, sample)
        )
        return found.value / standard.value, found.value, standard.value

    # -- table -------------------------------------------------------------------------------

    def read(self) -> TableRead:
        rows = self.grid.rows
        body = self.table.body
        cut = BodyColumns(rows[body.start:body.stop] if body.step == 1 else
                          [rows[index] for index in body])
        summaries = find_summary_rows(self.grid, self.table, cut=cut)
        self.result.warnings.extend(summaries.values())
        planned = self.plan(summaries, cut)
        plan = planned[0] if planned is not None else None
        is_column = self.targets[0][3]
        is_prefix = self.cell_prefix[is_column.index] if is_column is not None else ""
        points, at_rows = self.result.points, self.result.rows
        if isinstance(plan, PointColumns):
            # Every row is plain (the usual export): the run holds the columns as they are.
            if is_column is not None:
                self.internal_standards.extend(
                    (f"the internal standard of {analyte}", f"{is_prefix}{index + 1}",
                     response, sample)
                    for analyte, index, response, sample in zip(
                        plan.column("analyte"), body, plan.column("is_response"),
                        plan.column("sample_id")))
            self.result.points = plan
            at_rows.extend(body)
            plan, body = None, range(0)
        for index in body:
            point = plan[index - body.start] if plan is not None else None
            if point is not None:
                # A plain row, read column-wise: no cell of it can be refused.
                if is_column is not None:
                    self.internal_standards.append((
                        f"the internal standard of {point.analyte}", f"{is_prefix}{index + 1}",
                        point.is_response, point.sample_id))
                points.append(point)
                at_rows.append(index)
                continue
            row = rows[index]
            if index in summaries or all(map(is_blank, row)):
                continue
            if index in self.grid.hidden_rows:
                before = len(self.result.points)
                try:
                    self.row_points(index, row)
                except InputError as exc:
                    del self.result.points[before:], self.result.rows[before:]
                    self.result.warnings.append(
                        f"row {index + 1} is hidden in the workbook and cannot be read "
                        f"({exc.message}); it was left out"
                    )
                continue
            self.row_points(index, row)
        self.result.decimal = self.numbers.decimal if self.numbers.settled else None
        self._describe()
        return self.result

    def plan(self, summaries: Mapping[int, str], cut: BodyColumns
             ) -> tuple[PointColumns | list[Point | None], bool] | None:
        """The points of the plain rows of a long table, read column-wise, and whether every
        row is plain (None for other layouts)."""
        if self.table.header.layout != "long" or len(self.targets) != 1:
            return None
        _, conc_column, response_column, is_column = self.targets[0]
        if conc_column is None or self.table.body.step != 1:
            return None
        body = self.table.body
        skip = set(summaries) | set(self.grid.hidden_rows)
        return plan_rows(self.grid.rows[body.start:body.stop], index=self.index,
                         columns=(conc_column, response_column, is_column),
                         analyte=self.analyte, typer=self.typer, skip=skip,
                         first_row=body.start, prefix=self.cell_prefix[response_column.index],
                         cut=cut)

    def _describe(self) -> None:
        header = self.table.header
        analytes = set(point_values(self.result.points, "analyte"))
        for column in header.all_columns():
            unit = self.units.of(column) if column.name in _MEASURES else None
            text = f"{self.grid.reference(column.index, header.row)} {column.header!r} -> "
            text += column.name + (f" of {column.analyte}" if column.analyte else "")
            self.result.columns.append(text + (f" [{unit}]" if unit else ""))
            if unit is None:
                continue
            owners = [column.analyte] if column.analyte else sorted(analytes)
            name = column.name
            if name == "response" and any(t[0] == column.analyte and t[3] is not None
                                          for t in self.targets):
                name = "analyte_response"  # the fitted response is then a ratio
            for owner in owners:
                self.result.units.setdefault(owner, {}).setdefault(name, unit)
        for target, _, _, is_column in self.targets:
            if is_column is None:
                continue
            for owner in [target] if target else sorted(analytes):
                self.result.units.setdefault(owner, {})["response"] = "ratio"


def read_table(grid: Grid, table: Table, *, analyte: str | None, typer: SampleTyper,
               default_units: Mapping[str, tuple[str, str]] | None = None) -> TableRead:
    """Read the points of one table.

    Parameters
    ----------
    grid : Grid
        The sheet or text file.
    table : Table
        The table, as :func:`calib.io.layout.find_tables` found it.
    analyte : str or None
        Analyte of a long table without an analyte column.
    typer : SampleTyper
        Reads sample types (with an import map's patterns).
    default_units : mapping, optional
        Units for columns whose heading gives none, ``{"concentration":
        ("mg/L", "import map")}`` (the second item says where it came from).

    Raises
    ------
    InputError
        Naming the row and column of the first cell that cannot be used.

    Examples
    --------
    >>> from calib.io.layout import find_tables
    >>> rows = [["Sample", "Conc (ng/mL)", "Area", "IS area"], ["Cal 1", 1, 2050.0, 101000.0],
    ...         ["Blank", "", "ND", ""], ["QC-L", 3, "6 210", 99500.0]]
    >>> grid = Grid(rows, file="kx.csv", label="kx.csv")
    >>> read = read_table(grid, find_tables(grid)[0], analyte="KX-214", typer=SampleTyper())
    >>> [(p.sample_type.value, round(p.response, 5), p.included) for p in read.points]
    [('standard', 0.0203, True), ('blank', nan, False), ('qc', 0.06241, True)]
    >>> read.points[1].exclusion_reason
    "response not detected ('ND' in the file); no internal-standard response (a blank without \
internal standard); the ratio cannot be formed"
    """
    reader = _TableReader(grid, table, analyte=analyte, typer=typer,
                          default_units=default_units or {})
    return reader.read()
