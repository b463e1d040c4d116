"""Import maps: a TOML file that says how one instrument method's exports are laid out.

Detection handles most exports without help.  When it cannot (headings in
a language or wording calib does not know, an unusual sample naming scheme,
a header row that looks like data), the laboratory writes an import map once
per instrument method and passes it with ``--map``.  Every key is optional::

    # Import map for IC-2 anion exports (Fernbrook Water Laboratory)
    sheet = "Results"            # sheet name, or 0-based index
    header_row = 7               # 1-based row of the column headings
    layout = "long"              # "long" or "wide"; detected when left out
    analyte = "Nitrate-N"        # for a table without an analyte column
    decimal = ","                # decimal mark of a text file: "." or ","
    delimiter = ";"              # delimiter of a text file
    encoding = "cp1252"          # encoding of a text file
    ignore = ["Operator"]        # headings that never split a curve (see below)

    [columns]                    # canonical column = heading as written in the file
    concentration = "Sollwert"
    response = "Fl. Leitf."

    [units]                      # units the headings leave out
    concentration = "mg/L"

    [sample_types]               # glob patterns on the type cell or the sample name
    standard = ["KAL*"]
    blank = ["RB*", "Leer*"]
    qc = ["KS-?"]

    [analytes]                   # wide tables: analyte = its response heading,
    Nitrate = "NO3 Fl."          # or a table of its columns
    Fluoride = { response = "F Fl.", concentration = "F Soll" }

``ignore`` lists headings the analyst declares are not the analyte: calib
stops when a column it does not read holds values that would split one
curve in two (two emission lines, two batches), and this says the rows are
one curve all the same.

Headings are compared as calib compares headings (case, accents, spaces,
punctuation and a trailing unit do not matter).
"""

from __future__ import annotations

import dataclasses
import hashlib
import os
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from calib.errors import InputError
from calib.io.columns import CANONICAL, WIDE_COLUMNS
from calib.options import SampleType

__all__ = ["ImportMap", "load_map"]

_TOP_KEYS = (
    "name", "description", "sheet", "header_row", "layout", "analyte", "decimal", "delimiter",
    "encoding", "columns", "units", "sample_types", "analytes", "ignore",
)
_LAYOUTS = ("long", "wide")
_UNIT_KEYS = ("concentration", "response", "is_response")


@dataclass(frozen=True)
class ImportMap:
    """How to read one kind of export; every field is optional.

    Attributes
    ----------
    file : str or None
        File name the map was read from (shown in the run's source).
    sha256 : str or None
        SHA-256 of the map file.
    sheet : str or int or None
        Sheet name or 0-based index.
    header_row : int or None
        0-based row index of the header row (the file says it 1-based).
    layout : str or None
        ``"long"`` or ``"wide"``.
    analyte : str or None
        Analyte name for a table without an analyte column.
    decimal, delimiter, encoding : str or None
        For text files.
    columns : mapping of str to str
        Canonical column name to heading.
    units : mapping of str to str
        Canonical column name to unit, for headings that give none.
    sample_types : mapping of SampleType to tuple of str
        Glob patterns per sample type.
    analytes : mapping of str to mapping of str to str
        For wide tables: analyte to ``{canonical column: heading}``.
    ignore : tuple of str
        Headings of columns that do not split a curve, whatever they hold.
    """

    file: str | None = None
    sha256: str | None = None
    sheet: str | int | None = None
    header_row: int | None = None
    layout: str | None = None
    analyte: str | None = None
    decimal: str | None = None
    delimiter: str | None = None
    encoding: str | None = None
    columns: Mapping[str, str] = field(default_factory=dict)
    units: Mapping[str, str] = field(default_factory=dict)
    sample_types: Mapping[SampleType, tuple[str, ...]] = field(default_factory=dict)
    analytes: Mapping[str, Mapping[str, str]] = field(default_factory=dict)
    ignore: tuple[str, ...] = ()

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], *, file: str = "import map") -> ImportMap:
        """Build a map from parsed TOML, checking every key and value.

        Raises
        ------
        InputError
            Naming the map file and the key that is wrong.

        Examples
        --------
        >>> m = ImportMap.from_dict({"header_row": 7, "columns": {"response": "Fläche"}})
        >>> m.header_row, dict(m.columns)
        (6, {'response': 'Fläche'})
        >>> ImportMap.from_dict({"colums": {}}, file="ic2.toml")
        Traceback (most recent call last):
        ...
        calib.errors.InputError: ic2.toml: unknown key 'colums'; expected one of name, \
description, sheet, header_row, layout, analyte, decimal, delimiter, encoding, columns, units, \
sample_types, analytes, ignore
        """
        checker = _Checker(file)
        checker.keys(data, _TOP_KEYS, where="")
        sheet = data.get("sheet")
        if sheet is not None and (isinstance(sheet, bool) or not isinstance(sheet, (str, int))):
            raise checker.error("sheet", "a sheet name in quotes or a 0-based index", sheet)
        if isinstance(sheet, int) and sheet < 0:
            raise checker.error("sheet", "a 0-based index (0 or more)", sheet)
        header_row = data.get("header_row")
        if header_row is not None and (
            isinstance(header_row, bool) or not isinstance(header_row, int) or header_row < 1
        ):
            raise checker.error("header_row", "a row number from 1 (as the spreadsheet shows it)",
                                header_row)
        layout = checker.choice(data, "layout", _LAYOUTS)
        decimal = checker.choice(data, "decimal", (".", ","))
        delimiter = checker.text(data, "delimiter")
        if delimiter is not None and len(delimiter) != 1:
            raise checker.error("delimiter", "one character such as \",\", \";\" or \"\\t\"",
                                delimiter)
        encoding = checker.text(data, "encoding")
        if encoding is not None:
            try:
                "".encode(encoding)
            except LookupError:
                raise checker.error("encoding", "an encoding name such as \"utf-8\" or "
                                    "\"cp1252\"", encoding) from None
        columns = checker.table(data, "columns", CANONICAL)
        units = checker.table(data, "units", _UNIT_KEYS)
        kinds = {kind.value: kind for kind in SampleType}
        raw_types = data.get("sample_types", {})
        if not isinstance(raw_types, dict):
            raise checker.error("sample_types", "a table such as [sample_types]", raw_types)
        checker.keys(raw_types, tuple(kinds), where="sample_types.")
        sample_types: dict[SampleType, tuple[str, ...]] = {}
        for key, globs in raw_types.items():
            if isinstance(globs, str):
                globs = [globs]
            if not isinstance(globs, list) or not all(isinstance(g, str) and g for g in globs):
                raise checker.error(f"sample_types.{key}", "a list of patterns in quotes", globs)
            sample_types[kinds[key]] = tuple(globs)
        analytes = checker.analytes(data.get("analytes", {}))
        raw_ignore = data.get("ignore", [])
        ignore = [raw_ignore] if isinstance(raw_ignore, str) else raw_ignore
        if not isinstance(ignore, list) or not all(isinstance(h, str) and h.strip()
                                                   for h in ignore):
            raise checker.error("ignore", "a list of headings in quotes", raw_ignore)
        return cls(
            file=file, sheet=sheet, header_row=None if header_row is None else header_row - 1,
            layout=layout, analyte=checker.text(data, "analyte"), decimal=decimal,
            delimiter=delimiter, encoding=encoding, columns=columns, units=units,
            sample_types=sample_types, analytes=analytes, ignore=tuple(ignore),
        )


