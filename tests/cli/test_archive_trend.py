"""``calib check --archive``, ``calib archive ...`` and ``calib trend`` as a user runs them."""

from __future__ import annotations

import io
import json
import sqlite3

import numpy as np
import pytest
from pypdf import PdfReader

from calib.archive import Archive
from calib.cli.main import main
from calib.record import Record
from tests.archive.helpers import LEVELS, make_record, pdf_for

NITRATE_CSV = """\
"Nitrate-N calibration, ion chromatography"
Laboratory: Fernbrook Water Laboratory (fictional)
Instrument: IC-2 (conductivity detector)
Run date: 2026-11-30
Operator: R. Okafor

Analyte,Sample,Concentration (mg/L),Peak area (µS·min),Replicate
"""


@pytest.fixture(autouse=True)
def no_archive_from_the_environment(monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE", raising=False)


def write_run(path, *, slope=0.25, seed=0):
    rng = np.random.default_rng(seed)
    rows = [f"Nitrate-N,Cal-{k + 1},{x},{slope * x + rng.normal(0, 0.002):.5f},{rep}"
            for k, x in enumerate(LEVELS) for rep in (1, 2, 3)]
    path.write_text(NITRATE_CSV + "\n".join(rows) + "\n", encoding="utf-8")
    return path


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


def reviewed(record: Record) -> Record:
    entry = {"role": "reviewed", "name": "T. Øvergaard", "signed_at": "2026-12-02T10:00:00Z",
             "meaning": "Reviewed: the calibration meets the method's requirements",
             "previous_digest": record.digest}
    return Record({**record.body, "signatures": [*record.body["signatures"], entry]})


@pytest.fixture
def archived(tmp_path, capsys):
    """An archive with one record issued by ``calib check`` and then signed, and two more."""
    db = tmp_path / "records.sqlite"
    code, out, _ = cli(capsys, "check", write_run(tmp_path / "run.csv"), "--prepared-by",
                       "R. Okafor", "--archive", db)
    with Archive(db) as archive:
        first = archive.entries()[0]
        record = Record.from_json(first.json)
        signed = reviewed(record)
        archive.append(signed, pdf_for(signed), kind="signed")
        for i in (1, 2):
            other = make_record(seed=i, run=i)
            archive.append(other, pdf_for(other), kind="issued")
    return db, record, code, out


def test_check_files_the_issued_record(archived):
    db, record, code, out = archived
    assert f"Record {record.record_id} filed in archive {db} as entry seq 1" in out
    with Archive(db) as archive:
        entry = archive.entries()[0]
    assert entry.kind == "issued" and entry.pdf.startswith(b"%PDF-")
    assert entry.run_date == "2026-11-30" and entry.instrument == "IC-2 (conductivity detector)"
    assert code == (0 if entry.verdict == "accepted" else 1)
    # The PDF filed is the record's own: its attachment is the archived JSON.
    attached = PdfReader(io.BytesIO(entry.pdf)).attachments["calib-record.json"][0]
    assert attached == entry.json


def test_check_files_into_the_environment_archive(tmp_path, capsys, monkeypatch):
    db = tmp_path / "env.sqlite"
    monkeypatch.setenv("CALIB_ARCHIVE", str(db))
    _, out, err = cli(capsys, "check", write_run(tmp_path / "run.csv"), "--json")
    json.loads(out)
    assert f"filed in archive {db} as entry seq 1" in err
    with Archive(db) as archive:
        assert len(archive) == 1 and archive.entries()[0].roles == ()


def test_list(archived, capsys):
    db, record, *_ = archived
    code, out, _ = cli(capsys, "archive", "list", "--archive", db)
    lines = out.splitlines()
    assert code == 0 and lines[0].split()[:4] == ["seq", "archived", "(UTC)", "record"]
    assert len(lines) == 5 and record.record_id in lines[1] and "prepared, reviewed" in lines[2]
    code, out, _ = cli(capsys, "archive", "list", "--archive", db, "--json", "--from",
                       "2026-09-01", "--to", "2026-09-02", "--analyte", "NITRATE-N")
    assert [e["seq"] for e in json.loads(out)] == [3]
    _, out, _ = cli(capsys, "archive", "list", "--archive", db, "--instrument", "IC-9")
    assert out.strip() == f"No entries in {db} match."
    with pytest.raises(SystemExit) as stop:
        main(["archive", "list", "--archive", str(db), "--from", "30/11/2026"])
    assert stop.value.code == 2
    assert "expected a date YYYY-MM-DD, got '30/11/2026'" in capsys.readouterr().err


def test_show(archived, capsys):
    db, record, *_ = archived
    code, out, _ = cli(capsys, "archive", "show", record.record_id.lower(), "--archive", db)
    assert code == 0
    assert out.startswith(f"Record {record.record_id}: 2 versions in {db}")
    assert "Nitrate-N:" in out and "reviewed  T. Øvergaard" in out
    _, out, _ = cli(capsys, "archive", "show", record.record_id, "--archive", db, "--json")
    doc = json.loads(out)
    assert [v["kind"] for v in doc["versions"]] == ["issued", "signed"]
    assert [s["role"] for s in doc["signatures"]] == ["prepared", "reviewed"]
    code, _, err = cli(capsys, "archive", "show", "CR-000000000000", "--archive", db)
    assert code == 3 and err.strip() == f"calib: error: no record CR-000000000000 in {db}"


def test_export(archived, capsys, tmp_path):
    db, record, *_ = archived
    out_dir = tmp_path / "exported"
    code, _, _ = cli(capsys, "archive", "export", record.record_id, "--archive", db,
                     "--out", out_dir)
    with Archive(db) as archive:
        issued, signed = archive.entries(record_id=record.record_id)
    assert code == 0
    assert (out_dir / f"{record.record_id}.record.json").read_bytes() == signed.json
    assert (out_dir / f"{record.record_id}.pdf").read_bytes() == signed.pdf
    cli(capsys, "archive", "export", record.record_id, "--archive", db, "--out", out_dir,
        "--all-versions")
    assert (out_dir / f"{record.record_id}-v1-issued.record.json").read_bytes() == issued.json
    assert (out_dir / f"{record.record_id}-v2-signed.pdf").read_bytes() == signed.pdf


def _drop_triggers_and(db, sql):
    con = sqlite3.connect(db)
    for name, in con.execute("SELECT name FROM sqlite_master WHERE type = 'trigger'").fetchall():
        con.execute(f"DROP TRIGGER {name}")
    con.execute(sql)
    con.commit()
    con.close()


def test_verify(archived, capsys, tmp_path):
    db, record, *_ = archived
    code, out, _ = cli(capsys, "archive", "verify", "--archive", db)
    assert code == 0 and out.startswith(f"Archive {db}: 4 entries, every digest, PDF and the "
                                        "hash chain intact; head seq 4, entry hash ")
    assert f"Head receipt {db}.head.json (seq 4, written " in out
    code, out, _ = cli(capsys, "archive", "verify", "--archive", db, "--fast")
    assert code == 0 and out.startswith(f"Archive {db}: 4 entries, every link and entry hash "
                                        "intact (hash pass only: JSON and PDFs not read)")
    code, out, _ = cli(capsys, "archive", "verify", "--archive", db, "--head", "ab" * 32)
    # Exit code 5: an integrity failure (SPEC §7).
    assert code == 5 and "the noted head abababababababab… is not in the archive" in out
    _drop_triggers_and(db, "UPDATE entry_data SET json = CAST(replace(CAST(json AS TEXT), "
                           "'R. Okafor', 'R. Okafoe') AS BLOB) WHERE seq = 2")
    code, out, _ = cli(capsys, "archive", "verify", "--archive", db)
    assert code == 5
    assert ("  entry seq 2: its JSON does not match its version digest: the record data was "
            "altered") in out.splitlines()
    code, _, err = cli(capsys, "archive", "export", record.record_id, "--archive", db,
                       "--out", tmp_path / "x")
    assert code == 5 and "entry seq 2 of" in err and "nothing was exported" in err
    assert not (tmp_path / "x").exists()


def test_archive_must_be_named_and_exist(tmp_path, capsys):
    code, _, err = cli(capsys, "archive", "verify")
    assert code == 2 and err.strip() == ("calib: error: no archive given: pass --archive DB or "
                                         "set the CALIB_ARCHIVE environment variable to the "
                                         "archive file")
    code, _, err = cli(capsys, "trend", "Nitrate-N")
    assert code == 2 and "no archive given" in err
    missing = tmp_path / "typo.sqlite"
    code, _, err = cli(capsys, "archive", "list", "--archive", missing)
    assert code == 3 and err.strip() == f"calib: error: {missing}: no archive at this path"
    assert not missing.exists()


def _series(db, *, runs, drift_from=None, seed=5):
    """Nitrate records with 0.6 % run-to-run slope scatter; 1.5 % loss per run from ``drift_from``."""
    rng = np.random.default_rng(seed)
    with Archive(db) as archive:
        for run in range(runs):
            loss = 0.985 ** max(0, run - drift_from + 1) if drift_from is not None else 1.0
            slope = 0.25 * (1 + rng.normal(0, 0.006)) * loss
            record = make_record(slope=slope, seed=400 + run, run=run)
            archive.append(record, pdf_for(record), kind="issued")


def test_trend_in_control_exits_0(tmp_path, capsys):
    db = tmp_path / "a.sqlite"
    _series(db, runs=12)
    code, out, _ = cli(capsys, "trend", "nitrate-n", "--archive", db)
    assert code == 0, out
    assert out.startswith(f"Nitrate-N in {db}: ")
    assert "Limits from the first 10 accepted curves" in out and "No run rule fired." in out


def test_trend_flags_drift_and_writes_the_charts(tmp_path, capsys):
    db = tmp_path / "a.sqlite"
    _series(db, runs=16, drift_from=10)
    code, out, _ = cli(capsys, "trend", "Nitrate-N", "--archive", db)
    assert code == 7 and "FLAGGED: run rules fired on" in out and "beyond-3s" in out
    code, out, _ = cli(capsys, "trend", "Nitrate-N", "--archive", db, "--json", "--baseline", "8")
    doc = json.loads(out)
    assert code == 7 and doc["schema"] == "calib.trend/1" and doc["flagged"] is True
    assert doc["baseline"] == 8 and doc["charts"][0]["baseline_points"] == 8
    assert [c["quantity"] for c in doc["charts"]] == ["slope", "intercept", "residual_sd"]
    pdf_path = tmp_path / "trend.pdf"
    cli(capsys, "trend", "Nitrate-N", "--archive", db, "--pdf", pdf_path)
    first = pdf_path.read_bytes()
    cli(capsys, "trend", "Nitrate-N", "--archive", db, "--pdf", pdf_path)
    assert pdf_path.read_bytes() == first  # same archive, same bytes
    reader = PdfReader(pdf_path)
    text = "\n".join(page.extract_text() for page in reader.pages)
    assert "Control charts: Nitrate-N" in text and "Run rules that fired" in text
    assert "archive a.sqlite up to seq 16" in reader.pages[0].extract_text()


def test_trend_refusals(tmp_path, capsys):
    db = tmp_path / "a.sqlite"
    _series(db, runs=2)
    code, _, err = cli(capsys, "trend", "Fluoride", "--archive", db)
    assert code == 3 and err.strip() == (f"calib: error: no curve of 'Fluoride' in {db}; "
                                         "analytes archived: Nitrate-N")
    code, _, err = cli(capsys, "trend", "Nitrate-N", "--archive", db)
    assert code == 3 and err.strip() == (f"calib: error: Nitrate-N in {db}: 2 accepted curves "
                                         "(0 not accepted); a control chart needs at least 3")
    with pytest.raises(SystemExit) as stop:
        main(["trend", "Nitrate-N", "--archive", str(db), "--baseline", "2"])
    assert stop.value.code == 2
    assert "a baseline needs at least 3 curves, got 2" in capsys.readouterr().err
