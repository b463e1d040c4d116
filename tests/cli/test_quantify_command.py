"""``calib quantify`` as a user runs it: exit codes, JSON, refusal and --force, files, messages."""

from __future__ import annotations

import json
import re
from datetime import UTC, datetime

import pytest

from calib.cli.main import main
from calib.workflow import check_file, issue_record
from tests.quantify.helpers import write_run_csv, write_samples_csv


def quantify_json(capsys, *args):
    code = main(["quantify", *map(str, args), "--json"])
    out = capsys.readouterr()
    return code, (json.loads(out.out) if out.out else None), out.err


def test_the_run_files_own_samples_are_quantified(tmp_path, capsys):
    code, doc, err = quantify_json(capsys, write_run_csv(tmp_path / "run.csv"))
    assert code == 0 and doc["schema"] == "calib.quantify/1" and doc["verdict"] == "accepted"
    assert doc["samples_source"]["from_run"] is True
    by_id = {s["sample_id"]: s for s in doc["samples"]}
    assert set(by_id) == {"QC-L", "QC-M", "QC-H", "Well FB-3", "Well FB-7", "Spring S-2"}
    assert by_id["Well FB-3"]["n_replicates"] == 2
    assert by_id["Well FB-3"]["ci_low"] < 3.2 < by_id["Well FB-3"]["ci_high"]
    assert doc["qc"]["analytes"][0]["verdict"] == "pass"
    assert "caution" in err


def test_a_sample_above_the_top_standard_is_never_reported_as_a_number(tmp_path, capsys):
    _, doc, _ = quantify_json(capsys, write_run_csv(tmp_path / "run.csv", top_sample=14.0))
    spring = next(s for s in doc["samples"] if s["sample_id"] == "Spring S-2")
    assert spring["reported"] == "> ULOQ" and spring["note"] == "dilute and re-run"
    assert [spring[k] for k in ("concentration", "std_error", "ci_low", "ci_high")] == [None] * 4
    assert "above-uloq" in spring["flags"] and "outside-range" in spring["flags"]
    main(["quantify", str(tmp_path / "run.csv")])
    text = capsys.readouterr().out
    line = next(row for row in text.splitlines() if row.strip().startswith("Spring S-2"))
    # sample, type, n, mean response, then concentration, SE and interval all blank.
    assert re.match(r"\s+Spring S-2\s+unknown\s+2\s+[\d.]+\s+—\s+—\s+—\s+1\s+> ULOQ\s+"
                    r"above-uloq, outside-range$", line)


def test_a_rejected_curve_is_refused_unless_forced(tmp_path, capsys):
    run = write_run_csv(tmp_path / "bent.csv", bend=-0.012)
    code, doc, err = quantify_json(capsys, run)
    assert code == 1 and doc["verdict"] == "rejected" and doc["forced"] is False
    assert all(s["reported"] == "not reported" and s["concentration"] is None
               for s in doc["samples"])
    assert "calib: Nitrate-N: the curve was rejected; its samples are not quantified" in err
    code, doc, _ = quantify_json(capsys, run, "--force")
    assert code == 1 and doc["forced"] is True and doc["forced_analytes"] == ["Nitrate-N"]
    assert all("forced" in s["flags"] for s in doc["samples"])
    main(["quantify", str(run), "--force"])
    assert "FORCED: samples were quantified against a rejected curve" in capsys.readouterr().out


def test_a_record_and_a_samples_file_with_outputs(tmp_path, capsys):
    record, pdf = issue_record(check_file(write_run_csv(tmp_path / "run.csv")),
                               created_at=datetime(2026, 12, 1, tzinfo=UTC))
    (tmp_path / "record.pdf").write_bytes(pdf)
    samples = write_samples_csv(tmp_path / "batch.csv")
    out_pdf, out_xlsx = tmp_path / "out" / "results.pdf", tmp_path / "out" / "results.xlsx"
    code = main(["quantify", str(tmp_path / "record.pdf"), str(samples), "--pdf", str(out_pdf),
                 "--xlsx", str(out_xlsx)])
    text = capsys.readouterr().out
    assert code == 0
    assert text.startswith(f"Curve: record {record.record_id} (record.pdf) · samples: batch.csv")
    assert out_pdf.read_bytes()[:5] == b"%PDF-" and out_xlsx.read_bytes()[:2] == b"PK"
    assert f"Written: {out_pdf}" in text


def test_run_file_options_are_refused_with_a_record(tmp_path, capsys):
    record, _ = issue_record(check_file(write_run_csv(tmp_path / "run.csv")))
    (tmp_path / "record.json").write_bytes(record.canonical)
    code = main(["quantify", str(tmp_path / "record.json"), "x.csv", "--weighting", "1/x"])
    assert code == 2
    assert capsys.readouterr().err == ("calib quantify: error: --weighting apply to a run file; "
                                       "an issued record's curve is fixed\n")


def test_an_unusable_samples_file_is_one_line_and_exit_3(tmp_path, capsys):
    run = write_run_csv(tmp_path / "run.csv")
    bad = tmp_path / "bad.csv"
    bad.write_text("Sample,Area,Dilution\nFB-1,0.4,-2\n", encoding="utf-8")
    code = main(["quantify", str(run), str(bad)])
    err = capsys.readouterr().err
    assert code == 3
    assert err == (f"calib: error: {bad}, row 2, column C (Dilution): found the dilution factor "
                   "-2; expected a number above 0\n")


def test_help_has_examples(capsys):
    with pytest.raises(SystemExit) as done:
        main(["quantify", "--help"])
    assert done.value.code == 0
    out = capsys.readouterr().out
    assert "calib quantify record.pdf batch.xlsx --pdf results.pdf" in out
    assert "--force" in out and "never as a number" in out