class _Checker:
    """Checks parsed TOML values, raising InputErrors that name the map file and key."""

    def __init__(self, file: str) -> None:
        self.file = file

    def error(self, key: str, expected: str, found: object) -> InputError:
        return InputError(f"{key} is {found!r}; expected {expected}", file=self.file)

    def keys(self, data: Mapping[str, Any], allowed: tuple[str, ...], *, where: str) -> None:
        for key in data:
            if key not in allowed:
                raise InputError(
                    f"unknown key {where + key!r}; expected one of {', '.join(allowed)}",
                    file=self.file,
                )

    def text(self, data: Mapping[str, Any], key: str) -> str | None:
        value = data.get(key)
        if value is not None and (not isinstance(value, str) or not value.strip()):
            raise self.error(key, "text in quotes", value)
        return value

    def choice(self, data: Mapping[str, Any], key: str, choices: tuple[str, ...]) -> str | None:
        value = data.get(key)
        if value is not None and value not in choices:
            raise self.error(key, " or ".join(f'"{c}"' for c in choices), value)
        return value

    def table(self, data: Mapping[str, Any], key: str, allowed: tuple[str, ...]) -> dict[str, str]:
        table = data.get(key, {})
        if not isinstance(table, dict):
            raise self.error(key, f"a table such as [{key}]", table)
        self.keys(table, allowed, where=f"{key}.")
        for name, value in table.items():
            if not isinstance(value, str) or not value.strip():
                raise self.error(f"{key}.{name}", "text in quotes", value)
        return dict(table)

    def analytes(self, table: object) -> dict[str, dict[str, str]]:
        if not isinstance(table, dict):
            raise self.error("analytes", "a table such as [analytes]", table)
        analytes: dict[str, dict[str, str]] = {}
        for analyte, columns in table.items():
            if isinstance(columns, str):
                columns = {"response": columns}
            if not isinstance(columns, dict):
                raise self.error(f"analytes.{analyte}", "a response heading in quotes or a "
                                 "table of headings", columns)
            self.keys(columns, WIDE_COLUMNS, where=f"analytes.{analyte}.")
            for name, heading in columns.items():
                if not isinstance(heading, str) or not heading.strip():
                    raise self.error(f"analytes.{analyte}.{name}", "text in quotes", heading)
            if "response" not in columns:
                raise InputError(
                    f"analytes.{analyte} names no response heading; expected "
                    f"response = \"...\"", file=self.file,
                )
            analytes[analyte] = dict(columns)
        return analytes


def load_map(path: str | os.PathLike[str]) -> ImportMap:
    """Read an import map from a TOML file.

    Raises
    ------
    InputError
        When the file is missing or unreadable, is not TOML (naming the line),
        or holds an unknown key or a value of the wrong kind.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder, "ic2.toml")
    ...     _ = path.write_text('header_row = 3\\n[units]\\nconcentration = "mg/L"\\n')
    ...     imap = load_map(path)
    >>> imap.file, imap.header_row, dict(imap.units)
    ('ic2.toml', 2, {'concentration': 'mg/L'})
    """
    path = Path(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise InputError(f"cannot read the import map ({reason}); expected a TOML file",
                         file=str(path)) from None
    try:
        parsed = tomllib.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise InputError("the import map is not UTF-8 text; expected a TOML file",
                         file=str(path)) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"the import map is not valid TOML ({exc})", file=str(path)) from None
    imap = ImportMap.from_dict(parsed, file=str(path))
    return dataclasses.replace(imap, file=path.name, sha256=hashlib.sha256(data).hexdigest())
