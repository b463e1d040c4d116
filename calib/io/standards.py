"""Reading the standards file: which reference materials a run's standards came from.

ISO/IEC 17025 §6.5 (metrological traceability) and §7.5 (technical records)
ask that a calibration name the reference material behind its standards and
how the working standards were made from it.  A small file per method or run,
passed with ``calib check --standards FILE``, says so, in TOML::

    [[material]]
    id = "FWL-RM-0412"                  # the laboratory's own, supplier-neutral ID
    name = "Multi-element stock solution"
    lot = "L24-118"
    value = 1000.0                      # certified value
    uncertainty = 2.0                   # its stated (expanded) uncertainty
    unit = "mg/L"
    expires = 2027-03-31
    analytes = ["Pb", "Cu"]             # optional; default: every analyte of the run

    [[level]]
    name = "Intermediate 10 mg/L"
    from = "FWL-RM-0412"                # a material id, or the name of another level
    dilution = 100                      # final volume / aliquot volume
    concentration = 10.0                # optional, in the material's unit: checked (±1 %)

or as CSV, one row per material or level, with a ``kind`` column
(``material`` or ``level``) and the same column names (``analytes`` separated
by ``;``).  Every refusal names the file and the row (CSV) or entry (TOML).

Instead of the option, the run file may name its standards file in its
metadata lines (``Standards file: metals-standards.toml``): a plain file name,
read from the run file's own folder (:func:`standards_for_run`).
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import math
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from calib.errors import InputError

__all__ = ["METADATA_KEYS", "Level", "Material", "Standards", "parse_standards",
           "read_standards", "standards_for_run", "standards_section"]

METADATA_KEYS = ("standards file", "standards", "reference materials")
"""Metadata keys (folded) of a run-file line naming its standards file."""

MAX_BYTES = 1_000_000
"""A standards file is a few dozen lines; anything larger is refused before parsing."""
_MAX_ENTRIES = 500

_MATERIAL_KEYS = {"id", "name", "lot", "value", "uncertainty", "unit", "expires", "analytes"}
_MATERIAL_REQUIRED = ("id", "name", "lot", "value", "unit", "expires")
_LEVEL_KEYS = {"name", "from", "dilution", "concentration", "note"}
_LEVEL_REQUIRED = ("name", "from", "dilution")


@dataclass(frozen=True)
class Material:
    """A stock reference material: what the certificate says about it."""

    id: str
    name: str
    lot: str
    value: float
    uncertainty: float | None
    unit: str
    expires: dt.date
    analytes: tuple[str, ...] = ()
    """Analytes it is the source for; empty means every analyte of the run."""

    def covers(self, analyte: str) -> bool:
        """Whether this material is a source of ``analyte`` (case-insensitive).

        Examples
        --------
        >>> m = Material("A", "stock", "L1", 1000.0, 2.0, "mg/L", dt.date(2027, 1, 1), ("Pb",))
        >>> m.covers("pb"), m.covers("Cu")
        (True, False)
        """
        return not self.analytes or analyte.casefold() in {a.casefold() for a in self.analytes}


@dataclass(frozen=True)
class Level:
    """A working or intermediate standard: made from a material or another level by dilution."""

    name: str
    source: str
    dilution: float
    concentration: float | None = None
    """The concentration the preparation gives, in the material's unit (None when unknown)."""
    material: str = ""
    """The stock material this level finally comes from."""
    note: str = ""


@dataclass(frozen=True)
class Standards:
    """The materials and levels of a standards file, and its name and SHA-256."""

    file: str
    sha256: str
    materials: tuple[Material, ...]
    levels: tuple[Level, ...] = ()

    def for_analyte(self, analyte: str) -> tuple[Material, ...]:
        """The materials that are a source of ``analyte``."""
        return tuple(m for m in self.materials if m.covers(analyte))


def read_standards(path: str | Path) -> Standards:
    """Read a standards file (``.toml`` or ``.csv``).

    Raises
    ------
    InputError
        When the file cannot be read, is too large, or an entry is missing,
        ambiguous or wrong; the message names the file and the entry or row.
    """
    path = Path(path)
    try:
        with path.open("rb") as fh:
            data = fh.read(MAX_BYTES + 1)
    except OSError as exc:
        raise InputError(f"cannot read the standards file ({exc.strerror})",
                         file=str(path)) from None
    if len(data) > MAX_BYTES:
        raise InputError(f"standards file larger than {MAX_BYTES} bytes; it lists materials "
                         "and levels only", file=path.name)
    return parse_standards(data, name=path.name)


