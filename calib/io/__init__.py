"""Reading instrument exports into a :class:`~calib.run.Run`.

:func:`read_run` picks a reader by file extension.  A reader is anything with
the :class:`Reader` shape: the extensions it takes and a ``read`` method
returning a Run.  New formats slot in by adding a reader to :data:`READERS`
(or passing ``readers=`` to :func:`read_run`); they share the cell, heading
and table logic in :mod:`calib.io.cells`, :mod:`calib.io.columns` and
:mod:`calib.io.table`.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import Protocol

from calib.errors import InputError
from calib.io.csv_text import CsvReader
from calib.io.files import check_path
from calib.io.xlsx import XlsxReader
from calib.run import Run

__all__ = ["READERS", "Reader", "read_run"]


class Reader(Protocol):
    """What :func:`read_run` needs from a file-format reader."""

    @property
    def suffixes(self) -> tuple[str, ...]:
        """Lower-case file extensions read, with the dot (``(".csv",)``)."""
        ...

    def read(
        self,
        path: str | os.PathLike[str],
        *,
        sheet: str | int | None = None,
        analyte: str | None = None,
    ) -> Run:
        """Read the run in ``path``; raise :class:`~calib.errors.InputError` if it is unusable."""
        ...


READERS: tuple[Reader, ...] = (XlsxReader(), CsvReader())
"""The readers :func:`read_run` chooses from by default."""


def read_run(
    path: str | os.PathLike[str],
    *,
    sheet: str | int | None = None,
    analyte: str | None = None,
    readers: Sequence[Reader] = READERS,
) -> Run:
    """Read the standards, blanks, QCs and unknowns of one run file.

    Parameters
    ----------
    path : str or path-like
        An ``.xlsx`` workbook or a ``.csv`` text file, long layout: one row
        per injection under a header row.
    sheet : str or int, optional
        Workbook sheet by name or 0-based index; by default the first visible
        sheet holding a standards table.  Text files have no sheets.
    analyte : str, optional
        Analyte name for a table without an analyte column; by default the
        file name without its extension.
    readers : sequence of Reader, optional
        Readers to choose from by extension (tests pass fakes).

    Returns
    -------
    Run
        Every row as a :class:`~calib.run.Point` with its source cell, the
        file's SHA-256, and the units and metadata found.

    Raises
    ------
    InputError
        When the file is missing, of an unsupported type, or cannot be read or
        used; the message names file, sheet, row and column where known and
        says what was expected.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> text = "Fernbrook Water Laboratory\\nConc (mg/L),Area\\n0.5,1010\\n1.0,2032\\n"
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder, "nitrate.csv")
    ...     _ = path.write_text(text, encoding="utf-8")
    ...     run = read_run(path)
    >>> [(p.concentration, p.response, p.source_cell) for p in run.points]
    [(0.5, 1010.0, 'nitrate.csv!B3'), (1.0, 2032.0, 'nitrate.csv!B4')]
    >>> run.units["concentration"], run.source.layout
    ('mg/L', 'long')
    """
    checked = check_path(path)
    suffix = checked.suffix.lower()
    for reader in readers:
        if suffix in reader.suffixes:
            return reader.read(checked, sheet=sheet, analyte=analyte)
    supported = ", ".join(s for reader in readers for s in reader.suffixes)
    found = f"the file type {suffix!r}" if suffix else "a file name without an extension"
    raise InputError(f"found {found}; expected one of {supported}", file=str(Path(path)))
