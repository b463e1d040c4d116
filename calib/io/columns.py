"""Matching column headings to calib's canonical column names.

Instrument exports name the same thing in many ways and languages ("Conc.",
"Sollkonzentration", "Concentration nominale", "Área").  A heading is matched
after :func:`squash` folds case and accents and drops spaces and
punctuation, so ``Peak Area``, ``peak_area``, ``PEAK-AREA`` and ``Área`` are
one heading.  A unit at the end of a heading (``Conc. (mg/L)``,
``Response [counts]``, ``Konzentration in mg/l``, ``Conc, ng/mL``) is split
off and kept.

Wide tables name the analyte in the heading (``Nitrate area``,
``Fläche Nitrat``, ``KX-214 conc``); :func:`read_heading` recognises such
compound headings too.  Some headings are known not to be calibration data
(retention time, calculated concentration, accuracy...): they are marked
``ignored`` so that a wide table does not take them for an analyte's
response.
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from types import MappingProxyType

from calib.io.cells import Cell, CellError, to_text
from calib.io.numbers import is_unit

__all__ = ["CANONICAL", "IGNORED", "NOT_ANALYTES", "SYNONYMS", "WIDE_COLUMNS", "Column", "Heading",
           "column_letter", "duplicate_error", "map_headings", "match_heading", "read_heading",
           "split_unit", "squash"]

SYNONYMS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        "analyte": (
            "analyte", "analyte name", "compound", "compound name", "component",
            "component name", "name of analyte", "substance", "target", "element", "parameter",
            "determinand", "paramètre", "parámetro",
            # German, French, Spanish
            "analyt", "substanz", "komponente", "verbindung", "stoff", "composé", "composant",
            "analito", "compuesto", "componente", "sustancia",
            # an element with its emission line or mass (ICP exports)
            "element / wavelength", "element line", "element / mass", "analyte / wavelength",
            "analyte line", "emission line", "element / isotope", "element label",
            "analyte label", "element / line",
        ),
        "sample_type": (
            "sample type", "type", "sample kind", "kind", "std type",
            "probenart", "probentyp", "typ", "art", "type d'échantillon", "type échantillon",
            "tipo de muestra", "tipo",
        ),
        "level": (
            "level", "cal level", "calibration level", "std level", "standard level", "lvl",
            "stufe", "kalibrierstufe", "niveau", "niveau d'étalonnage", "nivel",
            "nivel de calibración",
        ),
        "concentration": (
            "concentration", "conc", "nominal", "nominal concentration", "nominal conc",
            "amount", "expected concentration", "expected conc", "theoretical concentration",
            "spiked concentration", "standard concentration", "std conc", "cal conc",
            "nominal value",
            "konzentration", "konz", "sollkonzentration", "soll konz", "sollwert", "soll",
            "gehalt", "nominalkonzentration", "concentration nominale",
            "concentration théorique", "teneur", "concentración", "concentración nominal",
            "concentración teórica",
        ),
        "response": (
            "response", "area", "peak area", "height", "peak height", "absorbance", "abs",
            "signal", "counts", "intensity", "peak response", "area counts", "analyte area",
            "analyte peak area", "analyte response", "analyte height", "compound area",
            "potential", "emf", "voltage", "potenzial", "spannung", "potentiel", "potencial",
            "fläche", "peakfläche", "höhe", "peakhöhe", "extinktion", "absorption",
            "intensität", "messwert", "aire", "aire du pic", "surface", "hauteur",
            "hauteur du pic", "réponse", "intensité", "área", "área del pico", "altura",
            "altura del pico", "absorbancia", "respuesta", "señal", "intensidad",
        ),
        "is_response": (
            "is area", "is response", "is height", "istd area", "istd response", "istd height",
            "internal standard area", "internal standard response", "internal standard",
            "is", "istd", "is peak area", "is fläche", "istd fläche", "fläche is",
            "fläche istd", "interner standard", "fläche interner standard", "aire ei",
            "aire étalon interne", "étalon interne", "ei", "réponse ei", "área pi",
            "área estándar interno", "estándar interno", "patrón interno", "pi",
        ),
        "replicate": (
            "replicate", "rep", "replicate number", "repl", "injection", "inj",
            "injection number", "repeat", "wiederholung", "wdh", "injektion", "replikat",
            "réplique", "répétition", "réplicat", "réplica", "repetición", "inyección",
        ),
        "injection_order": (
            "injection order", "inj order", "injection sequence", "run order", "sequence",
            "seq", "sequence number", "acquisition order", "order", "reihenfolge",
            "injektionsreihenfolge", "messreihenfolge", "sequenz", "ordre",
            "ordre d'injection", "séquence", "orden", "orden de inyección", "secuencia",
        ),
        "include": (
            "include", "included", "use", "used", "in fit", "use in fit", "in curve", "active",
            "verwenden", "verwendet", "aktiv", "berücksichtigt", "utiliser", "utilisé",
            "inclus", "inclure", "actif", "usar", "usado", "incluir", "incluido", "activo",
        ),
        "exclusion_reason": (
            "exclusion reason", "reason", "reason for exclusion", "comment", "comments",
            "remark", "remarks", "note", "notes", "grund", "ausschlussgrund", "bemerkung",
            "kommentar", "anmerkung", "raison", "motif", "motif d'exclusion", "commentaire",
            "remarque", "motivo", "razón", "comentario", "observaciones", "nota",
        ),
        "sample_id": (
            "sample id", "sample", "sample name", "name", "id", "sample no", "sample number",
            "sample code", "probe", "probenname", "probenbezeichnung", "proben id",
            "probennummer", "bezeichnung", "échantillon", "nom", "nom de l'échantillon",
            "identifiant", "muestra", "nombre", "nombre de la muestra", "id de muestra",
        ),
    }
)
"""Headings accepted for each canonical column (compared after :func:`squash`)."""

IGNORED: tuple[str, ...] = (
    "retention time", "rt", "ret time", "rrt", "time", "date", "acquisition date", "acquired",
    "injection date", "vial", "vial position", "position", "pos", "tray", "dilution",
    "dilution factor", "df", "injection volume", "inj vol", "volume", "weight", "data file",
    "file", "file name", "method", "calculated concentration", "calculated conc", "calc conc",
    "calc amount", "calculated amount", "back calculated", "back calculated concentration",
    "found", "found conc", "measured concentration", "result", "accuracy", "% accuracy",
    "deviation", "% deviation", "%dev", "bias", "recovery", "% recovery", "cv", "% cv", "rsd",
    "%rsd", "sd", "mean", "status", "s/n", "signal to noise", "unit", "units", "width",
    "peak width", "tailing", "plates", "resolution", "operator", "analyst", "instrument",
    "batch", "line", "row", "#", "no", "nr", "area %", "area ratio", "response ratio", "ratio",
    "peak area ratio", "retentionszeit", "ergebnis", "richtigkeit", "temps de rétention",
    "résultat", "tiempo de retención", "resultado",
)
"""Headings known to hold something calib does not use (compared after :func:`squash`)."""

CANONICAL: tuple[str, ...] = tuple(SYNONYMS)
"""The canonical column names, in the order the synonyms are listed."""

_REQUIRED: tuple[str, ...] = ("concentration", "response")
"""Columns every long-layout table must have."""

_UNIT_COLUMNS: frozenset[str] = frozenset({"concentration", "response", "is_response"})
"""Columns whose unit is kept in ``Run.units``; other brackets are ignored."""

WIDE_COLUMNS: tuple[str, ...] = ("concentration", "is_response", "response")
"""Columns a wide table may give once per analyte (``Nitrate conc``, ``Nitrate area``)."""

# A unit is the last bracketed group, "(mg/L)" or "[counts]", ending the heading.
_UNIT = re.compile(r"^(?P<name>.*?)\s*(?:\((?P<round>[^()]*)\)|\[(?P<square>[^\[\]]*)\])\s*$")
# Or written after a comma or "in": "Conc, mg/L", "Konz. in mg/l", "Conc. en mg/L".
_UNIT_WORDS = re.compile(r"^(?P<name>.*?)(?:\s*,\s*|\s+in\s+|\s+en\s+)(?P<unit>\S+)$")
# Or after a space, for amount units only ("Conc ppb"; "Nitrate counts" names a response).
_UNIT_SPACE = re.compile(r"^(?P<name>.*?)\s+(?P<unit>\S+)$")
_SEPARATORS = " _-:|/,.;–"
NOT_ANALYTES = frozenset(
    {"peak", "total", "sample", "mean", "avg", "average", "sum", "corrected", "raw", "net",
     "rel", "relative", "ratio", "norm", "normalised", "normalized", "calc", "calculated",
     "expected", "actual", "measured", "theoretical", "nominal", "std", "standard", "is",
     "istd", "internal", "cal", "found", "final", "%", "log", "value", "values", "reading",
     "data", "wert", "messwert", "valeur", "valor", "x", "y", "analyte", "compound", "target"}
)
"""Words (squashed) that never name an analyte: ``Peak area`` and ``Total area`` are not
the areas of analytes called Peak and Total."""


def squash(text: str) -> str:
    """Fold a heading for comparison: lower case, no accents, letters, digits and ``%`` only.

    ``%`` is kept because "Area %" (a share of the total) is not a response.

    Examples
    --------
    >>> squash(" Peak-Area "), squash("exclusion_reason"), squash("Area %"), squash("Fläche")
    ('peakarea', 'exclusionreason', 'area%', 'flache')
    """
    decomposed = unicodedata.normalize("NFKD", text.casefold())
    return "".join(
        ch for ch in decomposed if (ch.isalnum() or ch == "%") and not unicodedata.combining(ch)
    )


_LOOKUP: Mapping[str, str] = MappingProxyType(
    {squash(synonym): name for name, synonyms in SYNONYMS.items() for synonym in synonyms}
)
_IGNORED = frozenset(squash(word) for word in IGNORED)
# Longest synonyms first, so "is area" wins over "area" in "KX-214 IS area".
_WIDE_SYNONYMS: tuple[tuple[str, str], ...] = tuple(
    sorted(
        ((squash(s), name) for name in WIDE_COLUMNS for s in SYNONYMS[name] if len(squash(s)) > 1),
        key=lambda pair: -len(pair[0]),
    )
)


def split_unit(text: str) -> tuple[str, str | None]:
    """Split a heading into its name and the unit at its end.

    A bracketed group at the end is always taken as the unit; a unit written
    after a comma, ``in`` or a space is taken only when calib recognises it
    as a unit (see :func:`calib.io.numbers.is_unit`).

    Examples
    --------
    >>> split_unit("Conc. (mg/L)")
    ('Conc.', 'mg/L')
    >>> split_unit("Response [counts]")
    ('Response', 'counts')
    >>> split_unit("Konzentration in mg/l"), split_unit("Conc, ng/mL"), split_unit("Conc ppb")
    (('Konzentration', 'mg/l'), ('Conc', 'ng/mL'), ('Conc', 'ppb'))
    >>> split_unit("Peak area"), split_unit("Nitrate area")
    (('Peak area', None), ('Nitrate area', None))
    """
    stripped = text.strip()
    found = _UNIT.match(stripped)
    if found is not None:
        unit = (found["round"] if found["round"] is not None else found["square"]).strip()
        return found["name"], unit or None
    words = _UNIT_WORDS.match(stripped)
    if words is not None and words["name"] and is_unit(words["unit"]):
        return words["name"].rstrip(_SEPARATORS), words["unit"]
    spaced = _UNIT_SPACE.match(stripped)
    if spaced is not None and is_unit(spaced["unit"], amounts_only=True):
        return spaced["name"].rstrip(_SEPARATORS), spaced["unit"]
    return stripped, None


@dataclass(frozen=True)
class Heading:
    """What a heading names.

    Attributes
    ----------
    name : str or None
        Canonical column, or None when the heading is not recognised.
    unit : str or None
        Unit from the heading (only for :data:`_UNIT_COLUMNS`).
    analyte : str or None
        The analyte named in a compound heading (``Nitrate area``), else None.
    ignored : bool
        True for headings known to hold something calib does not use.
    """

    name: str | None
    unit: str | None = None
    analyte: str | None = None
    ignored: bool = False


def _strip_separators(text: str) -> str:
    return text.strip(_SEPARATORS + " ")


def _boundary_before(text: str, index: int) -> bool:
    """A word starts at ``text[index]``: after a separator, or a lower-to-upper case change."""
    if index <= 0:
        return False
    before, here = text[index - 1], text[index]
    return not before.isalnum() or (before.islower() and here.isupper())


def _folded_positions(text: str) -> tuple[str, list[int]]:
    """The squashed text and, for each of its characters, the index it came from."""
    folded: list[str] = []
    origin: list[int] = []
    for index, char in enumerate(text):
        for piece in squash(char):
            folded.append(piece)
            origin.append(index)
    return "".join(folded), origin


def _compound(name: str) -> tuple[str, str] | None:
    """``(canonical, analyte)`` for headings such as ``Nitrate area`` or ``Area: Nitrate``."""
    folded, origin = _folded_positions(name)
    for synonym, canonical in _WIDE_SYNONYMS:
        if len(folded) <= len(synonym):
            continue
        if folded.endswith(synonym):
            cut = origin[len(folded) - len(synonym)]
            if _boundary_before(name, cut):
                analyte = _strip_separators(name[:cut])
                if analyte and squash(analyte) not in NOT_ANALYTES:
                    return canonical, analyte
        if folded.startswith(synonym):
            end = origin[len(synonym) - 1] + 1
            if end < len(name) and _boundary_before(name, end + _leading_gap(name[end:])):
                analyte = _strip_separators(name[end:])
                if analyte and squash(analyte) not in NOT_ANALYTES:
                    return canonical, analyte
    return None


def _leading_gap(text: str) -> int:
    return len(text) - len(text.lstrip(_SEPARATORS + " "))


@lru_cache(maxsize=4096)
def read_heading(text: str) -> Heading:
    """Say what a heading names: a canonical column, an analyte's column, or nothing.

    Examples
    --------
    >>> read_heading("Conc. (ng/mL)")
    Heading(name='concentration', unit='ng/mL', analyte=None, ignored=False)
    >>> read_heading("Nitrate area [counts]")
    Heading(name='response', unit='counts', analyte='Nitrate', ignored=False)
    >>> read_heading("KX-214 IS area").name, read_heading("Fläche Nitrat").analyte
    ('is_response', 'Nitrat')
    >>> read_heading("Retention time (min)").ignored, read_heading("Vial 3").name
    (True, None)
    """
    whole = squash(text)
    if whole in _IGNORED:
        return Heading(None, ignored=True)
    name, unit = split_unit(text)
    key = squash(name)
    canonical = _LOOKUP.get(key)
    if canonical is not None:
        return Heading(canonical, unit if canonical in _UNIT_COLUMNS else None)
    if whole in _LOOKUP:
        return Heading(_LOOKUP[whole])
    if key in _IGNORED:
        return Heading(None, ignored=True)
    compound = _compound(name)
    if compound is not None:
        if _compound_ignored(compound[1]):
            return Heading(None, ignored=True)
        return Heading(compound[0], unit, analyte=compound[1])
    if _ends_with_ignored(name):
        return Heading(None, ignored=True)
    return Heading(None)


def _compound_ignored(analyte: str) -> bool:
    """``Nitrate calc conc`` leaves ``Nitrate calc``: a calculated value, not nominal."""
    words = [w for w in re.split(r"[\s_:|/,.;]+", analyte) if w]
    return bool(words) and squash(words[-1]) in NOT_ANALYTES


def _ends_with_ignored(name: str) -> bool:
    """``Nitrate RT``, ``Nitrate accuracy %``: an analyte's column calib does not use."""
    words = [w for w in re.split(r"[\s_:|/,;]+", name) if w]
    for start in range(1, len(words)):
        if squash(" ".join(words[start:])) in _IGNORED:
            return True
    return False


