"""The batch as XLSX and PDF: what a reviewer signs, with formula text neutralised."""

from __future__ import annotations

import io
import json
from datetime import UTC, datetime

import pytest
from openpyxl import load_workbook
from pypdf import PdfReader

from calib.quantify.document import quantify_document
from calib.quantify.workflow import quantify_files
from calib.record.record import canonical_json
from calib.report.quantify_pdf import QUANTIFY_ATTACHMENT, write_quantify_pdf
from calib.report.quantify_xlsx import neutralise, write_quantify_xlsx
from tests.quantify.helpers import response_at, write_run_csv, write_samples_csv

WHEN = datetime(2026, 12, 1, 9, 30, tzinfo=UTC)


@pytest.fixture
def document(tmp_path):
    run = write_run_csv(tmp_path / "run.csv")
    rows = [
        ["=HYPERLINK(\"http://example.invalid\")", "Nitrate-N", "unknown",
         round(response_at(2.0), 5), "", 1, ""],
        ["-FB-7", "Nitrate-N", "unknown", round(response_at(40.0), 5), "", 1, ""],
        ["@FB-8", "Nitrate-N", "unknown", round(response_at(6.0), 5), 2, 1, ""],
        ["QC-M", "Nitrate-N", "QC", round(response_at(4.1), 5), "", 1, 4.0],
    ]
    samples = write_samples_csv(tmp_path / "batch.csv", rows)
    return quantify_document(quantify_files(run, samples, created_at=WHEN))


@pytest.mark.parametrize("text", ["=1+1", "+1", "-1", "@SUM(A1)", "\tx", "\rx"])
def test_formula_like_text_is_neutralised(text):
    assert neutralise(text) == "'" + text


def test_workbook_holds_every_result_and_no_formula(document):
    book = load_workbook(io.BytesIO(write_quantify_xlsx(document)))
    assert book.sheetnames == ["Results", "QC", "Curves", "About"]
    rows = list(book["Results"].iter_rows(values_only=True))
    header, *body = rows
    col = {name: i for i, name in enumerate(header)}
    assert [r[col["Sample"]] for r in body] == ["'=HYPERLINK(\"http://example.invalid\")",
                                                "'-FB-7", "'@FB-8", "QC-M"]
    high = body[1]
    assert high[col["Reported"]] == "> ULOQ" and high[col["Concentration"]] is None
    assert high[col["Flags"]] == "above-uloq, outside-range"
    assert body[2][col["Dilution factor"]] == 2
    assert body[2][col["Concentration"]] == pytest.approx(12.0, rel=2e-3)
    for sheet in book.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f", f"{sheet.title}!{cell.coordinate} is a formula"


def test_pdf_carries_the_batch_json_and_is_reproducible(document):
    pdf = write_quantify_pdf(document)
    assert pdf == write_quantify_pdf(json.loads(json.dumps(document)))
    reader = PdfReader(io.BytesIO(pdf))
    assert reader.attachments[QUANTIFY_ATTACHMENT] == [canonical_json(document)]
    text = " ".join(page.extract_text() for page in reader.pages)
    assert "Sample results" in text and "> ULOQ" in text and "dilute and re-run" in text
    assert "Reviewed" in text and "Approved" in text


def test_a_forced_batch_says_so_on_paper(tmp_path):
    run = write_run_csv(tmp_path / "run.csv", bend=-0.012)
    doc = quantify_document(quantify_files(run, force=True, created_at=WHEN))
    assert doc["forced"] is True and doc["verdict"] == "rejected"
    text = " ".join(p.extract_text() for p in PdfReader(io.BytesIO(write_quantify_pdf(doc))).pages)
    assert "Forced." in text and "REJECTED curve" in text
    book = load_workbook(io.BytesIO(write_quantify_xlsx(doc)))
    about = {row[0]: row[1] for row in book["About"].iter_rows(values_only=True)}
    assert about["Forced"].startswith("yes: quantified against a rejected curve on request")
