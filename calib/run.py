"""The tidy form of one instrument run: every injection with its origin.

Readers in :mod:`calib.io` turn spreadsheets into a :class:`Run`; everything
downstream (fitting, checks, records) works on this form only.
"""

from __future__ import annotations

import gc
from collections.abc import Iterable, Iterator, MutableSequence, Sequence
from dataclasses import dataclass, field, fields
from operator import attrgetter
from typing import Any, overload

from calib.options import SampleType

__all__ = ["Point", "PointColumns", "Run", "SourceInfo", "held_points", "point_values",
           "response_basis"]


@dataclass(frozen=True)
class Point:
    """One injection of one analyte.

    Attributes
    ----------
    analyte : str
        Analyte name as written in the file.
    concentration : float
        Nominal concentration (``nan`` for unknowns).
    response : float
        Instrument response (peak area, absorbance, counts...).
    source_cell : str
        Where the response was read, ``Sheet!C7`` for workbooks, ``file.csv!C7``
        for text files (column letter and 1-based row as a spreadsheet shows).
    sample_type : SampleType
        Standard, blank, zero, QC or unknown.
    replicate : int or None
        Replicate number if the file gives one.
    included : bool
        False when the analyst excluded the point (then ``exclusion_reason`` says why).
    exclusion_reason : str or None
        The analyst's reason for excluding the point.
    sample_id : str or None
        Sample name or identifier when the file gives one.
    injection_order : int or None
        Position of the injection in the run sequence when the file gives one.
    is_response : float or None
        Response of the internal standard when the file gives one; ``response``
        is then the ratio ``analyte_response / is_response``.
    analyte_response : float or None
        The analyte's own response when ``response`` is a ratio to an internal
        standard; None otherwise.
    level : str or None
        The calibration level as the file labels it (``"L3"``, ``"Cal 3"``).

    A point set aside because its response is missing or unreadable (a
    non-detect marker, a spreadsheet error value) has ``response`` NaN,
    ``included`` False and the reason in ``exclusion_reason``.
    """

    analyte: str
    concentration: float
    response: float
    source_cell: str
    sample_type: SampleType = SampleType.STANDARD
    replicate: int | None = None
    included: bool = True
    exclusion_reason: str | None = None
    sample_id: str | None = None
    injection_order: int | None = None
    is_response: float | None = None
    analyte_response: float | None = None
    level: str | None = None


_FIELDS = tuple(f.name for f in fields(Point))


def _made(rows: Iterable[tuple[Any, ...]]) -> list[Point]:
    """``[Point(*values) for values in rows]``, made without the frozen dataclass's guarded
    assignment of each field (the values are in field order and already checked; each point
    is equal to, hashes and prints as the one ``Point(*values)`` makes)."""
    made: list[Point] = []
    append, new, names = made.append, object.__new__, _FIELDS
    for values in rows:
        point = new(Point)
        point.__dict__.update(zip(names, values))
        append(point)
    return made


