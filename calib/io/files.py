"""Loading a run file's bytes once, so the digest is of exactly what was parsed.

Readers hash and parse the same bytes: a file rewritten between the two would
otherwise give a record whose SHA-256 describes data calib never read.
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass
from pathlib import Path

from calib.errors import InputError

__all__ = ["RawFile", "check_path", "load_file"]

_RUN_FILES = "a run file (.xlsx, .xlsm, .xls, .ods, .csv, .tsv or .txt)"
"""What a run file is, for messages."""

_MAX_FILE_BYTES = 256 * 1024 * 1024
"""Largest run file read (an instrument export is far smaller; this guards memory)."""


@dataclass(frozen=True)
class RawFile:
    """The bytes of a run file with the names used for it.

    Attributes
    ----------
    path : Path
        The path as given.
    data : bytes
        Every byte of the file.
    sha256 : str
        Hex SHA-256 of ``data``.
    """

    path: Path
    data: bytes
    sha256: str

    @property
    def given(self) -> str:
        """The path as the caller wrote it, for messages."""
        return str(self.path)

    @property
    def name(self) -> str:
        """The file name without folders, for records and source cells."""
        return self.path.name


def check_path(path: str | os.PathLike[str]) -> Path:
    """Return ``path`` as a Path after checking that it names an existing file.

    Raises
    ------
    InputError
        When nothing is there or it is a folder.
    """
    path = Path(path)
    if path.is_dir():
        raise InputError(f"this is a folder; expected {_RUN_FILES}", file=str(path))
    if not path.exists():
        raise InputError(f"no such file; expected {_RUN_FILES}", file=str(path))
    return path


def load_file(path: str | os.PathLike[str], *, what: str) -> RawFile:
    """Read every byte of a run file and its SHA-256.

    Parameters
    ----------
    path : str or path-like
        The run file.
    what : str
        What the file should be, for messages (``"an .xlsx workbook"``).

    Raises
    ------
    InputError
        When the file is missing, a folder, empty, too large or unreadable.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     run = pathlib.Path(folder, "run.csv")
    ...     _ = run.write_bytes(b"abc")
    ...     load_file(run, what="a CSV file").sha256[:16]
    'ba7816bf8f01cfea'
    """
    path = check_path(path)
    try:
        size = path.stat().st_size
        if size > _MAX_FILE_BYTES:
            raise InputError(
                f"the file holds {size:,} bytes; expected {what} of at most "
                f"{_MAX_FILE_BYTES:,} bytes",
                file=str(path),
            )
        data = path.read_bytes()
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise InputError(f"cannot read the file ({reason}); expected {what}", file=str(path)) from None
    if not data:
        raise InputError(f"the file is empty (0 bytes); expected {what}", file=str(path))
    return RawFile(path, data, hashlib.sha256(data).hexdigest())
