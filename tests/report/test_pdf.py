"""The PDF record read back with pypdf: text, footer, attachment, reproducibility."""

from __future__ import annotations

import io
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
import statsmodels.api as sm
from pypdf import PdfReader

from calib.report import ATTACHMENT_NAME, load_template, write_pdf
from calib.report.formatting import format_number, format_p
from tests.report.conftest import (
    PREPARED_BY,
    ident,
    make_record,
    nitrate_standards,
    pdf_pages_text,
    render,
    unfitted_curve,
)

REPO = Path(__file__).resolve().parents[2]


def _all_text(pdf: bytes) -> str:
    """All text, runs of white space as one space (paragraphs wrap anywhere)."""
    return " ".join(" ".join(pdf_pages_text(pdf)).split())


def test_statistics_in_the_text_match_statsmodels(nitrate_pdf):
    # The record's numbers come from calib's fit; statsmodels OLS on the same standards
    # (those used in the fit) must give the figures the PDF prints, to the digits printed.
    used = [s for s in nitrate_standards() if s.excluded is None]
    ols = sm.OLS([s.y for s in used], sm.add_constant([s.x for s in used])).fit()
    text = _all_text(nitrate_pdf)
    assert format_number(ols.params[1], 6) in text  # slope estimate
    assert format_number(ols.bse[1], 4) in text  # its standard error
    assert format_number(ols.params[0], 6) in text  # intercept
    assert format_p(ols.pvalues[0]) in text  # intercept p-value, e.g. 0.428
    low, high = ols.conf_int(0.05)[1]
    assert format_number(low, 6) in text and format_number(high, 6) in text


def test_p_values_print_in_plain_or_scientific_form(nitrate_pdf):
    text = _all_text(nitrate_pdf)
    # The slope's p-value is astronomically small: scientific, two digits.
    assert "e-4" in text or "e-3" in text
    assert "nan" not in text.lower()


def test_text_names_the_checks_verdict_cells_and_record(nitrate_record, nitrate_pdf):
    text = _all_text(nitrate_pdf)
    _, digest, record_id = ident(nitrate_record)
    curve = nitrate_record["check"]["curves"][0]
    for check in curve["checks"]:
        assert check["title"] in text
    assert "Accepted." in text
    # Every cell is on sheet Run: the table names the sheet once and lists the cells.
    assert "Cell in Run" in text
    assert re.search(r"\bC7\b", text) and re.search(r"\bC24\b", text)
    assert "Air bubble in the sample loop" in text
    assert record_id in text and digest in text
    assert "Nitrate-N" in text and "nitrate_2026-11-30.xlsx" in text


def test_special_characters_and_non_ascii_names_extract(nitrate_pdf):
    text = _all_text(nitrate_pdf)
    assert "µS·min" in text
    assert "±15 %" in text
    assert "≤ 0.05" in text
    assert "r ≥ 0.995" in text
    assert "σ̂" in text or "σ" in text
    assert PREPARED_BY in text


def test_footer_on_every_page(nitrate_record, nitrate_pdf):
    _, digest, record_id = ident(nitrate_record)
    pages = pdf_pages_text(nitrate_pdf)
    assert len(pages) >= 2
    for number, page in enumerate(pages, start=1):
        assert f"Record {record_id} · digest {digest[:16]} · page {number} of {len(pages)}" in page
    assert "page 1 of" in pages[0]


def test_record_json_is_attached(nitrate_record, nitrate_pdf):
    data, _, _ = ident(nitrate_record)
    attachments = PdfReader(io.BytesIO(nitrate_pdf)).attachments
    assert list(attachments) == [ATTACHMENT_NAME]
    assert attachments[ATTACHMENT_NAME] == [data]


def test_two_renders_are_byte_identical(nitrate_record, nitrate_pdf):
    assert render(nitrate_record) == nitrate_pdf


