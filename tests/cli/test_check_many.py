"""``calib check``: --brief, the default length, --full, and several run files or a folder.

The expected verdicts and findings are read from the calib.check/1 JSON of the
same run, so the text is checked against the document an auditor gets; exit
codes against the table in calib.cli.exits (0 accepted, 1 not accepted,
2 usage, 3 unusable input).
"""

from __future__ import annotations

import json
import shutil

from calib.cli.main import main
from calib.resources import bundled_folder

SAMPLES = bundled_folder("sample_runs")
NITRATE = SAMPLES / "fernbrook_nitrate_2026-11-30.xlsx"
FLUORIDE = SAMPLES / "fernbrook_fluoride_2026-11-30.csv"
CATIONS = SAMPLES / "fernbrook_cations_grouped_2026-12-02.xlsx"


def run(capsys, *args):
    code = main(["check", *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


def findings_of(curve):
    return [c["id"] for c in curve["checks"]
            if c["verdict"] in ("fail", "warn") and c["severity"] != "info"]


def test_brief_is_one_line_per_analyte_with_the_failing_checks(capsys):
    _, doc_text, _ = run(capsys, CATIONS, "--json")
    doc = json.loads(doc_text)
    code, out, _ = run(capsys, CATIONS, "--brief")
    assert code == 1
    words = {"accepted": "ACCEPTED", "needs-review": "NEEDS REVIEW", "rejected": "REJECTED"}
    lines = out.splitlines()
    body = lines[1:1 + len(doc["curves"])]
    for line, curve in zip(body, doc["curves"], strict=True):
        assert line.split()[0] == curve["analyte"]
        assert words[curve["verdict"]] in line
        for check_id in findings_of(curve):
            assert check_id in line
    counts = {v: sum(c["verdict"] == v for c in doc["curves"])
              for v in ("accepted", "needs-review", "rejected")}
    tally = ", ".join(f"{v} {n}" for v, n in counts.items() if n)
    assert lines[1 + len(doc["curves"])] == \
        f"Run verdict: {words[doc['verdict']]} ({len(doc['curves'])} curves: {tally})"
    assert "Caution: Results decide whether" in out  # the caution stays in every output
    assert len(lines) < 15


def test_default_shows_details_only_of_curves_not_accepted(capsys):
    _, doc_text, _ = run(capsys, CATIONS, "--json")
    doc = json.loads(doc_text)
    _, full, _ = run(capsys, CATIONS, "--full")
    code, out, _ = run(capsys, CATIONS)
    assert code == 1
    assert len(out.splitlines()) < len(full.splitlines()) / 3
    flagged = [c for c in doc["curves"] if c["verdict"] != "accepted"]
    assert flagged
    for curve in flagged:
        word = {"needs-review": "NEEDS REVIEW", "rejected": "REJECTED"}[curve["verdict"]]
        assert f"{curve['analyte']}: {word} (" in out
    assert "Calcium: ACCEPTED\n  coefficient" not in out  # accepted: one line only
    assert "Calcium: ACCEPTED\n  coefficient" in full
    assert "mandel" not in out and "mandel" in full  # passing checks only with --full
    assert "add --full" in out and "Caution:" in out


def test_brief_and_full_exclude_each_other(capsys):
    import pytest

    with pytest.raises(SystemExit) as stop:
        main(["check", str(NITRATE), "--brief", "--full"])
    assert stop.value.code == 2
    assert "argument --full: not allowed with argument --brief" in capsys.readouterr().err


def test_several_files_one_summary_worst_exit_code(capsys):
    code, out, _ = run(capsys, NITRATE, FLUORIDE, "--brief")
    assert code == 1  # fluoride needs review (its intercept), nitrate accepted
    assert "Summary of 2 run files:" in out
    assert "fernbrook_nitrate_2026-11-30.xlsx  ACCEPTED" in out
    assert "fernbrook_fluoride_2026-11-30.csv  NEEDS REVIEW  1 curve, 1 not accepted" in out
    assert out.count("Caution: Results decide") == 1


def test_folder_with_an_unusable_file_checks_the_others_and_exits_3(tmp_path, capsys):
    shutil.copy(NITRATE, tmp_path / NITRATE.name)
    (tmp_path / "broken.csv").write_text("nothing,here\n1,2\n", encoding="utf-8")
    (tmp_path / "notes.pdf").write_bytes(b"%PDF-")  # not a run file: left alone
    code, out, _ = run(capsys, tmp_path, "--brief")
    assert code == 3
    assert "Summary of 2 run files:" in out
    assert "broken.csv                         UNUSABLE" in out
    assert "fernbrook_nitrate_2026-11-30.xlsx  ACCEPTED" in out
    assert "Worst verdict: UNUSABLE" in out


def test_several_files_json_is_one_list_document(capsys):
    code, out, err = run(capsys, NITRATE, FLUORIDE, "--json")
    doc = json.loads(out)
    assert code == 1
    assert doc["schema"] == "calib.check-set/1" and doc["verdict"] == "needs-review"
    assert [r["verdict"] for r in doc["runs"]] == ["accepted", "needs-review"]
    assert [r["check"]["schema"] for r in doc["runs"]] == ["calib.check/1"] * 2
    assert "caution" in err


def test_several_files_pdf_needs_a_folder(tmp_path, capsys):
    code, _, err = run(capsys, NITRATE, FLUORIDE, "--pdf", tmp_path / "one.pdf")
    assert code == 2
    assert "with several run files --pdf names a folder (one file per run)" in err
    code, _, _ = run(capsys, NITRATE, FLUORIDE, "--pdf", tmp_path / "records",
                       "--csv", tmp_path / "csv")
    assert code == 1
    assert sorted(p.name for p in (tmp_path / "records").iterdir()) == [
        "fernbrook_fluoride_2026-11-30.pdf", "fernbrook_nitrate_2026-11-30.pdf"]
    assert (tmp_path / "records" / "fernbrook_nitrate_2026-11-30.pdf").read_bytes()[:5] == b"%PDF-"
    assert len(list((tmp_path / "csv").iterdir())) == 2
    # Existing records are never replaced without --force.
    code, _, err = run(capsys, NITRATE, FLUORIDE, "--pdf", tmp_path / "records")
    assert code == 2 and "records are never overwritten silently" in err


def test_options_of_one_file_refused_with_several(capsys):
    code, _, err = run(capsys, NITRATE, FLUORIDE, "--exclude", "Run!C7=spilt")
    assert code == 2
    assert "--exclude applies to one run file; check that file on its own (2 run files given)" \
        in err


def test_two_runs_with_one_name_refused(tmp_path, capsys):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    shutil.copy(NITRATE, tmp_path / "a" / "day.xlsx")
    shutil.copy(NITRATE, tmp_path / "b" / "day.xlsx")
    code, _, err = run(capsys, tmp_path / "a" / "day.xlsx", tmp_path / "b" / "day.xlsx",
                       "--pdf", tmp_path / "out")
    assert code == 2 and "would both write day.*" in err
    code, _, err = run(capsys, NITRATE, NITRATE)
    assert code == 2 and "is named twice" in err


def test_empty_folder_refused(tmp_path, capsys):
    code, _, err = run(capsys, tmp_path)
    assert code == 2 and f"folder {tmp_path} holds no run files" in err
