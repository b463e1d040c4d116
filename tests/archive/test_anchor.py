"""Issue 16 item 4: an archive that cannot be rolled back unseen.

Each attack is made the way the issue describes it (rows deleted, an older copy restored,
entries renumbered and re-chained, created_at edited and every hash after it recomputed, a
PDF swapped) and each must be reported by name.  The forger here knows the documented entry
hash layout (calib.archive.chain), so the chain alone verifies after the re-chaining attacks;
only the head receipt written outside the archive gives them away.
"""

from __future__ import annotations

import json
import shutil
import sqlite3

import pytest

from calib.archive import Archive, ArchiveError
from calib.archive.anchor import read_receipt
from tests.archive.helpers import make_record, pdf_for
from tests.archive.tamper import delete_and_renumber, rechain, tamper
from tests.archive.test_store import FIXED, reviewed


@pytest.fixture
def four(location):
    """Four entries (three issued, one reviewed) and the head receipt written by the appends."""
    records = [make_record(seed=i, run=i) for i in range(3)]
    with Archive(location, clock=lambda: FIXED) as archive:
        for r in records:
            archive.append(r, pdf_for(r), kind="issued")
        signed = reviewed(records[0])
        entry = archive.append(signed, pdf_for(signed), kind="signed")
        receipt = archive.last_receipt
    assert receipt is not None and (receipt.seq, receipt.entry_hash) == (4, entry.entry_hash)
    return location, records, receipt


def problems(location, **kwargs):
    with Archive(location, create=False) as archive:
        return [str(p) for p in archive.verify_chain(pdfs=True, **kwargs).problems
                if "append-only triggers are missing" not in str(p)]


def test_receipt_is_written_on_every_append_with_a_logbook_line(four):
    location, records, receipt = four
    with Archive(location, create=False) as archive:
        assert read_receipt(archive.receipt_path) == receipt
        report = archive.verify_chain()
        assert report.ok and report.receipt == receipt
        assert receipt.archive_id == archive.archive_id
    assert receipt.logbook_line() == (f"calib archive head {receipt.archive_id}: seq 4, entry "
                                      f"hash {receipt.entry_hash} (2026-12-01T09:30:00Z)")
    doc = json.loads(archive.receipt_path.read_text(encoding="utf-8"))
    assert doc["schema"] == "calib.archive-head/1" and doc["stamp_kind"] == "sha256"


def test_deleting_the_last_row_is_detected(four):
    location, records, receipt = four
    tamper(location, *[(f"DELETE FROM {t} WHERE seq = 4",) for t in ("curves", "entry_data",
                                                                    "entries")])
    found = problems(location)
    assert len(found) == 1 and found[0].endswith(
        "(written 2026-12-01T09:30:00Z) names entry seq 4, but the archive ends at seq 3: "
        "entries were removed from its end or an older copy was restored")
    # Checking a single record also sees it, and nothing more may be appended on top.
    with Archive(location, create=False) as archive:
        one = archive.verify_entry(records[1].digest)
        assert not one.ok and "the archive ends at seq 3" in str(one.problems[-1])
        fresh = make_record(seed=9)
        with pytest.raises(ArchiveError, match="nothing appended: the head receipt .* names "
                                               "entry seq 4, but the archive ends at seq 3"):
            archive.append(fresh, pdf_for(fresh), kind="issued")


