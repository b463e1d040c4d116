"""The append-only, hash-chained archive of calibration records (one SQLite file).

Every issued record and every signed version of it is appended as an *entry*
holding the record JSON and the PDF bytes.  Nothing is ever changed or
removed: triggers refuse ``UPDATE`` and ``DELETE`` on the archive's tables,
and each entry carries the hash of the one before it, so an edit made by
going around the triggers (dropping them, editing the file) breaks the chain
and :meth:`Archive.verify_chain` names the entry.

Tables
    ``entries``: one row per appended version; ``seq`` counts from 1 with no
    gaps.  ``curves``: one row per curve of an entry (slope, intercept,
    residual SD, verdict), an index for trends, derived from the entry's JSON
    and checked against it by :meth:`Archive.verify_chain`.

Entry hash
    Each entry's hash covers the previous entry's hash and every column of
    the entry (the JSON and PDF through their SHA-256); the exact byte layout
    is in :mod:`calib.archive.chain`.

What the archive checks on append (it never trusts the caller)
    The JSON bytes are the record's canonical JSON; the version digest is
    recomputed from them; record id, content digest, analytes, verdict, run
    date, instrument, roles and curve figures are derived from the JSON
    re-read from those bytes, not taken from the object passed in.  The PDF
    must at least be a PDF (``%PDF-``); that its pages and attachment match
    the JSON is what ``calib verify`` checks.

Appending a version that is already archived
    Idempotent when JSON, PDF and kind are byte-identical: the existing entry is
    returned and nothing is written, so a writer that lost its connection can
    safely retry.  Anything else under an archived version digest is refused
    (:class:`ArchiveError`): an archived entry is never replaced.

Concurrency and crashes
    WAL journal, ``synchronous = FULL``, a busy timeout (30 s by default) and
    ``BEGIN IMMEDIATE`` transactions: a writer takes the write lock *before*
    reading the chain head, so two writers can never extend the same head,
    and each entry with its curve rows is committed in one transaction or
    not at all.  A process killed mid-write leaves no partial entry; SQLite
    rolls the unfinished transaction back when the file is next opened.

Limits of the chain
    Cutting entries off the end leaves a valid shorter chain: note the head
    that :meth:`Archive.verify_chain` reports and pass it back as
    ``expected_head`` (see :mod:`calib.archive.chain`).
"""

from __future__ import annotations

import contextlib
import json
import sqlite3
from collections.abc import Callable, Iterator, Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any, Self

from calib.archive.chain import (
    GENESIS_HASH,
    KINDS,
    ArchiveEntry,
    ChainProblem,
    ChainReport,
    check_entry,
    compute_entry_hash,
    derive_record,
    entry_fields,
)
from calib.archive.control import DEFAULT_BASELINE
from calib.archive.figures import CurveFigures
from calib.archive.trend import AnalyteTrend, ArchivedCurve, analyte_trend
from calib.errors import CalibError

if TYPE_CHECKING:
    from calib.record import Record

__all__ = ["Archive", "ArchiveError"]

SCHEMA_VERSION = 1
APPLICATION_ID = 0x43414C42  # "CALB": marks the SQLite file as a calib archive
DEFAULT_TIMEOUT = 30.0

_TRIGGERS = ("entries_no_update", "entries_no_delete", "entries_extend_head",
             "curves_no_update", "curves_no_delete", "curves_with_entry")

