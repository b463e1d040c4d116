"""Finding the tables in a grid: header rows, layouts, bodies and the lines around them.

A header row is a row of headings from which calib can read standards:

- **long** — whole headings for a concentration and a response column
  (``Sample | Conc. (mg/L) | Area``): one row per injection, an analyte
  column or one analyte for the whole table;
- **wide** — one row per standard and one response column per analyte, the
  analyte named in the heading (``Nitrate area``, ``Fläche Nitrat``), or the
  heading being only the analyte's name beside a shared concentration
  column (``Level | Conc (µg/L) | Atrazine | Simazine``), with a shared
  concentration column or one per analyte (``Nitrate conc``);
- **wide, two header rows** — analyte names in a row above repeated
  sub-headings (``Nitrate`` over ``Conc | Area``, often a merged cell).

Several header rows in one sheet make a stack of tables.  The lines above
each header (title, ``key: value`` lines, the analyte's name) belong to its
table; lines below the last table after a blank row are notes, and so are
lone lines of text right under its data (:mod:`calib.io.footer`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from calib.errors import InputError
from calib.io.cells import Cell, CellError, is_blank, is_empty_row, to_text
from calib.io.columns import (
    NOT_ANALYTES,
    WIDE_COLUMNS,
    Column,
    duplicate_error,
    read_heading,
    split_unit,
    squash,
)
from calib.io.footer import end_before_notes
from calib.io.importmap import ImportMap
from calib.io.metadata import read_metadata
from calib.io.numbers import find_marker, parse_number_text, split_unit_suffix
from calib.io.table import HEADER_SEARCH_ROWS, Grid

__all__ = ["Header", "Table", "find_first_header", "find_tables"]

# Headings named in the message when no header row is found.
_EXAMPLES = {"concentration": ("concentration", "conc", "amount"),
             "response": ("response", "area", "height")}
_SHARED_ONLY = ("analyte", "sample_type", "level", "replicate", "injection_order", "include",
                "exclusion_reason", "sample_id")
_PROBE_ROWS = 12


@dataclass(frozen=True)
class Header:
    """A header row and what its headings name.

    Attributes
    ----------
    row : int
        0-based row of the headings.
    first_row : int
        First row of the header: ``row``, or the row above holding analyte
        names over repeated sub-headings.
    layout : str
        ``"long"`` or ``"wide"``.
    shared : mapping of str to Column
        Columns every analyte of a row shares, by canonical name.
    analytes : mapping of str to mapping of str to Column
        Wide tables: each analyte's own columns (``response``, and possibly
        ``concentration`` and ``is_response``).
    """

    row: int
    first_row: int
    layout: str
    shared: Mapping[str, Column]
    analytes: Mapping[str, Mapping[str, Column]] = field(default_factory=dict)

    def measurement_indices(self) -> frozenset[int]:
        """Columns of concentrations and responses, where a data row has numbers."""
        indices = {c.index for n, c in self.shared.items()
                   if n in ("concentration", "response", "is_response")}
        for columns in self.analytes.values():
            indices.update(c.index for c in columns.values())
        return frozenset(indices)

    def all_columns(self) -> list[Column]:
        """Every recognised column, in sheet order."""
        columns = list(self.shared.values())
        for own in self.analytes.values():
            columns.extend(own.values())
        return sorted(columns, key=lambda c: c.index)


@dataclass(frozen=True)
class Table:
    """One table of a grid.

    Attributes
    ----------
    header : Header
        Its header row.
    body : range
        Rows below the header holding its data (blank rows included).
    preamble : range
        Rows above the header that belong to this table.
    footer : range
        Note rows below the body (empty for all but the last table).
    label : str or None
        In a stack of tables, the lone line right above the header, which
        names the table's analyte (then it is not in the metadata).
    metadata : dict of str to str
        ``key: value``, title and note lines of the preamble and footer.
    warnings : tuple of str
        Note lines read right under the data (:mod:`calib.io.footer`), by cell.
    """

    header: Header
    body: range
    preamble: range
    footer: range
    label: str | None
    metadata: dict[str, str]
    warnings: tuple[str, ...] = ()


def _texts(row: Sequence[Cell]) -> list[str]:
    return [t for t in (to_text(c) for c in row) if t is not None]


def _looks_numeric(cell: Cell) -> bool:
    if type(cell) is float or type(cell) is int:
        return True
    if isinstance(cell, str):
        text = cell.lstrip()
        return bool(text) and (text[0].isdigit() or (text[0] in "+-.\u2212" and text[1:2].isdigit()))
    return False


def _maybe_header(row: Sequence[Cell]) -> bool:
    """A quick test run on every row: headings are text, and a data row has numbers.

    A heading may start with a digit (``2,4-D area``), so a row passes while
    fewer than half as many of its cells look like numbers as hold text.
    """
    if is_empty_row(row):
        return False  # (a sheet may hold a million empty rows below a stray cell)
    texts = numbers = 0
    for cell in row:
        if type(cell) is str:
            if _looks_numeric(cell):
                numbers += 1
            elif cell.strip():
                texts += 1
        elif cell is not None and _looks_numeric(cell):
            numbers += 1
    return texts >= 2 and 2 * numbers < texts


def _numeric_below(grid: Grid, column: int, start: int) -> bool:
    """True when the first filled cells below ``start`` in ``column`` are mostly numbers."""
    seen = numbers = 0
    for row in grid.rows[start : start + 4 * _PROBE_ROWS]:
        value = row[column] if column < len(row) else None
        if is_blank(value):
            continue
        seen += 1
        if _looks_numeric(value) or (isinstance(value, str) and _reads_as_measure(value)):
            numbers += 1
        if seen >= _PROBE_ROWS:
            break
    return seen > 0 and numbers / seen >= 0.6


def _reads_as_measure(text: str) -> bool:
    if find_marker(text) is not None:
        return True
    number, _ = split_unit_suffix(text)
    try:
        return parse_number_text(number, decimal=",") is not None
    except ValueError:
        return False


class _Row:
    """The headings of one candidate row, sorted by what they name."""

    def __init__(self, grid: Grid, index: int) -> None:
        self.index = index
        self.whole: dict[str, list[Column]] = {}
        self.compound: dict[str, dict[str, list[Column]]] = {}
        self.unknown: list[tuple[int, str]] = []
        self.cells = grid.rows[index]
        for column, cell in enumerate(self.cells):
            if column in grid.hidden_columns or not isinstance(cell, str):
                continue
            text = cell.strip()
            if not text:
                continue
            heading = read_heading(text)
            if heading.name is None:
                if not heading.ignored:
                    self.unknown.append((column, text))
                continue
            col = Column(heading.name, text, column, heading.unit, heading.analyte)
            if heading.analyte is None:
                self.whole.setdefault(heading.name, []).append(col)
            else:
                self.compound.setdefault(heading.analyte, {}).setdefault(heading.name, []).append(
                    col
                )


def _single(columns: Mapping[str, list[Column]]) -> dict[str, Column]:
    """One column per name, or CellError naming the first two headings of a name."""
    result = {}
    for name, found in columns.items():
        if len(found) > 1:
            raise duplicate_error(found[0], found[1])
        result[name] = found[0]
    return result


def _grouped(grid: Grid, row: _Row) -> Header | None:
    """Two header rows: analyte names above repeated sub-headings (``Conc | Area``)."""
    if row.index == 0:
        return None
    above = grid.rows[row.index - 1]
    groups: list[str | None] = []
    current: str | None = None
    for column in range(len(row.cells)):
        text = to_text(above[column]) if column < len(above) else None
        if text is not None:
            current = text
        groups.append(current)
    shared: dict[str, list[Column]] = {}
    analytes: dict[str, dict[str, list[Column]]] = {}
    for name, columns in row.whole.items():
        for col in columns:
            group = groups[col.index] if col.index < len(groups) else None
            if name in WIDE_COLUMNS and group is not None:
                own = Column(name, f"{group} {col.header}", col.index, col.unit, group)
                analytes.setdefault(group, {}).setdefault(name, []).append(own)
            else:
                shared.setdefault(name, []).append(col)
    if len(analytes) < 1 or not all("response" in own for own in analytes.values()):
        return None
    return Header(
        row.index, row.index - 1, "wide", _single(shared),
        {name: _single(own) for name, own in analytes.items()},
    )


def _long_or_grouped(grid: Grid, row: _Row) -> Header:
    duplicated = [name for name, cols in row.whole.items() if len(cols) > 1]
    if duplicated and all(name in WIDE_COLUMNS for name in duplicated):
        grouped = _grouped(grid, row)
        if grouped is not None:
            return grouped
    return Header(row.index, row.index, "long", _single(row.whole))


def _wide(grid: Grid, row: _Row) -> Header | None:
    shared = _single(row.whole)
    if "analyte" in shared:
        return None
    analytes: dict[str, dict[str, Column]] = {}
    owned = {analyte: _single(kinds) for analyte, kinds in row.compound.items()}
    if any("response" in own for own in owned.values()):
        for analyte, own in owned.items():
            if "response" not in own:
                some = next(iter(own.values()))
                raise CellError(
                    f"{some.label} gives the {some.name.replace('_', ' ')} of {analyte}, but "
                    f"no column gives its response; expected a heading such as "
                    f"'{analyte} area'"
                )
            analytes[analyte] = own
    if "concentration" in shared:
        for column, text in row.unknown:
            name, unit = split_unit(text)
            analyte = name.strip() or text
            if squash(analyte) not in NOT_ANALYTES and _numeric_below(grid, column, row.index + 1):
                if analyte in analytes:
                    raise duplicate_error(analytes[analyte]["response"],
                                          Column("response", text, column, unit, analyte))
                analytes[analyte] = {"response": Column("response", text, column, unit, analyte)}
    if not analytes:
        return None
    if "concentration" not in shared and not all("concentration" in c for c in analytes.values()):
        missing = [a for a, c in analytes.items() if "concentration" not in c]
        raise CellError(
            f"the wide table gives no concentration for {', '.join(missing[:5])}; expected a "
            f"shared concentration column or one per analyte (such as '{missing[0]} conc')"
        )
    return Header(row.index, row.index, "wide", shared, analytes)


def _mapped_header(grid: Grid, index: int, imap: ImportMap, *, strict: bool) -> Header | None:
    """A header row read with the headings an import map names."""
    cells = grid.rows[index]
    found: dict[str, int] = {}
    for column, cell in enumerate(cells):
        if isinstance(cell, str) and cell.strip():
            found.setdefault(squash(cell), column)
            found.setdefault(squash(split_unit(cell)[0]), column)
    wanted = dict(imap.columns)
    for analyte, own in imap.analytes.items():
        for name, heading in own.items():
            wanted[f"{name}:{analyte}"] = heading
    missing = [h for h in wanted.values() if squash(h) not in found and
               squash(split_unit(h)[0]) not in found]
    if missing:
        if not strict:
            return None
        headings = ", ".join(repr(t) for t in _texts(cells)[:12]) or "no headings"
        raise grid.error(
            f"the import map names the heading {missing[0]!r}, which the header row does not "
            f"have (it has: {headings}); expected the heading as written in the file",
            row=index,
        )

    def column(name: str, heading: str, analyte: str | None = None) -> Column:
        at = found.get(squash(heading), found.get(squash(split_unit(heading)[0])))
        assert at is not None
        text = to_text(cells[at]) or heading
        return Column(name, text, at, split_unit(text)[1], analyte)

    row = _Row(grid, index)
    detected = {n: c for n, c in row.whole.items() if n not in imap.columns}
    mapped_indices = {found.get(squash(h), found.get(squash(split_unit(h)[0]))) for h in
                      wanted.values()}
    shared = {n: [c for c in cols if c.index not in mapped_indices] for n, cols in detected.items()}
    try:
        shared_cols = _single({n: c for n, c in shared.items() if c})
    except CellError as exc:
        raise grid.error(str(exc), row=index) from None
    for name, heading in imap.columns.items():
        shared_cols[name] = column(name, heading)
    analytes = {
        analyte: {name: column(name, heading, analyte) for name, heading in own.items()}
        for analyte, own in imap.analytes.items()
    }
    if analytes or imap.layout == "wide":
        if not analytes:
            header = _wide(grid, row)
            if header is None:
                raise grid.error("the import map says the table is wide, but no column right "
                                 "of the headings holds an analyte's responses", row=index)
            analytes = {a: dict(c) for a, c in header.analytes.items()}
        return Header(index, index, "wide", shared_cols, analytes)
    if "response" not in shared_cols or "concentration" not in shared_cols:
        if not strict:
            return None
        lacking = "concentration" if "concentration" not in shared_cols else "response"
        raise grid.error(
            f"the header row has no {lacking} column; expected a heading such as "
            f"{_EXAMPLES[lacking][0]!r} or an import map naming it under [columns]",
            row=index,
        )
    return Header(index, index, "long", shared_cols)


def _read_header(grid: Grid, index: int, *, imap: ImportMap | None = None,
                strict: bool = False) -> Header | None:
    """Read row ``index`` as a header row, or return None when it is not one.

    Parameters
    ----------
    grid : Grid
        The sheet or text file.
    index : int
        0-based row.
    imap : ImportMap, optional
        Headings an import map names.
    strict : bool
        Raise instead of returning None when the row cannot be a header (used
        for the row an import map names).

    Raises
    ------
    InputError
        When the row names one column twice, or (``strict``) lacks a column.

    Examples
    --------
    >>> grid = Grid([["Level", "Conc (µg/L)", "Atrazine", "Simazine"], [1, 0.1, 1520.0, 980.0]],
    ...             file="screen.csv", label="screen.csv")
    >>> header = _read_header(grid, 0)
    >>> header.layout, sorted(header.analytes), header.shared["concentration"].unit
    ('wide', ['Atrazine', 'Simazine'], 'µg/L')
    """
    if imap is not None and (imap.columns or imap.analytes or imap.layout == "wide"):
        return _mapped_header(grid, index, imap, strict=strict)
    row = _Row(grid, index)
    try:
        if "concentration" in row.whole and "response" in row.whole:
            header = _long_or_grouped(grid, row)
        else:
            header = _wide(grid, row)
            if header is None:
                header = _grouped_only(grid, row)
    except CellError as exc:
        raise grid.error(str(exc), row=index) from None
    if header is not None and imap is not None and imap.layout == "long" and (
        header.layout != "long"
    ):
        header = None
    if header is None and strict:
        raise _not_a_header(grid, index)
    return header


def _grouped_only(grid: Grid, row: _Row) -> Header | None:
    duplicated = [name for name, cols in row.whole.items() if len(cols) > 1]
    if "response" in duplicated:
        return _grouped(grid, row)
    return None


def _not_a_header(grid: Grid, index: int) -> InputError:
    texts = ", ".join(repr(t) for t in _texts(grid.rows[index])[:8]) or "an empty row"
    examples = " and ".join(
        ", ".join(repr(s) for s in _EXAMPLES[name]) for name in ("concentration", "response")
    )
    return grid.error(
        f"the header row names no concentration and response columns (it has: {texts}); "
        f"expected headings such as {examples}",
        row=index,
    )


def find_first_header(grid: Grid, *, imap: ImportMap | None = None,
                      limit: int = HEADER_SEARCH_ROWS) -> Header | None:
    """The first header row among the first ``limit`` rows, or None.

    Examples
    --------
    >>> grid = Grid([["Nitrate run"], [], ["Conc (mg/L)", "Area"]], file="r.csv", label="r.csv")
    >>> find_first_header(grid).row
    2
    """
    if imap is not None and imap.header_row is not None:
        if imap.header_row >= len(grid.rows):
            return None
        return _read_header(grid, imap.header_row, imap=imap, strict=True)
    for index, row in enumerate(grid.rows[:limit]):
        if _maybe_header(row):
            header = _read_header(grid, index, imap=imap)
            if header is not None:
                return header
    return None


def _no_header_error(grid: Grid, *, limit: int = HEADER_SEARCH_ROWS) -> InputError:
    """The message for a grid with no header row: what the closest row holds."""
    searched = grid.rows[:limit]
    shown: tuple[int, Sequence[Cell]] | None = None
    for index, row in enumerate(searched):
        if any(isinstance(c, str) and read_heading(c.strip()).name in ("concentration", "response")
               for c in row if isinstance(c, str) and c.strip()):
            shown = (index, row)
            break
    if shown is None:
        shown = next(((i, r) for i, r in enumerate(searched) if not all(map(is_blank, r))), None)
    if shown is None:
        found = "found no cell with content"
    else:
        texts = _texts(shown[1])[:8]
        found = f"found in row {shown[0] + 1}: " + ", ".join(repr(t) for t in texts)
    examples = " and ".join(
        ", ".join(repr(s) for s in _EXAMPLES[name]) for name in ("concentration", "response")
    )
    return grid.error(
        f"no header row naming both a concentration and a response column in the first "
        f"{limit} rows; {found}; expected headings such as {examples}"
    )


def _is_blank_row(row: Sequence[Cell]) -> bool:
    return is_empty_row(row) or all(map(is_blank, row))


def _line_like(row: Sequence[Cell], measures: frozenset[int]) -> bool:
    """A title, note or ``key: value`` line: no number where the table has numbers."""
    for index in measures:
        if index < len(row) and not is_blank(row[index]):
            return False
    texts = _texts(row)
    return len(texts) == 1 or (bool(texts) and (":" in texts[0]))


def _note_like(row: Sequence[Cell]) -> bool:
    texts = _texts(row)
    return bool(texts) and (texts[0].rstrip().endswith(":") or ": " in texts[0])


def _body_end(grid: Grid, header: Header, start: int, stop: int, *, last: bool) -> int:
    """Where a table's data ends: before notes, blank-separated lines or the next preamble."""
    rows, measures = grid.rows, header.measurement_indices()
    end = stop
    if not last:
        # Lines right above the next header are its title and key: value lines.
        while end > start and not _is_blank_row(rows[end - 1]) and _line_like(rows[end - 1],
                                                                               measures):
            end -= 1
    # Blank rows, and "Reviewed by: ..." lines right after the data.
    while end > start and (_is_blank_row(rows[end - 1]) or (
        _line_like(rows[end - 1], measures) and _note_like(rows[end - 1]))):
        end -= 1
    # Lines after a blank row at the end are notes, or the next table's preamble.
    scan = end
    while scan > start and (_is_blank_row(rows[scan - 1]) or _line_like(rows[scan - 1], measures)):
        scan -= 1
    for index in range(scan, end):
        if _is_blank_row(rows[index]):
            return index
    return end


