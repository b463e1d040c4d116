"""Every file of the bad-input corpus through ``calib check`` in a child process.

Each run is bounded (30 s wall clock, 2 GB address space) and writes its PDF into an
empty folder.  Unusable files must exit 3 with one line naming the file and saying what
was expected; readable but degenerate files give a verdict with their reasons.  Never a
traceback, never an output file.  The children run in parallel so the corpus stays fast.
"""

from __future__ import annotations

import importlib.util
import multiprocessing
import os
import re
import resource
import subprocess
import sys
import tempfile
import time
import traceback
from dataclasses import dataclass
from pathlib import Path

import pytest

from calib.cli.main import main

BAD = Path(__file__).resolve().parents[1] / "data" / "bad"
ROOT = Path(__file__).resolve().parents[2]
MEMORY = 2 * 1024**3
TIMEOUT = 30


def _generator():
    spec = importlib.util.spec_from_file_location("make_corpus", BAD / "make_corpus.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


corpus = _generator()

UNUSABLE = {
    "empty_file.csv": "the file is empty (0 bytes)",
    "empty_file.xlsx": "the file is empty (0 bytes)",
    "empty_file.ods": "the file is empty (0 bytes)",
    "only_whitespace.csv": "found no cell with content",
    "wrong_extension_workbook_named_csv.csv": "found a NUL byte",
    "wrong_extension_text_named_xlsx.xlsx": "cannot be read as a workbook",
    "wrong_extension_text_named_xls.xls": "cannot be read as a workbook",
    "unsupported_extension.docx": "found the file type '.docx'",
    "html_page_saved_as_xls.xls": "cannot be read as a workbook",
    "gzip_data_named_csv.csv": "found a NUL byte",
    "truncated_workbook.xlsx": "damaged zip archive",
    "corrupted_sheet_member.xlsx": "damaged member xl/worksheets/sheet1.xml",
    "zip_without_a_workbook.xlsx": "cannot be read as a workbook",
    "sheet_xml_is_not_xml.xlsx": "cannot be read as a workbook",
    "shared_string_index_out_of_range.xlsx": "shared strings",
    "password_protected_workbook.xlsx": "the workbook is password-protected (encrypted)",
    "password_protected_workbook_named_xls.xls": "the workbook is password-protected",
    "damaged_compound_file_header.xls": "sector allocation table is missing",
    "compound_file_directory_in_a_circle.xls": "directory chain is broken or runs in a circle",
    "truncated_ods.ods": "damaged zip archive",
    "truncated_xls.xls": "the file is damaged",
    "xml_entity_expansion_bomb.xlsx": "unrecognized entity",
    "stray_cell_in_last_row_and_column.xlsx": "calib reads at most 40,000,000 cells per sheet",
    "headers_only.csv": "has no rows; expected at least one calibration standard",
    "headers_only.xlsx": "has no rows; expected at least one calibration standard",
    "every_value_text.csv": "found the text 'one'; expected a whole number",
    "every_value_text.xlsx": "found the text 'high'; expected the nominal concentration",
    "mixed_units_in_one_column.csv": "found '2000 µg/L', in µg/L; expected mg/L as in row 2",
    "negative_concentrations.csv": "found the negative concentration -1",
    "zero_concentrations_only.csv": "standards at 1 concentration only",
    "one_level.csv": "standards at 1 concentration only",
    "two_levels.csv": "standards at 2 concentrations only",
    "infinite_responses.csv": "found the text 'inf'",
    "infinite_concentration.csv": "found the text 'inf'",
    "huge_exponent_response.csv": "found the text '1e999'; expected a finite number",
    "response_column_of_dates.xlsx": "found the date and time 2026-11-01 09:00:00",
    "formula_cells_without_cached_values.xlsx": "found a formula with no saved result",
    "control_characters_in_analyte_name.csv": "holding the control character U+0007",
    "right_to_left_mark_in_analyte_name.csv": "holding the control character U+202E",
    "nul_bytes_in_text.csv": "found a NUL byte",
    "binary_garbage.csv": "found a NUL byte",
    "bom_in_the_middle.csv": "found the text '\\ufeffNitrate-N' holding the control character "
                             "U+FEFF",
    "no_concentration_column.csv": "no header row naming both a concentration and a response",
    "no_response_column.csv": "no header row naming both a concentration and a response",
    "one_cell_of_150_kb.csv": "cannot be split into cells",
    "ten_thousand_columns.csv": "no header row naming both a concentration and a response",
    "zip_bomb_600_mb_sheet.xlsx": "expands to more than 500,000,000 bytes",
    "two_million_empty_rows.xlsx": "has 2,000,011 rows; calib reads at most 2,000,000",
    "two_million_empty_lines.csv": "has 2,000,011 lines; calib reads at most 2,000,000",
    "one_million_columns.csv": "row 1: the line holds 1,000,000 cells separated by ','; calib "
                               "reads at most 16,384 columns",
    "response_of_1e308_overflows_the_fit.csv": "found the response 1e+308 in "
                                               "response_of_1e308_overflows_the_fit.csv!D4; "
                                               "expected a finite value of magnitude between "
                                               "1e-30 and 1e+30",
    "concentration_of_1e-300.csv": "found the concentration 1e-300 in the row of "
                                   "'concentration_of_1e-300.csv'!D2; expected a finite value",
    "truncated_xls_where_the_reader_panics.xls": "sector allocation table is missing",
    "stray_cell_attributes_in_another_order.xlsx": "reaches row 1,048,576 and column 16,384 "
                                                   "(cell XFD1048576); calib reads at most "
                                                   "40,000,000 cells per sheet",
    "stray_cell_with_namespace_prefix.xlsx": "reaches row 1,048,576 and column 16,384 (cell "
                                             "XFD1048576); calib reads at most 40,000,000",
    "stray_cell_in_single_quotes_with_spaces.xlsx": "reaches row 1,048,576 and column 16,384 "
                                                    "(cell XFD1048576)",
    "stray_cell_written_with_a_character_reference.xlsx": "reaches row 1,048,576 and column "
                                                          "16,384 (cell XFD1048576)",
    "stray_cell_after_a_quoted_closing_bracket.xlsx": "reaches row 1,048,576 and column 16,384 "
                                                      "(cell XFD1048576)",
    "sheet_xml_in_utf16.xlsx": "the sheet xl/worksheets/sheet1.xml is not stored as UTF-8 XML",
    "ods_table_never_closed.ods": "content.xml: the XML is not well formed (mismatched tag",
    "ods_one_cell_repeated_over_a_billion_cells.ods": "reaches row 1,000,011 and column "
                                                      "100,000 (cell EQXD1000011); calib reads "
                                                      "at most 40,000,000 cells per sheet",
}
"""File → part of its one-line message (exit 3)."""

READABLE = {
    "all_responses_equal.csv": ("REJECTED", "0 of 10 standards within"),
    "exact_fit_no_residual.csv": ("ACCEPTED", "the curve passes through every standard"),
    "single_replicate_everywhere.csv": ("Nitrate-N:", "no pure error"),
    "duplicated_standards.csv": ("Nitrate-N:", "Nitrate-N"),
    "nan_responses.csv": ("REJECTED", "min-levels"),
    "error_values_in_responses.xlsx": ("REJECTED", "#DIV/0!"),
    "merged_header_cells.xlsx": ("Nitrate-N:", "Nitrate-N"),
    "windows_line_endings.csv": ("Nitrate-N:", "Nitrate-N"),
    "invalid_utf8.csv": ("Nitrate-N:", "Nitrate-N"),
    "analyte_name_300_characters.csv": ("N" * 300 + ":", "N" * 300),
}
"""Readable but degenerate or merely unusual: file → (verdict text, reason text)."""


@dataclass(frozen=True)
class Outcome:
    code: int
    out: str
    err: str
    written: tuple[str, ...]


def _limit_memory() -> None:
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY, MEMORY))