_SCHEMA = (
    """CREATE TABLE entries (
        seq INTEGER PRIMARY KEY,
        record_id TEXT NOT NULL,
        version_digest TEXT NOT NULL UNIQUE,
        content_digest TEXT NOT NULL,
        kind TEXT NOT NULL,
        created_at TEXT NOT NULL,
        analytes TEXT NOT NULL,
        verdict TEXT NOT NULL,
        run_date TEXT NOT NULL,
        instrument TEXT,
        roles TEXT NOT NULL,
        json BLOB NOT NULL,
        pdf BLOB NOT NULL,
        prev_hash TEXT NOT NULL,
        entry_hash TEXT NOT NULL UNIQUE
    )""",
    "CREATE INDEX entries_record ON entries (record_id COLLATE NOCASE, seq)",
    "CREATE INDEX entries_content ON entries (content_digest, seq)",
    """CREATE TABLE curves (
        seq INTEGER NOT NULL REFERENCES entries (seq),
        position INTEGER NOT NULL,
        analyte TEXT NOT NULL,
        model TEXT NOT NULL,
        weighting TEXT NOT NULL,
        verdict TEXT NOT NULL,
        slope REAL,
        intercept REAL,
        residual_sd REAL,
        concentration_unit TEXT,
        response_unit TEXT,
        PRIMARY KEY (seq, position)
    ) WITHOUT ROWID""",
    "CREATE INDEX curves_analyte ON curves (analyte COLLATE NOCASE, seq)",
    """CREATE TRIGGER entries_no_update BEFORE UPDATE ON entries
       BEGIN SELECT RAISE(ABORT, 'calib archive is append-only: an entry cannot be changed'); END""",
    """CREATE TRIGGER entries_no_delete BEFORE DELETE ON entries
       BEGIN SELECT RAISE(ABORT, 'calib archive is append-only: an entry cannot be deleted'); END""",
    f"""CREATE TRIGGER entries_extend_head BEFORE INSERT ON entries
       WHEN NEW.seq IS NOT (SELECT coalesce(max(seq), 0) + 1 FROM entries)
         OR NEW.prev_hash IS NOT coalesce(
              (SELECT entry_hash FROM entries ORDER BY seq DESC LIMIT 1), '{GENESIS_HASH}')
       BEGIN SELECT RAISE(ABORT, 'calib archive: a new entry must extend the chain head'); END""",
    """CREATE TRIGGER curves_no_update BEFORE UPDATE ON curves
       BEGIN SELECT RAISE(ABORT, 'calib archive is append-only: figures cannot be changed'); END""",
    """CREATE TRIGGER curves_no_delete BEFORE DELETE ON curves
       BEGIN SELECT RAISE(ABORT, 'calib archive is append-only: figures cannot be deleted'); END""",
    """CREATE TRIGGER curves_with_entry BEFORE INSERT ON curves
       WHEN NEW.seq IS NOT (SELECT max(seq) FROM entries)
       BEGIN SELECT RAISE(ABORT, 'calib archive: figures are added only with their entry'); END""",
)

_META_COLUMNS = ("seq", "record_id", "version_digest", "content_digest", "kind", "created_at",
                 "analytes", "verdict", "run_date", "instrument", "roles", "prev_hash",
                 "entry_hash")


class ArchiveError(CalibError):
    """The archive cannot be opened or used, or an append was refused."""


def _insert_figures(conn: sqlite3.Connection, seq: int, curves: Sequence[CurveFigures]) -> None:
    conn.executemany(
        "INSERT INTO curves (seq, position, analyte, model, weighting, verdict, slope, intercept,"
        " residual_sd, concentration_unit, response_unit) VALUES (?,?,?,?,?,?,?,?,?,?,?)",
        [(seq, c.position, c.analyte, c.model, c.weighting, c.verdict, c.slope, c.intercept,
          c.residual_sd, c.concentration_unit, c.response_unit) for c in curves],
    )


def _utc_now() -> datetime:
    return datetime.now(UTC)


