"""Writing output files so that a failed run leaves nothing half-written."""

from __future__ import annotations

import errno
import os
import re
import tempfile
import unicodedata
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

__all__ = ["Output", "disk_message", "file_mode", "safe_file_name", "write_all", "write_atomic"]

_PRIVATE_MODE = 0o600
"""Mode of private files (archive copies, frozen baselines, lab settings): owner only."""


def file_mode(*, private: bool = False) -> int:
    """The permission bits a new output file gets: ``0o666`` less the umask, or 0600 if private.

    Reports, workbooks and CSVs are meant to be opened by a reviewer on a shared
    drive, so they follow the process umask as any other program's files would;
    private files stay owner-only whatever the umask.

    Examples
    --------
    >>> import os
    >>> old = os.umask(0o022)
    >>> oct(file_mode()), oct(file_mode(private=True))
    ('0o644', '0o600')
    >>> _ = os.umask(old)
    """
    if private:
        return _PRIVATE_MODE
    # The umask can only be read by setting it; put it straight back.
    mask = os.umask(0o077)
    os.umask(mask)
    return 0o666 & ~mask

# Characters no file name of ours holds: path separators, the characters Windows forbids,
# and control characters (which also include the bidirectional controls, category Cf).
_UNSAFE = re.compile(r'[\\/:*?"<>|\x00-\x1f\x7f]')
_WINDOWS_RESERVED = frozenset({"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)),
                               *(f"lpt{i}" for i in range(1, 10))})
_MAX_NAME = 120
"""Longest file name :func:`safe_file_name` returns (characters, before the suffix)."""


def safe_file_name(text: str, *, fallback: str = "unnamed") -> str:
    """Turn a name from data (analyte, record id, sample) into one safe file-name component.

    Path separators, runs of dots, characters Windows forbids, control and
    bidirectional characters become ``_``; leading dots and spaces go (no
    hidden files, no ``..``); Windows device names get a ``_`` prefix; the
    result is at most :data:`_MAX_NAME` characters and never empty.

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
    name = name.lstrip(". ").rstrip(". ")[:_MAX_NAME].rstrip(". ")
    if not name:
        return fallback
    if name.split(".")[0].casefold() in _WINDOWS_RESERVED:
        name = "_" + name
    return name


def write_atomic(path: str | Path, data: bytes, *, replace: bool = True,
                 private: bool = False) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder, then rename.

    The rename is atomic on one file system, so readers see either the old
    file or the complete new one; on any error the temporary file is removed.
    With ``replace=False`` an existing ``path`` is never overwritten, even one
    created while the data was being written: the temporary file is linked to
    ``path`` (which fails when it exists) instead of renamed over it.
    The file's mode follows the umask unless ``private`` (then 0600), see
    :func:`file_mode`.

    Raises
    ------
    FileExistsError
        With ``replace=False``, when ``path`` exists.
    OSError
        When the file cannot be written; the error names ``path`` (never the
        temporary name), and a full disk reads as such (:func:`disk_message`).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "out.json"
    >>> write_atomic(target, b"{}").read_bytes()
    b'{}'
    """
    return write_all([Output(Path(path), data, replace, private)])[0]


_DISK_ERRNOS = {errno.ENOSPC: "the disk is full", errno.EDQUOT: "the disk quota is used up",
                errno.EROFS: "the disk is read-only", errno.EFBIG: "the file is too large"}


def disk_message(exc: BaseException) -> str | None:
    """One line for a disk that is full, over quota or read-only; None for other errors.

    Examples
    --------
    >>> disk_message(OSError(28, "No space left on device", "out/record.pdf"))
    'cannot write out/record.pdf: the disk is full (No space left on device); nothing was written'
    >>> disk_message(ValueError("x")) is None
    True
    """
    if not isinstance(exc, OSError) or exc.errno not in _DISK_ERRNOS:
        return None
    where = f" {exc.filename}" if exc.filename else ""
    return (f"cannot write{where}: {_DISK_ERRNOS[exc.errno]} ({exc.strerror}); "
            "nothing was written")


@dataclass(frozen=True)
class Output:
    """One file to write: where, what, whether an existing file may be replaced, who may read it.

    ``private`` files (archive copies, baselines, settings) are created 0600;
    the others follow the umask (:func:`file_mode`).
    """

    path: Path
    data: bytes
    replace: bool = True
    private: bool = False


def write_all(outputs: Sequence[Output], *, before_commit: Callable[[], None] | None = None
              ) -> list[Path]:
    """Write several files as one step: all of them, or none.

    Every file is first written in full to a temporary name beside its target
    and flushed to disk; only when all are written (and ``before_commit``, e.g.
    filing the record in the archive, has succeeded) are they renamed into
    place.  A full disk, a refused overwrite or any other error on the way
    removes every temporary file and leaves the targets as they were.

    Raises
    ------
    FileExistsError
        When a target with ``replace=False`` exists (checked before and at the rename).
    OSError
        When a file cannot be written; a full disk (ENOSPC) names the target file.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> [p.name for p in write_all([Output(folder / "a.csv", b"1"), Output(folder / "b.pdf", b"2")])]
    ['a.csv', 'b.pdf']
    >>> def fail(): raise RuntimeError("archive refused")
    >>> write_all([Output(folder / "c.csv", b"3")], before_commit=fail)
    Traceback (most recent call last):
    RuntimeError: archive refused
    >>> sorted(p.name for p in folder.iterdir())
    ['a.csv', 'b.pdf']
    """
    for out in outputs:
        if not out.replace and Path(out.path).exists():
            raise FileExistsError(17, "exists; records are never overwritten silently",
                                  str(out.path))
    staged: list[tuple[Output, str]] = []
    placed: list[Path] = []
    try:
        for out in outputs:
            target = Path(out.path)
            staged.append((out, _stage(target, out.data, file_mode(private=out.private))))
        if before_commit is not None:
            before_commit()
        for out, tmp in staged:
            target = Path(out.path)
            if out.replace:
                os.replace(tmp, target)
            else:
                os.link(tmp, target)
                placed.append(target)
                Path(tmp).unlink()
    except BaseException:
        for _, tmp in staged:
            Path(tmp).unlink(missing_ok=True)
        for target in placed:  # files this call created are taken back: none or all
            target.unlink(missing_ok=True)
        raise
    return [Path(out.path) for out in outputs]


def _stage(target: Path, data: bytes, mode: int = _PRIVATE_MODE) -> str:
    """Write ``data`` to a new temporary file beside ``target``, on disk; returns its name.

    The temporary file is created 0600 (no one reads a half-written file) and
    given ``mode`` only once complete, before it is renamed into place.
    """
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    except OSError as exc:
        raise OSError(exc.errno, exc.strerror, str(target)) from exc
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fchmod(fh.fileno(), mode)
            os.fsync(fh.fileno())
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        # Name the file the user asked for, not our temporary name.
        raise OSError(exc.errno, exc.strerror, str(target)) from exc
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return tmp