class PointColumns(MutableSequence[Point]):
    """Points held as one list per field: a sequence of :class:`Point` made on demand.

    A long export holds 10^5 injections; checking them a field at a time over
    lists costs a fraction of making and reading 10^5 objects.  The readers
    build a run's points so, the import checks read :meth:`column`, and a
    :class:`Point` is made only when one is asked for (``columns[i]``,
    iterating).  Setting ``columns[i] = point`` writes the point's fields back.

    The source cells of a block of rows may be given as a column prefix and
    a first row (``"Run!E"``, 8): the text of each is made when first read.

    Examples
    --------
    >>> cols = PointColumns.from_points([Point("Zn", 1.0, 10.0, "A2"), Point("Zn", 2.0, 21.0, "A3")])
    >>> cols.column("response"), cols[1].source_cell, len(cols)
    ([10.0, 21.0], 'A3', 2)
    >>> cols[0] = Point("Cu", 1.0, 10.0, "A2")
    >>> cols.column("analyte"), cols.points() == [cols[0], cols[1]]
    (['Cu', 'Zn'], True)
    """

    def __init__(self, columns: dict[str, list[Any]] | None = None, *,
                 cells: tuple[str, int] | None = None) -> None:
        self._columns: dict[str, list[Any]] = {name: [] for name in _FIELDS}
        self._cells = cells  # (prefix, first 1-based row) of cells not yet written out
        if columns is not None:
            self._columns.update(columns)
        lengths = {len(values) for name, values in self._columns.items()
                   if not (cells is not None and name == "source_cell")}
        if len(lengths) > 1:
            raise ValueError(f"columns of different lengths: {sorted(lengths)}")
        self._length = lengths.pop() if lengths else 0

    @classmethod
    def from_points(cls, points: Iterable[Point]) -> PointColumns:
        """The columns of ``points`` (or ``points`` itself when it is a :class:`PointColumns`)."""
        if isinstance(points, PointColumns):
            return points
        points = points if isinstance(points, (list, tuple)) else list(points)
        return cls({name: list(map(attrgetter(name), points)) for name in _FIELDS})

    def column(self, name: str) -> list[Any]:
        """Field ``name`` of every point, in order (a shared list: read it, never change it)."""
        if name == "source_cell" and self._cells is not None:
            prefix, first = self._cells
            self._columns[name] = [f"{prefix}{row}" for row in range(first, first + self._length)]
            self._cells = None
        return self._columns[name]

    def points(self) -> list[Point]:
        """Every point, made at once."""
        return _made(zip(*(self.column(name) for name in _FIELDS)))

    def __len__(self) -> int:
        return self._length

    @overload
    def __getitem__(self, index: int) -> Point: ...

    @overload
    def __getitem__(self, index: slice) -> list[Point]: ...

    def __getitem__(self, index: int | slice) -> Point | list[Point]:
        if isinstance(index, slice):
            return _made(zip(*(self.column(name)[index] for name in _FIELDS)))
        if not -self._length <= index < self._length:
            raise IndexError("point index out of range")
        return _made([tuple(self.column(name)[index] for name in _FIELDS)])[0]

    def __setitem__(self, index: int, point: Point) -> None:  # type: ignore[override]
        if not -self._length <= index < self._length:
            raise IndexError("point index out of range")
        for name in _FIELDS:
            self.column(name)[index] = getattr(point, name)

    def __delitem__(self, index: int | slice) -> None:
        for name in _FIELDS:
            del self.column(name)[index]
        self._length = len(self._columns["analyte"])

    def insert(self, index: int, point: Point) -> None:
        for name in _FIELDS:
            self.column(name).insert(index, getattr(point, name))
        self._length += 1

    def extend(self, points: Iterable[Point]) -> None:
        """Append ``points`` (another :class:`PointColumns`: a field at a time)."""
        other = PointColumns.from_points(points)
        if not self._length:  # the usual case: the one table of a run
            self._columns = {name: list(values) for name, values in other._columns.items()}
            self._cells, self._length = other._cells, len(other)
            return
        for name in _FIELDS:
            self.column(name).extend(other.column(name))
        self._length += len(other)

    def __iter__(self) -> Iterator[Point]:
        for start in range(0, self._length, 4096):  # made a block at a time
            yield from self[start:start + 4096]

    def __eq__(self, other: object) -> bool:
        if isinstance(other, PointColumns):
            return self.points() == other.points()
        if isinstance(other, (list, tuple)):
            return self.points() == list(other)
        return NotImplemented

    __hash__ = None  # type: ignore[assignment] - mutable

    def __repr__(self) -> str:
        return f"PointColumns({self.points()!r})"


def point_values(points: Sequence[Point], name: str) -> list[Any]:
    """Field ``name`` of every point, in order; read from the column when ``points`` is held so.

    Examples
    --------
    >>> point_values([Point("Zn", 1.0, 10.0, "A2")], "concentration")
    [1.0]
    """
    if isinstance(points, PointColumns):
        return points.column(name)
    return list(map(attrgetter(name), points))


def response_basis(points: Iterable[Point]) -> str:
    """``ratio`` when the points' responses are ratios to an internal standard, else ``raw``.

    Examples
    --------
    >>> response_basis([Point("Zn", 1.0, 2.0, "A2", is_response=4.0)]), response_basis([])
    ('ratio', 'raw')
    """
    return "ratio" if any(p.is_response is not None for p in points) else "raw"


