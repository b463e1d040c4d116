"""Copy an archive to another location or engine and prove the copy holds the same chain.

``calib archive migrate SRC DST`` moves a lab from one SQLite file to its
PostgreSQL server (or back, or to a fresh file).  The source is verified
first (a damaged archive is not copied: its damage would be laundered into a
clean-looking copy); every entry is then appended to the empty target *as
is* — same seq, archive time, JSON, PDF, figures and hashes — in one
transaction under the target's append lock, and the target is verified in
full.  The copy is proven equal when both have the same number of entries and
every seq carries the same entry hash (so the same head).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

from calib.archive.backends import ArchiveError, is_database_url, redact
from calib.archive.chain import ArchiveEntry, ChainReport
from calib.archive.figures import CurveFigures
from calib.archive.rows import SELECT_DATA, entry_from_row
from calib.archive.store import Archive

__all__ = ["MigrationReport", "migrate_archive"]


@dataclass(frozen=True)
class MigrationReport:
    """What :func:`migrate_archive` copied and proved.

    Attributes
    ----------
    source, target : str
        The two locations (a database URL without its password).
    entries : int
        Entries copied.
    head_seq, head_hash : int or None, str
        The head, the same in both.
    target_report : ChainReport
        The full verification of the target after the copy.
    """

    source: str
    target: str
    entries: int
    head_seq: int | None
    head_hash: str
    target_report: ChainReport


def _same_place(a: str | Path, b: str | Path) -> bool:
    if is_database_url(a) or is_database_url(b):
        return str(a) == str(b)
    return Path(a).resolve() == Path(b).resolve()


def _hashes(archive: Archive) -> list[tuple[int, str]]:
    return [(int(s), str(h)) for s, h in archive.storage.query(
        "SELECT seq, entry_hash FROM entries ORDER BY seq")]


def migrate_archive(source: str | Path, target: str | Path, *,
                    target_receipt: str | Path | None = None,
                    progress: Callable[[int], None] | None = None) -> MigrationReport:
    """Copy the archive at ``source`` into the empty (or new) archive at ``target``.

    The source keeps its own head receipt (checked before the copy).  The
    target's receipt goes to ``target_receipt``; without one, beside an
    SQLite target, and none for a database target (note the head printed).

    Raises
    ------
    ArchiveError
        If the two are the same archive, the source does not verify, the
        target already holds entries, or the copy does not reproduce the chain.
    """
    if _same_place(source, target):
        raise ArchiveError(f"{redact(str(source))}: source and target are the same archive")
    with Archive(source, create=False) as src:
        checked = src.verify_chain()
        if not checked.ok:
            raise ArchiveError(f"{src.location}: the source archive does not verify "
                               f"({checked.problems[0]}); nothing was copied — run calib "
                               "archive verify on it")
        if target_receipt is None and not is_database_url(target):
            target_receipt = Path(str(target) + ".head.json")
        with Archive(target, head_receipt=target_receipt) as dst:
            if len(dst):
                raise ArchiveError(f"{dst.location}: the target archive already holds "
                                   f"{len(dst)} entries; migrate into a new, empty archive")

            def stream() -> Iterator[tuple[ArchiveEntry, list[CurveFigures]]]:
                for n, row in enumerate(src.storage.rows(f"{SELECT_DATA} ORDER BY e.seq"), 1):
                    entry = entry_from_row(row)
                    yield entry, src.figures(entry.seq)
                    if progress is not None and n % 1000 == 0:
                        progress(n)

            with src.storage.snapshot():
                copied = dst.copy_entries(stream())
            report = dst.verify_chain(pdfs=True)
            # Writers may go on appending to the source meanwhile: compare what was copied.
            same = _hashes(src)[:copied] == _hashes(dst)
            target_location = dst.location
    if not report.ok or not same or copied < checked.entries:
        why = report.problems[0] if report.problems else "the entry hashes differ"
        raise ArchiveError(f"{target_location}: the copy does not reproduce the source chain "
                           f"({why}); do not use it")
    return MigrationReport(src.location, target_location, copied, report.head_seq,
                           report.head_hash, report)
