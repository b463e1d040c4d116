"""The workbook reader's child process: time and memory limits, panics, and the attribute scan.

The corpus (test_corpus.py) shows every hostile file ending in one line; here the
limits themselves are driven directly, with the parent's own checks switched off so
that the child meets the file: a table that is never closed makes the parser spin
(the time limit ends it), a stray cell makes it ask for gigabytes (the memory limit
ends it), a cut compound file makes it panic (its Rust message is never shown).
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from starlette.testclient import TestClient

from calib.errors import InputError
from calib.io import read_run, sandbox
from calib.io.files import load_file
from calib.io.sheetscan import Extent, OdsScanner, XlsxScanner, column_letters
from calib.web import create_app
from calib.web.security import CSRF_FIELD
from tests.robustness.test_corpus import BAD, corpus


@pytest.fixture(params=["forked", "script"])
def child_kind(request, monkeypatch):
    """Each limit is driven through both kinds of child: a forked copy of this process (the
    command line) and a new interpreter running the child script (threads, or no fork)."""
    if request.param == "script":
        monkeypatch.setattr(sandbox, "_can_fork", lambda: False)
    elif not sandbox._can_fork():
        pytest.skip("this platform (or this test process's threads) gives no forked child")
    return request.param


def _child_only(name: str, **limits: float):
    """Parse a corpus file in the child with the parent's checks switched off."""
    raw = load_file(BAD / name, what="a workbook")
    return sandbox.parse_workbook(raw, what="a workbook", max_rows=10**9, max_cells=10**15,
                                  checks=lambda: None)


def test_a_parser_that_spins_is_stopped_at_the_processor_time_limit(child_kind, monkeypatch):
    # calamine loops on this .ods (table never closed; checked by hand, 10 s without end).
    # One processor second, and a wall clock far beyond it: however busy the machine,
    # the processor-time limit (RLIMIT_CPU, POSIX setrlimit) is what ends the spin.
    monkeypatch.setattr(sandbox, "BASE_SECONDS", 0.5)
    monkeypatch.setattr(sandbox, "_WALL_FACTOR", 60.0)
    started = time.monotonic()
    with pytest.raises(InputError) as caught:
        _child_only("ods_table_never_closed.ods")
    assert time.monotonic() - started < 60
    assert str(caught.value) == (
        f"{BAD / 'ods_table_never_closed.ods'}: cannot be read as a workbook (the reader used "
        f"up the 1 s of processor time allowed for a file of this size, going round data it "
        f"could not finish: the file is damaged or not what its name says); expected a "
        f"workbook saved by a spreadsheet program"
    )


def test_the_wall_clock_allows_four_times_the_processor_time():
    # 15 s of processor time plus 1 s per MB (rounded up to the whole seconds RLIMIT_CPU
    # counts), and four times that on the wall clock.
    for size, cpu in ((0, 15), (2_000_000, 17), (2_000_001, 18), (20 * 1024**2, 36)):
        limits = sandbox.limits_for(size)
        assert (limits.cpu_seconds, limits.wall_seconds) == (cpu, 4.0 * cpu)
        assert limits.memory == 1024**3 + 24 * size


def _waiting_child(child_kind, monkeypatch, tmp_path, *, wait: float, then_read: bool):
    """A child that waits ``wait`` s without computing (a machine too busy to run it), then
    reads the workbook for real or goes on waiting."""
    if child_kind == "forked":
        from calib.io import _calamine_child

        real = _calamine_child._stream_book

        def slow(*args):
            time.sleep(wait)
            if not then_read:
                time.sleep(60)
            return real(*args)

        monkeypatch.setattr(_calamine_child, "_stream_book", slow)
        return
    script = tmp_path / "slow_child.py"
    script.write_text(
        "import runpy, sys, time\n"
        "data = sys.stdin.buffer.read()\n"
        f"time.sleep({wait})\n"
        f"time.sleep({0 if then_read else 60})\n"
        "import io\n"
        "sys.stdin = io.TextIOWrapper(io.BytesIO(data))\n"
        f"sys.argv = [{str(sandbox._CHILD)!r}, *sys.argv[1:]]\n"
        f"runpy.run_path({str(sandbox._CHILD)!r}, run_name='__main__')\n",
        encoding="utf-8")
    monkeypatch.setattr(sandbox, "_CHILD", script)


