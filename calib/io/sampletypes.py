"""What an injection is: standard, blank, zero sample, QC or unknown.

Exports say it in a type column (``Standard``, ``Cal``, ``Blindwert``,
``Contrôle``) or only in the sample name (``Std 3``, ``Cal-5``, ``Blank``,
``QC-L``, ``LQC``).  :class:`SampleTyper` reads either, first through the
patterns of an import map when one is given.

A row with no type column and a sample name that names no type is a
standard when it gives a concentration and an unknown when it does not.

Names of independent checks never become calibration points unless the file
says so: a name holding a check word anywhere (``Check Std 5``, ``Std QC``,
``Verification 12``, ``CRM 7``) is a QC, and a name that could be either of
two types (``Cal Blank``, ``Spike 1``) is refused with advice, since a guess
could put a check sample into the curve.
"""

from __future__ import annotations

import fnmatch
import re
import unicodedata
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


# Words that say what a sample is, wherever they stand in its name.
_WORD_KINDS: dict[str, str] = {
    **dict.fromkeys(("std", "stds", "standard", "standards", "cal", "calibrator", "calibrant",
                     "calibration", "kal", "kalibrator", "kalibrierstandard", "etalon", "patron",
                     "estandar"), "standard"),
    **dict.fromkeys(("qc", "qcl", "qcm", "qch", "lqc", "mqc", "hqc", "ccv", "icv", "lcs",
                     "check", "chk", "control", "kontrolle", "controle", "verification",
                     "verif", "verify", "ipc"), "check"),
    **dict.fromkeys(("crm", "srm", "rm", "reference"), "reference material"),
    **dict.fromkeys(("spike", "spiked", "spk", "fortified", "lfb", "lfm", "ms", "msd"),
                    "spike"),
    **dict.fromkeys(("blank", "blk", "blanc", "blanco", "blindwert", "leerwert", "ccb", "icb",
                     "rb", "mb"), "blank"),
}
_WORD = re.compile(r"[^\W\d_]+")


def _kinds_in(name: str) -> list[str]:
    folded = unicodedata.normalize("NFKD", name.casefold())
    folded = "".join(c for c in folded if not unicodedata.combining(c))
    return list(dict.fromkeys(k for w in _WORD.findall(folded) if (k := _WORD_KINDS.get(w))))


def _read_name(name: str | None) -> SampleType | str | None:
    """The type a sample name says, None when it says none, or why it is ambiguous (a str).

    Examples
    --------
    >>> [_read_name(n).value for n in ("Check Std 5", "Std QC", "Verification 12", "CRM 7")]
    ['qc', 'qc', 'qc', 'qc']
    >>> _read_name("Cal Blank")
    'names both a calibration standard and a blank'
    >>> _read_name("Spike 1")
    'names a spike, which may be a QC or a sample'
    """
    if name is None:
        return None
    kinds = _kinds_in(name)
    named = type_from_name(name)
    if named is SampleType.ZERO:
        return named
    if "spike" in kinds:
        if len(kinds) == 1:
            return "names a spike, which may be a QC or a sample"
        return "names both a spike and " + _a(next(k for k in kinds if k != "spike"))
    plain = [k for k in kinds if k != "standard"]
    if "blank" in plain:
        if len(plain) > 1:
            return f"names both {_a(plain[0])} and {_a(plain[1])}"
        if "standard" in kinds:
            return "names both a calibration standard and a blank"
        return SampleType.BLANK
    if plain:  # only check and reference-material words: an independent check
        return SampleType.QC
    return named


def _a(kind: str) -> str:
    return {"check": "a QC or check sample", "reference material": "a reference material",
            "blank": "a blank", "standard": "a calibration standard",
            "spike": "a spike"}[kind]


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
        kind = self._from_patterns(name) or _read_name(name)
        if type(kind) is str:  # SampleType is a str enum too
            raise CellError(
                f"found the sample name {name!r}, which {kind}; calib does not guess whether it "
                f"is a calibration point: add a sample type column (standard, blank, qc, "
                f"unknown), or an import map with [sample_types] patterns such as "
                f"{'blank' if 'blank' in kind else 'qc'} = [{name!r}]")
        if kind is not None:
            return kind
        return SampleType.STANDARD if has_concentration else SampleType.UNKNOWN
