"""Reading the title and ``key: value`` lines above a table into run metadata.

Exports put the instrument, method, run date, operator and units above the
table, as ``Instrument: IC-2`` in one cell, as ``Instrument | IC-2`` in two
cells, or as several pairs in one row.  Keys calib knows are stored under
one English name whatever language the file uses (``Gerät``, ``Appareil``
and ``Equipo`` all become ``instrument``); other keys are kept as written.
The first line that is not a pair is the title; later such lines are notes.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping, Sequence
from types import MappingProxyType

from calib.io.cells import Cell, is_empty_row, to_text
from calib.io.columns import SYNONYMS, squash

__all__ = ["METADATA_KEYS", "metadata_units", "read_metadata"]

METADATA_KEYS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        "instrument": (
            "instrument", "instrument name", "system", "device", "gerät", "gerätename",
            "messgerät", "appareil", "equipo", "instrumento",
        ),
        "method": (
            "method", "method name", "acquisition method", "processing method", "methode",
            "méthode", "método", "prüfvorschrift",
        ),
        "run_date": (
            "run date", "date", "analysis date", "acquired", "acquisition date", "injection date",
            "date of analysis", "datum", "messdatum", "analysendatum", "date d'analyse",
            "date d'acquisition", "fecha", "fecha de análisis",
        ),
        "operator": (
            "operator", "analyst", "user", "analysed by", "analyzed by", "bediener", "analytiker",
            "bearbeiter", "prüfer", "opérateur", "analyste", "operador", "analista",
        ),
        "units": (
            "units", "unit", "concentration units", "concentration unit", "conc units",
            "conc unit", "einheit", "einheiten", "unité", "unités", "unidad", "unidades",
        ),
        "response_units": ("response units", "response unit", "area units", "signal units"),
        "analyte": SYNONYMS["analyte"],
        "laboratory": ("laboratory", "lab", "labor", "laboratoire", "laboratorio"),
        "batch": (
            "batch", "batch id", "sequence name", "run", "run id", "charge", "lot", "lote",
            "séquence", "secuencia",
        ),
        "matrix": ("matrix", "matrix type", "matrix name", "matrice", "matriz"),
    }
)
"""Metadata keys calib recognises (compared after folding) and the name each is stored under."""

_KEY_LOOKUP = {squash(word): key for key, words in METADATA_KEYS.items() for word in words}
_SEPARATORS = (":", "=", "\t")


def _texts(row: Sequence[Cell]) -> list[str]:
    """Non-empty cell texts; a merged cell repeated across a row counts once."""
    texts: list[str] = []
    if is_empty_row(row):
        return texts
    for cell in row:
        if isinstance(cell, _dt.datetime) and cell.time() == _dt.time(0):
            text: str | None = cell.date().isoformat()
        else:
            text = to_text(cell)
        if text is not None and (not texts or texts[-1] != text):
            texts.append(text)
    return texts


def _key(text: str) -> str:
    written = text.strip().rstrip(":=").strip()
    return _KEY_LOOKUP.get(squash(written), written)


def _split_pair(text: str) -> tuple[str, str] | None:
    """``key, value`` of a one-cell line, or None.

    A colon between two digits is part of a time or a ratio, not a separator:

    >>> _split_pair("Injected at: 17:02")
    ('Injected at', '17:02')
    >>> _split_pair("Printed 2026-12-01 17:02 by the data system") is None
    True
    """
    for separator in _SEPARATORS:
        at = _separator_at(text, separator)
        if at < 0:
            continue
        key, value = text[:at], text[at + 1:]
        if key.strip() and value.strip() and len(key) <= 60:
            return key, value.strip()
    return None


def _separator_at(text: str, separator: str) -> int:
    """Index of the first ``separator`` in ``text`` (a colon not between two digits), or -1."""
    at = text.find(separator)
    while separator == ":" and 0 < at < len(text) - 1 and text[at - 1].isdigit() \
            and text[at + 1].isdigit():
        at = text.find(separator, at + 1)
    return at


def _pairs(texts: list[str]) -> list[tuple[str, str]] | None:
    """The ``key, value`` pairs of a row, or None when it is a title or note line."""
    if len(texts) == 1:
        pair = _split_pair(texts[0])
        return [pair] if pair else None
    if len(texts) == 2:
        return [(texts[0], texts[1])]
    pairs: list[tuple[str, str]] = []
    index = 0
    while index < len(texts):
        text = texts[index]
        if text.rstrip().endswith((":", "=")) and index + 1 < len(texts):
            pairs.append((text, texts[index + 1]))
            index += 2
            continue
        pair = _split_pair(text)
        if pair is None:
            return None
        pairs.append(pair)
        index += 1
    return pairs


def read_metadata(rows: Sequence[Sequence[Cell]]) -> dict[str, str]:
    """Read title, note and ``key: value`` lines.

    Examples
    --------
    >>> rows = [
    ...     ["Fernbrook Water Laboratory"],
    ...     ["Gerät:", "IC-2"],
    ...     ["Methode: FWL-IC-07", None, "Bediener:", "R. Okafor"],
    ...     ["Sequence name = NO3-1130"],
    ...     ["Draft export"],
    ... ]
    >>> read_metadata(rows)  # doctest: +NORMALIZE_WHITESPACE
    {'title': 'Fernbrook Water Laboratory', 'instrument': 'IC-2', 'method': 'FWL-IC-07',
     'operator': 'R. Okafor', 'batch': 'NO3-1130', 'notes': 'Draft export'}
    """
    metadata: dict[str, str] = {}
    notes: list[str] = []
    for row in rows:
        texts = _texts(row)
        if not texts:
            continue
        pairs = _pairs(texts)
        if pairs is None:
            line = " ".join(texts)
            if "title" not in metadata:
                metadata["title"] = line
            else:
                notes.append(line)
            continue
        for key, value in pairs:
            name = _key(key)
            if name and value and name not in metadata:
                metadata[name] = value
    if notes:
        metadata["notes"] = "; ".join(notes)
    return metadata


def metadata_units(metadata: Mapping[str, str]) -> dict[str, str]:
    """Units the metadata lines give: ``units`` for concentration, ``response_units``.

    Examples
    --------
    >>> metadata_units({"units": "ng/mL", "response_units": "counts"})
    {'concentration': 'ng/mL', 'response': 'counts'}
    """
    units = {}
    if metadata.get("units"):
        units["concentration"] = metadata["units"]
    if metadata.get("response_units"):
        units["response"] = metadata["response_units"]
    return units


def _metadata_analyte(metadata: Mapping[str, str]) -> str | None:
    """The analyte an ``Analyte: ...`` line names, if any."""
    return metadata.get("analyte")