_HEALTHY = Path(__file__).parents[2] / "sample_runs" / "fernbrook_anions_wide_2026-12-01.xlsx"


def test_a_child_kept_waiting_is_not_said_to_read_a_damaged_file(child_kind, monkeypatch,
                                                                  tmp_path):
    # A loaded machine: the child gets no processor for longer than the wall clock allows.
    _waiting_child(child_kind, monkeypatch, tmp_path, wait=60, then_read=False)
    monkeypatch.setattr(sandbox, "limits_for", lambda size: sandbox.Limits(1024**3 + 24 * size,
                                                                            1, 0.5))
    raw = load_file(_HEALTHY, what="a workbook")
    started = time.monotonic()
    with pytest.raises(InputError) as caught:
        sandbox.parse_workbook(raw, what="a workbook", max_rows=10**6, max_cells=10**9,
                               checks=lambda: None)
    assert time.monotonic() - started < 5
    assert str(caught.value) == (
        f"{_HEALTHY}: was not read in time: the workbook reader was stopped after 0.5 s, the wait "
        f"allowed for a file of this size, before it had used its 1 s of processor time, so the "
        f"machine was too busy to finish it (which says nothing against the file); try again, "
        f"when the machine is less busy"
    )
    assert "damaged" not in str(caught.value)


def test_a_child_slower_on_the_wall_clock_than_its_processor_limit_still_reads(
        child_kind, monkeypatch, tmp_path):
    # Before, the wall clock was the processor limit (then 1 s here): a healthy file read by
    # a child kept waiting 1.2 s was refused as damaged.  Now it reads, the same as at once.
    _waiting_child(child_kind, monkeypatch, tmp_path, wait=1.2, then_read=True)
    monkeypatch.setattr(sandbox, "BASE_SECONDS", 0.9)
    raw = load_file(_HEALTHY, what="a workbook")
    book, _ = sandbox.parse_workbook(raw, what="a workbook", max_rows=10**6, max_cells=10**9,
                                     checks=lambda: None)
    assert sandbox.limits_for(len(raw.data)).cpu_seconds == 1
    monkeypatch.undo()
    at_once, _ = sandbox.parse_workbook(raw, what="a workbook", max_rows=10**6,
                                        max_cells=10**9, checks=lambda: None)
    assert book == at_once and book.worksheets


def test_a_parser_that_asks_for_too_much_memory_is_stopped(child_kind):
    # One cell at XFD1048576: a dense grid of 1,048,576 × 16,384 cells (common practice of
    # spreadsheet readers; the issue measured a request of 549,755,813,888 bytes).
    with pytest.raises(InputError) as caught:
        _child_only("stray_cell_attributes_in_another_order.xlsx")
    assert "reading it needed more than the 1,024 MB of memory calib allows" in str(caught.value)


def test_panic_text_never_reaches_the_message(child_kind, capfd):
    # Cut at 6,656 bytes, the compound file makes calamine panic (found by cutting the sample
    # .xls at every 512 bytes); the parent's own check refuses it first, so the child is
    # driven alone here.
    with pytest.raises(InputError) as caught:
        _child_only("truncated_xls_where_the_reader_panics.xls")
    message = str(caught.value)
    assert message.endswith("cannot be read as a workbook (the reader stopped at data it could "
                            "not follow; the file is damaged); expected a workbook saved by a "
                            "spreadsheet program")
    out, err = capfd.readouterr()
    assert "panicked" not in out + err + message and "cfb.rs" not in out + err + message


def test_the_child_is_stopped_when_the_parent_refuses(monkeypatch):
    # The parent's checks run while the child parses; a refusal there ends the child at once.
    children = []
    original = sandbox._Child

    def keep(*args, **kwargs):
        children.append(original(*args, **kwargs))
        return children[-1]

    monkeypatch.setattr(sandbox, "_Child", keep)
    with pytest.raises(InputError, match="not well formed"):
        read_run(BAD / "ods_table_never_closed.ods")
    assert children and children[0].process.poll() is not None