def test_restoring_an_older_copy_is_detected(tmp_path, monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE_HEAD", raising=False)
    path = tmp_path / "records.sqlite"
    records = [make_record(seed=i, run=i) for i in range(4)]
    with Archive(path) as archive:
        for r in records[:2]:
            archive.append(r, pdf_for(r), kind="issued")
    shutil.copy(path, tmp_path / "monday.sqlite")  # a backup taken after two entries
    with Archive(path) as archive:
        for r in records[2:]:
            archive.append(r, pdf_for(r), kind="issued")
    shutil.copy(tmp_path / "monday.sqlite", path)  # ... restored over the newer archive
    assert problems(path) == [
        f"the head receipt {path}.head.json (written "
        f"{read_receipt(tmp_path / 'records.sqlite.head.json').written_at}) names entry seq 4, "
        "but the archive ends at seq 2: entries were removed from its end or an older copy "
        "was restored"]


def test_renumbering_after_a_deletion_is_detected(four):
    location, _, receipt = four
    delete_and_renumber(location, 2)
    # The re-chained archive is consistent in itself ...
    with Archive(location, create=False, head_receipt=None) as archive:
        assert [str(p) for p in archive.verify_chain().problems
                if "triggers" not in str(p)] == []
    # ... but the receipt names seq 4, which no longer exists.
    found = problems(location)
    assert len(found) == 1 and "names entry seq 4, but the archive ends at seq 3" in found[0]


def test_editing_created_at_and_recomputing_the_chain_is_detected(four):
    location, _, receipt = four
    rechain(location, {2: {"created_at": "2026-11-30T09:30:00Z"}})
    with Archive(location, create=False, head_receipt=None) as archive:
        assert [str(p) for p in archive.verify_chain().problems
                if "triggers" not in str(p)] == []
        new_head = archive.head()[1]
    assert problems(location) == [
        f"entry seq 4: its entry hash {new_head[:16]}… is not the {receipt.entry_hash[:16]}… "
        f"the head receipt {receipt_path(location)} names: the chain was rewritten (entries "
        "removed and renumbered, or edited and re-hashed)"]


def receipt_path(location):
    with Archive(location, create=False, head_receipt="auto") as archive:
        return archive.receipt_path


def test_swapping_an_entrys_pdf_is_detected(four):
    location, records, _ = four
    with Archive(location, create=False) as archive:
        third = archive.entry_at(3)
    # Plainly: the PDF of seq 3 put in place of seq 2's.
    tamper(location, ("UPDATE entry_data SET pdf = ? WHERE seq = 2", (third.pdf,)))
    found = problems(location)
    assert ("entry seq 2: its PDF does not match the PDF digest in the chain: the stored PDF "
            "was replaced") in found
    assert (f"entry seq 2: the stored PDF carries other record data (digest "
            f"{records[2].digest[:16]}…) than this entry: the PDF was swapped or "
            "altered") in found
    with Archive(location, create=False) as archive:
        one = archive.verify_entry(records[1].digest)
    assert not one.ok and any("the PDF was swapped" in str(p) for p in one.problems)


def test_swapped_pdf_with_its_digest_rechained_is_still_detected(four):
    location, records, _ = four
    with Archive(location, create=False) as archive:
        third = archive.entry_at(3)
    tamper(location, ("UPDATE entry_data SET pdf = ? WHERE seq = 2", (third.pdf,)),
           ("UPDATE entries SET pdf_sha256 = ? WHERE seq = 2", (third.pdf_sha256,)))
    rechain(location, {2: {"pdf_sha256": third.pdf_sha256}})
    found = problems(location)
    assert (f"entry seq 2: the stored PDF carries other record data (digest "
            f"{records[2].digest[:16]}…) than this entry: the PDF was swapped or "
            "altered") in found
    assert any("the chain was rewritten" in p for p in found)


def test_an_edited_receipt_is_reported(four):
    location, _, receipt = four
    path = receipt_path(location)
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc["seq"] = 3
    path.write_text(json.dumps(doc), encoding="utf-8")
    assert problems(location) == [f"the head receipt {path} was edited: its stamp does not "
                                  "match its contents"]


def test_a_receipt_of_another_archive_is_reported(four, tmp_path, monkeypatch):
    location, _, receipt = four
    monkeypatch.setenv("CALIB_ARCHIVE_HEAD", str(tmp_path / "other.head.json"))
    other = tmp_path / "other.sqlite"
    record = make_record(seed=11)
    with Archive(other) as archive:
        archive.append(record, pdf_for(record), kind="issued")
        other_id = archive.archive_id
    shutil.copy(tmp_path / "other.head.json", receipt_path_of(location, monkeypatch, tmp_path))
    found = problems(location)
    assert len(found) == 1 and found[0].endswith(
        f"belongs to archive {other_id}, but this is archive {receipt.archive_id}: the archive "
        "was replaced by another one")


def receipt_path_of(location, monkeypatch, tmp_path):
    if location.startswith("postgresql"):
        monkeypatch.setenv("CALIB_ARCHIVE_HEAD", str(tmp_path / "records.head.json"))
        return tmp_path / "records.head.json"
    monkeypatch.delenv("CALIB_ARCHIVE_HEAD")
    return location + ".head.json"


def test_a_keyed_receipt_cannot_be_replaced_by_a_plain_one(tmp_path, monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE_HEAD", raising=False)
    key = tmp_path / "head.key"
    key.write_bytes(b"fernbrook-logbook-key-0123456789")
    monkeypatch.setenv("CALIB_ARCHIVE_HEAD_KEY", str(key))
    path = tmp_path / "records.sqlite"
    records = [make_record(seed=i, run=i) for i in range(2)]
    with Archive(path) as archive:
        for r in records:
            archive.append(r, pdf_for(r), kind="issued")
        assert archive.last_receipt.stamp_kind == "hmac-sha256"
    # Truncate, then forge a receipt for seq 1 with a plain hash stamp (no key needed).
    tamper(str(path), *[(f"DELETE FROM {t} WHERE seq = 2",) for t in ("curves", "entry_data",
                                                                      "entries")])
    monkeypatch.delenv("CALIB_ARCHIVE_HEAD_KEY")
    with Archive(path) as archive:
        head = archive.head()
    from calib.archive.anchor import write_receipt

    (tmp_path / "records.sqlite.head.json").unlink()
    write_receipt(tmp_path / "records.sqlite.head.json", archive.archive_id, *head,
                  "2026-12-01T10:00:00Z")
    monkeypatch.setenv("CALIB_ARCHIVE_HEAD_KEY", str(key))
    assert problems(str(path)) == [
        f"the head receipt {path}.head.json is not keyed although CALIB_ARCHIVE_HEAD_KEY is "
        "set: it was replaced"]


def test_no_receipt_is_said_plainly(tmp_path, monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE_HEAD", raising=False)
    path = tmp_path / "records.sqlite"
    record = make_record()
    with Archive(path, head_receipt=None) as archive:
        archive.append(record, pdf_for(record), kind="issued")
        assert archive.last_receipt is None
    with Archive(path, create=False) as archive:
        report = archive.verify_chain()
    assert report.ok and report.receipt is None
    assert str(report.receipt_path) == f"{path}.head.json"


def test_a_format_1_archive_is_migrated_and_keeps_its_head(tmp_path):
    # tests/data/archive/format1.sqlite was written by calib 0.1.0 (see SOURCE.md there).
    from tests.conftest import DATA

    path = tmp_path / "old.sqlite"
    shutil.copy(DATA / "archive" / "format1.sqlite", path)
    with Archive(path, create=False) as archive:
        report = archive.verify_chain()
        versions = archive.storage.schema_versions()
        columns = [r[1] for r in archive.storage.query("PRAGMA table_info(entries)")]
    assert report.ok, report.problems
    assert (report.entries, report.head_seq, report.head_hash) == (
        4, 4, "2a970f3b7f8baeb1b7472abbb39c9379b81190cae7d9867cf58c72d1dd12469b")
    # Format 2 (blobs apart) and then format 3 (people tables) are applied in turn.
    assert versions == [1, 2, 3] and "json" not in columns and "pdf_sha256" in columns
    con = sqlite3.connect(path)
    assert con.execute("PRAGMA user_version").fetchone()[0] == 3
    con.close()


def test_the_passes_find_what_they_read(four):
    # Hash pass: links and entry hashes only.  Default deep pass: also the JSON and the PDF's
    # digest.  With pdfs=True: also the record data attached inside each PDF.
    location, records, _ = four
    with Archive(location, create=False) as archive:
        third = archive.entry_at(3)
    tamper(location, ("UPDATE entry_data SET pdf = ? WHERE seq = 2", (third.pdf,)),
           ("UPDATE entries SET pdf_sha256 = ? WHERE seq = 2", (third.pdf_sha256,)))
    with Archive(location, create=False, head_receipt=None) as archive:
        fast = [str(p) for p in archive.verify_chain(deep=False).problems if p.seq]
        default = [str(p) for p in archive.verify_chain().problems if p.seq]
        full = [str(p) for p in archive.verify_chain(pdfs=True).problems if p.seq]
    hash_broken = ("entry seq 2: its entry hash does not match its fields: the entry or its "
                   "stored hash was altered")
    assert fast == [hash_broken] and default == [hash_broken]
    assert full == [hash_broken, f"entry seq 2: the stored PDF carries other record data (digest "
                                 f"{records[2].digest[:16]}…) than this entry: the PDF was "
                                 "swapped or altered"]


def test_a_receipt_that_cannot_be_written_is_said_with_the_entry_kept(tmp_path):
    record = make_record()
    missing = tmp_path / "no-such-folder" / "records.head.json"
    with Archive(tmp_path / "records.sqlite", head_receipt=missing) as archive:
        with pytest.raises(ArchiveError, match=rf"entry seq 1 was archived, but its head receipt "
                                               rf"{missing} cannot be written"):
            archive.append(record, pdf_for(record), kind="issued")
        assert len(archive) == 1 and archive.verify_chain().ok
