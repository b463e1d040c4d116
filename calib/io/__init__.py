"""Reading instrument exports into a :class:`~calib.run.Run`.

:func:`read_run` picks a reader by file extension.  A reader is anything with
the :class:`Reader` shape: the extensions it takes and a ``read`` method
returning a Run.  New formats slot in by adding a reader to :data:`READERS`
(or passing ``readers=`` to :func:`read_run`); they share the cell, heading,
layout and table logic of the modules beside this one:

===========================  ======================================================
:mod:`calib.io.numbers`      numbers as text, decimal marks, units after numbers, markers
:mod:`calib.io.cells`        one raw cell as a number, flag or text
:mod:`calib.io.columns`      headings to canonical columns (several languages), units
:mod:`calib.io.sampletypes`  standard, blank, zero, QC or unknown, from a cell or a name
:mod:`calib.io.metadata`     title and ``key: value`` lines above a table
:mod:`calib.io.layout`       header rows, long / wide / stacked tables
:mod:`calib.io.rows`         the body rows of a table as points
:mod:`calib.io.assemble`     tables and sheets into one checked Run
:mod:`calib.io.importmap`    TOML import maps (``--map``)
:mod:`calib.io.limits`       limits on untrusted files
:mod:`calib.io.workbook`     ``.xlsx`` ``.xlsm`` ``.xls`` ``.ods`` (python-calamine)
:mod:`calib.io.detail`       hidden rows, error values, merges (openpyxl, ODS XML)
:mod:`calib.io.csv_text`     ``.csv`` ``.tsv`` ``.txt``
:mod:`calib.io.summary`      what was recognised, as text (``--show-import``)
===========================  ======================================================

Ambiguity is an error, not a guess: :mod:`calib.io.decimals` never assumes
the decimal mark of ``1,006``, :mod:`calib.io.summary_rows` sets aside Mean
and Total rows, :mod:`calib.io.ambiguity` refuses columns that split a curve,
repeated replicate numbers and two populations in one curve,
:mod:`calib.io.names` refuses invisible and look-alike characters in analyte
names, and :mod:`calib.io.levels` checks level labels against concentrations.
"""

from __future__ import annotations

import gc
import os
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Protocol

from calib.errors import InputError
from calib.io.csv_text import CsvReader
from calib.io.files import check_path
from calib.io.importmap import ImportMap, load_map
from calib.io.limits import check_magnitudes
from calib.io.summary import describe_import
from calib.io.workbook import WorkbookReader
from calib.run import Run, held_points

__all__ = ["READERS", "ImportMap", "Reader", "describe_import", "load_map", "read_run"]


class Reader(Protocol):
    """What :func:`read_run` needs from a file-format reader.

    ``read`` is also passed ``map=`` (an :class:`ImportMap`) when the caller
    gives one; readers that take no maps may leave that keyword out.
    """

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


@contextmanager
def _collector_paused() -> Iterator[None]:
    """Pause Python's cycle collector while a file is read.

    A read makes a few objects per cell and point (10^5 and more for a large export) and
    frees them by reference counting; the collector would scan the growing heap again and
    again (a fifth of the reading time of a 60,000-row workbook) and find no cycle to free.
    It is resumed afterwards, unless it was already paused by someone else.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


READERS: tuple[Reader, ...] = (WorkbookReader(), CsvReader())
"""The readers :func:`read_run` chooses from by default."""


def read_run(
    path: str | os.PathLike[str],
    *,
    sheet: str | int | None = None,
    analyte: str | None = None,
    map: ImportMap | str | os.PathLike[str] | None = None,
    readers: Sequence[Reader] = READERS,
) -> Run:
    """Read the standards, blanks, QCs and unknowns of one run file.

    Parameters
    ----------
    path : str or path-like
        A workbook (``.xlsx``, ``.xlsm``, ``.xls``, ``.ods``) or a delimited
        text file (``.csv``, ``.tsv``, ``.txt``) in any layout calib knows:
        long, wide, several tables stacked in a sheet, or a sheet per analyte.
    sheet : str or int, optional
        Workbook sheet by name or 0-based index; by default the first visible
        sheet holding a standards table (or every such sheet, when each holds
        other analytes).  Text files have no sheets.
    analyte : str, optional
        Analyte name for a table without an analyte column; by default the
        ``Analyte:`` line above the table, or the sheet or file name.
    map : ImportMap or path, optional
        An import map (or the path of its TOML file) for exports that
        detection cannot read alone.
    readers : sequence of Reader, optional
        Readers to choose from by extension (tests pass fakes).

    Returns
    -------
    Run
        Every injection as a :class:`~calib.run.Point` with its source cell,
        the file's SHA-256, the layout, units, metadata and warnings found.

    Raises
    ------
    InputError
        When the file is missing, of an unsupported type, or cannot be read or
        used; the message names file, sheet, row and column where known and
        says what was expected.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> text = "Fernbrook Water Laboratory\\nConc (mg/L),Area\\n0.5,1010\\n1.0,2032\\n2.0,4071\\n"
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder, "nitrate.csv")
    ...     _ = path.write_text(text, encoding="utf-8")
    ...     run = read_run(path)
    >>> [(p.concentration, p.response, p.source_cell) for p in run.points]
    [(0.5, 1010.0, 'nitrate.csv!B3'), (1.0, 2032.0, 'nitrate.csv!B4'), (2.0, 4071.0, \
'nitrate.csv!B5')]
    >>> run.units["concentration"], run.source.layout, run.source.encoding
    ('mg/L', 'long', 'utf-8')
    """
    checked = check_path(path)
    imap = map if isinstance(map, ImportMap) or map is None else load_map(map)
    suffix = checked.suffix.lower()
    for reader in readers:
        if suffix in reader.suffixes:
            with _collector_paused():
                if imap is None:
                    run = reader.read(checked, sheet=sheet, analyte=analyte)
                else:
                    run = reader.read(checked, sheet=sheet, analyte=analyte,
                                      map=imap)  # type: ignore[call-arg]
            check_magnitudes(held_points(run), file=str(checked))
            return run
    supported = ", ".join(s for reader in readers for s in reader.suffixes)
    found = f"the file type {suffix!r}" if suffix else "a file name without an extension"
    raise InputError(f"found {found}; expected one of {supported}", file=str(Path(path)))
