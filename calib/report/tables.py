"""Tables of the PDF record from plain text cells.

Cells are given as plain text and laid out once by :mod:`calib.report.grid`
(measured, broken into lines); text is never interpreted as markup, so names
and reasons from a spreadsheet print as written.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from calib.report.grid import PAD_BOTTOM, PAD_TOP, Grid, GridRow, grid_row, layout_cell

__all__ = ["TableMaker"]

#: Extra room above and below a blank sign-off row, to sign a printed copy by hand.
_HAND_PADDING = 9.0


class TableMaker:
    """Builds the record's tables at a given frame width.

    Parameters
    ----------
    width : float
        Width of the text frame in points; column widths are fractions of it.
    """

    def __init__(self, width: float) -> None:
        self.width = width

    def grid(
        self,
        rows: Sequence[Sequence[str]],
        fractions: Sequence[float],
        *,
        right: Iterable[int] = (),
        header: bool = True,
        bold: Iterable[tuple[int, int]] = (),
        tall_rows: Iterable[int] = (),
        spans: Iterable[int] = (),
    ) -> Grid:
        """A data table.

        Parameters
        ----------
        rows : sequence of rows
            Text cells; the first row is the header when ``header``.
        fractions : sequence of float
            Column widths as fractions of the frame width.
        right : iterable of int
            Columns holding numbers, aligned right.
        header : bool
            Whether the first row is a header (bold, shaded, repeated on new pages).
        bold : iterable of (column, row)
            Cells set in bold (e.g. a failed verdict).
        tall_rows : iterable of int
            Rows given room to sign by hand on a printed copy.
        spans : iterable of int
            Rows whose second cell spans to the end of the row (the cells it covers are
            dropped).

        Examples
        --------
        >>> table = TableMaker(400).grid([["Level", "Area"], ["1", "0.52"]], [0.5, 0.5],
        ...                              right=[1])
        >>> len(table.rows), table.width
        (2, 400.0)
        """
        right, bold = set(right), set(bold)
        tall, spanned = set(tall_rows), set(spans)
        widths = [f * self.width for f in fractions]
        wide = sum(widths[1:])
        laid: list[GridRow] = []
        for r, row in enumerate(rows):
            if not all(isinstance(text, str) for text in row):
                odd = next(text for text in row if not isinstance(text, str))
                raise TypeError(f"table cells are text; got {type(odd).__name__}")
            is_head = header and r == 0
            if r in spanned:
                cells = [layout_cell(row[0], widths[0], is_head or (0, r) in bold, 0 in right),
                         layout_cell(row[1], wide, is_head or (1, r) in bold, False,
                                     len(widths) - 1)]
            else:
                cells = [layout_cell(text, widths[c], is_head or (c, r) in bold, c in right)
                         for c, text in enumerate(row)]
            pad = _HAND_PADDING if r in tall else None
            laid.append(grid_row(cells, pad_top=pad or PAD_TOP, pad_bottom=pad or PAD_BOTTOM))
        return Grid(laid, widths, header=header)

    def pairs(self, items: Sequence[tuple[str, str, bool]]) -> Grid:
        """A label/value grid, two pairs a row; an item with ``wide`` set takes a whole row."""
        rows: list[list[str]] = []
        spans: list[int] = []
        pending: list[str] = []
        for label, value, wide in items:
            if wide:
                if pending:
                    rows.append(pending + ["", ""])
                    pending = []
                spans.append(len(rows))
                rows.append([label, value, "", ""])
            else:
                pending += [label, value]
                if len(pending) == 4:
                    rows.append(pending)
                    pending = []
        if pending:
            rows.append(pending + ["", ""])
        label, value = 0.17, 0.33
        bold = [(c, r) for r in range(len(rows)) for c in (0, 2)]
        return self.grid(rows, [label, value] * 2, header=False, bold=bold, spans=spans)