def _child(path: Path, folder: str) -> None:
    """In a forked child: bounded memory, output to files, ``calib check``, exit with its code."""
    code = 98
    try:
        _limit_memory()
        os.chdir(folder)
        os.environ.pop("CALIB_ARCHIVE", None)
        os.environ["NO_COLOR"] = "1"
        for fd, name in ((1, "stdout.txt"), (2, "stderr.txt")):
            os.dup2(os.open(Path(folder).parent / name, os.O_WRONLY | os.O_CREAT), fd)
        sys.stdout = open(1, "w", encoding="utf-8", closefd=False)  # noqa: SIM115
        sys.stderr = open(2, "w", encoding="utf-8", closefd=False)  # noqa: SIM115
        code = main(["check", str(path), "--full", "--pdf", str(Path(folder, "record.pdf"))])
    except BaseException:  # noqa: BLE001 - anything escaping main is what this test looks for
        traceback.print_exc()
        code = 99
    finally:
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)


def _check_all(files: list[Path], *, at_once: int = 4) -> dict[str, Outcome]:
    """Run ``calib check FILE --pdf`` for every file in forked children, a few at a time.

    Forking after calib and its libraries are imported spares each child the seconds a
    fresh interpreter spends on imports; :func:`test_a_fresh_interpreter_refuses_hostile_files`
    runs the real command line.  Children are forked from this one thread only: forking
    while other threads run can copy a lock one of them holds, and the child then hangs.
    """
    context = multiprocessing.get_context("fork")
    waiting, running, outcomes = list(files), [], {}
    with tempfile.TemporaryDirectory() as top:
        while waiting or running:
            while waiting and len(running) < at_once:
                path = waiting.pop(0)
                folder = Path(top, path.name, "out")
                folder.mkdir(parents=True)
                child = context.Process(target=_child, args=(path, str(folder)))
                child.start()
                running.append((path, folder, child, time.monotonic() + TIMEOUT))
            path, folder, child, deadline = running.pop(0)
            child.join(max(deadline - time.monotonic(), 0))
            if child.is_alive():
                child.kill()
                child.join()
                outcomes[path.name] = Outcome(-9, "", f"timed out after {TIMEOUT} s", ())
                continue
            read = (lambda name, f=folder: Path(f.parent, name).read_text(
                encoding="utf-8", errors="replace") if Path(f.parent, name).exists() else "")
            outcomes[path.name] = Outcome(child.exitcode, read("stdout.txt"),
                                          read("stderr.txt"), tuple(sorted(os.listdir(folder))))
    return outcomes