def parse_standards(data: bytes, *, name: str) -> Standards:
    """Parse the bytes of a standards file; ``name`` (ending ``.toml`` or ``.csv``) names it.

    Examples
    --------
    >>> text = b'''
    ... [[material]]
    ... id = "FWL-RM-0412"
    ... name = "Multi-element stock"
    ... lot = "L24-118"
    ... value = 1000.0
    ... uncertainty = 2.0
    ... unit = "mg/L"
    ... expires = 2027-03-31
    ... [[level]]
    ... name = "I1"
    ... from = "FWL-RM-0412"
    ... dilution = 100
    ... [[level]]
    ... name = "S3"
    ... from = "I1"
    ... dilution = 20
    ... '''
    >>> s = parse_standards(text, name="metals.toml")
    >>> [(lv.name, lv.material, lv.concentration) for lv in s.levels]
    [('I1', 'FWL-RM-0412', 10.0), ('S3', 'FWL-RM-0412', 0.5)]
    """
    import hashlib

    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("the standards file is not UTF-8 text", file=name) from None
    suffix = Path(name).suffix.lower()
    if suffix == ".toml":
        materials, levels = _from_toml(text, name)
    elif suffix == ".csv":
        materials, levels = _from_csv(text, name)
    else:
        raise InputError(f"a standards file ends in .toml or .csv, not {suffix or '(none)'}",
                         file=name)
    if not materials:
        raise InputError("no [[material]] entry: name at least one reference material", file=name)
    if len(materials) + len(levels) > _MAX_ENTRIES:
        raise InputError(f"more than {_MAX_ENTRIES} materials and levels", file=name)
    made = _link_levels(materials, levels, name)
    return Standards(name, hashlib.sha256(data).hexdigest(), tuple(m for m, _ in materials), made)


def standards_for_run(run_path: str | Path, metadata: Mapping[str, str],
                      given: Standards | str | Path | None) -> Standards | None:
    """The standards of a run: those ``given``, else the file its metadata names, else None.

    The metadata may only name a file in the run file's own folder (a plain
    name: no folders, so a run file never points calib elsewhere).  When both
    are given and name different files, the run is refused: which one holds is
    not ours to guess.

    Raises
    ------
    InputError
        When the named file cannot be used, or the two disagree.
    """
    named = [(k, v.strip()) for k, v in metadata.items()
             if " ".join(str(k).casefold().replace("_", " ").split()) in METADATA_KEYS
             and str(v).strip()]
    run_path = Path(run_path)
    if len(named) > 1:
        raise InputError(f"the run names two standards files ({named[0][1]!r}, {named[1][1]!r}); "
                         "keep one line", file=run_path.name)
    if given is not None:
        chosen = given if isinstance(given, Standards) else read_standards(given)
        if named and named[0][1].casefold() != chosen.file.casefold():
            raise InputError(f"the run names standards file {named[0][1]!r} but --standards "
                             f"gives {chosen.file!r}: give one of them", file=run_path.name)
        return chosen
    if not named:
        return None
    name = named[0][1]
    if Path(name).name != name or name in (".", ".."):
        raise InputError(f"line {named[0][0]!r}: {name!r} must be a file name in the run file's "
                         "folder (no folders); or pass --standards FILE", file=run_path.name)
    return read_standards(run_path.parent / name)


def standards_section(standards: Standards) -> dict[str, Any]:
    """The ``standards`` section of a record: plain JSON-ready data.

    Examples
    --------
    >>> m = Material("A-1", "stock", "L1", 1000.0, None, "mg/L", dt.date(2027, 1, 1))
    >>> standards_section(Standards("s.toml", "0" * 64, (m,)))["materials"][0]["expires"]
    '2027-01-01'
    """
    return {
        "file": standards.file,
        "sha256": standards.sha256,
        "materials": [
            {"id": m.id, "name": m.name, "lot": m.lot, "value": m.value,
             "uncertainty": m.uncertainty, "unit": m.unit, "expires": m.expires.isoformat(),
             "analytes": list(m.analytes)}
            for m in standards.materials
        ],
        "levels": [
            {"name": lv.name, "from": lv.source, "dilution": lv.dilution,
             "concentration": lv.concentration, "material": lv.material, "note": lv.note}
            for lv in standards.levels
        ],
    }


