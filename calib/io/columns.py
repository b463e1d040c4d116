"""Matching column headings to calib's canonical column names.

Instrument exports name the same thing in many ways ("Conc.", "Amount",
"Nominal concentration").  A heading is matched after folding case and
dropping spaces and punctuation, so ``Peak Area``, ``peak_area`` and
``PEAK-AREA`` are one heading.  A unit written in brackets at the end of a
heading (``Conc. (mg/L)``, ``Response [counts]``) is split off and kept.

The synonyms are English for now; more languages slot into :data:`SYNONYMS`.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType

from calib.io.cells import Cell, CellError, to_text

__all__ = [
    "CANONICAL",
    "REQUIRED",
    "SYNONYMS",
    "UNIT_COLUMNS",
    "Column",
    "column_letter",
    "map_headings",
    "match_heading",
    "split_unit",
    "squash",
]

SYNONYMS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        "analyte": ("analyte", "compound", "component", "name of analyte", "analyte name"),
        "concentration": (
            "concentration", "conc", "nominal", "nominal concentration", "nominal conc",
            "amount",
        ),
        "response": (
            "response", "area", "peak area", "height", "peak height", "absorbance", "signal",
            "counts",
        ),
        "replicate": ("replicate", "rep", "injection", "replicate number"),
        "include": ("include", "included", "use", "used"),
        "exclusion_reason": ("exclusion reason", "reason", "comment"),
        "sample_type": ("sample type", "type"),
        "sample_id": ("sample id", "sample", "sample name", "id"),
    }
)
"""Headings accepted for each canonical column (compared after :func:`squash`)."""

CANONICAL: tuple[str, ...] = tuple(SYNONYMS)
"""The canonical column names, in the order the synonyms are listed."""

REQUIRED: tuple[str, ...] = ("concentration", "response")
"""Columns every long-layout table must have."""

UNIT_COLUMNS: frozenset[str] = frozenset({"concentration", "response"})
"""Columns whose bracketed unit is kept in ``Run.units``; other brackets are ignored."""

# A unit is the last bracketed group, "(mg/L)" or "[counts]", ending the heading.
_UNIT = re.compile(r"^(?P<name>.*?)\s*(?:\((?P<round>[^()]*)\)|\[(?P<square>[^\[\]]*)\])\s*$")


def squash(text: str) -> str:
    """Fold a heading for comparison: lower case, letters, digits and ``%`` only.

    ``%`` is kept because "Area %" (a share of the total) is not a response.

    Examples
    --------
    >>> squash(" Peak-Area "), squash("exclusion_reason"), squash("Area %")
    ('peakarea', 'exclusionreason', 'area%')
    """
    return "".join(ch for ch in text.casefold() if ch.isalnum() or ch == "%")


_LOOKUP: Mapping[str, str] = MappingProxyType(
    {squash(synonym): name for name, synonyms in SYNONYMS.items() for synonym in synonyms}
)


def split_unit(text: str) -> tuple[str, str | None]:
    """Split a heading into its name and the unit in brackets at its end.

    Examples
    --------
    >>> split_unit("Conc. (mg/L)")
    ('Conc.', 'mg/L')
    >>> split_unit("Response [counts]")
    ('Response', 'counts')
    >>> split_unit("Peak area")
    ('Peak area', None)
    """
    found = _UNIT.match(text.strip())
    if found is None:
        return text.strip(), None
    unit = (found["round"] if found["round"] is not None else found["square"]).strip()
    return found["name"], unit or None


def match_heading(text: str) -> tuple[str | None, str | None]:
    """Return the canonical column a heading names (or None) and its unit.

    The unit is kept only for :data:`UNIT_COLUMNS`; elsewhere brackets are a
    hint to the reader, as in ``Include (y/n)``.

    Examples
    --------
    >>> match_heading("Conc. (mg/L)")
    ('concentration', 'mg/L')
    >>> match_heading("Include (y/n)")
    ('include', None)
    >>> match_heading("Retention time (min)")
    (None, None)
    """
    name, unit = split_unit(text)
    canonical = _LOOKUP.get(squash(name))
    return canonical, unit if canonical in UNIT_COLUMNS else None


def column_letter(index: int) -> str:
    """Spreadsheet column letters for a 0-based column index.

    Examples
    --------
    >>> column_letter(0), column_letter(25), column_letter(26), column_letter(701)
    ('A', 'Z', 'AA', 'ZZ')
    """
    if index < 0:
        raise ValueError(f"index must be >= 0; got {index}")
    letters = ""
    index += 1
    while index:
        index, remainder = divmod(index - 1, 26)
        letters = chr(ord("A") + remainder) + letters
    return letters


@dataclass(frozen=True)
class Column:
    """A heading matched to a canonical column.

    Attributes
    ----------
    name : str
        Canonical column name, one of :data:`CANONICAL`.
    header : str
        The heading as written in the file.
    index : int
        0-based column index.
    unit : str or None
        Unit from the heading (only for :data:`UNIT_COLUMNS`).
    """

    name: str
    header: str
    index: int
    unit: str | None = None

    @property
    def letter(self) -> str:
        """Spreadsheet column letters, ``"C"`` for index 2."""
        return column_letter(self.index)

    @property
    def label(self) -> str:
        """How messages name the column: letter and heading, ``D (Peak area)``."""
        return f"{self.letter} ({self.header})"


def map_headings(cells: Sequence[Cell]) -> dict[str, Column]:
    """Match every heading of a header row; unknown headings are left out.

    Raises
    ------
    CellError
        When two headings name the same canonical column.

    Examples
    --------
    >>> cols = map_headings(["Sample", "Conc. (mg/L)", "Peak Area", "Vial"])
    >>> sorted(cols)
    ['concentration', 'response', 'sample_id']
    >>> cols["concentration"].unit, cols["response"].letter
    ('mg/L', 'C')
    >>> map_headings(["Conc", "Area", "Height"])
    Traceback (most recent call last):
    ...
    calib.io.cells.CellError: two columns name the response: B (Area) and C (Height); keep one, \
or rename the other so that only one heading names the response
    """
    columns: dict[str, Column] = {}
    for index, cell in enumerate(cells):
        text = to_text(cell)
        if text is None:
            continue
        name, unit = match_heading(text)
        if name is None:
            continue
        column = Column(name, text, index, unit)
        if name in columns:
            first = columns[name]
            what = name.replace("_", " ")
            raise CellError(
                f"two columns name the {what}: {first.label} and {column.label}; keep one, "
                f"or rename the other so that only one heading names the {what}"
            )
        columns[name] = column
    return columns