class Archive:
    """An archive file; open it with ``with Archive(path) as archive:``.

    Parameters
    ----------
    path : str or Path
        The SQLite file.
    create : bool
        Create the file and its tables when missing (the default).  Readers
        pass False so that a mistyped path is an error, not a new empty archive.
    timeout : float
        Seconds to wait for another writer before giving up.
    clock : callable, optional
        Returns the current UTC time for ``created_at`` (tests pass a fixed clock).

    Raises
    ------
    ArchiveError
        If the file is missing (with ``create=False``), is not a calib archive,
        or was written by a newer calib.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with Archive(pathlib.Path(tempfile.mkdtemp()) / "records.sqlite") as archive:
    ...     len(archive), archive.verify_chain().ok
    (0, True)
    """

    def __init__(self, path: str | Path, *, create: bool = True,
                 timeout: float = DEFAULT_TIMEOUT,
                 clock: Callable[[], datetime] | None = None) -> None:
        self.path = Path(path)
        self._clock = clock or _utc_now
        if not create and not self.path.is_file():
            raise ArchiveError(f"{self.path}: no archive at this path")
        try:
            self._conn = sqlite3.connect(str(self.path), timeout=timeout, isolation_level=None)
        except sqlite3.Error as exc:
            raise ArchiveError(f"{self.path}: cannot open the archive ({exc})") from None
        try:
            self._conn.execute(f"PRAGMA busy_timeout = {int(timeout * 1000)}")
            self._conn.execute("PRAGMA journal_mode = WAL")
            self._conn.execute("PRAGMA synchronous = FULL")
            self._conn.execute("PRAGMA foreign_keys = ON")
            self._prepare(create=create)
        except sqlite3.OperationalError as exc:
            self._conn.close()
            raise ArchiveError(f"{self.path}: cannot use the archive ({exc})") from None
        except sqlite3.DatabaseError as exc:
            self._conn.close()
            raise ArchiveError(f"{self.path}: not a calib archive ({exc})") from None
        except BaseException:
            self._conn.close()
            raise

    # -- opening ---------------------------------------------------------------------------

    def _pragma(self, name: str) -> int:
        return int(self._conn.execute(f"PRAGMA {name}").fetchone()[0])

    def _prepare(self, *, create: bool) -> None:
        if self._pragma("application_id") == 0:
            if not create:
                raise ArchiveError(f"{self.path}: not a calib archive")
            with self._write():
                # Another process may have set the archive up while we waited for the lock.
                if self._pragma("application_id") == 0:
                    if self._conn.execute("SELECT count(*) FROM sqlite_master").fetchone()[0]:
                        raise ArchiveError(
                            f"{self.path}: an SQLite database that is not a calib archive")
                    for statement in _SCHEMA:
                        self._conn.execute(statement)
                    self._conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
                    self._conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
        if self._pragma("application_id") != APPLICATION_ID:
            raise ArchiveError(f"{self.path}: an SQLite database that is not a calib archive")
        version = self._pragma("user_version")
        if version > SCHEMA_VERSION:
            raise ArchiveError(f"{self.path}: archive format {version} was written by a newer "
                               f"calib (this one reads format {SCHEMA_VERSION})")

    def close(self) -> None:
        """Close the connection (the archive stays as written)."""
        self._conn.close()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextlib.contextmanager
    def _write(self) -> Iterator[None]:
        """A write transaction holding the write lock from its first statement."""
        try:
            self._conn.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise ArchiveError(f"{self.path}: the archive is busy or locked ({exc})") from None
        try:
            yield
        except BaseException:
            self._conn.execute("ROLLBACK")
            raise
        self._conn.execute("COMMIT")

    @contextlib.contextmanager
    def _snapshot(self) -> Iterator[None]:
        """A read transaction: one consistent view while writers go on appending."""
        self._conn.execute("BEGIN")
        try:
            yield
        finally:
            self._conn.execute("COMMIT")

    # -- writing ---------------------------------------------------------------------------

    def append(self, record: Record, pdf: bytes, *, kind: str) -> ArchiveEntry:
        """Append a version of a record with its PDF.

        Parameters
        ----------
        record : Record
            The record; only its canonical JSON bytes are used, everything else
            is derived from them.
        pdf : bytes
            The rendered PDF of exactly this version.
        kind : str
            ``issued`` (a new record) or ``signed`` (a new sign-off version).

        Returns
        -------
        ArchiveEntry
            The new entry, or the existing one when this exact version, PDF and
            kind are already archived.

        Raises
        ------
        ValueError
            If ``kind`` is not ``issued`` or ``signed``.
        ArchiveError
            If the record or PDF is unusable, or the version is archived with
            different bytes.
        """
        if kind not in KINDS:
            raise ValueError(f"kind must be one of {', '.join(KINDS)}; got {kind!r}")
        if not isinstance(pdf, (bytes, bytearray)) or not bytes(pdf).startswith(b"%PDF-"):
            raise ArchiveError("the PDF to archive is not a PDF document (no %PDF- header)")
        pdf = bytes(pdf)
        data = bytes(record.canonical)
        try:
            derived = derive_record(data)
        except ValueError as exc:
            raise ArchiveError(f"cannot archive this record: {exc}") from None
        if getattr(record, "digest", derived.version_digest) != derived.version_digest:
            raise ArchiveError("cannot archive this record: its digest does not match its JSON")
        facts = derived.facts
        meta = {
            "record_id": derived.record_id, "version_digest": derived.version_digest,
            "content_digest": derived.content_digest, "kind": kind,
            "analytes": facts.analytes, "verdict": facts.verdict, "run_date": facts.run_date,
            "instrument": facts.instrument, "roles": facts.roles,
        }
        with self._write():
            # Read under the lock, so archive times never run backwards along the chain.
            meta["created_at"] = self._clock().astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
            existing = self._one("WHERE version_digest = ?", (derived.version_digest,))
            if existing is not None:
                return self._same_or_refuse(existing, data, pdf, kind)
            head = self._conn.execute(
                "SELECT seq, entry_hash FROM entries ORDER BY seq DESC LIMIT 1").fetchone()
            seq, prev = (head[0] + 1, head[1]) if head else (1, GENESIS_HASH)
            entry_hash = compute_entry_hash(prev, entry_fields(seq, meta, pdf))
            self._conn.execute(
                "INSERT INTO entries (seq, record_id, version_digest, content_digest, kind,"
                " created_at, analytes, verdict, run_date, instrument, roles, json, pdf,"
                " prev_hash, entry_hash) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
                (seq, meta["record_id"], meta["version_digest"], meta["content_digest"], kind,
                 meta["created_at"], _json_list(facts.analytes), facts.verdict, facts.run_date,
                 facts.instrument, _json_list(facts.roles), data, pdf, prev, entry_hash),
            )
            _insert_figures(self._conn, seq, facts.curves)
        return ArchiveEntry(
            seq=seq, record_id=derived.record_id, version_digest=derived.version_digest,
            content_digest=derived.content_digest, kind=kind, created_at=meta["created_at"],
            analytes=facts.analytes, verdict=facts.verdict, json=data, pdf=pdf, prev_hash=prev,
            entry_hash=entry_hash, run_date=facts.run_date, instrument=facts.instrument,
            roles=facts.roles,
        )

    @staticmethod
    def _same_or_refuse(existing: ArchiveEntry, data: bytes, pdf: bytes,
                        kind: str) -> ArchiveEntry:
        differs = [name for name, same in (("JSON", existing.json == data),
                                           ("PDF", existing.pdf == pdf),
                                           ("kind", existing.kind == kind)) if not same]
        if not differs:
            return existing
        raise ArchiveError(
            f"version {existing.version_digest[:16]} of record {existing.record_id} is already "
            f"archived as entry seq {existing.seq} with a different {' and '.join(differs)}; "
            "an archived entry is never replaced")

    # -- reading ---------------------------------------------------------------------------

    def _select(self, *, data: bool) -> str:
        blobs = "json, pdf" if data else "CAST('' AS BLOB), CAST('' AS BLOB)"
        return f"SELECT {', '.join(_META_COLUMNS)}, {blobs} FROM entries"

    def _one(self, where: str, params: tuple[Any, ...]) -> ArchiveEntry | None:
        row = self._conn.execute(f"{self._select(data=True)} {where} LIMIT 1", params).fetchone()
        return _entry(row) if row else None

    def __len__(self) -> int:
        return int(self._conn.execute("SELECT count(*) FROM entries").fetchone()[0])

    def entries(self, record_id: str | None = None, analyte: str | None = None, *,
                verdict: str | None = None, instrument: str | None = None,
                date_from: str | None = None, date_to: str | None = None,
                kind: str | None = None, data: bool = True) -> list[ArchiveEntry]:
        """Entries in chain order, optionally filtered.

        Parameters
        ----------
        record_id : str, optional
            Only versions of this record (case-insensitive).
        analyte : str, optional
            Only records holding a curve of this analyte (case-insensitive).
        verdict : str, optional
            Only records with this run verdict.
        instrument : str, optional
            Only runs on this instrument (case-insensitive).
        date_from, date_to : str, optional
            ``YYYY-MM-DD``: only runs dated on or after / on or before this day.
        kind : str, optional
            ``issued`` or ``signed``.
        data : bool
            Read the JSON and PDF bytes; with False they are left empty (a fast listing).
        """
        clauses, params = [], []
        for column, value in (("record_id", record_id), ("instrument", instrument)):
            if value is not None:
                clauses.append(f"{column} = ? COLLATE NOCASE")
                params.append(value)
        for column, value in (("verdict", verdict), ("kind", kind)):
            if value is not None:
                clauses.append(f"{column} = ?")
                params.append(value)
        if date_from is not None:
            clauses.append("run_date >= ?")
            params.append(date_from)
        if date_to is not None:
            clauses.append("run_date <= ?")
            params.append(date_to)
        if analyte is not None:
            clauses.append("EXISTS (SELECT 1 FROM curves c WHERE c.seq = entries.seq"
                           " AND c.analyte = ? COLLATE NOCASE)")
            params.append(analyte)
        where = f" WHERE {' AND '.join(clauses)}" if clauses else ""
        rows = self._conn.execute(f"{self._select(data=data)}{where} ORDER BY seq", params)
        return [_entry(row) for row in rows]

    def latest(self, record_id: str) -> ArchiveEntry | None:
        """The newest version of ``record_id`` (case-insensitive), or None."""
        return self._one("WHERE record_id = ? COLLATE NOCASE ORDER BY seq DESC", (record_id,))

    def find_digest(self, digest: str) -> ArchiveEntry | None:
        """The entry whose version digest is ``digest`` (full hex), or None."""
        return self._one("WHERE version_digest = ?", (digest.strip().lower(),))

    def head(self) -> tuple[int, str] | None:
        """Seq and entry hash of the newest entry; None when the archive is empty."""
        row = self._conn.execute(
            "SELECT seq, entry_hash FROM entries ORDER BY seq DESC LIMIT 1").fetchone()
        return (int(row[0]), str(row[1])) if row else None

    def analytes(self) -> list[str]:
        """Every analyte name in the archive, sorted."""
        rows = self._conn.execute("SELECT DISTINCT analyte FROM curves ORDER BY analyte")
        return [r[0] for r in rows]

    def curve_history(self, analyte: str, *, instrument: str | None = None,
                      ) -> list[ArchivedCurve]:
        """Every archived curve of ``analyte``, one per record, in chain order.

        The figures come from each record's first version (sign-off does not
        change them); the roles from its latest version, so a record rejected
        at review is known as such.  The analyte and instrument match
        case-insensitively.
        """
        query = (
            "SELECT e.record_id, e.seq, e.run_date, e.instrument,"
            " (SELECT l.roles FROM entries l WHERE l.content_digest = e.content_digest"
            "  ORDER BY l.seq DESC LIMIT 1),"
            " c.position, c.analyte, c.model, c.weighting, c.verdict, c.slope, c.intercept,"
            " c.residual_sd, c.concentration_unit, c.response_unit"
            " FROM curves c JOIN entries e ON e.seq = c.seq"
            " WHERE c.analyte = ? COLLATE NOCASE"
            " AND e.seq = (SELECT min(f.seq) FROM entries f"
            "              WHERE f.content_digest = e.content_digest)"
        )
        params: list[Any] = [analyte]
        if instrument is not None:
            query += " AND e.instrument = ? COLLATE NOCASE"
            params.append(instrument)
        out = []
        for row in self._conn.execute(query + " ORDER BY e.seq, c.position", params):
            figures = CurveFigures(*row[5:])
            out.append(ArchivedCurve(row[0], row[1], row[2], row[3], tuple(_loads_list(row[4])),
                                     figures))
        return out

    def trend(self, analyte: str, *, baseline: int = DEFAULT_BASELINE,
              instrument: str | None = None, **options: Any) -> AnalyteTrend:
        """Control charts of ``analyte``'s accepted curves (see :mod:`calib.archive.trend`).

        The charts are named with the analyte as the archive spells it; ``options``
        (``screen``, ``frozen``, ``rules``) go to :func:`calib.archive.trend.analyte_trend`.
        """
        history = self.curve_history(analyte, instrument=instrument)
        name = history[0].figures.analyte if history else analyte
        return analyte_trend(history, analyte=name, baseline=baseline, **options)

    # -- verifying -------------------------------------------------------------------------

    def verify_chain(self, *, expected_head: str | None = None) -> ChainReport:
        """Recompute every digest and entry hash and compare the indexes with the JSON.

        Parameters
        ----------
        expected_head : str, optional
            An entry hash noted earlier: it must still be in the chain, or
            entries were cut off the end or the file was replaced.

        Returns
        -------
        ChainReport
            Every problem names the entry (seq) it concerns.
        """
        problems: list[ChainProblem] = []
        with self._snapshot():
            present = {r[0] for r in self._conn.execute(
                "SELECT name FROM sqlite_master WHERE type = 'trigger'")}
            missing = [t for t in _TRIGGERS if t not in present]
            if missing:
                problems.append(ChainProblem(None, "append-only triggers are missing ("
                                             + ", ".join(missing) + "): the archive was opened "
                                             "for editing outside calib"))
            figures: dict[int, list[tuple[Any, ...]]] = {}
            for row in self._conn.execute(
                    "SELECT seq, position, analyte, model, weighting, verdict, slope, intercept,"
                    " residual_sd, concentration_unit, response_unit FROM curves"
                    " ORDER BY seq, position"):
                figures.setdefault(row[0], []).append(tuple(row[1:]))
            count, prev_seq, prev_hash = 0, 0, GENESIS_HASH
            hashes = set()
            for row in self._conn.execute(f"{self._select(data=True)} ORDER BY seq"):
                entry = _entry(row)
                count += 1
                problems += check_entry(entry, prev_seq, prev_hash, figures.pop(entry.seq, []))
                prev_seq, prev_hash = entry.seq, entry.entry_hash
                hashes.add(entry.entry_hash)
        for seq in sorted(figures):
            problems.append(ChainProblem(seq, "figures are stored for an entry that does not "
                                              "exist (the entry was removed)"))
        if expected_head is not None and expected_head.strip().lower() not in hashes:
            problems.append(ChainProblem(None, f"the noted head {expected_head.strip()[:16]}… is "
                                               "not in the archive: entries were removed from "
                                               "its end, or the file was replaced"))
        return ChainReport(count, prev_seq or None, prev_hash, tuple(problems))


