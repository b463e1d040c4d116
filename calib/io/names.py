"""Analyte names: one spelling per analyte, nothing hidden in it.

``Sulfate`` and ``Sulfаte`` (the second ``а`` Cyrillic) print alike but
would be two analytes, and the trend history of one would split in two; a
zero-width space does the same unseen.  So, for every analyte name:

- it is normalised to Unicode NFKC (full-width ``Ｓｕｌｆａｔｅ`` becomes
  ``Sulfate``, with a note) and its spaces are collapsed;
- an invisible character (zero-width space, soft hyphen, word joiner...)
  is refused, naming the cell and the character;
- a name mixing Latin letters with look-alike letters of another script is
  refused, and so are two names of one run that differ only in such letters
  or in case, naming both cells.
"""

from __future__ import annotations

import dataclasses
import unicodedata
from collections.abc import MutableSequence, Sequence

from calib.errors import InputError
from calib.io.layout import Table
from calib.io.rows import TableRead
from calib.io.table import Grid
from calib.run import Point, point_values

__all__ = ["normalise_analytes"]

# Letters of other scripts drawn like Latin ones (Cyrillic and Greek), with the Latin letter.
_LOOK_ALIKE = {
    "а": "a", "в": "b", "е": "e", "ё": "e", "к": "k", "м": "m", "н": "h", "о": "o", "р": "p",
    "с": "c", "т": "t", "у": "y", "х": "x", "ѕ": "s", "і": "i", "ї": "i", "ј": "j", "ԁ": "d",
    "ԛ": "q", "ԝ": "w", "һ": "h", "ɑ": "a",
    "А": "A", "В": "B", "Е": "E", "К": "K", "М": "M", "Н": "H", "О": "O", "Р": "P", "С": "C",
    "Т": "T", "У": "Y", "Х": "X", "Ѕ": "S", "І": "I", "Ј": "J",
    "ο": "o", "ν": "v", "Α": "A", "Β": "B", "Ε": "E", "Ζ": "Z", "Η": "H", "Ι": "I", "Κ": "K",
    "Μ": "M", "Ν": "N", "Ο": "O", "Ρ": "P", "Τ": "T", "Υ": "Y", "Χ": "X",
}
_TO_LATIN = str.maketrans(_LOOK_ALIKE)
# Fillers that are not format characters but show nothing.
_BLANK_LOOKING = frozenset("\u115f\u1160\u3164\uffa0\u034f\u2800")


def _invisible(name: str) -> str | None:
    for char in name:
        if char in _BLANK_LOOKING or unicodedata.category(char) == "Cf":
            return char
    return None


def _char_name(char: str) -> str:
    return f"U+{ord(char):04X} {unicodedata.name(char, 'unnamed character')}"


def _skeleton(name: str) -> str:
    """The name as compared for look-alikes: NFKC, case folded, look-alike letters made Latin.

    Examples
    --------
    >>> _skeleton("Sulfаte") == _skeleton("sulfate"), _skeleton("Ｎｉｔｒａｔｅ")
    (True, 'nitrate')
    """
    return unicodedata.normalize("NFKC", name).translate(_TO_LATIN).casefold()


def _look_alike_in(name: str) -> str | None:
    if not any("a" <= c.casefold() <= "z" for c in name):
        return None
    return next((c for c in name if c in _LOOK_ALIKE), None)


def _name_cells(reads: Sequence[tuple[Grid, Table, TableRead]],
                points: Sequence[Point]) -> dict[str, str]:
    """Where each analyte name was read: its cell, or the first point's source cell."""
    cells: dict[str, str] = {}
    analytes = point_values(points, "analyte")
    start = 0
    for grid, table, read in reads:
        own = analytes[start:start + len(read.points)]
        # The first row of each name (the last one written wins: the earliest).
        first = dict(zip(reversed(own), range(len(own) - 1, -1, -1)))
        header = table.header
        column = header.shared.get("analyte")
        for name in dict.fromkeys(own):
            if name in cells:
                continue
            if column is not None:
                cells[name] = grid.reference(column.index, read.rows[first[name]])
            elif name in header.analytes:
                cells[name] = grid.reference(header.analytes[name]["response"].index,
                                             header.row)
            else:
                cells[name] = (f"the name given to the table of "
                               f"{points[start + first[name]].source_cell}")
        start += len(own)
    return cells


def normalise_analytes(reads: Sequence[tuple[Grid, Table, TableRead]],
                       points: MutableSequence[Point],
                       warnings: list[str], *, file: str, sheet: str | None) -> dict[str, str]:
    """Normalise every analyte name in ``points`` (in place), refusing hidden or look-alike ones.

    Returns
    -------
    dict
        The names changed, ``{as written: as read}``.

    Raises
    ------
    InputError
        For a name holding an invisible character or look-alike letters of
        another script, or two names differing only in such letters or case.
    """
    cells = _name_cells(reads, points)
    renamed: dict[str, str] = {}
    by_skeleton: dict[str, str] = {}
    for raw, cell in cells.items():
        hidden = _invisible(raw)
        if hidden is not None:
            raise InputError(
                f"the analyte name {raw!r} in {cell} holds the invisible character "
                f"{_char_name(hidden)}; expected a name of visible characters: delete it in the "
                f"file", file=file, sheet=sheet)
        name = " ".join(unicodedata.normalize("NFKC", raw).split())
        odd = _look_alike_in(name)
        if odd is not None:
            raise InputError(
                f"the analyte name {name!r} in {cell} mixes Latin letters with "
                f"{_char_name(odd)}, which looks like the Latin {_LOOK_ALIKE[odd]!r}; expected "
                f"one spelling: retype the name in the file", file=file, sheet=sheet)
        key = _skeleton(name)
        other = by_skeleton.setdefault(key, raw)
        if other != raw and " ".join(unicodedata.normalize("NFKC", other).split()) != name:
            raise InputError(
                f"the analyte names {other!r} (in {cells[other]}) and {raw!r} (in {cell}) "
                f"differ only in case or in look-alike characters; expected one spelling per "
                f"analyte: correct one of them in the file", file=file, sheet=sheet)
        if name != raw:
            renamed[raw] = name
            warnings.append(f"{cell}: the analyte name {raw!r} was read as {name!r} (Unicode "
                            f"compatibility form)")
    if renamed:
        for index, name in enumerate(point_values(points, "analyte")):
            if name in renamed:
                points[index] = dataclasses.replace(points[index], analyte=renamed[name])
    return renamed
