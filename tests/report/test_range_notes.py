"""The PDF states an applied working range, its reason and the full-range verdict."""

from __future__ import annotations

import pypdf

from calib.checks.narrowing import parse_range
from calib.workflow import check_file, issue_record

ROWS = [(1, 1.6), (1, 1.5), (2, 2.0), (2, 2.02), (5, 5.01), (5, 4.98), (10, 10.02), (10, 9.97),
        (20, 20.1), (20, 19.9), (50, 50.2), (50, 49.8), (100, 100.3), (100, 99.8)]


def test_applied_range_is_shown_with_reason(tmp_path):
    run = tmp_path / "run.csv"
    run.write_text("Analyte,Concentration,Response\n"
                   + "".join(f"A,{x},{y}\n" for x, y in ROWS), encoding="utf-8")
    reason = "level 1 prepared from an expired stock (lab note 14)"
    assessment = check_file(run, profile="bioanalytical", weighting="1/x",
                            ranges=[parse_range(f"2..100={reason}")])
    _, pdf = issue_record(assessment, prepared_by="A. Analyst")
    out = tmp_path / "r.pdf"
    out.write_bytes(pdf)
    text = " ".join(" ".join(p.extract_text().split()) for p in pypdf.PdfReader(out).pages)
    assert f"Working range applied by the analyst: 2 to 100 ({reason})" in text
    assert "On the full range the curve was:" in text