# ----------------------------------------------------------------------------- parsing

Where = str  # "entry 2 of [[material]]" or "row 5"


def _from_toml(text: str, name: str) -> tuple[list[tuple[Material, Where]],
                                              list[tuple[dict[str, Any], Where]]]:
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML ({exc})", file=name) from None
    unknown = sorted(set(doc) - {"material", "level"})
    if unknown:
        raise InputError(f"unknown table {unknown[0]!r}; a standards file has [[material]] and "
                         "[[level]] entries only", file=name)
    materials, levels = [], []
    for table, out in (("material", materials), ("level", levels)):
        entries = doc.get(table, [])
        if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
            raise InputError(f"{table} must be written [[{table}]] (a list of tables)", file=name)
        for i, entry in enumerate(entries, start=1):
            where = f"entry {i} of [[{table}]]"
            out.append((_material(entry, name, where) if table == "material" else
                        _level_fields(entry, name, where), where))
    return materials, levels


def _from_csv(text: str, name: str) -> tuple[list[tuple[Material, Where]],
                                             list[tuple[dict[str, Any], Where]]]:
    rows = list(csv.reader(io.StringIO(text)))
    if not rows:
        raise InputError("the standards file is empty", file=name)
    header = [h.strip().casefold() for h in rows[0]]
    if "kind" not in header:
        raise InputError("no 'kind' column (material or level)", file=name, row=1)
    allowed = _MATERIAL_KEYS | _LEVEL_KEYS | {"kind"}
    for h in header:
        if h and h not in allowed:
            raise InputError(f"unknown column {h!r}; known: {', '.join(sorted(allowed))}",
                             file=name, row=1, column=h)
    if len(set(header)) != len(header):
        raise InputError("a column is named twice", file=name, row=1)
    materials, levels = [], []
    for number, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        if len(row) > len(header):
            raise InputError("more cells than header columns", file=name, row=number)
        entry = {h: c.strip() for h, c in zip(header, row) if h and c.strip()}
        kind = entry.pop("kind", "").casefold()
        where = f"row {number}"
        if kind == "material":
            if "analytes" in entry:
                entry["analytes"] = [a.strip() for a in entry["analytes"].split(";") if a.strip()]
            for key in ("value", "uncertainty"):
                if key in entry:
                    entry[key] = _number_text(entry[key], name, number, key)
            if "expires" in entry:
                entry["expires"] = _date_text(entry["expires"], name, number)
            materials.append((_material(entry, name, where, row=number), where))
        elif kind == "level":
            for key in ("dilution", "concentration"):
                if key in entry:
                    entry[key] = _number_text(entry[key], name, number, key)
            levels.append((_level_fields(entry, name, where, row=number), where))
        else:
            raise InputError(f"kind must be material or level, not {kind!r}", file=name,
                             row=number, column="kind")
    return materials, levels


