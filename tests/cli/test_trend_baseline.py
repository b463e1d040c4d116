"""``calib trend``: the screened default, ``--freeze`` (Phase I), a frozen baseline (Phase II)."""

from __future__ import annotations

import json

import pytest
from pypdf import PdfReader

from calib.archive import Archive
from calib.cli.main import main
from tests.archive.cu_series import ANALYTE, INSTRUMENT, cu_record, fill_cu_archive
from tests.archive.helpers import pdf_for


@pytest.fixture(autouse=True)
def no_archive_from_the_environment(monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE", raising=False)


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def db(tmp_path):
    path = tmp_path / "a.sqlite"
    fill_cu_archive(path)
    return path


def bad_record(db):
    with Archive(db) as archive:
        return next(c.record_id for c in archive.curve_history(ANALYTE)
                    if c.run_date == "2026-09-07")


def test_the_copper_drift_is_flagged_by_default(db, capsys):
    code, out, _ = cli(capsys, "trend", ANALYTE, "--archive", db, "--instrument", INSTRUMENT)
    bad = bad_record(db)
    assert code == 7
    assert (f"Limits from the first 9 accepted curves, each judged against the others (no "
            f"frozen baseline); set aside as too far from the others: {bad}") in out
    row = next(line for line in out.splitlines() if bad in line and "2026-09-07" in line)
    assert "set aside" in row and "slope: beyond-3s (below)" in row
    assert "FLAGGED: run rules fired on 1 of 9 curves (*; run dates 2026-09-07)." in out
    assert "Note: the limits are not frozen" in out
    assert "qualified person" in out


def test_freeze_usage_errors(db, capsys):
    code, _, err = cli(capsys, "trend", ANALYTE, "--archive", db, "--freeze")
    assert code == 2 and "--freeze needs --reviewed-by NAME" in err
    code, _, err = cli(capsys, "trend", ANALYTE, "--archive", db, "--exclude", "CR-1=bad day")
    assert code == 2 and "--exclude only goes with --freeze" in err
    code, _, err = cli(capsys, "trend", ANALYTE, "--archive", db, "--freeze", "--reviewed-by",
                       "M. Castellanos", "--baseline-file", "x.json")
    assert code == 2 and "--freeze writes a new baseline; --baseline-file reads one" in err
    with pytest.raises(SystemExit) as stop:
        main(["trend", ANALYTE, "--archive", str(db), "--freeze", "--exclude", "CR-1="])
    assert stop.value.code == 2
    assert "excluding CR-1 from the baseline needs a reason" in capsys.readouterr().err


def test_freeze_then_monitor(db, capsys, tmp_path):
    bad = bad_record(db)
    freeze = ("trend", ANALYTE, "--archive", db, "--instrument", INSTRUMENT, "--freeze",
              "--baseline", "8", "--reviewed-by", "M. Castellanos")
    # Phase I refuses a baseline with the bad curve in it, and says what to do.
    code, _, err = cli(capsys, *freeze)
    assert code == 3 and f"the baseline is not in control: {bad} (2026-09-07) slope" in err
    assert "--exclude RECORD_ID=REASON" in err
    folder = tmp_path / "a.sqlite.baselines"
    assert not folder.exists() or not any(folder.iterdir())
    code, out, _ = cli(capsys, *freeze, "--exclude", f"{bad}=nebuliser partly blocked",
                       "--note", "after the October service")
    target = folder / "Cu 324.754@ICP-OES-2.v1.json"
    assert code == 0, out
    assert out.startswith(f"Baseline frozen: {target}")
    assert "Limits from the frozen baseline Cu 324.754@ICP-OES-2.v1.json (SHA-256 " in out
    assert "reviewed by M. Castellanos" in out
    assert "No run rule fired outside the curves the baseline's reviewer excluded." in out
    assert "[reviewed: nebuliser partly blocked]" in out
    stored = json.loads(target.read_text(encoding="utf-8"))
    assert stored["schema"] == "calib.baseline/1" and stored["note"] == "after the October service"
    assert stored["archive"]["name"] == "a.sqlite" and stored["archive"]["seq"] == 12
    # Phase II: later runs against the frozen limits; a 6 % loss of sensitivity is flagged.
    with Archive(db) as archive:
        for day, slope in enumerate([0.251, 0.249, 0.235], start=12):
            archive.append((rec := cu_record(day, slope)), pdf_for(rec), kind="issued")
    code, out, _ = cli(capsys, "trend", ANALYTE, "--archive", db, "--instrument", INSTRUMENT,
                       "--json")
    doc = json.loads(out)
    assert code == 7 and doc["limits_from"]["method"] == "frozen baseline"
    assert doc["limits_from"]["file"] == target.name
    assert doc["flagged_points"] == [len(doc["points"]) - 1]
    assert doc["points"][-1]["phase"] == "monitored"
    # Ad-hoc limits are still possible, and say the frozen baseline was not used.
    code, out, _ = cli(capsys, "trend", ANALYTE, "--archive", db, "--instrument", INSTRUMENT,
                       "--baseline", "5")
    assert ("Note: the frozen baseline Cu 324.754@ICP-OES-2.v1.json was not used: --baseline 5 "
            "asked for limits from the first 5 curves.") in out
    # The PDF: run dates along the x axis, the frozen baseline named with its reviewer.
    pdf = tmp_path / "cu.pdf"
    cli(capsys, "trend", ANALYTE, "--archive", db, "--instrument", INSTRUMENT, "--pdf", pdf)
    text = " ".join(" ".join(page.extract_text() for page in PdfReader(pdf).pages).split())
    assert "Limits from the frozen baseline Cu 324.754@ICP-OES-2.v1.json (SHA-256 " in text
    assert "Frozen baseline (Phase I) established " in text and "M. Castellanos" in text
    assert f"Excluded: {bad} (2026-09-07): nebuliser partly blocked." in text
    assert "Run date" in text and "2026-09-01" in text and "Frozen baseline period" in text
    assert "excluded from the baseline: nebuliser partly blocked" in text
    # Freezing again writes version 2 and keeps version 1.
    code, out, _ = cli(capsys, *freeze, "--exclude", f"{bad}=nebuliser partly blocked")
    assert code == 7 and (folder / "Cu 324.754@ICP-OES-2.v2.json").exists() and target.exists()


def test_an_edited_baseline_is_refused(db, capsys, tmp_path):
    bad = bad_record(db)
    cli(capsys, "trend", ANALYTE, "--archive", db, "--instrument", INSTRUMENT, "--freeze",
        "--baseline", "8", "--reviewed-by", "M. Castellanos", "--exclude", f"{bad}=blocked tube")
    target = tmp_path / "a.sqlite.baselines" / "Cu 324.754@ICP-OES-2.v1.json"
    target.write_text(target.read_text(encoding="utf-8").replace('"M. Castellanos"',
                                                                 '"J. Doe"'), encoding="utf-8")
    code, _, err = cli(capsys, "trend", ANALYTE, "--archive", db, "--instrument", INSTRUMENT)
    assert code == 3 and err.strip() == (f"calib: error: {target}: the baseline was edited after "
                                         "it was frozen (its digest does not match its content)")
    other = tmp_path / "other.json"
    other.write_bytes(b"")
    code, _, err = cli(capsys, "trend", ANALYTE, "--archive", db, "--baseline-file", other)
    assert code == 3 and "not a readable baseline file" in err
