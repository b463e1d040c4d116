"""XLSX, CSV and terminal exports: the same figures as the JSON, and no formula gets through."""

from __future__ import annotations

import csv
import io

import pytest
from openpyxl import load_workbook

from calib.checks import evaluate_run, load_profile
from calib.checks.exclusions import Exclusion
from calib.export import neutralise, results_csv, results_xlsx, verdict_text
from calib.export.tables import SUMMARY_COLUMNS
from calib.record import check_document
from calib.run import Point
from tests.checks.runs import BIO_LEVELS, curve_points, make_run, qc_points, spread


@pytest.fixture(scope="module")
def document():
    # Two analytes: KX-214 with a failing LLOQ (a narrowed range is proposed) and one whose name
    # and exclusion reason start like spreadsheet formulas.
    points = curve_points(BIO_LEVELS, deviations={1: spread(20.1)}) + qc_points()
    points += [Point("=HYPERLINK(\"http://x\")", p.concentration, p.response,
                     p.source_cell.replace("D", "E"))
               for p in curve_points(BIO_LEVELS) + qc_points()]
    exclusions = [Exclusion("Run!E9", "@SUM(A1) typed by mistake"), Exclusion("Run!D9", "bubble")]
    return check_document(evaluate_run(make_run(points), profile=load_profile("bioanalytical"),
                                       exclusions=exclusions))


@pytest.mark.parametrize(("value", "written"), [
    ("=1+1", "'=1+1"), ("+1", "'+1"), ("-2+3", "'-2+3"), ("@SUM(A1)", "'@SUM(A1)"),
    ("\t=1", "'\t=1"), ("Run!C7", "Run!C7"), ("a\x00b", "ab"), (-0.5, -0.5), (3, 3),
    (True, True), (None, None), (float("inf"), None),
])
def test_neutralise(value, written):
    # SPEC §9: values starting with = + - @ are neutralised; numbers stay numbers.
    assert neutralise(value) == written


def test_workbook_has_a_summary_and_one_sheet_per_analyte(document):
    wb = load_workbook(io.BytesIO(results_xlsx(document)))
    assert wb.sheetnames == ["Summary", "KX-214", "_HYPERLINK(\"http___x\")"]
    summary = wb["Summary"]
    rows = [[c.value for c in row] for row in summary.iter_rows()]
    header = next(i for i, r in enumerate(rows) if r[0] == "Analyte")
    assert rows[header][:len(SUMMARY_COLUMNS)] == [h for _, h in SUMMARY_COLUMNS]
    kx = rows[header + 1]
    curve = document["curves"][0]
    assert kx[0] == "KX-214" and kx[1] == "rejected"
    slope_col = [k for k, _ in SUMMARY_COLUMNS].index("slope")
    # A number, not text; openpyxl writes 16 significant digits ("%.16g").
    assert kx[slope_col] == pytest.approx(curve["coefficients"]["slope"]["estimate"], rel=1e-15)
    assert kx[[k for k, _ in SUMMARY_COLUMNS].index("range_proposed")] == "2 to 1000"
    assert rows[header + 2][0] == "'=HYPERLINK(\"http://x\")"
    assert ["Run!E9", "'@SUM(A1) typed by mistake", "Run!E9", "'=HYPERLINK(\"http://x\")"] in \
        [r[:4] for r in rows]
    assert not any(isinstance(v, str) and v.startswith(("=", "+", "-", "@"))
                   for sheet in wb for row in sheet.iter_rows(values_only=True) for v in row)
    cells = [[c for c in row] for row in wb["KX-214"].iter_rows(values_only=True)]
    assert ["Range proposed (not applied)", 2, 1000] == list(cells[next(
        i for i, r in enumerate(cells) if r[0] == "Range proposed (not applied)")][:3])
    assert any(r[0] == "back-calculation" and r[2] == "fail" for r in cells)
    assert any(r[0] == "Run!D9" and r[7] is False and r[8] == "bubble" for r in cells)


def test_workbook_bytes_are_reproducible(document):
    assert results_xlsx(document) == results_xlsx(document)


def test_csv_has_one_row_per_curve_with_full_precision(document):
    rows = list(csv.DictReader(io.StringIO(results_csv(document).decode("utf-8"))))
    assert [r["analyte"] for r in rows] == ["KX-214", "'=HYPERLINK(\"http://x\")"]
    slope = document["curves"][0]["coefficients"]["slope"]["estimate"]
    assert float(rows[0]["slope"]) == slope  # repr round-trips the double
    assert rows[0]["verdict"] == "rejected" and rows[0]["proposed_verdict"] == "accepted"
    assert rows[0]["failing_checks"].startswith("back-calculation")
    assert rows[0]["reasons"].startswith("Back-calculated standards within tolerance")


def test_terminal_text_lists_reasons_first_and_colours_only_on_request(document):
    plain = verdict_text(document)
    assert "\x1b[" not in plain
    lines = plain.splitlines()
    assert lines[0] == "Verdicts under profile bioanalytical version 1:"
    assert lines[1] == "  KX-214: REJECTED"
    assert lines[2].startswith("    1. Back-calculated standards within tolerance")
    assert "Proposed, not applied: range 2 to 1000 gives ACCEPTED." in plain
    assert "--range 'KX-214:2..1000'" in plain
    assert "Run!D9: bubble" in plain
    coloured = verdict_text(document, colour=True)
    assert "\x1b[1;31mREJECTED\x1b[0m" in coloured  # the word is there, the colour only helps


def test_workbook_bytes_do_not_depend_on_the_clock(document, monkeypatch):
    # openpyxl stamps the save time into the file and the zip entries carry the clock time;
    # a saved export must not change with either.
    import time as time_module

    first = results_xlsx(document)
    real = time_module.time
    monkeypatch.setattr(time_module, "time", lambda: real() + 3600)
    monkeypatch.setattr(time_module, "localtime", lambda t=None: time_module.gmtime(real() + 7200))
    assert results_xlsx(document) == first
