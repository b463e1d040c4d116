"""``calib archive`` on both engines: pages, the logbook line, migrate, and refusals."""

from __future__ import annotations

import pytest

from calib.archive import Archive
from calib.cli.main import main
from tests import postgres
from tests.archive.helpers import make_record, pdf_for
from tests.archive.tamper import tamper


@pytest.fixture(autouse=True)
def no_archive_from_the_environment(monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE", raising=False)


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def six(location):
    records = [make_record(seed=i, run=i) for i in range(6)]
    with Archive(location) as archive:
        for r in records:
            archive.append(r, pdf_for(r), kind="issued")
        receipt = archive.last_receipt
    return location, records, receipt


def test_list_pages(six, capsys):
    location, records, _ = six
    code, out, _ = cli(capsys, "archive", "list", "--archive", location, "--limit", "2",
                       "--offset", "3")
    lines = out.splitlines()
    assert code == 0 and [line.split()[0] for line in lines[1:3]] == ["4", "5"]
    assert lines[-1] == "(entries 4–5 of 6 matching)"
    with pytest.raises(SystemExit) as usage:
        cli(capsys, "archive", "list", "--archive", location, "--limit", "-1")
    assert usage.value.code == 2
    assert "argument --limit: expected a whole number 0 or more, got '-1'" in \
        capsys.readouterr().err


def test_head_prints_the_logbook_line_and_checks_the_receipt(six, capsys):
    location, _, receipt = six
    code, out, _ = cli(capsys, "archive", "head", "--archive", location)
    assert code == 0
    assert out.splitlines()[0] == (f"calib archive head {receipt.archive_id}: seq 6, entry hash "
                                   f"{receipt.entry_hash}")
    tamper(location, *[(f"DELETE FROM {t} WHERE seq = 6",) for t in ("curves", "entry_data",
                                                                    "entries")])
    code, out, _ = cli(capsys, "archive", "head", "--archive", location)
    assert code == 5 and "names entry seq 6, but the archive ends at seq 5" in out
    code, out, _ = cli(capsys, "archive", "verify", "--archive", location, "--record",
                       six[1][2].record_id)
    assert code == 5 and "names entry seq 6, but the archive ends at seq 5" in out
    code, out, _ = cli(capsys, "archive", "verify", "--archive", location, "--fast")
    assert code == 5 and "names entry seq 6, but the archive ends at seq 5: entries were " \
                         "removed from its end or an older copy was restored" in out


def test_migrate_command_copies_and_proves(tmp_path, capsys, postgres_base, monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE_HEAD", raising=False)
    source = tmp_path / "records.sqlite"
    record = make_record()
    with Archive(source) as archive:
        entry = archive.append(record, pdf_for(record), kind="issued")
    url = postgres.fresh_schema(postgres_base)
    code, out, _ = cli(capsys, "archive", "migrate", source, url, "--target-head",
                       tmp_path / "pg.head.json")
    assert code == 0 and out.splitlines() == [
        f"Copied 1 entries from {source} to {url}.",
        f"Both hold the same chain: every seq has the same entry hash; head seq 1, entry hash "
        f"{entry.entry_hash}. The copy verifies in full."]
    code, out, _ = cli(capsys, "archive", "list", "--archive", url)
    assert code == 0 and record.record_id in out
    code, _, err = cli(capsys, "archive", "migrate", source, url)
    assert code == 3 and "the target archive already holds 1 entries" in err


def test_verify_one_record(six, capsys):
    location, records, _ = six
    code, out, _ = cli(capsys, "archive", "verify", "--archive", location, "--record",
                       records[2].record_id.lower())
    assert code == 0 and out.strip() == (
        f"Record {records[2].record_id} in {location_shown(location)}: entries seq 3 intact, "
        "each linked to its neighbours, JSON and PDF matching; head receipt matches.")
    with Archive(location, create=False) as archive:
        body = archive.entry_at(3).json.replace(b"R. Okafor", b"R. Okafoe")
    tamper(location, ("UPDATE entry_data SET json = ? WHERE seq = 3", (body,)))
    code, out, _ = cli(capsys, "archive", "verify", "--archive", location, "--record",
                       records[2].record_id)
    assert code == 5 and ("  entry seq 3: its JSON does not match its version digest: the "
                          "record data was altered") in out.splitlines()
    code, _, err = cli(capsys, "archive", "verify", "--archive", location, "--record", "CR-NONE")
    assert code == 3 and "no record CR-NONE in" in err


def location_shown(location):
    with Archive(location, create=False) as archive:
        return archive.location


def test_logbook_note_after_an_append(location):
    from calib.cli.archive import logbook_note

    record = make_record()
    with Archive(location) as archive:
        assert logbook_note(archive) == ""
        entry = archive.append(record, pdf_for(record), kind="issued")
        note = logbook_note(archive)
    assert note.startswith(f"For the logbook: calib archive head {archive.archive_id}: seq 1, "
                           f"entry hash {entry.entry_hash} (")