@pytest.fixture(scope="session")
def outcomes(tmp_path_factory) -> dict[str, Outcome]:
    # calib imports its heavy libraries inside the commands: import them once, before forking.
    for module in ("calib.workflow", "calib.record", "calib.report.pdf", "calib.export",
                   "calib.cli.render", "calib.io.detail", "openpyxl"):
        importlib.import_module(module)
    large = corpus.write_large(tmp_path_factory.mktemp("bad-large"))
    files = sorted(p for p in BAD.iterdir() if p.name != "make_corpus.py") + large
    outcomes = _check_all(files)
    return {p.name: outcomes[p.name] for p in files}


def test_the_corpus_is_large_and_every_file_is_classified(outcomes):
    assert len(outcomes) >= 40
    assert set(outcomes) == set(UNUSABLE) | set(READABLE)
    assert set(corpus.SMALL) | set(corpus.LARGE) == set(outcomes)


def test_committed_files_are_what_the_script_writes(tmp_path):
    for written in corpus.write_small(tmp_path):
        assert written.read_bytes() == (BAD / written.name).read_bytes(), written.name


def test_committed_files_are_small():
    assert all(p.stat().st_size < 200_000 for p in BAD.iterdir())


@pytest.mark.parametrize("name", sorted(UNUSABLE))
def test_unusable_file_exits_3_with_one_line(outcomes, name):
    result = outcomes[name]
    assert result.code == 3, (result.code, result.err[-500:])
    assert result.out == ""
    lines = result.err.splitlines()
    assert len(lines) == 1 and "Traceback" not in result.err
    assert lines[0].startswith("calib: error: ")
    assert name in lines[0]
    assert UNUSABLE[name] in lines[0]
    assert "expected" in lines[0] or "calib reads at most" in lines[0]
    assert result.written == ()


@pytest.mark.parametrize("name", sorted(READABLE))
def test_readable_file_gives_a_verdict_and_its_record(outcomes, name):
    verdict, reason = READABLE[name]
    result = outcomes[name]
    assert result.code in (0, 1), result.err[-500:]
    assert "Traceback" not in result.err and "error" not in result.err
    assert verdict in result.out and reason in result.out
    assert not re.search(r"(?<!')\bnan\b(?!')", result.out.casefold())
    # A readable run issues its record: the only file is the complete PDF.
    assert result.written == ("record.pdf",)


@pytest.mark.parametrize("name", ["password_protected_workbook.xlsx",
                                  "compound_file_directory_in_a_circle.xls",
                                  "xml_entity_expansion_bomb.xlsx",
                                  "stray_cell_with_namespace_prefix.xlsx",
                                  "ods_table_never_closed.ods"])
def test_a_fresh_interpreter_refuses_hostile_files(tmp_path, name):
    env = {**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1"}
    env.pop("CALIB_ARCHIVE", None)
    done = subprocess.run(
        [sys.executable, "-m", "calib", "check", str(BAD / name), "--pdf",
         str(tmp_path / "record.pdf")],
        capture_output=True, text=True, timeout=TIMEOUT, preexec_fn=_limit_memory, env=env,
        check=False,
    )
    assert done.returncode == 3 and done.stdout == ""
    assert done.stderr.count("\n") == 1 and UNUSABLE[name] in done.stderr
    assert list(tmp_path.iterdir()) == []