def _json_list(values: Sequence[str]) -> str:
    return json.dumps(list(values), ensure_ascii=False, separators=(",", ":"))


def _entry(row: Sequence[Any]) -> ArchiveEntry:
    meta = dict(zip(_META_COLUMNS, row))
    return ArchiveEntry(
        seq=meta["seq"], record_id=meta["record_id"], version_digest=meta["version_digest"],
        content_digest=meta["content_digest"], kind=meta["kind"], created_at=meta["created_at"],
        analytes=tuple(_loads_list(meta["analytes"])), verdict=meta["verdict"],
        json=_blob(row[-2]), pdf=_blob(row[-1]), prev_hash=meta["prev_hash"],
        entry_hash=meta["entry_hash"], run_date=meta["run_date"],
        instrument=meta["instrument"], roles=tuple(_loads_list(meta["roles"])),
    )


def _blob(value: Any) -> bytes:
    # Whatever was written into a BLOB column from outside calib must not crash the reader.
    if isinstance(value, (bytes, bytearray, memoryview)):
        return bytes(value)
    return b"" if value is None else str(value).encode("utf-8", "surrogateescape")


def _loads_list(text: Any) -> list[str]:
    # A tampered column must be reported by verify_chain, not crash the reader.
    try:
        value = json.loads(text)
    except (TypeError, ValueError):
        return [str(text)]
    return [str(v) for v in value] if isinstance(value, list) else [str(value)]


