"""What an injection is: standard, blank, zero sample, QC or unknown.

Exports say it in a type column (``Standard``, ``Cal``, ``Blindwert``,
``Contrôle``) or only in the sample name (``Std 3``, ``Cal-5``, ``Blank``,
``QC-L``, ``LQC``).  :class:`SampleTyper` reads either, first through the
patterns of an import map when one is given.

A row with no type column and a sample name that names no type is a
standard when it gives a concentration and an unknown when it does not.
"""

from __future__ import annotations

import fnmatch
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from calib.io.cells import CellError, describe
from calib.io.columns import squash
from calib.options import SampleType

__all__ = ["SAMPLE_TYPE_WORDS", "SampleTyper", "type_from_name"]

SAMPLE_TYPE_WORDS: dict[SampleType, tuple[str, ...]] = {
    SampleType.STANDARD: (
        "standard", "std", "cal", "calibrator", "calibrant", "calibration",
        "calibration standard", "cal std", "cal standard", "kalibrierstandard", "kalibrierung",
        "kalibrator", "kal", "standardlösung", "étalon", "etalonnage", "étalon d'étalonnage",
        "patrón", "estándar", "calibrador", "estándar de calibración",
    ),
    SampleType.BLANK: (
        "blank", "blk", "reagent blank", "method blank", "solvent blank", "double blank",
        "matrix blank", "blindwert", "leerwert", "blindprobe", "blanc", "blanco",
    ),
    SampleType.ZERO: (
        "zero", "zero standard", "zero sample", "zero calibrator", "blank with is",
        "blank + is", "blank+is", "nullprobe", "nullwert", "zéro", "cero",
    ),
    SampleType.QC: (
        "qc", "quality control", "qc sample", "control", "control sample", "kontrolle",
        "kontrollprobe", "qualitätskontrolle", "contrôle", "contrôle qualité",
        "control de calidad", "ccv", "icv", "lcs",
    ),
    SampleType.UNKNOWN: (
        "unknown", "unk", "sample", "unknown sample", "analyte", "probe", "unbekannt",
        "échantillon", "inconnu", "muestra", "desconocido",
    ),
}
"""Words accepted in a sample_type cell (compared after folding case, accents and punctuation)."""

_WORD_LOOKUP = {
    squash(word): kind for kind, words in SAMPLE_TYPE_WORDS.items() for word in words
}

# Names that say the type: "Std 3", "Cal-5", "Blank", "Zero", "QC-L", "LQC".
_ZERO = r"(zero|null|cero|z[ée]ro)\b.*|(blank|blk)\s*(\+|with|w/)\s*i\.?s.*"
_BLANK = (r"(reagent |method |solvent |double |matrix )?"
          r"(blank|blk|blindwert|leerwert|blanc|blanco|rb|mb)(\b|\d).*")
_QC = r"(qc[lmh]?|[lmh]qc|lloq[ -]?qc|ccv|icv|lcs|kontroll\w*|contr[ôo]le|control)(\b|\d|[-_ ]).*"
_STANDARD = (r"(std|standard|cal|calibrator|calibrant|kal|kalibr\w*|[ée]talon|"
             r"patr[óo]n|est[áa]ndar)(\b|\d|[-_ #]).*")
_NAME_PATTERNS: tuple[tuple[SampleType, re.Pattern[str]], ...] = tuple(
    (kind, re.compile(pattern, re.IGNORECASE))
    for kind, pattern in (
        (SampleType.ZERO, _ZERO),
        (SampleType.BLANK, _BLANK),
        (SampleType.QC, _QC),
        (SampleType.STANDARD, _STANDARD),
    )
)


def type_from_name(name: str | None) -> SampleType | None:
    """The sample type a sample name says plainly, or None when it does not.

    Examples
    --------
    >>> [type_from_name(n).value for n in ("Std 3", "Cal-5", "Blank", "QC-L", "LQC", "Zero")]
    ['standard', 'standard', 'blank', 'qc', 'qc', 'zero']
    >>> type_from_name("Blank+IS").value, type_from_name("Kal 2").value
    ('zero', 'standard')
    >>> type_from_name("Well 12") is None, type_from_name("L4") is None, type_from_name(None)
    (True, True, None)
    """
    if name is None:
        return None
    text = name.strip()
    for kind, pattern in _NAME_PATTERNS:
        if pattern.fullmatch(text):
            return kind
    return None


@dataclass(frozen=True)
class SampleTyper:
    """Reads sample types from type cells and sample names.

    Attributes
    ----------
    patterns : mapping of SampleType to sequence of str
        Glob patterns from an import map (``"KAL*"``, ``"RB-?"``), matched
        without case against the type cell, then the sample name, before the
        built-in words and name patterns.
    """

    patterns: Mapping[SampleType, Sequence[str]] = field(default_factory=dict)

    def _from_patterns(self, text: str | None) -> SampleType | None:
        if text is None:
            return None
        folded = text.strip().casefold()
        for kind, globs in self.patterns.items():
            if any(fnmatch.fnmatchcase(folded, glob.casefold()) for glob in globs):
                return kind
        return None

    def from_cell(self, text: str | None) -> SampleType | None:
        """The type a sample_type cell gives; None for an empty cell.

        Raises
        ------
        CellError
            When the cell names no type calib knows.

        Examples
        --------
        >>> SampleTyper().from_cell("Kalibrierstandard").value, SampleTyper().from_cell("Std 2")
        ('standard', <SampleType.STANDARD: 'standard'>)
        """
        if text is None:
            return None
        kind = self._from_patterns(text) or _WORD_LOOKUP.get(squash(text)) or type_from_name(text)
        if kind is None:
            accepted = "; ".join(
                f"{kind.value} ({', '.join(words[:5])}...)"
                for kind, words in SAMPLE_TYPE_WORDS.items()
            )
            raise CellError(f"found {describe(text)}; expected a sample type: {accepted}")
        return kind

    def from_name(self, name: str | None, *, has_concentration: bool) -> SampleType:
        """The type of a row with no type column, from its sample name.

        A name that says no type plainly (``L3``, ``Sample 4``, ``Well 12``) is a
        standard when the row gives a concentration and an unknown otherwise.

        Examples
        --------
        >>> SampleTyper().from_name("L3", has_concentration=True).value
        'standard'
        >>> SampleTyper().from_name("Sample 4", has_concentration=False).value
        'unknown'
        """
        kind = self._from_patterns(name) or type_from_name(name)
        if kind is not None:
            return kind
        return SampleType.STANDARD if has_concentration else SampleType.UNKNOWN
