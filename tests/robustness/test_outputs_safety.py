"""Output files: no silent overwrite, safe file names, neutralised cells, escaped markup."""

from __future__ import annotations

import csv
import io

import pytest
from openpyxl import load_workbook
from pypdf import PdfReader

from calib.checks import evaluate_run
from calib.cli.main import main
from calib.export.cells import neutralise as export_neutralise
from calib.output import safe_file_name, write_atomic
from calib.report.quantify_xlsx import neutralise as quantify_neutralise
from calib.resources import bundled_folder
from calib.run import Run
from calib.workflow import issue_record, record_pdf
from tests.conftest import make_run

NITRATE = bundled_folder("sample_runs") / "fernbrook_nitrate_2026-11-30.xlsx"
XS = [0.5, 0.5, 1, 1, 2, 2, 5, 5, 10, 10]
YS = [0.101, 0.099, 0.202, 0.198, 0.401, 0.403, 1.002, 0.997, 2.004, 1.995]


# --- refusing to overwrite a record ------------------------------------------------------

def test_check_refuses_an_existing_pdf_without_force(tmp_path, capsys):
    target = tmp_path / "record.pdf"
    target.write_bytes(b"the old record")
    assert main(["check", str(NITRATE), "--pdf", str(target)]) == 2
    err = capsys.readouterr().err
    assert f"calib check: error: {target} exists; records are never overwritten" in err
    assert "add --force to replace it" in err
    assert target.read_bytes() == b"the old record"
    assert main(["check", str(NITRATE), "--pdf", str(target), "--force"]) == 0
    assert target.read_bytes().startswith(b"%PDF-")


def test_demo_refuses_to_overwrite_its_records_without_force(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    capsys.readouterr()
    assert main(["demo", "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "calib demo: error:" in err and "exists; records are never overwritten" in err
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before
    assert main(["demo", "--out", str(tmp_path), "--force"]) == 0


def test_write_atomic_without_replace_never_clobbers(tmp_path):
    target = write_atomic(tmp_path / "r.pdf", b"old")
    with pytest.raises(FileExistsError):
        write_atomic(target, b"new", replace=False)
    assert target.read_bytes() == b"old"
    assert [p.name for p in tmp_path.iterdir()] == ["r.pdf"]  # no temporary file left


# --- names that become file names --------------------------------------------------------

@pytest.mark.parametrize(("name", "safe"), [
    ("../../etc/passwd", "____etc_passwd"),
    ("..\\..\\boot.ini", "____boot.ini"),
    ("/abs/path", "_abs_path"),
    ("CR-2026-0001", "CR-2026-0001"),
    ("NO3-N (mg/L)", "NO3-N (mg_L)"),
    ("Nitr\u202eate\x00-N", "Nitr_ate_-N"),
    ("con", "_con"),
    ("...", "_"),
    ("  ", "unnamed"),
])
def test_safe_file_name(name, safe):
    assert safe_file_name(name) == safe
    assert "/" not in safe and "\\" not in safe and ".." not in safe


def test_safe_file_name_is_bounded():
    assert len(safe_file_name("x" * 1000)) == 120


# --- formula-like cells in every writer --------------------------------------------------

RISKY = ["=HYPERLINK(\"http://x\")", "+1+1", "-2+3", "@SUM(A1)", "\tcmd", "\rcmd"]


@pytest.mark.parametrize("text", RISKY)
@pytest.mark.parametrize("writer", [export_neutralise, quantify_neutralise])
def test_every_neutraliser_defuses_formula_starts(writer, text):
    assert writer(text) == "'" + text


def test_quantify_workbook_cells_drop_control_characters():
    assert quantify_neutralise("S\x01ample") == "Sample"


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def test_check_exports_neutralise_an_analyte_named_like_a_formula(tmp_path):
    run_csv = tmp_path / "run.csv"
    lines = ["Analyte,Sample,Concentration (mg/L),Response,Replicate"]
    lines += [f"=cmd|' /C calc'!A0,Cal-{i // 2},{x},{y},{i % 2 + 1}"
              for i, (x, y) in enumerate(zip(XS, YS, strict=True))]
    run_csv.write_text("\n".join(lines) + "\n", encoding="utf-8")
    xlsx, out_csv = tmp_path / "r.xlsx", tmp_path / "r.csv"
    assert main(["check", str(run_csv), "--xlsx", str(xlsx), "--csv", str(out_csv)]) in (0, 1)
    cells = [c.value for ws in load_workbook(xlsx) for row in ws.iter_rows() for c in row
             if isinstance(c.value, str)]
    assert "'=cmd|' /C calc'!A0" in cells
    assert not any(v.startswith(("=", "+", "-", "@", "\t", "\r")) for v in cells)
    rows = list(csv.reader(io.StringIO(out_csv.read_text(encoding="utf-8-sig"))))
    # Numbers such as a negative intercept are numbers to a spreadsheet, not formulas.
    assert not any(v.startswith(("=", "+", "-", "@", "\t", "\r")) and not _is_number(v)
                   for r in rows for v in r)
    assert any(v == "'=cmd|' /C calc'!A0" for r in rows for v in r)


# --- markup in text placed into the PDF --------------------------------------------------

MARKUP = "<font color='red'>N</font> & <para>x</para>"


def _run_named(analyte: str) -> Run:
    run = make_run(XS, YS, analyte=analyte)
    return Run(run.source, run.points, metadata={"Operator": f"Op {MARKUP}"},
               units={"concentration": "mg/L", "response": "area"})


def test_markup_in_names_is_printed_literally(tmp_path):
    template = tmp_path / "lab.toml"
    template.write_text(f'[lab]\nname = "Lab {MARKUP}"\n', encoding="utf-8")
    record, _ = issue_record(evaluate_run(_run_named(f"A {MARKUP}")),
                             prepared_by=f"Prep {MARKUP}")
    pdf = record_pdf(record, template=template)
    text = " ".join(" ".join(page.extract_text().split())
                    for page in PdfReader(io.BytesIO(pdf)).pages)
    for who in ("A", "Prep", "Lab"):
        assert f"{who} <font color='red'>N</font> & <para>x</para>" in text, who