@dataclass(frozen=True)
class SourceInfo:
    """Where a run came from and how it was read.

    Attributes
    ----------
    file : str
        File name without folders.
    sha256 : str
        Hex SHA-256 of the file's bytes.
    sheet : str or None
        The sheet read; None for text files and for runs read from several sheets.
    layout : str
        ``"long"`` (one row per injection), ``"wide"`` (one row per standard,
        one response column per analyte), ``"stacked"`` (several tables in one
        sheet) or ``"sheet-per-analyte"`` (one sheet per analyte).
    sheets : tuple of str
        Every sheet read, in workbook order (empty for text files).
    tables : tuple of str
        The cell range of each table read, ``"Run!A5:F23"``.
    columns : tuple of str
        How each heading was recognised, ``"Run!B5 'Conc. (ng/mL)' -> concentration"``.
    encoding, delimiter, decimal_mark : str or None
        For text files: the encoding, delimiter and decimal mark used.
    import_map : str or None
        File name of the import map used, if any.
    ignored_columns : tuple of str
        Every heading of a header row calib did not use, and why,
        ``"Run!D5 'RT (min)': known not to be calibration data"``.
    """

    file: str
    sha256: str
    sheet: str | None = None
    layout: str = "long"
    sheets: tuple[str, ...] = ()
    tables: tuple[str, ...] = ()
    columns: tuple[str, ...] = ()
    encoding: str | None = None
    delimiter: str | None = None
    decimal_mark: str | None = None
    import_map: str | None = None
    ignored_columns: tuple[str, ...] = ()


class _HeldPoints:
    """The ``points`` field of :class:`Run`: a tuple of :class:`Point` when read.

    A reader hands the run its :class:`PointColumns`; the points are made the
    first time ``run.points`` is read (the import checks and
    :meth:`Run.column` read the columns without making them).
    """

    def __get__(self, run: object, owner: type | None = None) -> tuple[Point, ...]:
        if run is None:
            raise AttributeError("points")  # the field has no default
        held = run.__dict__["_held_points"]
        if isinstance(held, PointColumns):
            # 10^5 new objects, none in a cycle: the collector would only scan them
            # (and everything else) again and again while they are made.
            paused = gc.isenabled()
            gc.disable()
            try:
                held = run.__dict__["_held_points"] = tuple(held.points())
            finally:
                if paused:
                    gc.enable()
        return held  # type: ignore[no-any-return]

    def __set__(self, run: object, points: Iterable[Point]) -> None:
        if run.__dict__.get("_held_points") is not None:
            raise AttributeError("cannot assign to field 'points'")
        run.__dict__["_held_points"] = points if isinstance(points, (tuple, PointColumns)) \
            else tuple(points)


@dataclass(frozen=True)
class Run:
    """A run as read from one file.

    Attributes
    ----------
    source : SourceInfo
        The file the run was read from.
    points : tuple of Point
        Every injection in file order.  A reader may hand over
        :class:`PointColumns`; the tuple is then made when ``points`` is first
        read (:meth:`column` reads a field without making it).
    metadata : dict
        ``key: value`` lines found above the table (instrument, method...).
    units : dict
        Units found in column headers, e.g. ``{"concentration": "mg/L"}``
        (those every analyte shares).
    analyte_units : dict
        Units per analyte, ``{"Nitrate": {"concentration": "mg/L"}}``, for runs
        whose analytes have units of their own (one sheet per analyte).
    warnings : tuple of str
        Things the reader noticed that do not stop the run (an internal
        standard response far from the run's mean, a hidden row set aside).
    """

    source: SourceInfo
    points: tuple[Point, ...] = _HeldPoints()  # type: ignore[assignment]
    metadata: dict[str, str] = field(default_factory=dict)
    units: dict[str, str] = field(default_factory=dict)
    analyte_units: dict[str, dict[str, str]] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    @property
    def analytes(self) -> tuple[str, ...]:
        """Analyte names in order of first appearance."""
        return tuple(dict.fromkeys(self.column("analyte")))

    def column(self, name: str) -> list[Any]:
        """Field ``name`` of every point, in file order (read it, never change it).

        Examples
        --------
        >>> run = Run(SourceInfo("z.csv", "0" * 64), (Point("Zn", 1.0, 10.0, "z.csv!B2"),))
        >>> run.column("response"), run.column("source_cell")
        ([10.0], ['z.csv!B2'])
        """
        return point_values(held_points(self), name)

    def units_of(self, analyte: str) -> dict[str, str]:
        """Units of one analyte's columns: the run's shared units, then its own."""
        return {**self.units, **self.analyte_units.get(analyte, {})}

    def standards(self, analyte: str) -> tuple[Point, ...]:
        """The calibration standards of one analyte (included or not), in file order."""
        return tuple(
            p
            for p in self.points
            if p.analyte == analyte and p.sample_type is SampleType.STANDARD
        )


def held_points(run: Run) -> Sequence[Point]:
    """The points of ``run`` as held: the reader's :class:`PointColumns` until
    ``run.points`` is first read (nothing is made), else the tuple."""
    return run.__dict__["_held_points"]  # type: ignore[no-any-return]
