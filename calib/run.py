"""The tidy form of one instrument run: every injection with its origin.

Readers in :mod:`calib.io` turn spreadsheets into a :class:`Run`; everything
downstream (fitting, checks, records) works on this form only.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field

from calib.options import SampleType

__all__ = ["Point", "Run", "SourceInfo", "response_basis"]


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


@dataclass(frozen=True)
class Run:
    """A run as read from one file.

    Attributes
    ----------
    source : SourceInfo
        The file the run was read from.
    points : tuple of Point
        Every injection in file order.
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
    points: tuple[Point, ...]
    metadata: dict[str, str] = field(default_factory=dict)
    units: dict[str, str] = field(default_factory=dict)
    analyte_units: dict[str, dict[str, str]] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    @property
    def analytes(self) -> tuple[str, ...]:
        """Analyte names in order of first appearance."""
        return tuple(dict.fromkeys(p.analyte for p in self.points))

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