def test_render_in_a_fresh_process_gives_the_same_bytes(nitrate_record, nitrate_pdf, tmp_path):
    # The record read back from its canonical JSON (keys sorted), in another interpreter
    # with another hash seed and a SOURCE_DATE_EPOCH (which reportlab would otherwise use
    # for the PDF dates and identifier), must give the very same bytes.
    data, digest, record_id = ident(nitrate_record)
    (tmp_path / "record.json").write_bytes(data)
    script = (
        "import json, sys\n"
        "from calib.report import write_pdf\n"
        "data = open(sys.argv[1], 'rb').read()\n"
        "pdf = write_pdf(json.loads(data), digest=sys.argv[2], record_id=sys.argv[3],"
        " attachment=data)\n"
        "open(sys.argv[4], 'wb').write(pdf)\n"
    )
    env = dict(os.environ, PYTHONHASHSEED="123", SOURCE_DATE_EPOCH="1700000000",
               PYTHONPATH=str(REPO))
    out = tmp_path / "again.pdf"
    subprocess.run([sys.executable, "-c", script, str(tmp_path / "record.json"), digest,
                    record_id, str(out)], check=True, env=env, cwd=tmp_path)
    assert out.read_bytes() == nitrate_pdf


def test_pdf_dates_are_the_record_creation_time(nitrate_pdf):
    info = PdfReader(io.BytesIO(nitrate_pdf)).metadata
    assert info["/CreationDate"] == "D:20261201093000+00'00'"
    # No lab template set up: the record never borrows the demo lab's name (issue 16, item 6).
    assert info["/Author"] == "Laboratory not configured"


def test_no_machine_paths_in_the_pdf(nitrate_pdf):
    # Font files are found on disk; their path must not leak into (and vary) the bytes.
    assert b"report_templates" not in nitrate_pdf
    assert b"DejaVuSans.ttf" not in nitrate_pdf


def test_multi_analyte_record_starts_with_a_summary(nitrate, fluoride, kx214):
    record = make_record([nitrate, fluoride, kx214])
    pages = pdf_pages_text(render(record))
    first = pages[0]
    assert "Analytes in this run" in first
    assert "Rejected. 3 analytes; accepted: 2, rejected: 1." in first
    for name in ("Nitrate-N", "Fluoride", "KX-214"):
        assert name in first
    # Fluoride's contaminated blank: its failing check is named on the summary page.
    assert "Intercept does not differ significantly from zero" in first
    assert format_number(fluoride[0]["coefficients"]["slope"]["estimate"], 5) in first
    # Each analyte section starts on its own page with its title.
    starts = [i for i, p in enumerate(pages) if "Calibration record: " in p]
    assert len(starts) == 3 and starts[0] == 1


def test_single_analyte_record_has_no_summary(nitrate_pdf):
    assert "Analytes in this run" not in pdf_pages_text(nitrate_pdf)[0]


def test_rejected_verdict_names_the_failing_check(fluoride):
    text = _all_text(render(make_record([fluoride])))
    assert "Rejected. Failed: Intercept does not differ significantly from zero." in text
    # Its p-value is tiny: printed like 2.3e-23, never as 0.
    assert format_p(fluoride[0]["coefficients"]["intercept"]["p_value"]) in text
    assert "e-23" in text


def test_weighted_wide_range_curve_notes_its_axes(kx214):
    text = _all_text(render(make_record([kx214])))
    assert "The concentration axes are logarithmic" in text
    assert "weighted the standards by 1/x²" in text
    assert "Internal standard area 45 % below the batch mean" in text


def test_unfitted_curve_renders_dashes_not_nan(nitrate):
    record = make_record([(unfitted_curve("Nitrite-N"), None), nitrate])
    text = _all_text(render(record))
    assert "The curve could not be fitted" in text
    assert "Only one level: no curve can be fitted." in text
    assert "Cell in Run" in text and re.search(r"\bE9\b", text)
    assert "—" in text
    assert re.search(r"\b(nan|inf)\b", text, flags=re.IGNORECASE) is None
    assert "No residuals: the curve was not fitted." in text


