"""The archive on both engines: append, read back, page, refuse changes, find tampering.

Every test taking ``location`` runs once on an SQLite file and once on a PostgreSQL
database (tests/archive/conftest.py); the expected messages are calib's own wording.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from datetime import UTC, datetime

import pytest

from calib.archive import GENESIS_HASH, Archive, ArchiveError, compute_entry_hash
from calib.record import Record
from tests.archive.helpers import FAKE_PDF, make_record, pdf_for
from tests.archive.tamper import sql_error, tamper

FIXED = datetime(2026, 12, 1, 9, 30, tzinfo=UTC)


def reviewed(record: Record, name: str = "T. Øvergaard") -> Record:
    """The next version of ``record``: one more signature, same content."""
    entry = {"role": "reviewed", "name": name, "signed_at": "2026-12-02T10:00:00Z",
             "meaning": "Reviewed: the calibration meets the method's requirements",
             "previous_digest": record.digest}
    return Record({**record.body, "signatures": [*record.body["signatures"], entry]})


@pytest.fixture
def filled(location):
    """An archive of three issued records and one signed version of the first."""
    records = [make_record(seed=i, run=i) for i in range(3)]
    with Archive(location, clock=lambda: FIXED) as archive:
        for r in records:
            archive.append(r, pdf_for(r), kind="issued")
        signed = reviewed(records[0])
        archive.append(signed, pdf_for(signed), kind="signed")
    return location, records


def plain_pdf() -> bytes:
    """A genuine PDF with no attached record data."""
    import io

    from reportlab.pdfgen.canvas import Canvas

    out = io.BytesIO()
    canvas = Canvas(out, invariant=1)
    canvas.drawString(72, 720, "A page of something else")
    canvas.save()
    return out.getvalue()


def report_of(path, **kwargs):
    with Archive(path, create=False) as archive:
        return archive.verify_chain(pdfs=True, **kwargs)


def entry_messages(report):
    return [str(p) for p in report.problems if p.seq is not None]

def test_append_and_read_back(filled):
    path, records = filled
    with Archive(path, create=False) as archive:
        entries = archive.entries()
        assert [e.seq for e in entries] == [1, 2, 3, 4]
        assert [e.kind for e in entries] == ["issued", "issued", "issued", "signed"]
        first = entries[0]
        assert first.record_id == records[0].record_id
        assert first.version_digest == records[0].digest
        assert first.content_digest == records[0].content_digest
        assert first.json == records[0].canonical and first.pdf == pdf_for(records[0])
        assert first.analytes == ("Nitrate-N",) and first.verdict == "accepted"
        assert first.run_date == "2026-09-01" and first.instrument.startswith("IC-2")
        assert first.created_at == "2026-12-01T09:30:00Z"
        assert first.prev_hash == GENESIS_HASH and entries[1].prev_hash == first.entry_hash
        # Signing keeps the record id; latest() is the signed version.
        versions = archive.entries(record_id=records[0].record_id.lower())
        assert [v.seq for v in versions] == [1, 4]
        assert archive.latest(records[0].record_id).roles == ("prepared", "reviewed")
        assert archive.find_digest(records[1].digest.upper()).seq == 2
        assert archive.find_digest("0" * 64) is None and archive.latest("CR-NONE") is None
        assert len(archive) == 4 and archive.head() == (4, entries[-1].entry_hash)
        assert archive.analytes() == ["Nitrate-N"]


def test_filters(filled):
    path, _ = filled
    with Archive(path, create=False) as archive:
        assert [e.seq for e in archive.entries(analyte="nitrate-n")] == [1, 2, 3, 4]
        assert archive.entries(analyte="Fluoride") == []
        assert [e.seq for e in archive.entries(date_from="2026-09-02")] == [2, 3]
        assert [e.seq for e in archive.entries(date_to="2026-09-01")] == [1, 4]
        assert [e.seq for e in archive.entries(kind="signed")] == [4]
        assert archive.entries(instrument="ic-2 (CONDUCTIVITY detector)", verdict="rejected") == []
        quick = archive.entries(data=False)
        assert quick[0].json == b"" and quick[0].entry_hash == archive.entries()[0].entry_hash


def test_entry_hash_follows_the_documented_layout(filled):
    # Recomputed here with hashlib and json only, from the byte layout in calib.archive.chain.
    path, _ = filled
    with Archive(path, create=False) as archive:
        entries = archive.entries()
    prev = "0" * 64
    for e in entries:
        fields = {"seq": e.seq, "record_id": e.record_id, "version_digest": e.version_digest,
                  "content_digest": e.content_digest, "kind": e.kind, "created_at": e.created_at,
                  "analytes": list(e.analytes), "verdict": e.verdict, "run_date": e.run_date,
                  "instrument": e.instrument, "roles": list(e.roles),
                  "pdf_sha256": hashlib.sha256(e.pdf).hexdigest()}
        text = json.dumps(fields, sort_keys=True, ensure_ascii=False, separators=(",", ":"))
        assert e.entry_hash == hashlib.sha256(prev.encode() + b"\n" + text.encode()).hexdigest()
        assert e.entry_hash == compute_entry_hash(prev, fields)
        assert e.version_digest == hashlib.sha256(e.json).hexdigest()
        prev = e.entry_hash


def test_same_version_again_is_idempotent_and_different_bytes_are_refused(filled):
    path, records = filled
    with Archive(path) as archive:
        again = archive.append(records[1], pdf_for(records[1]), kind="issued")
        assert again.seq == 2 and len(archive) == 4
        with pytest.raises(ArchiveError, match=r"already archived as entry seq 2 with a "
                                               r"different PDF and kind; an archived entry is "
                                               r"never replaced"):
            archive.append(records[1], pdf_for(records[1]) + b"\n", kind="signed")


def test_bad_appends_are_refused_with_the_reason(location):
    with Archive(location) as archive:
        record = make_record()
        with pytest.raises(ValueError, match="kind must be one of issued, signed; got 'final'"):
            archive.append(record, pdf_for(record), kind="final")
        with pytest.raises(ArchiveError, match="not a PDF document"):
            archive.append(record, b"<html>", kind="issued")
        with pytest.raises(ArchiveError, match="cannot archive this record: not a calib record"):
            archive.append(Record({"schema": "something/else"}), FAKE_PDF, kind="issued")
        # The PDF must carry this very version as its attached record data (issue 16).
        with pytest.raises(ArchiveError, match=f"cannot archive {record.record_id}: the PDF "
                                               r"cannot be read \(not a readable PDF"):
            archive.append(record, FAKE_PDF, kind="issued")
        with pytest.raises(ArchiveError, match=f"cannot archive {record.record_id}: the PDF "
                                               "carries no record data: it is not this entry's "
                                               "record PDF"):
            archive.append(record, plain_pdf(), kind="issued")
        other = make_record(seed=7)
        with pytest.raises(ArchiveError, match=f"cannot archive {record.record_id}: the PDF "
                                               rf"carries other record data \(digest "
                                               rf"{other.digest[:16]}…\) than this entry: the "
                                               "PDF was swapped or altered"):
            archive.append(record, pdf_for(other), kind="issued")
        # A signed version whose issued version was never archived (issue 16, attack).
        signed = reviewed(record)
        with pytest.raises(ArchiveError, match=f"cannot archive a signed version of "
                                               f"{record.record_id}: its issued version is not "
                                               "in the archive"):
            archive.append(signed, pdf_for(signed), kind="signed")
        assert len(archive) == 0


def test_update_and_delete_are_refused_by_triggers(filled):
    path, _ = filled
    refused = {
        "UPDATE entries SET verdict = 'accepted' WHERE seq = 2": "an entry cannot be changed",
        "DELETE FROM entries WHERE seq = 4": "an entry cannot be deleted",
        "UPDATE entry_data SET pdf = json WHERE seq = 1": "a stored record or PDF cannot be "
                                                          "changed",
        "DELETE FROM entry_data WHERE seq = 4": "a stored record or PDF cannot be deleted",
        "UPDATE curves SET slope = 0.3": "figures cannot be changed",
        "DELETE FROM curves": "figures cannot be deleted",
        "UPDATE archive_meta SET value = 'AR-OTHER'": "the archive identity cannot be changed",
        "INSERT INTO entries SELECT * FROM entries WHERE seq = 1": "must extend the chain head",
        "INSERT INTO curves SELECT 2, position + 5, analyte, model, weighting, verdict, slope,"
        " intercept, residual_sd, concentration_unit, response_unit FROM curves WHERE seq = 1":
            "figures are added only with their entry",
    }
    if not path.startswith("postgresql"):
        refused["INSERT OR REPLACE INTO entries SELECT * FROM entries WHERE seq = 2"] = \
            "must extend the chain head"
    else:
        # PostgreSQL's TRUNCATE skips row triggers; a statement trigger refuses it.
        refused["TRUNCATE entries CASCADE"] = "calib archive is append-only: entries cannot be " \
                                             "emptied"
    for sql, message in refused.items():
        assert message in sql_error(path, sql), sql
    assert report_of(path).ok


def test_intact_archive_verifies(filled):
    report = report_of(filled[0])
    assert report.ok and report.entries == 4 and report.head_seq == 4


def test_edited_json_byte_is_found(filled):
    path, _ = filled
    with Archive(path) as archive:
        data = archive.entries()[1].json
    # One digit of the residual SD, as an editor with a hex viewer would change it.
    at = data.index(b'"residual_sd":0.00') + len(b'"residual_sd":0.00')
    edited = data[:at] + (b"7" if data[at:at + 1] != b"7" else b"8") + data[at + 1:]
    tamper(path, ("UPDATE entry_data SET json = ? WHERE seq = 2", (edited,)))
    report = report_of(path)
    assert not report.ok
    assert ("entry seq 2: its JSON does not match its version digest: the record data was "
            "altered") in entry_messages(report)
    assert any("append-only triggers are missing" in str(p) for p in report.problems)


def test_edited_number_with_rehashed_digest_is_found(filled):
    # A careful forger fixes the version digest too; the entry hash still gives it away.
    path, _ = filled
    with Archive(path) as archive:
        body = json.loads(archive.entries()[2].json)
    body["check"]["curves"][0]["coefficients"]["slope"]["estimate"] *= 1.1
    forged = Record(body)
    tamper(path, ("UPDATE entry_data SET json = ? WHERE seq = 3", (forged.canonical,)),
           ("UPDATE entries SET version_digest = ? WHERE seq = 3", (forged.digest,)))
    messages = entry_messages(report_of(path))
    assert "entry seq 3: its entry hash does not match its fields: the entry or its stored hash " \
           "was altered" in messages
    assert any(m.startswith("entry seq 3: the per-analyte figures") for m in messages)


def test_edited_stored_hash_is_found(filled):
    path, _ = filled
    tamper(path, ("UPDATE entries SET entry_hash = ? WHERE seq = 2", ("ab" * 32,)))
    messages = entry_messages(report_of(path))
    assert messages[0] == ("entry seq 2: its entry hash does not match its fields: the entry or "
                           "its stored hash was altered")
    assert messages[1].startswith("entry seq 3: its prev_hash does not match the entry hash of "
                                  "seq 2: the chain is broken")


def test_deleted_row_is_found(filled):
    path, _ = filled
    tamper(path, ("DELETE FROM entry_data WHERE seq = 2",), ("DELETE FROM entries WHERE seq = 2",))
    messages = entry_messages(report_of(path))
    assert "entry seq 3: follows seq 1: seq 2 missing (entries were removed)" in messages
    assert any(m.startswith("entry seq 3: its prev_hash does not match") for m in messages)
    assert ("entry seq 2: figures are stored for an entry that does not exist (the entry was "
            "removed)") in messages


def test_rehashed_index_column_is_found(filled):
    # Verdict changed and the entry hash recomputed to match: the JSON still says otherwise.
    path, _ = filled
    with Archive(path) as archive:
        e = archive.entries()[3]
    fields = {"seq": 4, "record_id": e.record_id, "version_digest": e.version_digest,
              "content_digest": e.content_digest, "kind": e.kind, "created_at": e.created_at,
              "analytes": list(e.analytes), "verdict": "rejected", "run_date": e.run_date,
              "instrument": e.instrument, "roles": list(e.roles),
              "pdf_sha256": hashlib.sha256(e.pdf).hexdigest()}
    tamper(path, ("UPDATE entries SET verdict = 'rejected', entry_hash = ? WHERE seq = 4",
                  (compute_entry_hash(e.prev_hash, fields),)))
    messages = entry_messages(report_of(path))
    assert messages[0] == ("entry seq 4: stored verdict 'rejected' does not match its JSON "
                           "('accepted')")
    # Seq 4 is the head: the head receipt written at its append names the old hash.
    forged = compute_entry_hash(e.prev_hash, fields)
    assert messages[1].startswith(f"entry seq 4: its entry hash {forged[:16]}… is not the "
                                  f"{e.entry_hash[:16]}… the head receipt")
    assert len(messages) == 2


def test_edited_trend_figures_are_found(filled):
    path, _ = filled
    tamper(path, ("UPDATE curves SET slope = slope * 1.02 WHERE seq = 3",))
    assert entry_messages(report_of(path)) == [
        "entry seq 3: the per-analyte figures stored for trends do not match its JSON"]


def test_truncation_is_found_only_against_a_noted_head(filled):
    path, _ = filled
    noted = report_of(path).head_hash
    tamper(path, ("DELETE FROM curves WHERE seq = 4",), ("DELETE FROM entry_data WHERE seq = 4",),
           ("DELETE FROM entries WHERE seq = 4",))
    with Archive(path, create=False, head_receipt=None) as archive:
        # Without the head receipt the chain alone cannot show a cut-off end ...
        report = archive.verify_chain()
        assert entry_messages(report) == [] and report.head_seq == 3
        # ... but a head noted in the logbook can.
        problems = [str(p) for p in archive.verify_chain(expected_head=noted).problems]
    assert f"the noted head {noted[:16]}… is not in the archive: entries were removed from its " \
           "end, or the file was replaced" in problems


def test_opening_something_else_is_refused(tmp_path):
    with pytest.raises(ArchiveError, match="no archive at this path"):
        Archive(tmp_path / "missing.sqlite", create=False)
    assert not (tmp_path / "missing.sqlite").exists()
    text = tmp_path / "notes.sqlite"
    text.write_text("not a database at all, just some text that is long enough" * 20)
    with pytest.raises(ArchiveError, match=r"notes.sqlite: not a calib archive \(file is not a "
                                           r"database\)"):
        Archive(text)
    other = tmp_path / "other.sqlite"
    con = sqlite3.connect(other)
    con.execute("CREATE TABLE samples (id INTEGER)")
    con.commit()
    con.close()
    with pytest.raises(ArchiveError, match="an SQLite database that is not a calib archive"):
        Archive(other)
    newer = tmp_path / "newer.sqlite"
    Archive(newer).close()
    con = sqlite3.connect(newer)
    con.execute("PRAGMA user_version = 99")
    con.commit()
    con.close()
    with pytest.raises(ArchiveError, match="archive format 99 was written by a newer calib"):
        Archive(newer)


def test_wal_mode_and_busy_timeout(tmp_path):
    with Archive(tmp_path / "a.sqlite", timeout=7) as archive:
        con = archive.storage._conn
        assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert con.execute("PRAGMA busy_timeout").fetchone()[0] == 7000


def test_rejected_at_sign_off_is_left_out_of_the_trend(location):
    with Archive(location) as archive:
        records = [make_record(seed=i, run=i) for i in range(4)]
        for r in records:
            archive.append(r, pdf_for(r), kind="issued")
        rejected = Record({**records[1].body, "signatures": [
            *records[1].body["signatures"],
            {"role": "rejected", "name": "T. Øvergaard", "signed_at": "2026-12-02T10:00:00Z",
             "meaning": "Reviewed: this calibration is rejected and must not be used",
             "previous_digest": records[1].digest}]})
        archive.append(rejected, pdf_for(rejected), kind="signed")
        history = archive.curve_history("NITRATE-N")
        trend = archive.trend("nitrate-n", baseline=3)
    # One point per record (the signed version does not count twice), in run-date order.
    assert [c.record_id for c in history] == [r.record_id for r in records]
    assert [p.record_id for p in trend.points] == [records[i].record_id for i in (0, 2, 3)]
    assert [p.roles for p in trend.left_out] == [("prepared", "rejected")]
    assert trend.analyte == "Nitrate-N"


def test_deleted_first_row_is_found(filled):
    path, _ = filled
    tamper(path, ("DELETE FROM entry_data WHERE seq = 1",), ("DELETE FROM entries WHERE seq = 1",))
    messages = entry_messages(report_of(path))
    assert messages[0] == "entry seq 2: is the first entry: seq 1 missing (entries were removed)"
    assert messages[1] == ("entry seq 2: its prev_hash does not match the entry hash of the start "
                           "of the chain: the chain is broken (an entry before it was removed or "
                           "altered)")


def test_a_writer_holding_the_lock_too_long_gives_a_clear_error(tmp_path):
    path = tmp_path / "a.sqlite"
    Archive(path).close()
    holder = sqlite3.connect(path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")
    try:
        busy = pytest.raises(ArchiveError, match=r"a.sqlite: the archive is busy or locked "
                                                 r"\(database is locked\)")
        with Archive(path, timeout=0.2) as archive, busy:
            record = make_record()
            archive.append(record, pdf_for(record), kind="issued")
    finally:
        holder.execute("ROLLBACK")
        holder.close()
