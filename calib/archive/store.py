"""The append-only, hash-chained archive of calibration records, on SQLite or PostgreSQL.

Every issued record and every signed version of it is appended as an *entry*
holding the record JSON and the PDF bytes.  Nothing is ever changed or
removed: triggers refuse ``UPDATE`` and ``DELETE`` (tables and triggers in
:mod:`calib.archive.schema`), and each entry carries the hash of the one
before it, so an edit made by going around the triggers breaks the chain and
:meth:`Archive.verify_chain` names the entry.  The engine is chosen by the
location (:mod:`calib.archive.backends`): a path is an SQLite file,
``postgresql://…`` a PostgreSQL database; both give the same guarantees.

Entry hash
    Each entry's hash covers the previous entry's hash and every column of
    the entry (the JSON and PDF through their SHA-256); the exact byte layout
    is in :mod:`calib.archive.chain`.

What the archive checks on append (it never trusts the caller)
    The JSON bytes are the record's canonical JSON; the version digest is
    recomputed from them; record id, content digest, analytes, verdict, run
    date, instrument, roles and curve figures are derived from the JSON
    re-read from those bytes, not taken from the object passed in.  The PDF
    must carry exactly this version's JSON as its attached record data.  A
    ``signed`` version is accepted only when the record's issued version is
    already archived.  An archive whose head receipt shows it was rolled back
    refuses new entries until the lab has looked into it.

Appending a version that is already archived
    Idempotent when JSON, PDF and kind are byte-identical: the existing entry is
    returned and nothing is written, so a writer that lost its connection can
    safely retry.  Anything else under an archived version digest is refused
    (:class:`ArchiveError`): an archived entry is never replaced.

Concurrency and crashes
    The head is read and extended inside a transaction holding the append lock
    (:mod:`calib.archive.backends`), so two writers can never extend the same
    head, and each entry with its data and curve rows is committed in one
    transaction or not at all.

Anchoring
    After each append the head receipt (:mod:`calib.archive.anchor`) moves to
    the new head; verification checks it whenever it is present.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any, Self

from calib.archive import anchor
from calib.archive.backends import ArchiveError, Storage, is_database_url, open_storage
from calib.archive.chain import (
    GENESIS_HASH,
    KINDS,
    ArchiveEntry,
    ChainReport,
    compute_entry_hash,
    derive_record,
    entry_fields,
    pdf_problem,
)
from calib.archive.control import DEFAULT_BASELINE
from calib.archive.figures import CurveFigures
from calib.archive.rows import (
    FIGURE_COLUMNS,
    META_COLUMNS,
    SELECT_DATA,
    SELECT_META,
    entry_from_row,
    loads_list,
)
from calib.archive.trend import AnalyteTrend, ArchivedCurve, analyte_trend

if TYPE_CHECKING:
    from calib.archive.audit import EntryReport
    from calib.record import Record

__all__ = ["Archive", "ArchiveError", "PreparedEntry"]

_DEFAULT_TIMEOUT = 30.0
_AUTO = "auto"

@dataclass(frozen=True)
class PreparedEntry:
    """An entry checked and ready to be chained: everything but seq, time and hashes."""

    record_id: str
    version_digest: str
    content_digest: str
    kind: str
    analytes: tuple[str, ...]
    verdict: str
    run_date: str
    instrument: str | None
    roles: tuple[str, ...]
    json: bytes
    pdf: bytes
    curves: tuple[CurveFigures, ...] = ()


def _utc_now() -> datetime:
    return datetime.now(UTC)


class Archive:
    """An archive; open it with ``with Archive(location) as archive:``.

    Parameters
    ----------
    path : str or Path
        The SQLite file, or a ``postgresql://…`` URL.
    create : bool
        Create the archive when missing (the default).  Readers pass False so
        that a mistyped path is an error, not a new empty archive.
    timeout : float
        Seconds to wait for another writer before giving up.
    clock : callable, optional
        Returns the current UTC time for ``created_at`` (tests pass a fixed clock).
    head_receipt : str, Path or None
        Where the head receipt goes; ``"auto"`` (the default) is
        :func:`calib.archive.anchor.default_receipt_path`, None writes none.

    Raises
    ------
    ArchiveError
        If the archive is missing (with ``create=False``), is not a calib
        archive, or was written by a newer calib.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with Archive(pathlib.Path(tempfile.mkdtemp()) / "records.sqlite") as archive:
    ...     len(archive), archive.verify_chain().ok, archive.engine
    (0, True, 'sqlite')
    """

    def __init__(self, path: str | Path, *, create: bool = True,
                 timeout: float = _DEFAULT_TIMEOUT,
                 clock: Callable[[], datetime] | None = None,
                 head_receipt: str | Path | None = _AUTO) -> None:
        self._clock = clock or _utc_now
        self._store: Storage = open_storage(path, create=create, timeout=timeout)
        database = is_database_url(path)
        self.path: Path | str = self._store.location if database else Path(path)
        self.location = self._store.location
        self.engine = self._store.engine
        self.archive_id = self._store.archive_id
        if head_receipt == _AUTO:
            self.receipt_path = anchor.default_receipt_path(str(path), database=database)
        else:
            self.receipt_path = Path(head_receipt) if head_receipt is not None else None
        self.last_receipt: anchor.HeadReceipt | None = None

    def close(self) -> None:
        """Close the connection (the archive stays as written)."""
        self._store.close()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def storage(self) -> Storage:
        """The engine underneath (for :mod:`calib.archive.audit` and the migration)."""
        return self._store

    # -- writing ---------------------------------------------------------------------------

    def append(self, record: Record, pdf: bytes, *, kind: str) -> ArchiveEntry:
        """Append a version of a record with its PDF.

        Parameters
        ----------
        record : Record
            The record; only its canonical JSON bytes are used, everything else
            is derived from them.
        pdf : bytes
            The rendered PDF of exactly this version (its attached record data
            must be this version's JSON).
        kind : str
            ``issued`` (a new record) or ``signed`` (a new sign-off version).

        Returns
        -------
        ArchiveEntry
            The new entry, or the existing one when this exact version, PDF and
            kind are already archived.  :attr:`last_receipt` is the head receipt
            written for it (None when the archive has no receipt).

        Raises
        ------
        ValueError
            If ``kind`` is not ``issued`` or ``signed``.
        ArchiveError
            If the record or PDF is unusable, the version is archived with
            different bytes, a signed version's issued version is not archived,
            or the head receipt shows that the archive was rolled back.
        """
        return self.append_prepared([self.prepare(record, pdf, kind=kind)])[0]

    def prepare(self, record: Record, pdf: bytes, *, kind: str) -> PreparedEntry:
        """Check a record version and its PDF and derive what is indexed (no writing)."""
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
        wrong_pdf = pdf_problem(pdf, derived.version_digest)
        if wrong_pdf:
            raise ArchiveError(f"cannot archive {derived.record_id}: "
                               f"{wrong_pdf.replace('the stored PDF', 'the PDF')}")
        facts = derived.facts
        return PreparedEntry(derived.record_id, derived.version_digest, derived.content_digest,
                             kind, facts.analytes, facts.verdict, facts.run_date,
                             facts.instrument, facts.roles, data, pdf, facts.curves)

    def append_prepared(self, items: Sequence[PreparedEntry]) -> list[ArchiveEntry]:
        """Chain entries made by :meth:`prepare`, in one transaction under the append lock.

        Used by :meth:`append` (one item) and by bulk loads (the scale bench).
        """
        from calib.archive.audit import receipt_problems

        out = []
        with self._store.write():
            problems = receipt_problems(self)
            if problems:
                raise ArchiveError(
                    f"{self.location}: nothing appended: {problems[0]} (have the archive "
                    "checked; if it was replaced on purpose, move its old head receipt "
                    f"{self.receipt_path} away with the old archive)")
            for item in items:
                out.append(self._chain_one(item))
        head = out[-1] if out else None
        if head is not None and self.receipt_path is not None:
            try:
                self.last_receipt = anchor.write_receipt(
                    self.receipt_path, self.archive_id, head.seq, head.entry_hash,
                    head.created_at)
            except (OSError, ValueError) as exc:
                raise ArchiveError(f"entry seq {head.seq} was archived, but its head receipt "
                                   f"{self.receipt_path} cannot be written ({exc})") from None
        return out

    def _chain_one(self, item: PreparedEntry) -> ArchiveEntry:
        existing = self._one("WHERE e.version_digest = ?", (item.version_digest,))
        if existing is not None:
            return _same_or_refuse(existing, item)
        if item.kind == "signed" and not self._store.query(
                "SELECT 1 FROM entries WHERE content_digest = ? AND kind = 'issued' LIMIT 1",
                (item.content_digest,)):
            raise ArchiveError(
                f"cannot archive a signed version of {item.record_id}: its issued version is "
                "not in the archive (file the issued record first; a signed version is only "
                "ever filed after the version it continues)")
        # Read under the lock, so archive times never run backwards along the chain.
        created_at = self._clock().astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        head = self.head()
        seq, prev = (head[0] + 1, head[1]) if head else (1, GENESIS_HASH)
        meta = {"record_id": item.record_id, "version_digest": item.version_digest,
                "content_digest": item.content_digest, "kind": item.kind,
                "created_at": created_at, "analytes": item.analytes, "verdict": item.verdict,
                "run_date": item.run_date, "instrument": item.instrument, "roles": item.roles}
        entry_hash = compute_entry_hash(prev, entry_fields(seq, meta, item.pdf))
        entry = ArchiveEntry(
            seq=seq, record_id=item.record_id, version_digest=item.version_digest,
            content_digest=item.content_digest, kind=item.kind, created_at=created_at,
            analytes=item.analytes, verdict=item.verdict, json=item.json, pdf=item.pdf,
            prev_hash=prev, entry_hash=entry_hash, run_date=item.run_date,
            instrument=item.instrument, roles=item.roles,
            pdf_sha256=entry_fields(seq, meta, item.pdf)["pdf_sha256"])
        self._insert(entry, item.curves)
        return entry

    def _insert(self, entry: ArchiveEntry, curves: Iterable[CurveFigures]) -> None:
        """Write one entry as given (the triggers still refuse anything but the next head)."""
        self._store.execute(
            f"INSERT INTO entries ({', '.join(META_COLUMNS)}) VALUES "
            f"({', '.join('?' * len(META_COLUMNS))})",
            (entry.seq, entry.record_id, entry.version_digest, entry.content_digest, entry.kind,
             entry.created_at, _json_list(entry.analytes), entry.verdict, entry.run_date,
             entry.instrument, _json_list(entry.roles), entry.pdf_sha256, entry.prev_hash,
             entry.entry_hash))
        self._store.execute("INSERT INTO entry_data (seq, json, pdf) VALUES (?, ?, ?)",
                            (entry.seq, entry.json, entry.pdf))
        rows = [(entry.seq, c.position, c.analyte, c.model, c.weighting, c.verdict, c.slope,
                 c.intercept, c.residual_sd, c.concentration_unit, c.response_unit)
                for c in curves]
        if rows:
            self._store.executemany(
                f"INSERT INTO curves (seq, {FIGURE_COLUMNS}) VALUES (?,?,?,?,?,?,?,?,?,?,?)",
                rows)

    def copy_entries(self, entries: Iterable[tuple[ArchiveEntry, Sequence[CurveFigures]]],
                     ) -> int:
        """Append entries of another archive exactly as they are (``calib archive migrate``).

        Seq, times and hashes are kept; each entry's hash is recomputed first
        and the triggers make sure each one extends this archive's head, so a
        copy either reproduces the chain or stops.  Returns the number copied.
        """
        count, last = 0, None
        with self._store.write():
            for entry, curves in entries:
                fields = entry_fields(entry.seq, {**entry.summary(), "pdf_sha256": None},
                                      entry.pdf)
                if compute_entry_hash(entry.prev_hash, fields) != entry.entry_hash:
                    raise ArchiveError(f"entry seq {entry.seq} of the source does not match "
                                       "its own hash: nothing was copied (verify the source)")
                self._insert(entry, curves)
                count, last = count + 1, entry
        if last is not None and self.receipt_path is not None:
            self.last_receipt = anchor.write_receipt(self.receipt_path, self.archive_id,
                                                     last.seq, last.entry_hash, last.created_at)
        return count

    # -- reading ---------------------------------------------------------------------------

    def _one(self, where: str, params: tuple[Any, ...]) -> ArchiveEntry | None:
        rows = self._store.query(f"{SELECT_DATA} {where} LIMIT 1", params)
        return entry_from_row(rows[0]) if rows else None

    def __len__(self) -> int:
        return int(self._store.query("SELECT count(*) FROM entries")[0][0])

    @staticmethod
    def _filters(record_id: str | None, analyte: str | None, verdict: str | None,
                 instrument: str | None, date_from: str | None, date_to: str | None,
                 kind: str | None, partial: bool = False) -> tuple[str, list[Any]]:
        clauses, params = [], []

        def text(column: str, value: str) -> None:
            # Case-insensitive; with ``partial`` any part of the name (LIKE, '!' escapes).
            if partial:
                clauses.append(f"lower({column}) LIKE ? ESCAPE '!'")
                escaped = value.lower().replace("!", "!!").replace("%", "!%").replace("_", "!_")
                params.append(f"%{escaped}%")
            else:
                clauses.append(f"lower({column}) = lower(?)")
                params.append(value)

        if record_id is not None:
            clauses.append("lower(e.record_id) = lower(?)")
            params.append(record_id)
        if instrument is not None:
            text("e.instrument", instrument)
        for column, value in (("verdict", verdict), ("kind", kind)):
            if value is not None:
                clauses.append(f"e.{column} = ?")
                params.append(value)
        if date_from is not None:
            clauses.append("e.run_date >= ?")
            params.append(date_from)
        if date_to is not None:
            clauses.append("e.run_date <= ?")
            params.append(date_to)
        if analyte is not None:
            # IN (…) rather than EXISTS: the engines then start from the analyte index,
            # so a rare analyte is found without walking the whole archive.
            before = len(clauses)
            text("c.analyte", analyte)
            clauses[before] = f"e.seq IN (SELECT c.seq FROM curves c WHERE {clauses[before]})"
        return (f" WHERE {' AND '.join(clauses)}" if clauses else ""), params

    def entries(self, record_id: str | None = None, analyte: str | None = None, *,
                verdict: str | None = None, instrument: str | None = None,
                date_from: str | None = None, date_to: str | None = None,
                kind: str | None = None, data: bool = True, limit: int | None = None,
                offset: int = 0, after_seq: int | None = None,
                newest_first: bool = False, partial: bool = False) -> list[ArchiveEntry]:
        """Entries in chain order, optionally filtered and paged.

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
            Read the JSON and PDF bytes; with False they are left empty and no
            blob is read (a fast listing).
        limit, offset : int, optional
            One page: at most ``limit`` entries after skipping ``offset``.
        after_seq : int, optional
            Keyset paging: only entries after this seq (before it with
            ``newest_first``); faster than a large offset.
        newest_first : bool
            Newest entry first.
        partial : bool
            ``analyte`` and ``instrument`` match any part of the stored name
            (case-insensitive): "pb" finds "Pb 220.353".

        Raises
        ------
        ValueError
            If ``limit`` or ``offset`` is negative.
        """
        if (limit is not None and limit < 0) or offset < 0:
            raise ValueError(f"limit and offset must be 0 or more; got {limit}, {offset}")
        where, params = self._filters(record_id, analyte, verdict, instrument, date_from,
                                      date_to, kind, partial)
        if after_seq is not None:
            where += (" AND " if where else " WHERE ") + (
                "e.seq < ?" if newest_first else "e.seq > ?")
            params.append(int(after_seq))
        order = " ORDER BY e.seq DESC" if newest_first else " ORDER BY e.seq"
        page = ""
        if limit is not None or offset:
            page = " LIMIT ? OFFSET ?"
            params += [limit if limit is not None else 2**62, offset]
        rows = self._store.query(f"{SELECT_DATA if data else SELECT_META}{where}{order}{page}",
                                 params)
        return [entry_from_row(row) for row in rows]

    def count(self, record_id: str | None = None, analyte: str | None = None, *,
              verdict: str | None = None, instrument: str | None = None,
              date_from: str | None = None, date_to: str | None = None,
              kind: str | None = None, partial: bool = False) -> int:
        """How many entries :meth:`entries` would list with these filters (for paging)."""
        where, params = self._filters(record_id, analyte, verdict, instrument, date_from,
                                      date_to, kind, partial)
        return int(self._store.query(f"SELECT count(*) FROM entries e{where}", params)[0][0])

    def latest(self, record_id: str) -> ArchiveEntry | None:
        """The newest version of ``record_id`` (case-insensitive), or None."""
        return self._one("WHERE lower(e.record_id) = lower(?) ORDER BY e.seq DESC", (record_id,))

    def find_digest(self, digest: str) -> ArchiveEntry | None:
        """The entry whose version digest is ``digest`` (full hex), or None."""
        return self._one("WHERE e.version_digest = ?", (digest.strip().lower(),))

    def entry_at(self, seq: int) -> ArchiveEntry | None:
        """The entry at ``seq`` with its JSON and PDF, or None."""
        return self._one("WHERE e.seq = ?", (int(seq),))

    def head(self) -> tuple[int, str] | None:
        """Seq and entry hash of the newest entry; None when the archive is empty."""
        rows = self._store.query("SELECT seq, entry_hash FROM entries ORDER BY seq DESC LIMIT 1")
        return (int(rows[0][0]), str(rows[0][1])) if rows else None

    def figures(self, seq: int) -> list[CurveFigures]:
        """The curve figures stored for the entry at ``seq``."""
        return [CurveFigures(*row) for row in self._store.query(
            f"SELECT {FIGURE_COLUMNS} FROM curves WHERE seq = ? ORDER BY position", (seq,))]

    def analytes(self) -> list[str]:
        """Every analyte name in the archive, sorted."""
        rows = self._store.query("SELECT DISTINCT analyte FROM curves ORDER BY analyte")
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
            f" {', '.join('c.' + c.strip() for c in FIGURE_COLUMNS.split(','))}"
            " FROM curves c JOIN entries e ON e.seq = c.seq"
            " WHERE lower(c.analyte) = lower(?)"
            " AND e.seq = (SELECT min(f.seq) FROM entries f"
            "              WHERE f.content_digest = e.content_digest)"
        )
        params: list[Any] = [analyte]
        if instrument is not None:
            query += " AND lower(e.instrument) = lower(?)"
            params.append(instrument)
        out = []
        for row in self._store.query(query + " ORDER BY e.seq, c.position", params):
            figures = CurveFigures(*row[5:])
            out.append(ArchivedCurve(row[0], row[1], row[2], row[3], tuple(loads_list(row[4])),
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

    # -- verifying (calib.archive.audit) ---------------------------------------------------

    def verify_chain(self, *, expected_head: str | None = None, deep: bool = True,
                     pdfs: bool = False,
                     progress: Callable[[int], None] | None = None) -> ChainReport:
        """Verify the whole archive (see :func:`calib.archive.audit.verify_chain`).

        ``deep=False`` is the hash pass only (no blob read, ≥ 5,000 entries/s);
        the default also checks every entry's JSON and PDF digests and indexes,
        and ``pdfs=True`` each PDF's attached record data as well.
        """
        from calib.archive.audit import verify_chain

        return verify_chain(self, expected_head=expected_head, deep=deep, pdfs=pdfs,
                            progress=progress)

    def verify_entry(self, digest: str) -> EntryReport:
        """Verify one version against the archive without a pass over the chain.

        See :func:`calib.archive.audit.verify_entry`: the entry, its links to the
        entries before and after it, its JSON and PDF, the append-only triggers
        and the head receipt — a few indexed reads, whatever the archive's size.
        """
        from calib.archive.audit import verify_entry

        return verify_entry(self, digest)


def _same_or_refuse(existing: ArchiveEntry, item: PreparedEntry) -> ArchiveEntry:
    differs = [name for name, same in (("JSON", existing.json == item.json),
                                       ("PDF", existing.pdf == item.pdf),
                                       ("kind", existing.kind == item.kind)) if not same]
    if not differs:
        return existing
    raise ArchiveError(
        f"version {existing.version_digest[:16]} of record {existing.record_id} is already "
        f"archived as entry seq {existing.seq} with a different {' and '.join(differs)}; "
        "an archived entry is never replaced")


def _json_list(values: Sequence[str]) -> str:
    return json.dumps(list(values), ensure_ascii=False, separators=(",", ":"))