def test_a_reader_in_a_thread_gets_a_script_child_and_the_same_run(tmp_path):
    # A forked copy of a process with other threads could wait forever for a lock one of
    # them held at the fork (POSIX fork(): only the calling thread is copied), so a read
    # from a thread (the web server's) starts the child script; both give the same run.
    import threading

    from calib.io.workbook import WorkbookReader

    path = Path(__file__).parents[2] / "sample_runs" / "fernbrook_anions_wide_2026-12-01.xlsx"
    in_main = read_run(path)
    found = {}

    def read() -> None:
        found["can_fork"] = sandbox._can_fork()
        found["run"] = WorkbookReader().read(path)

    thread = threading.Thread(target=read)
    thread.start()
    thread.join()
    assert found["can_fork"] is False
    assert found["run"].points == in_main.points


def test_the_answer_may_hold_only_plain_values():
    # Only lists, strings, numbers and dates are unpickled from the child (pickle docs: a
    # crafted pickle can run code on load; find_class is the documented way to refuse it).
    import io
    import os
    import pickle

    crafted = pickle.dumps(os.getcwd.__call__)
    with pytest.raises(pickle.UnpicklingError, match="is not a cell value"):
        sandbox._PlainValues(io.BytesIO(crafted)).load()


# ------------------------------------------------------------------ the attribute scan

_QUOTES = st.sampled_from(['"', "'"])
_SPACE = st.sampled_from(["", " ", "\t", "\n ", "  "])
_PREFIX = st.sampled_from(["", "x:", "ss:"])


@st.composite
def _sheet(draw):
    """Sheet XML with cells at random positions, attributes in any order and spelling."""
    prefix = draw(_PREFIX)
    cells = draw(st.lists(st.tuples(st.integers(1, 1_048_576), st.integers(1, 16_384)),
                          min_size=1, max_size=6))
    parts = []
    for row, column in cells:
        q = draw(_QUOTES)
        ref = f"{column_letters(column)}{row}"
        if draw(st.booleans()):
            ref = "".join(f"&#{ord(ch)};" if draw(st.booleans()) else ch for ch in ref)
        r_attr = f"r{draw(_SPACE)}={draw(_SPACE)}{q}{ref}{q}"
        others = ['t="n"', f's="{draw(st.sampled_from(["0", ">", "1"]))}"']
        attributes = draw(st.permutations([r_attr, *others]))
        row_attributes = draw(st.permutations([f'r="{row}"', 'spans="1:1"']))
        parts.append(f"<{prefix}row {' '.join(row_attributes)}><{prefix}c "
                     f"{' '.join(attributes)}><{prefix}v>1</{prefix}v></{prefix}c></{prefix}row>")
    farthest = (max(r for r, _ in cells), max(c for _, c in cells))
    return "".join(parts).encode(), farthest


@settings(max_examples=300, deadline=None)
@given(sheet=_sheet(), cut=st.integers(1, 400), cells=st.integers(1, 10**10))
def test_the_scan_never_lets_a_sheet_past_the_limit(sheet, cut, cells):
    # Whatever the spelling and wherever the chunks are cut, a sheet whose farthest cell
    # makes a grid of more than `cells` cells is seen to (ECMA-376 Part 1, §18.3.1.4 c and
    # §18.3.1.73 row: r is the cell reference; XML 1.0 §2.3/§4.1 allow either quote, white
    # space around = and character references in attribute values).
    data, (rows, columns) = sheet
    scanner = XlsxScanner(rows=2_000_000, cells=cells)
    for start in range(0, len(data), cut):
        scanner.feed(data[start : start + cut])
    extent = scanner.close()
    if rows * columns > cells:
        assert extent.rows * max(extent.columns, 1) > cells
    assert extent.rows <= max(rows, 1) * 10 and extent.columns <= max(columns, 26)


