"""Verifying an archive: the whole chain, or one entry in a few indexed reads.

Whole chain (:func:`verify_chain`)
    The *hash pass* reads only the short columns of ``entries`` in seq order
    and recomputes each entry hash from them (the PDF through its stored
    SHA-256): gaps, broken links and edited columns are found without reading a
    single blob.  The *content pass* (``deep=True``) also reads each entry's
    JSON and PDF: the JSON must hash to the version digest and be a canonical
    record, the PDF must hash to the chained PDF digest and carry exactly that
    JSON, and the indexed columns and trend figures must match the JSON.

One entry (:func:`verify_entry`)
    The entry's hash, its link to the entry before it (whose own hash is
    recomputed too) and from the entry after it, its JSON and PDF, the
    append-only triggers and the head receipt.  Any edit that the whole-chain
    pass would find in this entry is found; an edit elsewhere needs the
    whole-chain pass.

Both check the head receipt (:mod:`calib.archive.anchor`) when present, so
truncation, an older copy restored, renumbering and a recomputed chain are
reported.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from calib.archive import anchor, schema
from calib.archive.chain import (
    GENESIS_HASH,
    ArchiveEntry,
    ChainProblem,
    ChainReport,
    check_content,
    check_link,
    figures_row,
)
from calib.archive.figures import CurveFigures
from calib.archive.rows import FIGURE_COLUMNS, SELECT_DATA, SELECT_META, entry_from_row

if TYPE_CHECKING:
    from calib.archive.store import Archive

__all__ = ["EntryReport", "receipt_problems", "verify_chain", "verify_entry"]


@dataclass(frozen=True)
class EntryReport:
    """Result of verifying one version against the archive.

    Attributes
    ----------
    entry : ArchiveEntry or None
        The archived entry (None when the version is not in the archive).
    problems : tuple of ChainProblem
        Empty when the entry, its links, the triggers and the head receipt are intact.
    head_seq, head_hash : int or None, str
        The archive's head when checked.
    receipt : HeadReceipt or None
        The head receipt that was checked (None when there is none).
    """

    entry: ArchiveEntry | None
    problems: tuple[ChainProblem, ...]
    head_seq: int | None
    head_hash: str
    receipt: anchor.HeadReceipt | None = None

    @property
    def ok(self) -> bool:
        """True when the entry is there and no problem was found."""
        return self.entry is not None and not self.problems


def _trigger_problems(archive: Archive) -> list[ChainProblem]:
    expected = (schema.POSTGRES_TRIGGERS if archive.engine == "postgresql"
                else schema.SQLITE_TRIGGERS)
    present = archive.storage.triggers()
    missing = [t for t in expected if t not in present]
    if not missing:
        return []
    return [ChainProblem(None, "append-only triggers are missing (" + ", ".join(missing)
                         + "): the archive was opened for editing outside calib")]


def _receipt(archive: Archive) -> tuple[anchor.HeadReceipt | None, list[ChainProblem]]:
    path = archive.receipt_path
    if path is None:
        return None, []
    try:
        receipt = anchor.read_receipt(path)
    except ValueError as exc:
        return None, [ChainProblem(None, str(exc))]
    if receipt is None:
        return None, []
    if receipt.archive_id != archive.archive_id:
        return receipt, [ChainProblem(None, (
            f"the head receipt {path} belongs to archive {receipt.archive_id}, but this is "
            f"archive {archive.archive_id}: the archive was replaced by another one"))]
    rows = archive.storage.query("SELECT entry_hash FROM entries WHERE seq = ?", (receipt.seq,))
    if not rows:
        head = archive.head()
        ends = f"ends at seq {head[0]}" if head else "is empty"
        return receipt, [ChainProblem(None, (
            f"the head receipt {path} (written {receipt.written_at}) names entry seq "
            f"{receipt.seq}, but the archive {ends}: entries were removed from its end or an "
            "older copy was restored"))]
    if rows[0][0] != receipt.entry_hash:
        return receipt, [ChainProblem(receipt.seq, (
            f"its entry hash {str(rows[0][0])[:16]}… is not the {receipt.entry_hash[:16]}… the "
            f"head receipt {path} names: the chain was rewritten (entries removed and "
            "renumbered, or edited and re-hashed)"))]
    return receipt, []


def receipt_problems(archive: Archive) -> list[ChainProblem]:
    """What the head receipt says is wrong with the archive (empty when none, or consistent)."""
    return _receipt(archive)[1]


def _entry(row: tuple[Any, ...]) -> ArchiveEntry:
    return entry_from_row(row)


def verify_chain(archive: Archive, *, expected_head: str | None = None, deep: bool = True,
                 pdfs: bool = False,
                 progress: Callable[[int], None] | None = None) -> ChainReport:
    """Verify every entry of ``archive`` (the module docstring says what is checked).

    Parameters
    ----------
    archive : Archive
        An open archive.
    expected_head : str, optional
        An entry hash noted earlier (a logbook): it must still be in the chain.
    deep : bool
        Also read and check every entry's JSON and PDF (the content pass).
    pdfs : bool
        With ``deep``, also parse every PDF and check its attached record data against the
        entry's JSON (``calib archive verify`` does; a few ms per record PDF).
    progress : callable, optional
        Called with the number of entries checked so far, every 1,000 entries.

    Returns
    -------
    ChainReport
        Every problem names the entry (seq) it concerns.
    """
    store = archive.storage
    problems: list[ChainProblem] = []
    wanted = expected_head.strip().lower() if expected_head is not None else None
    seen_expected = False
    with store.snapshot():
        problems += _trigger_problems(archive)
        figures: dict[int, list[tuple[Any, ...]]] = {}
        if deep:
            for row in store.rows(f"SELECT seq, {FIGURE_COLUMNS} FROM curves"
                                  " ORDER BY seq, position"):
                # Read as the store reads them (a calib.record/1 mean-rf "none" is "1/x2").
                figures.setdefault(int(row[0]), []).append(figures_row(CurveFigures(*row[1:])))
        count, prev_seq, prev_hash = 0, 0, GENESIS_HASH
        for row in store.rows(f"{SELECT_DATA if deep else SELECT_META} ORDER BY e.seq"):
            entry = _entry(row)
            count += 1
            problems += check_link(entry, prev_seq, prev_hash)
            if deep:
                problems += check_content(entry, figures.pop(entry.seq, []), attachment=pdfs)
            prev_seq, prev_hash = entry.seq, entry.entry_hash
            seen_expected = seen_expected or entry.entry_hash == wanted
            if progress is not None and count % 1000 == 0:
                progress(count)
    # After the snapshot: writers may have appended (and moved the receipt) meanwhile, and
    # the archive only ever grows, so the receipt is checked against the archive as it is now.
    receipt, found = _receipt(archive)
    problems += found
    for seq in sorted(figures):
        problems.append(ChainProblem(seq, "figures are stored for an entry that does not "
                                          "exist (the entry was removed)"))
    if wanted is not None and not seen_expected:
        problems.append(ChainProblem(None, f"the noted head {wanted[:16]}… is not in the "
                                           "archive: entries were removed from its end, or "
                                           "the file was replaced"))
    return ChainReport(count, prev_seq or None, prev_hash, tuple(problems), receipt,
                       archive.receipt_path)


def verify_entry(archive: Archive, digest: str) -> EntryReport:
    """Verify the version ``digest`` against ``archive`` in a few indexed reads.

    Parameters
    ----------
    archive : Archive
        An open archive.
    digest : str
        The version digest (full hex) of the record version.

    Returns
    -------
    EntryReport
    """

    with archive.storage.snapshot():
        entry = archive.find_digest(digest)
        head = archive.head()
        problems = _trigger_problems(archive)
        if entry is None:
            problems.append(ChainProblem(None, f"version {digest.strip()[:16]}… is not in the "
                                               "archive"))
        else:
            problems += _entry_problems(archive, entry)
    receipt, found = _receipt(archive)  # after the snapshot, as in verify_chain
    head_seq, head_hash = head if head else (None, GENESIS_HASH)
    return EntryReport(entry, tuple(problems + found), head_seq, head_hash, receipt)


def _entry_problems(archive: Archive, entry: ArchiveEntry) -> list[ChainProblem]:
    """The entry, the links on either side of it, and its JSON and PDF."""
    store = archive.storage
    problems = []
    before = store.query(f"{SELECT_META} WHERE e.seq < ? ORDER BY e.seq DESC LIMIT 1",
                         (entry.seq,))
    if before:
        prev = _entry(before[0])
        # The entry before must itself be intact, or its hash proves nothing.
        earlier = store.query("SELECT seq, entry_hash FROM entries WHERE seq < ?"
                              " ORDER BY seq DESC LIMIT 1", (prev.seq,))
        problems += check_link(prev, *(tuple(earlier[0]) if earlier else (0, GENESIS_HASH)))
        problems += check_link(entry, prev.seq, prev.entry_hash)
    else:
        problems += check_link(entry, 0, GENESIS_HASH)
    after = store.query(f"{SELECT_META} WHERE e.seq > ? ORDER BY e.seq LIMIT 1", (entry.seq,))
    if after:
        problems += check_link(_entry(after[0]), entry.seq, entry.entry_hash)
    problems += check_content(entry, [figures_row(c) for c in archive.figures(entry.seq)])
    return problems