def _number_text(text: str, name: str, row: int, column: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise InputError(f"not a number: {text!r}", file=name, row=row, column=column) from None


def _date_text(text: str, name: str, row: int) -> dt.date:
    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise InputError(f"expiry date {text!r} is not written YYYY-MM-DD", file=name, row=row,
                         column="expires") from None


def _refuse(message: str, name: str, where: str, row: int | None, column: str | None = None
            ) -> InputError:
    if row is not None:
        return InputError(message, file=name, row=row, column=column)
    return InputError(f"{where}: {message}" if column is None else
                      f"{where}, key {column}: {message}", file=name)


def _check_keys(entry: Mapping[str, Any], allowed: set[str], required: tuple[str, ...],
                name: str, where: str, row: int | None) -> None:
    for key in entry:
        if key not in allowed:
            raise _refuse(f"unknown key {key!r}; known: {', '.join(sorted(allowed))}", name,
                          where, row)
    for key in required:
        if key not in entry or entry[key] in ("", None):
            raise _refuse(f"{key} is missing", name, where, row, key)


def _text(entry: Mapping[str, Any], key: str, name: str, where: str, row: int | None) -> str:
    value = entry.get(key, "")
    if not isinstance(value, str):
        raise _refuse("must be text", name, where, row, key)
    value = value.strip()
    if len(value) > 200 or any(ord(c) < 32 for c in value):
        raise _refuse("must be one line of at most 200 characters", name, where, row, key)
    return value


def _positive(entry: Mapping[str, Any], key: str, name: str, where: str, row: int | None,
              *, zero: bool = False) -> float:
    value = entry[key]
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise _refuse("must be a number", name, where, row, key)
    value = float(value)
    if not math.isfinite(value) or value < 0 or (value == 0 and not zero):
        raise _refuse(f"must be a finite number above zero, not {value:g}", name, where, row,
                      key)
    return value


def _material(entry: Mapping[str, Any], name: str, where: str, row: int | None = None
              ) -> Material:
    _check_keys(entry, _MATERIAL_KEYS, _MATERIAL_REQUIRED, name, where, row)
    expires = entry["expires"]
    if isinstance(expires, dt.datetime) or not isinstance(expires, dt.date):
        raise _refuse("must be a date written YYYY-MM-DD (no time)", name, where, row, "expires")
    analytes = entry.get("analytes", [])
    if not isinstance(analytes, list) or not all(isinstance(a, str) and a.strip()
                                                 for a in analytes):
        raise _refuse("must be a list of analyte names", name, where, row, "analytes")
    uncertainty = (_positive(entry, "uncertainty", name, where, row, zero=True)
                   if "uncertainty" in entry else None)
    return Material(_text(entry, "id", name, where, row), _text(entry, "name", name, where, row),
                    _text(entry, "lot", name, where, row),
                    _positive(entry, "value", name, where, row), uncertainty,
                    _text(entry, "unit", name, where, row), expires,
                    tuple(a.strip() for a in analytes))


def _level_fields(entry: Mapping[str, Any], name: str, where: str, row: int | None = None
                  ) -> dict[str, Any]:
    _check_keys(entry, _LEVEL_KEYS, _LEVEL_REQUIRED, name, where, row)
    fields = {"name": _text(entry, "name", name, where, row),
              "from": _text(entry, "from", name, where, row),
              "dilution": _positive(entry, "dilution", name, where, row),
              "note": _text(entry, "note", name, where, row) if "note" in entry else "",
              "row": row, "where": where}
    if fields["dilution"] < 1:
        raise _refuse(f"must be 1 or more (final volume / aliquot volume), not "
                      f"{fields['dilution']:g}", name, where, row, "dilution")
    if "concentration" in entry:
        fields["stated"] = _positive(entry, "concentration", name, where, row)
    return fields


def _link_levels(materials: list[tuple[Material, Where]],
                 levels: list[tuple[dict[str, Any], Where]], name: str) -> tuple[Level, ...]:
    """Follow each level to its material; refuse duplicates, unknown sources and loops."""
    by_id: dict[str, Material] = {}
    for m, where in materials:
        key = m.id.casefold()
        if key in by_id:
            raise InputError(f"{where}: material id {m.id!r} is used twice", file=name)
        by_id[key] = m
    fields: dict[str, dict[str, Any]] = {}
    for f, where in levels:
        key = f["name"].casefold()
        if key in fields or key in by_id:
            raise InputError(f"{where}: name {f['name']!r} is used twice (level names and "
                             "material ids must all differ)", file=name)
        fields[key] = f
    made: list[Level] = []
    for f, where in levels:
        factor, seen, source = f["dilution"], [f["name"].casefold()], f["from"].casefold()
        while source not in by_id:
            if source not in fields:
                raise InputError(f"{where}: from = {f['from']!r} names no material or level",
                                 file=name)
            if source in seen:
                raise InputError(f"{where}: levels made from each other in a loop "
                                 f"({' → '.join([*seen, source])})", file=name)
            seen.append(source)
            factor *= fields[source]["dilution"]
            source = fields[source]["from"].casefold()
        material = by_id[source]
        prepared = material.value / factor
        stated = f.get("stated")
        if stated is not None and abs(stated - prepared) > 0.01 * prepared:
            raise InputError(f"{where}: concentration {stated:g} {material.unit} differs from "
                             f"the preparation ({material.value:g} {material.unit} diluted "
                             f"{factor:g}-fold = {prepared:.6g}) by more than 1 %; correct one",
                             file=name)
        made.append(Level(f["name"], f["from"], f["dilution"], prepared,
                          material.id, f["note"]))
    return tuple(made)
