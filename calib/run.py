"""The tidy form of one instrument run: every injection with its origin.

Readers in :mod:`calib.io` turn spreadsheets into a :class:`Run`; everything
downstream (fitting, checks, records) works on this form only.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from calib.options import SampleType

__all__ = ["Point", "Run", "SourceInfo"]


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


@dataclass(frozen=True)
class SourceInfo:
    """Where a run came from: file name, its SHA-256, the sheet and the layout read."""

    file: str
    sha256: str
    sheet: str | None = None
    layout: str = "long"


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
        Units found in column headers, e.g. ``{"concentration": "mg/L"}``.
    """

    source: SourceInfo
    points: tuple[Point, ...]
    metadata: dict[str, str] = field(default_factory=dict)
    units: dict[str, str] = field(default_factory=dict)

    @property
    def analytes(self) -> tuple[str, ...]:
        """Analyte names in order of first appearance."""
        return tuple(dict.fromkeys(p.analyte for p in self.points))

    def standards(self, analyte: str) -> tuple[Point, ...]:
        """The calibration standards of one analyte (included or not), in file order."""
        return tuple(
            p
            for p in self.points
            if p.analyte == analyte and p.sample_type is SampleType.STANDARD
        )
