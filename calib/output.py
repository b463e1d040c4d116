"""Writing output files so that a failed run leaves nothing half-written."""

from __future__ import annotations

import os
import re
import tempfile
import unicodedata
from pathlib import Path

__all__ = ["safe_file_name", "write_atomic"]

# Characters no file name of ours holds: path separators, the characters Windows forbids,
# and control characters (which also include the bidirectional controls, category Cf).
_UNSAFE = re.compile(r'[\\/:*?"<>|\x00-\x1f\x7f]')
_WINDOWS_RESERVED = frozenset({"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)),
                               *(f"lpt{i}" for i in range(1, 10))})
MAX_NAME = 120
"""Longest file name :func:`safe_file_name` returns (characters, before the suffix)."""


def safe_file_name(text: str, *, fallback: str = "unnamed") -> str:
    """Turn a name from data (analyte, record id, sample) into one safe file-name component.

    Path separators, runs of dots, characters Windows forbids, control and
    bidirectional characters become ``_``; leading dots and spaces go (no
    hidden files, no ``..``); Windows device names get a ``_`` prefix; the
    result is at most :data:`MAX_NAME` characters and never empty.

    Examples
    --------
    >>> safe_file_name("../../etc/passwd")
    '____etc_passwd'
    >>> safe_file_name("Nitrate-N"), safe_file_name("NUL.pdf"), safe_file_name(" . ")
    ('Nitrate-N', '_NUL.pdf', 'unnamed')
    """
    name = "".join("_" if unicodedata.category(c) in ("Cc", "Cf", "Zl", "Zp") else c
                   for c in unicodedata.normalize("NFC", text))
    name = re.sub(r"\.{2,}", "_", _UNSAFE.sub("_", name))
    name = name.lstrip(". ").rstrip(". ")[:MAX_NAME].rstrip(". ")
    if not name:
        return fallback
    if name.split(".")[0].casefold() in _WINDOWS_RESERVED:
        name = "_" + name
    return name


def write_atomic(path: str | Path, data: bytes, *, replace: bool = True) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder, then rename.

    The rename is atomic on one file system, so readers see either the old
    file or the complete new one; on any error the temporary file is removed.
    With ``replace=False`` an existing ``path`` is never overwritten, even one
    created while the data was being written: the temporary file is linked to
    ``path`` (which fails when it exists) instead of renamed over it.

    Raises
    ------
    FileExistsError
        With ``replace=False``, when ``path`` exists.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "out.json"
    >>> write_atomic(target, b"{}").read_bytes()
    b'{}'
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        if replace:
            os.replace(tmp, target)
        else:
            os.link(tmp, target)
            Path(tmp).unlink()
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return target