@settings(max_examples=200, deadline=None)
@given(sheet=_sheet())
def test_the_general_scan_reads_exactly_what_the_sheet_names(sheet):
    # Near the limit (cells=1) every part takes the general scan, which is exact.
    data, (rows, columns) = sheet
    scanner = XlsxScanner(cells=1)
    scanner.feed(data)
    # A row element written without r is the next row, so the count of row elements counts.
    assert scanner.close() == Extent(max(rows, data.count(b"row ")), columns)


def test_the_ods_scan_counts_repeats_of_cells_with_content_only():
    # ODF 1.2 Part 1 §9.1.3 table:number-rows-repeated, §9.1.4 table:number-columns-repeated.
    scanner = OdsScanner()
    scanner.feed(b'<t:table xmlns:t="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
                 b'xmlns:o="urn:oasis:names:tc:opendocument:xmlns:office:1.0">'
                 b'<t:table-row t:number-rows-repeated="2"><t:table-cell t:number-columns-'
                 b'repeated="3" o:value-type="float" o:value="1"/></t:table-row>'
                 b'<t:table-row t:number-rows-repeated="1048570"><t:table-cell '
                 b't:number-columns-repeated="1024"/></t:table-row></t:table>')
    assert scanner.close() == Extent(rows=2, columns=3)


def test_the_ods_scan_refuses_a_document_type():
    # Entity definitions (the "billion laughs") need a DOCTYPE; none is accepted.
    scanner = OdsScanner()
    with pytest.raises(ValueError, match="declares a document type"):
        scanner.feed(b'<?xml version="1.0"?><!DOCTYPE d [<!ENTITY a "x">]><d>&a;</d>')


@pytest.mark.parametrize("variant", ["spans first", "prefix", "quotes", "reference"])
def test_a_workbook_with_a_stray_cell_is_refused_however_it_is_written(tmp_path, variant):
    tails = {
        "spans first": b'<row spans="1:1" r="1048576"><c t="n" r="XFD1048576"><v>1</v></c></row>',
        "prefix": b'<x:row spans="1:1" r="1048576"><x:c t="n" r="XFD1048576"><x:v>1</x:v>'
                  b'</x:c></x:row>',
        "quotes": b"<row r='1048576'><c t='n' r = 'XFD1048576'><v>1</v></c></row>",
        "reference": b'<row r="1048576"><c r="&#x58;FD1048576"><v>1</v></c></row>',
    }
    prefix = b"x:" if variant == "prefix" else b""
    path = tmp_path / "stray.xlsx"
    path.write_bytes(corpus._stray_cell_written(tails[variant], prefix=prefix))
    with pytest.raises(InputError) as caught:
        read_run(path)
    assert str(caught.value) == (
        f"{path}: a sheet of the workbook reaches row 1,048,576 and column 16,384 (cell "
        f"XFD1048576); calib reads at most 40,000,000 cells per sheet (delete stray cells far "
        f"from the table, or split the export)"
    )


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(sheet=_sheet())
def test_generated_workbooks_give_a_run_or_an_input_error(sheet, tmp_path_factory):
    # Through the whole reader, child process included: never an abort, a hang or any
    # exception but InputError.
    data, _ = sheet
    header = (b'<row r="1"><c r="A1" t="inlineStr"><is><t>Conc</t></is></c><c r="B1" '
              b't="inlineStr"><is><t>Area</t></is></c></row>')
    path = tmp_path_factory.mktemp("generated") / "generated.xlsx"
    path.write_bytes(corpus._hand_xlsx(corpus._SHEET_OPEN.replace(
        b"main\">", b"main\" xmlns:x=\"http://schemas.openxmlformats.org/spreadsheetml/2006/"
                    b"main\" xmlns:ss=\"http://schemas.openxmlformats.org/spreadsheetml/2006/"
                    b"main\">") + b"<sheetData>" + header + data + b"</sheetData></worksheet>"))
    started = time.monotonic()
    try:
        read_run(path)
    except InputError as exc:
        assert "Traceback" not in str(exc) and "panicked" not in str(exc)
    # Bounded by the wall clock allowed (a loaded machine may take long, never for ever).
    assert time.monotonic() - started < sandbox.limits_for(path.stat().st_size).wall_seconds + 10


