"""calib.service: one path for CLI and web; all files or none; templates named in the record."""

from __future__ import annotations

import csv
import errno
import hashlib
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from pypdf import PdfReader

from calib import service
from calib.cli.main import main
from calib.errors import TemplateError
from calib.report.template import (
    demo_template,
    load_template,
    template_for_record,
    template_section,
)
from calib.resources import bundled_folder

REPO = Path(__file__).resolve().parents[1]
SAMPLES = bundled_folder("sample_runs")
FLUORIDE = SAMPLES / "fernbrook_fluoride_2026-11-30.csv"
NITRATE = SAMPLES / "fernbrook_nitrate_2026-11-30.xlsx"


def lab_template(folder: Path, name: str = "Kestrel Bioanalytical") -> Path:
    path = folder / "kestrel.toml"
    path.write_text(f'[lab]\nname = "{name}"\naddress = ["Plot 9, Heron Quay"]\n',
                    encoding="utf-8")
    return path


def pdf_author(data: bytes) -> str:
    return str(PdfReader(io.BytesIO(data)).metadata["/Author"])


# ------------------------------------------------------------------ outcomes

def test_check_outcome_carries_the_assessment_and_its_document():
    outcome = service.check(FLUORIDE)
    # The demo fluoride run is flagged for its intercept (README, quick start).
    assert outcome.verdict == "needs-review" and not outcome.accepted
    assert outcome.document["schema"] == "calib.check/1"
    assert outcome.document["curves"][0]["analyte"] == "Fluoride"


def test_issue_names_its_template_by_file_name_and_sha256(tmp_path):
    template = lab_template(tmp_path)
    issued = service.issue(service.check(NITRATE), prepared_by="R. Okafor", template=template,
                           pdf=tmp_path / "out" / "n.pdf", record_json=tmp_path / "out" / "n.json")
    section = json.loads((tmp_path / "out" / "n.json").read_bytes())["template"]
    # The digest is the SHA-256 of the file's bytes, what sha256sum prints (FIPS 180-4).
    assert section["name"] == "kestrel.toml"
    assert section["sha256"] == hashlib.sha256(template.read_bytes()).hexdigest()
    assert section["laboratory"] == "configured"
    assert section["layout"]["lab"]["name"] == "Kestrel Bioanalytical"
    assert pdf_author(issued.pdf) == "Kestrel Bioanalytical"
    assert issued.written == (tmp_path / "out" / "n.pdf", tmp_path / "out" / "n.json")
    # The template is part of the content: the record id derives from it.
    other = service.issue(service.check(NITRATE), prepared_by="R. Okafor",
                          created_at=None, template=demo_template())
    assert other.record.record_id != issued.record.record_id


def test_without_a_lab_template_the_record_says_laboratory_not_configured(tmp_path):
    issued = service.issue(service.check(NITRATE))
    assert issued.record.body["template"]["laboratory"] == "not configured"
    assert pdf_author(issued.pdf) == "Laboratory not configured"
    assert b"Fernbrook Water Laboratory" not in issued.pdf


def test_lab_init_makes_the_lab_template_the_default_and_show_reports_it(tmp_path, capsys):
    template = lab_template(tmp_path)
    assert main(["lab", "init", "--template", str(template)]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"Lab template set up: {template.resolve()}\n  laboratory: Kestrel")
    assert hashlib.sha256(template.read_bytes()).hexdigest() in out
    assert Path(os.environ["CALIB_CONFIG"]).is_file()
    issued = service.issue(service.check(NITRATE))
    assert pdf_author(issued.pdf) == "Kestrel Bioanalytical"
    assert main(["lab", "show"]) == 0
    assert "(unchanged since set-up)" in capsys.readouterr().out


def test_a_lab_template_edited_after_set_up_is_refused(tmp_path, capsys):
    template = lab_template(tmp_path)
    assert main(["lab", "init", "--template", str(template)]) == 0
    template.write_text('[lab]\nname = "Someone Else Ltd"\n', encoding="utf-8")
    pdf = tmp_path / "n.pdf"
    capsys.readouterr()
    assert main(["check", str(NITRATE), "--pdf", str(pdf)]) == 3
    err = capsys.readouterr().err
    assert err.startswith(f"calib: error: template {template.resolve()}: the lab's template "
                          "changed since it was set up (SHA-256 ")
    assert err.endswith(f"run calib lab init --template {template.resolve()} again\n")
    assert not pdf.exists()


