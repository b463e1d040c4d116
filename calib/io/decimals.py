"""The decimal mark of a sheet's number text, settled from the numbers themselves.

A number such as ``1,006`` is 1.006 under a decimal comma and 1006 under a
thousands comma.  The mark is taken from an import map, or from numbers
that show it (``0,5``, ``12.75``); a semicolon-separated text file is
*assumed* to write decimal commas, but an assumption never settles a
number that could be read both ways: ``1,006`` is then refused, as it is
in any file whose numbers do not show the mark.

Within one column, a number shaped like a thousands group (``1,006``) read
under a decimal comma beside plain whole numbers of three or more digits
(``995``) is refused too: the column mixes two ways of writing, and the
two readings differ a thousandfold.
"""

from __future__ import annotations

import re

from calib.io.numbers import (
    DecimalMark,
    NumberTextError,
    decimal_evidence,
    parse_number_text,
    split_unit_suffix,
)
from calib.io.table import Grid

__all__ = ["DecimalReader"]

_THOUSANDS_SHAPE = re.compile(r"[+-]?\d{1,3}([,.])\d{3}")
_WHOLE = re.compile(r"[+-]?\d{3,}")


class DecimalReader:
    """Reads number text with the grid's decimal mark, settled from its numbers when needed."""

    def __init__(self, grid: Grid, measures: frozenset[int], body: range) -> None:
        self.grid = grid
        self.measures = measures
        self.body = body
        self.decimal: DecimalMark | None = grid.decimal
        self.settled = grid.decimal is not None
        self.assumed = False
        # column -> (row, text) of the first thousands-shaped number and of the first whole one
        self.shapes: dict[int, list[tuple[int, str] | None]] = {}
        if not self.settled and grid.sheet is None:
            # Text files: every number is text, so say which mark the file writes.
            self._settle(first=True)

    def _settle(self, *, first: bool = False) -> None:
        """Settle the mark from the numbers; ``first`` stops at the first number that shows one."""
        self.settled = True
        seen: set[str] = set()
        for index in self.body:
            row = self.grid.rows[index]
            for column in self.measures:
                value = row[column] if column < len(row) else None
                if isinstance(value, str):
                    evidence = decimal_evidence(split_unit_suffix(value)[0])
                    if evidence is not None:
                        seen.add(evidence)
            if len(seen) == 2 or (first and seen):
                break
        if len(seen) == 1:
            self.decimal = seen.pop()  # type: ignore[assignment]
        elif not seen:
            self.decimal = self.grid.decimal_hint
            self.assumed = self.decimal is not None

    def parse(self, text: str) -> float | None:
        if self.assumed and _THOUSANDS_SHAPE.fullmatch(text.strip()):
            mark = _THOUSANDS_SHAPE.fullmatch(text.strip())[1]  # type: ignore[index]
            word = "comma" if mark == "," else "point"
            raise NumberTextError(
                f"found the text {text.strip()!r}, where the {word} may be a decimal {word} or a "
                f"thousands separator (no number in the file shows which); expected a number "
                f"whose decimal mark the file makes clear (for example "
                f"{text.strip().replace(mark, '')} or {text.strip().replace(mark, '.')}), or an "
                f"import map naming the decimal mark")
        try:
            return parse_number_text(text, decimal=self.decimal)
        except NumberTextError:
            if self.settled:
                raise
        self._settle()
        return parse_number_text(text, decimal=self.decimal)

    def note_shape(self, column: int, row: int, text: str) -> str | None:
        """Remember how a column writes its numbers; the problem when it mixes two ways."""
        if self.grid.decimal is not None or self.decimal != ",":
            return None
        text = text.strip()
        if _THOUSANDS_SHAPE.fullmatch(text) and "," in text:
            slot = 0
        elif _WHOLE.fullmatch(text):
            slot = 1
        else:
            return None
        shapes = self.shapes.setdefault(column, [None, None])
        if shapes[slot] is None:
            shapes[slot] = (row, text)
        grouped, whole = shapes
        if grouped is None or whole is None:
            return None
        return (f"found {grouped[1]!r} (row {grouped[0] + 1}) beside the whole number "
                f"{whole[1]!r} (row {whole[0] + 1}) in one column: read with a decimal comma, "
                f"{grouped[1]!r} is a thousand times smaller than it looks if the comma "
                f"separates thousands; expected one way of writing numbers in a column: write "
                f"{grouped[1].replace(',', '')} if the comma separates thousands, or give an "
                f"import map with decimal = \",\" if {grouped[1]} means "
                f"{grouped[1].replace(',', '.')}")