def _label(rows: Sequence[Sequence[Cell]], preamble: range) -> int | None:
    """The row of the last lone line of the block of lines right above a header."""
    index = preamble.stop - 1
    while index >= preamble.start and not _is_blank_row(rows[index]):
        texts = _texts(rows[index])
        if len(texts) == 1 and ":" not in texts[0]:
            return index
        index -= 1
    return None


def find_tables(grid: Grid, *, imap: ImportMap | None = None) -> list[Table]:
    """Every table in a grid, top to bottom.

    Raises
    ------
    InputError
        When there is no header row in the first :data:`HEADER_SEARCH_ROWS`
        rows, or a header row names a column twice.

    Examples
    --------
    >>> rows = [
    ...     ["Analyte: Lead"], ["Sample", "Conc (µg/L)", "Counts"], ["Cal-1", 1.0, 2010.0],
    ...     [], ["Copper"], ["Sample", "Conc (µg/L)", "Counts"], ["Cal-1", 5.0, 7350.0],
    ...     [], ["Reviewed by: J. Marsh"],
    ... ]
    >>> tables = find_tables(Grid(rows, file="metals.csv", label="metals.csv"))
    >>> [(t.header.row, list(t.body), t.label, t.metadata) for t in tables]
    [(1, [2], None, {'analyte': 'Lead'}), (5, [6], 'Copper', {'Reviewed by': 'J. Marsh'})]
    """
    first = find_first_header(grid, imap=imap)
    if first is None:
        raise _no_header_error(grid)
    headers = [first]
    if imap is None or imap.header_row is None:
        # A data row of the table above has a number in a measured column: skip it at once.
        measures = sorted(first.measurement_indices())
        rows = grid.rows
        for index in range(first.row + 1, len(rows)):
            row = rows[index]
            width = len(row)
            if measures and width > measures[0] and type(row[measures[0]]) is float:
                continue  # the usual data row, decided without the general test
            if is_empty_row(row) or any(i < width and _looks_numeric(row[i]) for i in measures):
                continue
            if _maybe_header(row):
                header = _read_header(grid, index, imap=imap)
                if header is not None and header.first_row > headers[-1].row:
                    headers.append(header)
                    measures = sorted(header.measurement_indices())
    tables = []
    preamble_start = 0
    for number, header in enumerate(headers):
        last = number == len(headers) - 1
        stop = len(grid.rows) if last else headers[number + 1].first_row
        start = header.row + 1
        end, warnings = _body_end(grid, header, start, stop, last=last), ()
        if last:
            end, warnings = end_before_notes(grid, start, end, shared=header.shared,
                                             measures=header.measurement_indices())
        preamble = range(preamble_start, header.first_row)
        footer = range(end, stop) if last else range(stop, stop)
        label_row = _label(grid.rows, preamble) if len(headers) > 1 else None
        label = _texts(grid.rows[label_row])[0] if label_row is not None else None
        metadata = read_metadata([grid.rows[i] for i in preamble if i != label_row])
        if last and footer:
            notes = read_metadata([grid.rows[i] for i in footer])
            if "title" in notes:
                notes["notes"] = "; ".join(
                    n for n in (notes.pop("title"), notes.get("notes")) if n
                )
            for key, value in notes.items():
                metadata.setdefault(key, value)
        tables.append(Table(header, range(start, end), preamble, footer, label, metadata,
                            warnings))
        preamble_start = end
    return tables