def test_lab_show_without_set_up_and_a_damaged_settings_file(capsys):
    assert main(["lab", "show"]) == 0
    assert "No lab template is set up" in capsys.readouterr().out
    Path(os.environ["CALIB_CONFIG"]).write_text("[lab]\ntemplate = 3\n", encoding="utf-8")
    assert main(["lab", "show"]) == 3
    assert capsys.readouterr().err == (f"calib: error: lab settings {os.environ['CALIB_CONFIG']}: "
                                       "key 'lab.template' must be a file path\n")


def test_lab_init_refuses_a_broken_template_and_writes_no_settings(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text('[lab]\nname = "X"\ncolour = "red"\n', encoding="utf-8")
    assert main(["lab", "init", "--template", str(bad)]) == 3
    assert capsys.readouterr().err == "calib: error: template bad.toml: unknown key 'lab.colour'\n"
    assert not Path(os.environ["CALIB_CONFIG"]).exists()


def test_demo_keeps_the_fictional_letterhead_even_with_a_lab_template(tmp_path, capsys):
    assert main(["lab", "init", "--template", str(lab_template(tmp_path))]) == 0
    assert main(["demo", "--out", str(tmp_path / "d")]) == 0
    pdf = (tmp_path / "d" / "fernbrook_nitrate_2026-11-30.pdf").read_bytes()
    assert pdf_author(pdf) == "Fernbrook Water Laboratory"
    body = json.loads((tmp_path / "d" / "fernbrook_nitrate_2026-11-30.record.json").read_bytes())
    assert body["template"]["laboratory"] == "demonstration"
    assert body["template"]["name"] == "fernbrook-demo.toml"


# ------------------------------------------------------------------ the template inside a record

def test_template_for_record_rebuilds_the_exact_template(tmp_path):
    template = load_template(lab_template(tmp_path))
    issued = service.issue(service.check(NITRATE), template=template)
    rebuilt = template_for_record(issued.record.canonical)
    assert rebuilt.fingerprint == template.fingerprint and rebuilt.lab == template.lab
    # Re-rendered with the rebuilt template, the pages are the same bytes (the renderer is
    # deterministic: tests/report/test_pdf.py).
    from calib.workflow import render_record

    assert render_record(issued.record, rebuilt) == issued.pdf


def test_a_tampered_template_section_is_refused():
    section = template_section(demo_template())
    section["layout"]["lab"]["name"] = "Forged Lab"
    with pytest.raises(TemplateError) as caught:
        template_for_record({"template": section})
    assert str(caught.value) == ("the record's template section does not match its "
                                 "fingerprint: the template named 'fernbrook-demo.toml' was "
                                 "altered")
    section = template_section(demo_template())
    del section["layout"]["titles"]
    with pytest.raises(TemplateError, match="^the record's template section is malformed "
                                            r"\(KeyError: 'titles'\)$"):
        template_for_record({"template": section})


def test_records_from_before_templates_were_named_get_the_old_bundled_letterhead():
    # Earlier releases laid every record out with the Fernbrook letterhead (then the default).
    assert template_for_record({"schema": "calib.record/1"}).lab.name == \
        "Fernbrook Water Laboratory"


def test_sign_and_verify_find_the_lab_template_in_the_record(tmp_path, capsys):
    template = lab_template(tmp_path)
    v1 = tmp_path / "v1.pdf"
    assert main(["check", str(NITRATE), "--pdf", str(v1), "--prepared-by", "R. Okafor",
                 "--template", str(template)]) == 0
    template.unlink()  # years later: the file is gone, the record still carries its layout
    capsys.readouterr()
    assert main(["verify", str(v1)]) == 0
    assert capsys.readouterr().out.startswith(f"{v1}: intact, origin not verified throughout")
    v2 = tmp_path / "v2.pdf"
    assert main(["sign", str(v1), "--role", "reviewed", "--name", "T. Reviewer",
                 "--out", str(v2)]) == 0
    assert pdf_author(v2.read_bytes()) == "Kestrel Bioanalytical"
    assert service.verify(v2).ok


# ------------------------------------------------------------------ all files, or none

def overflowing_run(folder: Path) -> Path:
    """The demo fluoride run with one response of 1e308 (issue 17: it used to overflow after
    the CSV and workbook had been written)."""
    with FLUORIDE.open(encoding="utf-8", newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[11][:2] == ["Fluoride", "Cal-2"]
    rows[11][3] = "1e308"
    path = folder / "overflow.csv"
    with path.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)
    return path


def test_a_failure_after_the_exports_are_built_writes_nothing(tmp_path):
    run = overflowing_run(tmp_path)
    env = dict(os.environ, PYTHONPATH=str(REPO))
    done = subprocess.run([sys.executable, "-m", "calib", "check", run.name, "--csv", "out.csv",
                           "--xlsx", "out.xlsx", "--pdf", "out.pdf", "--archive", "a.sqlite"],
                          cwd=tmp_path, env=env, capture_output=True, text=True, timeout=120,
                          check=False)
    # 4 while the fit lets 1e308 overflow; 3 once the importer refuses it (issue 17, item 2).
    assert done.returncode in (3, 4)
    assert done.stderr.splitlines()[-1].startswith("calib: ")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["overflow.csv"]


def test_a_full_disk_is_one_line_exit_3_and_leaves_nothing(tmp_path, capsys, monkeypatch):
    import calib.output

    def full(fd):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(calib.output.os, "fsync", full)
    out = tmp_path / "out"
    code = main(["check", str(NITRATE), "--csv", str(out / "r.csv"), "--pdf", str(out / "r.pdf")])
    err = capsys.readouterr().err
    assert code == 3
    assert err == (f"calib: error: cannot write {out / 'r.pdf'}: the disk is full (No space "
                   "left on device); nothing was written\n")
    assert list(out.iterdir()) == []


def test_an_archive_that_refuses_the_record_leaves_no_files(tmp_path, monkeypatch):
    def refused(*args, **kwargs):
        from calib.archive import ArchiveError

        raise ArchiveError("the archive is read-only")

    monkeypatch.setattr(service, "file", refused)
    from calib.archive import ArchiveError

    with pytest.raises(ArchiveError, match="^the archive is read-only$"):
        service.issue(service.check(NITRATE), pdf=tmp_path / "r.pdf", csv=tmp_path / "r.csv",
                      archive=tmp_path / "a.sqlite")
    assert list(tmp_path.iterdir()) == []


def test_issue_never_replaces_a_record_without_replace(tmp_path):
    (tmp_path / "r.pdf").write_bytes(b"earlier record")
    with pytest.raises(FileExistsError):
        service.issue(service.check(NITRATE), pdf=tmp_path / "r.pdf", csv=tmp_path / "r.csv")
    assert (tmp_path / "r.pdf").read_bytes() == b"earlier record"
    assert not (tmp_path / "r.csv").exists()


def test_issue_files_the_record_in_the_archive(tmp_path):
    issued = service.issue(service.check(NITRATE), prepared_by="R. Okafor",
                           archive=tmp_path / "a.sqlite")
    assert issued.filed.seq == 1 and issued.filed.record_id == issued.record.record_id
    assert service.verify(_pdf(tmp_path, issued.pdf), archive=tmp_path / "a.sqlite").ok


def _pdf(folder: Path, data: bytes) -> Path:
    path = folder / "record.pdf"
    path.write_bytes(data)
    return path


def test_quantify_and_trend_write_their_pdfs_with_the_chosen_template(tmp_path):
    from tests.archive.helpers import make_record, pdf_for
    from tests.quantify.helpers import write_run_csv

    template = lab_template(tmp_path)
    outcome = service.quantify(write_run_csv(tmp_path / "run.csv"), template=template,
                               pdf=tmp_path / "q.pdf", xlsx=tmp_path / "q.xlsx")
    assert outcome.written == (tmp_path / "q.xlsx", tmp_path / "q.pdf")
    assert pdf_author((tmp_path / "q.pdf").read_bytes()) == "Kestrel Bioanalytical"

    from calib.archive import Archive

    with Archive(tmp_path / "a.sqlite") as archive:
        for run in range(4):
            record = make_record(slope=0.25 + 0.001 * run, seed=40 + run, run=run)
            archive.append(record, pdf_for(record), kind="issued")
    found = service.trend(tmp_path / "a.sqlite", "Nitrate-N", pdf=tmp_path / "t.pdf",
                          template=template)
    assert found.written == (tmp_path / "t.pdf",) and len(found.trend.points) == 4
    assert pdf_author((tmp_path / "t.pdf").read_bytes()) == "Kestrel Bioanalytical"
