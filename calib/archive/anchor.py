"""The head receipt: the chain head anchored outside the archive.

A hash chain shows that nothing inside it changed, not that its end is still
there: deleting the last rows, restoring an older copy, or editing an entry
and recomputing every hash after it each leave a chain that verifies.  So on
every append the archive writes a *head receipt* to a separate file (by
default beside an SQLite archive, ``records.sqlite.head.json``; for a
PostgreSQL archive where ``CALIB_ARCHIVE_HEAD`` points) and the command line
prints its one-line form for the lab's logbook.  Whenever the receipt is
present, verification checks that the archive still holds the receipt's entry
at the receipt's seq with the receipt's hash — which fails after each of the
changes above.

Receipt file (JSON, UTF-8)
    ``{"schema": "calib.archive-head/1", "archive_id": ..., "seq": N,
    "entry_hash": ..., "written_at": "YYYY-MM-DDTHH:MM:SSZ", "stamp_kind":
    "sha256" | "hmac-sha256", "stamp": ...}`` where ``stamp`` is the SHA-256 (or,
    with a key file named by ``CALIB_ARCHIVE_HEAD_KEY``, the HMAC-SHA256) of
    ``"calib archive head\\n" + archive_id + "\\n" + seq + "\\n" + entry_hash +
    "\\n" + written_at``.  A hash stamp shows an accidental or careless edit; only
    the keyed stamp (and the logbook copy) stands against someone who edits
    both the archive and its receipt.

Several writers
    The receipt is rewritten under an exclusive lock on ``<receipt>.lock`` and
    only moves forward (a writer that finished later with a lower seq leaves
    the newer receipt in place); writers on several hosts that each keep their
    own receipt are all checked the same way.
"""

from __future__ import annotations

import contextlib
import hashlib
import hmac
import json
import os
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

__all__ = ["HeadReceipt", "default_receipt_path", "read_receipt", "write_receipt"]

_HEAD_ENV = "CALIB_ARCHIVE_HEAD"
_HEAD_KEY_ENV = "CALIB_ARCHIVE_HEAD_KEY"
SCHEMA = "calib.archive-head/1"
_SUFFIX = ".head.json"


@dataclass(frozen=True)
class HeadReceipt:
    """The head of an archive at one moment, as written outside it."""

    archive_id: str
    seq: int
    entry_hash: str
    written_at: str
    stamp_kind: str = "sha256"
    stamp: str = ""

    def logbook_line(self) -> str:
        """The one line a lab copies into its logbook."""
        return (f"calib archive head {self.archive_id}: seq {self.seq}, entry hash "
                f"{self.entry_hash} ({self.written_at})")

    def document(self) -> dict[str, object]:
        return {"schema": SCHEMA, "archive_id": self.archive_id, "seq": self.seq,
                "entry_hash": self.entry_hash, "written_at": self.written_at,
                "stamp_kind": self.stamp_kind, "stamp": self.stamp}


def default_receipt_path(location: str, *, database: bool) -> Path | None:
    """Where the receipt of the archive at ``location`` goes when nothing else is said.

    ``CALIB_ARCHIVE_HEAD`` wins; otherwise beside an SQLite file; a database
    archive without ``CALIB_ARCHIVE_HEAD`` has none (README asks labs to set it).

    Examples
    --------
    >>> str(default_receipt_path("lab/records.sqlite", database=False))
    'lab/records.sqlite.head.json'
    """
    configured = os.environ.get(_HEAD_ENV)
    if configured:
        return Path(configured)
    return None if database else Path(location + _SUFFIX)


def _key() -> bytes | None:
    path = os.environ.get(_HEAD_KEY_ENV)
    if not path:
        return None
    try:
        key = Path(path).read_bytes().strip()
    except OSError as exc:
        raise ValueError(f"{_HEAD_KEY_ENV}={path}: the head receipt key cannot be read "
                         f"({exc.strerror})") from None
    if len(key) < 16:
        raise ValueError(f"{_HEAD_KEY_ENV}={path}: the head receipt key must hold at least 16 "
                         "bytes")
    return key


def _stamp_of(receipt: HeadReceipt, kind: str) -> str:
    """The stamp of ``receipt`` (layout in the module docstring).

    Examples
    --------
    >>> r = HeadReceipt("AR-0", 1, "0" * 64, "2026-12-01T09:30:00Z")
    >>> lines = ["calib archive head", "AR-0", "1", "0" * 64, "2026-12-01T09:30:00Z"]
    >>> _stamp_of(r, "sha256") == hashlib.sha256(chr(10).join(lines).encode()).hexdigest()
    True
    """
    text = (f"calib archive head\n{receipt.archive_id}\n{receipt.seq}\n{receipt.entry_hash}\n"
            f"{receipt.written_at}").encode()
    if kind == "hmac-sha256":
        key = _key()
        if key is None:
            raise ValueError(f"the head receipt is keyed but {_HEAD_KEY_ENV} names no key file")
        return hmac.new(key, text, hashlib.sha256).hexdigest()
    return hashlib.sha256(text).hexdigest()


def read_receipt(path: Path) -> HeadReceipt | None:
    """The receipt at ``path``; None when there is none.

    Raises
    ------
    ValueError
        If the file is there but is not an intact receipt (the message says why).
    """
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise ValueError(f"the head receipt {path} cannot be read ({exc.strerror})") from None
    try:
        doc = json.loads(data)
        if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
            raise ValueError(f"not a {SCHEMA} document")
        receipt = HeadReceipt(str(doc["archive_id"]), int(doc["seq"]), str(doc["entry_hash"]),
                              str(doc["written_at"]), str(doc["stamp_kind"]), str(doc["stamp"]))
    except (ValueError, KeyError, TypeError) as exc:
        raise ValueError(f"the head receipt {path} is damaged ({exc})") from None
    if receipt.stamp_kind not in ("sha256", "hmac-sha256"):
        raise ValueError(f"the head receipt {path} has an unknown stamp {receipt.stamp_kind!r}")
    if receipt.stamp_kind == "sha256" and _key() is not None:
        raise ValueError(f"the head receipt {path} is not keyed although {_HEAD_KEY_ENV} is set: "
                         "it was replaced")
    if not hmac.compare_digest(_stamp_of(receipt, receipt.stamp_kind), receipt.stamp):
        raise ValueError(f"the head receipt {path} was edited: its stamp does not match its "
                         "contents")
    return receipt


@contextlib.contextmanager
def _locked(path: Path) -> Iterator[None]:
    import fcntl

    fd = os.open(str(path) + ".lock", os.O_RDWR | os.O_CREAT, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)


def write_receipt(path: Path, archive_id: str, seq: int, entry_hash: str,
                  written_at: str) -> HeadReceipt:
    """Write (or move forward) the receipt at ``path``; returns the receipt now in the file."""
    kind = "hmac-sha256" if _key() is not None else "sha256"
    receipt = HeadReceipt(archive_id, seq, entry_hash, written_at, kind)
    receipt = HeadReceipt(**{**receipt.__dict__, "stamp": _stamp_of(receipt, kind)})
    with _locked(path):
        try:
            current = read_receipt(path)
        except ValueError:
            current = None  # a damaged receipt was reported before the append; replace it
        if current is not None and current.archive_id == archive_id and current.seq >= seq:
            return current
        temporary = path.with_name(f".{path.name}.{os.getpid()}.tmp")
        temporary.write_text(json.dumps(receipt.document(), indent=1) + "\n", encoding="utf-8")
        with open(temporary, "rb") as f:
            os.fsync(f.fileno())
        os.replace(temporary, path)
    return receipt