# ------------------------------------------------------------------ the web page survives

def _token(html: str) -> str:
    found = re.search(rf'name="{CSRF_FIELD}" value="([^"]+)"', html)
    assert found, "the page has no form token"
    return found.group(1)


def test_the_web_page_answers_after_every_corpus_file_is_uploaded(tmp_path):
    files = sorted(p for p in BAD.iterdir() if p.name != "make_corpus.py")
    assert len(files) >= 60
    app = create_app(archive=tmp_path / "records.sqlite")
    with TestClient(app, base_url="http://127.0.0.1:8750", raise_server_exceptions=False) as c:
        token = _token(c.get("/").text)
        for path in files:
            started = time.monotonic()
            r = c.post("/check", data={CSRF_FIELD: token, "profile": "default"},
                       files={"run": (path.name, path.read_bytes())})
            assert r.status_code < 500, (path.name, r.status_code, r.text[-300:])
            assert "Traceback" not in r.text and "panicked" not in r.text, path.name
            assert time.monotonic() - started < 60, path.name
            assert c.get("/").status_code == 200, path.name


def test_the_dimension_of_a_sheet_counts_as_its_reach():
    # ECMA-376 Part 1, §18.3.1.35 dimension: ref is the used range, A1:XFD1048576 here.
    scanner = XlsxScanner()
    scanner.feed(b'<worksheet><x:dimension ref="A1:XFD1048576"/><sheetData><row r="1">'
                 b'<c r="A1"><v>1</v></c></row></sheetData></worksheet>')
    assert scanner.close() == Extent(rows=1_048_576, columns=16_384)


def test_one_tag_longer_than_a_megabyte_is_refused():
    scanner = XlsxScanner()
    with pytest.raises(ValueError, match="one XML tag runs past 1,000,000 bytes"):
        scanner.feed(b'<c t="n"' + b" " * 1_100_000)


@pytest.mark.parametrize("reference", [b"$XFD$7", b"xfd7", b" XFD7", b"XFD7"])
def test_a_plainly_spelt_part_with_any_cell_reference_is_bounded(reference):
    # The quick path of the scan (every r spelt r="...") must still see column XFD (16,384)
    # however its reference is written: with $ signs, small letters or a leading space, the
    # spellings a spreadsheet reader may tolerate (ECMA-376 Part 1, §18.3.1.4 c: r is an A1
    # reference).
    scanner = XlsxScanner(cells=10**6)
    scanner.feed(b'<row r="7"><c r="A7"><v>1</v></c><c r="' + reference + b'"><v>1</v></c></row>')
    assert scanner.close() == Extent(rows=7, columns=16_384)


def test_a_sheet_asked_for_is_the_only_one_parsed(child_kind, tmp_path):
    # Two sheets; asked for one (by name in another case, or by index), the child sends the
    # cells of that one only: the other is listed but never parsed.
    import openpyxl

    path = tmp_path / "two.xlsx"
    book = openpyxl.Workbook()
    book.active.title = "Notes"
    book.active.append(["free text", 1.0])
    second = book.create_sheet("Run 2")
    second.append(["Conc", "Area"])
    second.append([1.0, 10.0])
    book.save(path)
    raw = load_file(path, what="a workbook")
    for asked in ("run 2", 1):
        data, _ = sandbox.parse_workbook(raw, what="a workbook", max_rows=10**6,
                                         max_cells=10**9, checks=lambda: None, sheet=asked)
        assert data.names == ["Notes", "Run 2"]
        assert data.sheets["Notes"].rows is None
        assert data.sheets["Run 2"].rows == [["Conc", "Area"], [1.0, 10.0]]
    every, _ = sandbox.parse_workbook(raw, what="a workbook", max_rows=10**6, max_cells=10**9,
                                      checks=lambda: None)
    assert every.sheets["Notes"].rows == [["free text", 1.0]]
    nothing, _ = sandbox.parse_workbook(raw, what="a workbook", max_rows=10**6,
                                        max_cells=10**9, checks=lambda: None, sheet="Other")
    assert all(sheet.rows is None for sheet in nothing.sheets.values())
