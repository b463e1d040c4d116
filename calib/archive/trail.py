"""The audit trail: who signed in, issued, excluded, signed or changed a user, and when.

Each row names the time (UTC), the event, the person who acted, what it was
about and a few details, and is chained like the archive's entries: its hash
covers its own fields and the hash of the row before it, the first row
pointing at the genesis hash.  So a changed, removed or re-ordered row breaks
the chain (:func:`verify_trail`), and triggers refuse ``UPDATE`` and ``DELETE``
(and ``TRUNCATE`` on PostgreSQL) and any insert that does not extend the head.

Rows are appended by the caller inside its write transaction
(:func:`append_row`), so a user change and its trail row are stored together or
not at all; the archive's append lock also serialises the trail head.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

from calib.archive.chain import GENESIS_HASH
from calib.archive.schema import TRAIL_TRIGGERS

if TYPE_CHECKING:
    from calib.archive.backends import Storage

__all__ = ["EVENTS", "TrailReport", "TrailRow", "append_row", "record_event", "row_hash",
           "trail_rows", "verify_trail"]

#: The events the trail records (plain words, as printed by ``calib audit list``).
EVENTS = ("sign-in", "failed sign-in", "lock-out", "sign-out", "idle sign-out", "issue",
          "exclusion", "signature", "refused signature", "user added", "user disabled",
          "user enabled", "password reset", "roles changed")


@dataclass(frozen=True)
class TrailRow:
    """One row of the audit trail."""

    seq: int
    at: str
    event: str
    actor: str
    subject: str
    detail: Mapping[str, Any] = field(default_factory=dict)
    prev_hash: str = GENESIS_HASH
    row_hash: str = ""


def row_hash(seq: int, at: str, event: str, actor: str, subject: str, detail_json: str,
             prev_hash: str) -> str:
    """SHA-256 of a row's fields as canonical JSON (sorted keys, no spaces, UTF-8).

    Examples
    --------
    >>> len(row_hash(1, "2026-03-02T09:00:00Z", "sign-in", "Mira Holt", "", "{}", "0" * 64))
    64
    """
    text = json.dumps({"seq": seq, "at": at, "event": event, "actor": actor,
                       "subject": subject, "detail": detail_json, "prev": prev_hash},
                      sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _at(when: datetime | None) -> str:
    return (when or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def append_row(storage: Storage, event: str, *, actor: str, subject: str = "",
               detail: Mapping[str, Any] | None = None, at: datetime | None = None) -> TrailRow:
    """Append one row; the caller holds ``storage.write()`` (the append lock).

    Raises
    ------
    ValueError
        If ``event`` is not one of :data:`EVENTS`.
    """
    if event not in EVENTS:
        raise ValueError(f"unknown audit event {event!r}; one of: {', '.join(EVENTS)}")
    detail_json = json.dumps(dict(detail or {}), sort_keys=True, separators=(",", ":"),
                             ensure_ascii=False)
    head = storage.query("SELECT seq, row_hash FROM audit_trail ORDER BY seq DESC LIMIT 1")
    seq, prev = (int(head[0][0]) + 1, str(head[0][1])) if head else (1, GENESIS_HASH)
    when = _at(at)
    digest = row_hash(seq, when, event, actor, subject, detail_json, prev)
    storage.execute("INSERT INTO audit_trail VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                    (seq, when, event, actor, subject, detail_json, prev, digest))
    return TrailRow(seq, when, event, actor, subject, json.loads(detail_json), prev, digest)


def record_event(storage: Storage, event: str, **fields: Any) -> TrailRow:
    """Append one row in its own write transaction (see :func:`append_row`)."""
    with storage.write():
        return append_row(storage, event, **fields)


def _row(values: tuple[Any, ...]) -> TrailRow:
    seq, at, event, actor, subject, detail, prev, digest = values
    try:
        parsed = json.loads(detail)
    except (TypeError, ValueError):
        parsed = {"unreadable": str(detail)}
    return TrailRow(int(seq), str(at), str(event), str(actor), str(subject),
                    parsed if isinstance(parsed, dict) else {"value": parsed}, str(prev),
                    str(digest))


def trail_rows(storage: Storage, *, actor: str | None = None, event: str | None = None,
               since: str | None = None, limit: int | None = None) -> list[TrailRow]:
    """Rows in trail order, optionally of one actor or event, from a date (``YYYY-MM-DD``).

    ``limit`` keeps the newest rows.
    """
    where, params = [], []
    if actor:
        where.append("lower(actor) = lower(?)")
        params.append(actor)
    if event:
        where.append("event = ?")
        params.append(event)
    if since:
        where.append("at >= ?")
        params.append(since)
    sql = ("SELECT seq, at, event, actor, subject, detail, prev_hash, row_hash FROM audit_trail"
           + (" WHERE " + " AND ".join(where) if where else "") + " ORDER BY seq DESC")
    if limit is not None:
        if limit < 1:
            raise ValueError(f"limit must be at least 1; got {limit}")
        sql += f" LIMIT {int(limit)}"
    return [_row(r) for r in reversed(storage.query(sql, params))]


@dataclass(frozen=True)
class TrailReport:
    """Result of :func:`verify_trail`: rows checked, the head, and what was found wrong."""

    rows: int
    head_hash: str
    problems: tuple[str, ...]

    @property
    def ok(self) -> bool:
        return not self.problems


def verify_trail(storage: Storage) -> TrailReport:
    """Recompute every row's hash and link; check the append-only triggers are in place."""
    problems: list[str] = []
    present = storage.triggers() if storage.engine == "sqlite" else {r[0] for r in storage.query(
        "SELECT t.tgname FROM pg_trigger t WHERE NOT t.tgisinternal AND t.tgenabled <> 'D'"
        " AND t.tgrelid = to_regclass('audit_trail')")}
    missing = [t for t in TRAIL_TRIGGERS if t not in present]
    if missing:
        problems.append("append-only triggers of the audit trail are missing ("
                        + ", ".join(missing) + "): it was opened for editing outside calib")
    prev, expected_seq, count = GENESIS_HASH, 1, 0
    for values in storage.rows("SELECT seq, at, event, actor, subject, detail, prev_hash,"
                               " row_hash FROM audit_trail ORDER BY seq"):
        seq, at, event, actor, subject, detail, stored_prev, stored = values
        count += 1
        if int(seq) != expected_seq:
            problems.append(f"row {seq}: expected row {expected_seq} here (rows were removed "
                            "or renumbered)")
        if str(stored_prev) != prev:
            problems.append(f"row {seq}: does not link to the row before it")
        if row_hash(int(seq), str(at), str(event), str(actor), str(subject), str(detail),
                    str(stored_prev)) != str(stored):
            problems.append(f"row {seq} ({event}, {at}): its content does not match its hash "
                            "(the row was changed)")
        prev, expected_seq = str(stored), int(seq) + 1
    return TrailReport(count, prev, tuple(problems))
