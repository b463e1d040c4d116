"""Reading the samples to quantify: unknowns and QCs, with their dilution factors.

A samples file is a long table, one row per injection, under a header row
that may have title lines above it::

    Sample ID | Analyte | Sample type | Response | IS response | Dilution factor | Replicate | Nominal
    Sample weight (g) | Final volume (mL)

Only ``response`` is required, with at least one of ``sample_id``,
``analyte``, ``sample_type``, ``concentration`` (a QC's nominal) or
``dilution_factor`` beside it.  Headings are matched as the run importer
matches them (:mod:`calib.io.columns`); the dilution factor, which a run file
does not carry, is recognised here ("Dilution", "Dilution factor", "DF",
"Verdünnungsfaktor"...).  A blank dilution cell means 1; a factor below 1
(a concentrated sample, or a factor entered upside down) is refused unless
the caller confirms it.  A sample weight and a final volume, with their units
in the headings, turn the concentration into the sample's content
(:mod:`calib.quantify.amounts`); one without the other is refused.  An import
map (``--map``) names headings the detection does not know.

The sample type comes from a type cell or the sample name (``QC-L``,
``LQC``); a row whose name says nothing is a QC when it gives a nominal
concentration and an unknown otherwise.  Standards, blanks and zero samples in
the file are left out (and listed in the notes).  A response that is a
non-detect marker, an error value or empty sets the injection aside with the
reason, as the run importer does.  The file's cells are read with the run
importer's cell rules (:mod:`calib.io.cells`); workbooks are read with
python-calamine in the same time- and memory-limited child process as run
files (:mod:`calib.io.sandbox`), after the same archive limits
(:mod:`calib.io.limits`).
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from calib.errors import InputError
from calib.fit.qc import dilution_of
from calib.io.cells import Cell, CellError, is_blank, to_flag, to_integer, to_number, to_text
from calib.io.columns import column_letter
from calib.io.fastrows import column_of
from calib.io.files import load_file
from calib.io.limits import LARGEST_VALUE, check_magnitudes
from calib.io.numbers import find_marker
from calib.io.sampletypes import SampleTyper, type_from_name
from calib.io.table import Grid, cell_reference
from calib.options import SampleType
from calib.quantify.samplefile import (
    DILUTION_HEADINGS,
    SAMPLE_MAP_COLUMNS,
    VOLUME_HEADINGS,
    WEIGHT_HEADINGS,
    SamplesMap,
    book_grid,
    find_header,
    load_samples_map,
    no_header,
    text_grid,
)
from calib.quantify.sampletable import Reading, SampleRows, merge_rows, read_plain_rows
from calib.run import Point, Run, SourceInfo

__all__ = ["DILUTION_HEADINGS", "SAMPLE_MAP_COLUMNS", "VOLUME_HEADINGS", "WEIGHT_HEADINGS",
           "Reading", "SampleSheet", "SamplesMap", "dilution_of", "load_samples_map",
           "read_samples", "readings_from_run"]

_TEXT = (".csv", ".tsv", ".txt")
_BOOKS = (".xlsx", ".xlsm", ".xls", ".ods")
_WHAT = "a samples table (.xlsx, .xlsm, .xls, .ods, .csv, .tsv or .txt)"


@dataclass(frozen=True)
class SampleSheet:
    """The samples read from one file.

    Attributes
    ----------
    source : SourceInfo
        The file (name, SHA-256, sheet).
    rows : SampleRows
        Unknowns and QCs in file order, as columns (:attr:`readings` as objects).
    units : dict
        ``{"concentration": unit}`` when the nominal heading gives one.
    notes : tuple of str
        Rows left out (standards, blanks), in plain words.
    internal_standard : str or None
        The internal-standard response column (letter and heading) when the
        file has one and its ratios were formed; None otherwise.
    """

    source: SourceInfo
    rows: SampleRows
    units: dict[str, str]
    notes: tuple[str, ...] = ()
    internal_standard: str | None = None

    @property
    def readings(self) -> tuple[Reading, ...]:
        """Unknowns and QCs in file order, as :class:`Reading` objects (built on first use)."""
        return self.rows.readings


_PLAIN_NUMBER = re.compile(r"-?[0-9]{1,30}(?:\.[0-9]{1,30})?")


def readings_from_run(run: Run) -> tuple[Reading, ...]:
    """The unknowns and QCs of a run file, as readings (dilution factor 1 unless the point has one).

    Examples
    --------
    >>> from calib.run import Point, Run, SourceInfo
    >>> run = Run(SourceInfo("r.csv", "0" * 64), (
    ...     Point("A", 1.0, 10.0, "r.csv!C2"),
    ...     Point("A", float("nan"), 12.0, "r.csv!C3", sample_type=SampleType.UNKNOWN)))
    >>> [(r.point.source_cell, r.dilution_factor) for r in readings_from_run(run)]
    [('r.csv!C3', 1.0)]
    """
    return tuple(Reading(p, dilution_of(p)) for p in run.points
                 if p.sample_type in (SampleType.UNKNOWN, SampleType.QC))


class _TableReader:
    """Turns the body rows under a header into readings."""

    def __init__(self, grid: Grid, header_row: int, columns: dict[str, tuple[int, str, str | None]],
                 *, analyte: str | None, decimal: str | None, internal_standard: bool = True,
                 dilution_below_one: bool = False,
                 patterns: Mapping[SampleType, tuple[str, ...]] | None = None) -> None:
        self.grid = grid
        self.header_row = header_row
        self.columns = columns
        self.analyte = analyte
        self.decimal = decimal
        # A plain number (digits, one decimal point) reads the same by float(); a
        # decimal comma file reads "1.250" as 1250, so there the full parser decides.
        self.plain = _PLAIN_NUMBER if decimal != "," else None
        self.types: dict[str, SampleType] = {}
        self.at = {name: spec[0] for name, spec in columns.items()}
        # "run.csv!D" of every response cell: the row number is all that changes.
        self.response_at = (cell_reference(grid.label, columns["response"][0], 0)[:-1]
                            if "response" in columns else "")
        self.ratios = internal_standard and "is_response" in columns
        self.dilution_below_one = dilution_below_one
        self.typer = SampleTyper(patterns=dict(patterns or {}))
        self.readings: list[Reading] = []
        self.read_at: list[int] = []
        self.notes: list[str] = []
        if "analyte" not in columns and analyte is None:
            raise grid.error("the samples table has no analyte column; add one, or quantify "
                             "against a curve of a single analyte", row=header_row)
        self.mass_unit = self.volume_unit = 1.0
        self._amount_columns()

    def _amount_columns(self) -> None:
        """Check the sample weight and final volume columns: both or neither, with units."""
        from calib.quantify.amounts import mass_in_kg, volume_in_litres

        weight, volume = self.columns.get("sample_weight"), self.columns.get("final_volume")
        if weight is None and volume is None:
            return
        if weight is None or volume is None:
            have, lack = (("sample weight", "final volume") if volume is None
                          else ("final volume", "sample weight"))
            index, heading, _ = weight or volume  # type: ignore[misc]
            raise self.grid.error(
                f"the samples table gives the {have} (column {column_letter(index)}, {heading}) "
                f"but no {lack}; the content C × V / m needs both: add the {lack} column, or "
                f"remove the {have} column to report concentrations", row=self.header_row)
        for (index, heading, unit), convert, kind, example in (
                (weight, mass_in_kg, "mass", "Sample weight (g)"),
                (volume, volume_in_litres, "volume", "Final volume (mL)")):
            factor = convert(unit)
            if factor is None:
                found = f"the unit {unit!r}" if unit else "no unit"
                raise self.grid.error(
                    f"found {found} in the heading {heading!r}; expected a {kind} unit in the "
                    f"heading, such as {example!r}", row=self.header_row,
                    column=column_letter(index))
            if kind == "mass":
                self.mass_unit = factor
            else:
                self.volume_unit = factor

    def amount(self, row_index: int, row: list[Cell], name: str, what: str) -> float | None:
        value = self.number(row_index, row, name, f"the {what} (a number above 0)")
        if value is None:
            return None
        if not value > 0:
            raise self.fail(row_index, name, f"found the {what} {value:g}; expected a number "
                                             f"above 0")
        return value

    def cell(self, row: list[Cell], name: str) -> Cell:
        index = self.at.get(name)
        if index is None:
            return None
        return row[index] if index < len(row) else None

    def fail(self, row_index: int, name: str, message: str) -> InputError:
        index, heading, _ = self.columns[name]
        return self.grid.error(message, row=row_index, column=f"{column_letter(index)} ({heading})")

    def number(self, row_index: int, row: list[Cell], name: str, expected: str) -> float | None:
        value = self.cell(row, name)
        if self.plain is not None and type(value) is str and self.plain.fullmatch(value):
            return float(value)
        if is_blank(value):
            return None
        try:
            return to_number(value, decimal=self.decimal)  # type: ignore[arg-type]
        except CellError as exc:
            found = str(exc).split("; expected", 1)[0]
            raise self.fail(row_index, name, f"{found}; expected {expected}") from None

    def text(self, row: list[Cell], name: str) -> str | None:
        value = self.cell(row, name)
        return None if value is None else to_text(value)

    def measured(self, row_index: int, row: list[Cell], name: str, what: str
                 ) -> tuple[float, str | None]:
        """A response cell: its value, or nan and the reason it is set aside."""
        value = self.cell(row, name)
        if is_blank(value):
            return math.nan, f"no {what} in the file"
        if isinstance(value, str) and not (self.plain is not None and self.plain.fullmatch(value)):
            marker = find_marker(value)
            if marker is not None:
                return math.nan, marker.reason(what)
        number = self.number(row_index, row, name,
                             f"the {what} (a number; a marker such as ND sets it aside)")
        return float(number), None  # type: ignore[arg-type]

    def kind(self, row_index: int, row: list[Cell], name: str | None, nominal: float | None
             ) -> SampleType:
        text = self.text(row, "sample_type")
        if text is not None:
            # The same few words on every row: each is typed once.
            found = self.types.get(text)
            if found is None:
                try:
                    found = self.typer.from_cell(text)
                except CellError as exc:
                    raise self.fail(row_index, "sample_type", str(exc)) from None
                if found is not None:
                    self.types[text] = found
            if found is not None:
                return found
        named = type_from_name(name)
        if named is not None:
            return named
        return SampleType.QC if nominal is not None else SampleType.UNKNOWN

    def row(self, row_index: int, row: list[Cell]) -> None:
        name = self.text(row, "sample_id")
        nominal = self.number(row_index, row, "concentration",
                              "the nominal concentration of the QC (a number of 0 or more)")
        kind = self.kind(row_index, row, name, nominal)
        if kind not in (SampleType.UNKNOWN, SampleType.QC):
            self.notes.append(f"row {row_index + 1}{f' ({name})' if name else ''} is a "
                              f"{kind.value} sample, not one to quantify; it was left out")
            return
        if kind is SampleType.QC and (nominal is None or nominal <= 0):
            found = "no nominal concentration" if nominal is None else f"the nominal {nominal:g}"
            column = "concentration" if "concentration" in self.columns else "sample_type"
            if column not in self.columns:
                column = "response"
            raise self.fail(row_index, column, f"found {found} for a QC; expected its nominal "
                                               "concentration, a number above 0")
        dilution = self.number(row_index, row, "dilution_factor",
                               "a dilution factor above 0 (an empty cell means 1)")
        if dilution is not None and not dilution > 0:
            raise self.fail(row_index, "dilution_factor", f"found the dilution factor "
                                                          f"{dilution:g}; expected a number above 0")
        if dilution is not None and dilution < 1 and not self.dilution_below_one:
            raise self.fail(
                row_index, "dilution_factor",
                f"found the dilution factor {dilution:g}, below 1: the result would be "
                f"multiplied by {dilution:g}, as for a sample concentrated before measuring; "
                f"expected a factor of 1 or more (a 1 + 9 dilution is 10); if the sample was "
                f"concentrated, confirm with --dilution-below-one")
        mass = self.amount(row_index, row, "sample_weight", "sample weight")
        volume = self.amount(row_index, row, "final_volume", "final volume")
        if "sample_weight" in self.columns and (mass is None or volume is None) and (
                kind is SampleType.UNKNOWN or (mass, volume) != (None, None)):
            # A QC is a solution: it may leave both empty; an unknown may not leave either.
            name_ = "sample_weight" if mass is None else "final_volume"
            what = "sample weight" if mass is None else "final volume"
            raise self.fail(row_index, name_, f"found an empty cell; expected the {what} (a "
                                              f"number above 0; only a QC may leave the weight "
                                              f"and the volume both empty)")
        reasons: list[str] = []
        response, why = self.measured(row_index, row, "response", "response")
        if why:
            reasons.append(why)
        analyte_response = is_response = None
        if self.ratios and not why:
            is_value, is_why = self.measured(row_index, row, "is_response",
                                             "internal-standard response")
            analyte_response = response
            if is_why or not is_value > 0:
                reasons.append((is_why or f"internal-standard response is {is_value:g}")
                               + "; the ratio cannot be formed")
                response = math.nan
            else:
                is_response = is_value
                response = response / is_value
        included = True
        if "include" in self.columns:
            try:
                included = to_flag(self.cell(row, "include"))
            except CellError as exc:
                raise self.fail(row_index, "include", str(exc)) from None
        if not included:
            reasons.insert(0, self.text(row, "exclusion_reason") or "excluded by the analyst")
        replicate = order = None
        for key in ("replicate", "injection_order"):
            value = self.cell(row, key)
            if not is_blank(value):
                try:
                    number = to_integer(value)
                except CellError as exc:
                    raise self.fail(row_index, key, str(exc)) from None
                replicate, order = (number, order) if key == "replicate" else (replicate, number)
        point = Point(
            analyte=self.text(row, "analyte") or self.analyte or "",
            concentration=float(nominal) if kind is SampleType.QC else math.nan,
            response=response, source_cell=f"{self.response_at}{row_index + 1}",
            sample_type=kind, replicate=replicate, included=not reasons,
            exclusion_reason="; ".join(reasons) if reasons else None, sample_id=name,
            injection_order=order, is_response=is_response, analyte_response=analyte_response,
            level=self.text(row, "level"),
        )
        if not point.analyte:
            raise self.fail(row_index, "analyte", "found an empty cell; expected the analyte name")
        self.read_at.append(row_index)
        self.readings.append(Reading(
            point, 1.0 if dilution is None else float(dilution),
            mass_kg=None if mass is None else mass * self.mass_unit,
            volume_l=None if volume is None else volume * self.volume_unit))

    def read(self) -> SampleRows:
        """The table's readings: plain rows a column at a time, the others row by row."""
        rows = self.grid.rows
        start = self.header_row + 1
        # Up to the first row without a response (a blank line, or notes under the table)
        # every row is a reading, a set-aside injection or a sample left out.
        stop = start
        index = self.at.get("response")
        if index is not None:
            body = rows[start:]
            column = column_of(body, index, min(map(len, body), default=0))
            # Cells that may be blank (a rare few), then the first that is.
            maybe = [k for k, v in enumerate(column)
                     if type(v) is not str or not v or v[0].isspace()]
            stop = start + next((k for k in maybe if is_blank(column[k])), len(column))
        plain, at, left = read_plain_rows(self, start, stop)
        for row_index in left:
            self.row(row_index, list(rows[row_index]))
        seen_gap = False
        for row_index in range(stop, len(rows)):
            row = list(rows[row_index])
            if all(is_blank(c) for c in row):
                seen_gap = bool(self.readings) or bool(at) or seen_gap
                continue
            # Notes under the table, after a blank line, carry no response.
            if seen_gap and is_blank(self.cell(row, "response")):
                break
            self.row(row_index, row)
        return merge_rows([(plain, at),
                           (SampleRows.from_readings(self.readings), self.read_at)])


