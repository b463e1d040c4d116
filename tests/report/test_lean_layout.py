"""The record's own table, text and chart drawing (calib.report.grid, text, blocks, vector).

These replace reportlab's general Table, Paragraph and drawing renderer in the
record for speed; the checks here are that nothing is lost on the way: every
word printed in order, lines within their column, tables split between rows
with the header repeated, charts' labels present, and the same bytes whatever
was rendered before in the process.
"""

from __future__ import annotations

import io

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pypdf import PdfReader
from reportlab.graphics.shapes import Circle, Drawing, String
from reportlab.lib.pagesizes import A4
from reportlab.platypus import SimpleDocTemplate

from calib.report.blocks import SideBySide, TextBlock, plain
from calib.report.charts import CurveBand, PlotPoint, calibration_chart
from calib.report.styles import BOLD, REGULAR, get_styles, register_fonts
from calib.report.tables import TableMaker
from calib.report.text import measure, wrap_runs, wrap_words
from calib.report.vector import ChartFlowable, as_flowable

register_fonts()


def render(story) -> bytes:
    buffer = io.BytesIO()
    SimpleDocTemplate(buffer, pagesize=A4, invariant=1).build(list(story))
    return buffer.getvalue()


def pdf_text(pdf: bytes) -> list[str]:
    return [page.extract_text() for page in PdfReader(io.BytesIO(pdf)).pages]


words = st.text(alphabet=st.characters(categories=("L", "N", "P")), min_size=1, max_size=30)


@settings(max_examples=200, deadline=None)
@given(st.lists(words, min_size=1, max_size=40), st.floats(20, 300))
def test_wrapping_keeps_every_word_in_order_within_the_width(items, width):
    text = " ".join(items)
    lines = wrap_words(text, REGULAR, 7, width)
    # Words come back in order; only a word wider than the line is cut (between characters).
    assert "".join(line for line, _ in lines).replace(" ", "") == text.replace(" ", "")
    for line, w in lines:
        assert w == pytest.approx(measure(line, REGULAR, 7))
        assert w <= width + 1e-9 or len(line) == 1


def test_a_newline_starts_a_new_line_and_mixed_faces_keep_their_face():
    assert [line for line, _ in wrap_words("a\nb", REGULAR, 7, 500)] == ["a", "b"]
    lines = wrap_runs((("Rejected.", BOLD), (" intercept", REGULAR)), 9, 500)
    assert [(w, f) for w, f, _ in lines[0]] == [("Rejected.", BOLD), ("intercept", REGULAR)]


def test_table_cells_print_as_written_in_row_order():
    maker = TableMaker(480)
    rows = [["Cell", "Reason"], ["D9", "<b>air bubble</b> & re-injected"], ["D10", "ok"]]
    text = pdf_text(render([maker.grid(rows, [0.3, 0.7])]))[0]
    assert "<b>air bubble</b> & re-injected" in text  # never read as markup
    assert text.index("D9") < text.index("D10")


def test_a_long_table_splits_between_rows_and_repeats_its_header():
    maker = TableMaker(480)
    rows = [["Level", "Response"]] + [[str(i), f"{i * 0.125:.3f}"] for i in range(200)]
    pages = pdf_text(render([maker.grid(rows, [0.5, 0.5], right=[1])]))
    assert len(pages) >= 3
    assert all(page.startswith("Level Response") for page in pages)
    printed = [line.split()[0] for page in pages for line in page.splitlines()[1:]]
    assert printed == [str(i) for i in range(200)]  # every row once, in order


def test_spanned_and_hand_signature_rows():
    maker = TableMaker(400)
    table = maker.grid([["Label", "A wide value across the row", "", ""], ["a", "b", "c", "d"]],
                       [0.25] * 4, header=False, spans=[0], tall_rows=[1])
    first, second = table.rows
    assert [c.span for c in first.cells] == [1, 3]  # the covered cells are dropped
    assert second.height > first.height  # room to sign by hand
    assert "A wide value across the row" in pdf_text(render([table]))[0]


def test_text_block_splits_across_pages_without_losing_lines():
    story = [plain(f"Line {i} of a long note.", get_styles().body) for i in range(300)]
    story.append(TextBlock([("\n".join(f"row {i}" for i in range(150)), REGULAR)], size=8,
                           leading=11))
    text = "\n".join(pdf_text(render(story)))
    assert all(f"Line {i} of a long note." in text for i in range(300))
    assert all(f"row {i}\n" in text + "\n" for i in range(150))


def test_chart_labels_and_rotated_title_reach_the_page():
    points = [PlotPoint(x, 2 * x + 0.1, x != 3) for x in (1.0, 2.0, 3.0, 4.0)]
    band = CurveBand((1.0, 4.0), (2.1, 8.1), (0.2, 0.3), 0.95, (0.5, 0.6))
    drawing = calibration_chart(points, band, width=240, height=190,
                                x_title="Concentration (mg/L)", y_title="Response (µS·min)")
    flowable = as_flowable(drawing)
    assert isinstance(flowable, ChartFlowable)
    text = pdf_text(render([SideBySide([[plain("Plot", get_styles().head_cell), flowable]],
                                       [250])]))[0]
    for label in ("Concentration (mg/L)", "Response (µS·min)", "Standard excluded",
                  "95 % confidence band of the mean"):
        assert label in text


def test_a_drawing_with_other_shapes_goes_to_reportlabs_renderer():
    drawing = Drawing(100, 60)
    drawing.add(Circle(50, 30, 10))
    drawing.add(String(10, 10, "kept"))
    flowable = ChartFlowable(drawing)
    assert not flowable._simple
    assert "kept" in pdf_text(render([flowable]))[0]


def test_pdf_bytes_do_not_depend_on_what_was_rendered_before():
    # Encoded strings are cached per document; a cache leaking across documents would
    # make the second rendering of the same story differ from the first.
    def story(tag):
        maker = TableMaker(480)
        return [plain(f"Record {tag} ÄÖÜ µ σ ≤", get_styles().heading),
                maker.grid([["Name", "Value"], [tag, "1.5 µg/L"]], [0.5, 0.5])]

    first = render(story("alpha"))
    render(story("ßeta Łukasiewicz Nguyễn"))
    assert render(story("alpha")) == first


def test_a_row_taller_than_a_page_continues_on_the_next_pages():
    # A spreadsheet cell holds up to 32,767 characters; a reason or note that long makes
    # a row taller than any page, which must continue page after page, not stop the record.
    maker = TableMaker(480)
    words = [f"w{i}" for i in range(4000)]
    rows = [["Cell", "Reason"], ["D9", " ".join(words)], ["D10", "ok"]]
    pages = pdf_text(render([maker.grid(rows, [0.1, 0.9])]))
    assert len(pages) >= 3
    assert all(page.startswith("Cell Reason") for page in pages)  # header on every page
    printed = " ".join(pages).split()
    found = [w for w in printed if w.startswith("w") and w[1:].isdigit()]
    assert found == words  # every word once, in order
    assert "D10" in pages[-1]


def test_a_row_that_fits_a_page_moves_whole_to_the_next_page():
    maker = TableMaker(480)
    filler = [["Level", "Response"]] + [[str(i), "1.0"] for i in range(60)]
    block = ["D9", "\n".join(f"line {i}" for i in range(20))]  # about 170 points high
    table = maker.grid([*filler, block], [0.5, 0.5])
    pages = pdf_text(render([table]))
    holding = [n for n, page in enumerate(pages) if "line 0" in page or "line 19" in page]
    assert len(holding) == 1  # both ends of the row on one page: not cut