def match_heading(text: str) -> tuple[str | None, str | None]:
    """Return the canonical column a heading names (or None) and its unit.

    Only whole headings count here (``Peak area``, not ``Nitrate area``).  The
    unit is kept only for :data:`_UNIT_COLUMNS`; elsewhere brackets are a hint
    to the reader, as in ``Include (y/n)``.

    Examples
    --------
    >>> match_heading("Conc. (mg/L)")
    ('concentration', 'mg/L')
    >>> match_heading("Include (y/n)")
    ('include', None)
    >>> match_heading("Retention time (min)")
    (None, None)
    """
    heading = read_heading(text)
    if heading.analyte is not None:
        return None, None
    return heading.name, heading.unit


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
        Unit from the heading (only for :data:`_UNIT_COLUMNS`).
    analyte : str or None
        For a wide table, the analyte the column belongs to; None for a column
        every analyte shares.
    """

    name: str
    header: str
    index: int
    unit: str | None = None
    analyte: str | None = None

    @property
    def letter(self) -> str:
        """Spreadsheet column letters, ``"C"`` for index 2."""
        return column_letter(self.index)

    @property
    def label(self) -> str:
        """How messages name the column: letter and heading, ``D (Peak area)``."""
        return f"{self.letter} ({self.header})"


def duplicate_error(first: Column, second: Column) -> CellError:
    """The message for two headings naming one column."""
    what = first.name.replace("_", " ")
    if first.analyte is not None:
        what = f"{what} of {first.analyte}"
    return CellError(
        f"two columns name the {what}: {first.label} and {second.label}; keep one, "
        f"or rename the other so that only one heading names the {what}"
    )


def map_headings(cells: Sequence[Cell]) -> dict[str, Column]:
    """Match every whole heading of a header row; other headings are left out.

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
    calib.errors.CellError: two columns name the response: B (Area) and C (Height); keep one, \
or rename the other so that only one heading names the response
    """
    columns: dict[str, Column] = {}
    for index, cell in enumerate(cells):
        text = to_text(cell) if isinstance(cell, str) else None
        if text is None:
            continue
        name, unit = match_heading(text)
        if name is None:
            continue
        column = Column(name, text, index, unit)
        if name in columns:
            raise duplicate_error(columns[name], column)
        columns[name] = column
    return columns