def read_samples(path: str | os.PathLike[str], *, sheet: str | int | None = None,
                 analyte: str | None = None, map: SamplesMap | None = None,
                 internal_standard: bool = True,
                 dilution_below_one: bool = False) -> SampleSheet:
    """Read the unknowns and QCs of a samples file.

    Parameters
    ----------
    path : str or path-like
        ``.xlsx``, ``.xlsm``, ``.xls``, ``.ods``, ``.csv``, ``.tsv`` or ``.txt``.
    sheet : str or int, optional
        Workbook sheet by name or 0-based index; by default the first sheet
        holding a samples table.
    analyte : str, optional
        Analyte of every row when the table has no analyte column.
    map : SamplesMap, optional
        Import map (:func:`load_samples_map`): headings, sheet, header row,
        text settings, units and sample-type patterns.
    internal_standard : bool
        Form the ratio to the internal standard when the file has its column
        (True); False reads the raw responses and leaves that column aside.
    dilution_below_one : bool
        Accept dilution factors below 1 (a concentrated sample); refused otherwise.

    Returns
    -------
    SampleSheet

    Raises
    ------
    InputError
        When the file cannot be read or a cell cannot be used; the message
        names the file, sheet, row and column.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> text = ("Fernbrook Water Laboratory\\nSample,Area,Dilution factor,Nominal (mg/L)\\n"
    ...         "FW-101,5230,,\\nFW-102,18800,10,\\nQC-M,8110,,4.0\\n")
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder, "batch.csv")
    ...     _ = path.write_text(text, encoding="utf-8")
    ...     sheet = read_samples(path, analyte="Nitrate-N")
    >>> [(r.point.sample_id, r.point.sample_type.value, r.dilution_factor)
    ...  for r in sheet.readings]
    [('FW-101', 'unknown', 1.0), ('FW-102', 'unknown', 10.0), ('QC-M', 'qc', 1.0)]
    >>> sheet.readings[2].point.concentration, sheet.units
    (4.0, {'concentration': 'mg/L'})
    """
    suffix = Path(path).suffix.lower()
    if suffix not in _TEXT + _BOOKS:
        found = f"the file type {suffix!r}" if suffix else "a file name without an extension"
        raise InputError(f"found {found}; expected {_WHAT}", file=str(path))
    raw = load_file(path, what=_WHAT)
    base = map.base if map is not None else None
    if sheet is None and base is not None:
        sheet = base.sheet
    if analyte is None and base is not None:
        analyte = base.analyte
    decimal: str | None = None
    if suffix in _TEXT:
        if sheet is not None:
            raise InputError(f"a text file has no sheets; got sheet {sheet!r} (leave the sheet "
                             "out)", file=raw.given)
        grid, source, decimal = text_grid(raw, map)
    else:
        grid, source = book_grid(raw, sheet, map)
    found = find_header(grid, map)
    if found is None:
        raise no_header(grid, map)
    header_row, columns = found
    reader = _TableReader(grid, header_row, columns, analyte=analyte, decimal=decimal,
                          internal_standard=internal_standard,
                          dilution_below_one=dilution_below_one,
                          patterns=base.sample_types if base is not None else None)
    rows = reader.read()
    _check_magnitudes(rows, file=raw.given)
    units = {}
    if "concentration" in columns and columns["concentration"][2]:
        units["concentration"] = str(columns["concentration"][2])
    elif base is not None and base.units.get("concentration"):
        units["concentration"] = str(base.units["concentration"])
    is_column = None
    if reader.ratios:
        index, heading, _ = columns["is_response"]
        is_column = f"column {column_letter(index)} ({heading})"
    return SampleSheet(replace(source, layout="long"), rows, units, tuple(reader.notes),
                       internal_standard=is_column)


def _check_magnitudes(rows: SampleRows, *, file: str) -> None:
    """:func:`calib.io.limits.check_magnitudes` of the readings, a column at a time."""
    values = [rows.response, rows.nominal]
    values += [np.array(rows.extra[k], dtype=float) for k in ("is_response", "analyte_response")
               if k in rows.extra and None not in rows.extra[k]]
    if any(k in rows.extra and None in rows.extra[k] for k in ("is_response",
                                                               "analyte_response")):
        check_magnitudes(rows.points(), file=file)
        return
    size = np.abs(np.vstack(values)) if len(rows) else np.empty((0, 0))
    with np.errstate(invalid="ignore"):
        wrong = ((size > LARGEST_VALUE) | ((size < 1.0 / LARGEST_VALUE) & (size != 0.0))).any(
            axis=0) if size.size else np.zeros(0, dtype=bool)
    if wrong.any():
        # The first offending reading, refused in check_magnitudes' own words.
        check_magnitudes(rows.points()[: int(np.argmax(wrong)) + 1], file=file)