def test_signatures_fill_the_sign_off_rows(nitrate):
    signatures = [
        {"role": "prepared", "name": PREPARED_BY, "signed_at": "2026-12-01T09:30:00Z",
         "meaning": "Prepared: I evaluated this calibration"},
        {"role": "reviewed", "name": "Tomasz Øvergaard", "signed_at": "2026-12-02T14:05:00Z",
         "meaning": "Reviewed: data, fit and checks checked"},
    ]
    text = _all_text(render(make_record([nitrate], signatures=signatures)))
    assert "Tomasz Øvergaard" in text
    assert "2026-12-02 14:05:00 UTC" in text
    assert "Reviewed: data, fit and checks checked" in text
    # Approval has not happened: the row is blank but carries the template's meaning.
    assert "Approved: this calibration may be used to report results" in text


def test_markup_characters_in_record_text_print_as_written(nitrate):
    curve, details = nitrate
    curve = dict(curve, analyte="Nitrate <as N> & co")
    record = make_record([(curve, dict(details, analyte=curve["analyte"]))])
    assert "Nitrate <as N> & co" in _all_text(render(record))


def test_letter_template_and_hidden_sections(nitrate_record, tmp_path):
    path = tmp_path / "lab.toml"
    path.write_text(
        '[lab]\nname = "Kestrel Bioanalytical"\naddress = ["Hangar Road 9"]\n'
        '[page]\nsize = "Letter"\n[show]\nstandards = false\nresidual_plot = false\n',
        encoding="utf-8",
    )
    pdf = render(nitrate_record, template=load_template(path))
    reader = PdfReader(io.BytesIO(pdf))
    box = reader.pages[0].mediabox
    assert (float(box.width), float(box.height)) == (612.0, 792.0)
    text = _all_text(pdf)
    assert "Kestrel Bioanalytical" in text and "Fernbrook" not in text
    assert "Run!C7" not in text and "Residuals (response" not in text
    assert "Response against concentration" in text


def test_attachment_must_be_bytes(nitrate_record):
    with pytest.raises(TypeError, match="attachment must be bytes; got str"):
        write_pdf(nitrate_record, digest="0" * 64, record_id="CR-0", attachment="{}")


def test_sections_are_made_only_as_the_layout_reaches_them(nitrate, fluoride, kx214,
                                                           monkeypatch):
    # Issue 8: a record of hundreds of analytes must not hold every analyte's tables and
    # charts at once.  Each section is asked for only after the one before it was drawn.
    from reportlab.platypus import Flowable

    import calib.report.pdf as pdf_module

    drawn: list[int] = []
    asked: list[int] = []

    class Drawn(Flowable):
        def __init__(self, index):
            super().__init__()
            self.index = index

        def wrap(self, *_):
            return 0, 0

        def draw(self):
            drawn.append(self.index)

    real = pdf_module.story_sections

    def counted(*args, **kwargs):
        for i, section in enumerate(real(*args, **kwargs)):
            asked.append(len(drawn))
            yield [*section, Drawn(i)]

    monkeypatch.setattr(pdf_module, "story_sections", counted)
    pdf = render(make_record([nitrate, fluoride, kx214]))
    assert asked == [0, 1, 2, 3]  # summary, then three analytes: each after the last was drawn
    assert drawn == [0, 1, 2, 3]
    assert len(pdf_pages_text(pdf)) >= 4


def test_a_long_analyte_name_is_shortened_in_the_page_header(nitrate):
    # Found trying a 300-character name: the header's right side ran over the lab's name.
    curve, details = nitrate
    name = "N" * 300
    record = make_record([(dict(curve, analyte=name), dict(details, analyte=name))])
    first = pdf_pages_text(render(record))[0]
    header = next(line for line in first.splitlines() if "Calibration record ·" in line)
    assert header.endswith("…") and len(header) < 200
    assert name in first.replace("\n", "")  # the title itself keeps the whole name
