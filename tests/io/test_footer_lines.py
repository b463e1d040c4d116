"""A note line right under a table's last row ends the table; a row missing its values does not.

Reports often close a long table with a line of their own in the next row
(``Printed 2026-12-01 by A. Analyst``, ``End of report``), with no blank row
between: common practice of instrument and LIMS exports.  Such a line (text in one
cell, every measurement cell of its row empty, nothing but such lines and blank rows
below it) ends the table and is kept as a note.  An empty response inside the
table, a note line with data rows after it, or a lone name that looks like the
table's own names (``Cal-7``) is still refused: ambiguity is an error (SPEC.md).
"""

from __future__ import annotations

import pytest

from calib.io import read_run
from calib.io.layout import find_tables
from calib.io.table import Grid
from tests.io.conftest import message

# An invented fluoride run (Fernbrook Water Laboratory, fictional): 5 levels × 2.
HEADER = "Analyte,Sample,Concentration (mg/L),Peak area (µS·min)\n"
DATA = "".join(f"Fluoride,Cal-{n},{c},{0.215 * c + 0.001 * (r - 1):.5f}\n"
               for n, c in enumerate((0.1, 0.2, 0.5, 1.0, 2.0), start=1) for r in (1, 2))
EMPTY_RESPONSE = ("found an empty cell; expected the response (a number; a marker such as ND "
                  "or <LOD sets the point aside)")


def _note_warning(cell: str, text: str) -> str:
    return (f"{cell}: {text!r}, alone in its row right under the table with no concentration "
            f"or response, was read as a note that ends the table, not as a standard")


@pytest.mark.parametrize("footer", ["Printed 2026-12-01 by A. Analyst", "End of report",
                                    "Printed 2026-12-01 17:02 by A. Analyst"])
def test_a_note_line_right_under_the_data_ends_the_table(write_csv, footer):
    path = write_csv(HEADER + DATA + f"{footer}\n\n")
    run = read_run(path)
    assert len(run.points) == 10 and {p.analyte for p in run.points} == {"Fluoride"}
    assert run.metadata["notes"] == footer
    grid = Grid([line.split(",") for line in (HEADER + DATA + footer).splitlines()],
                file=str(path), label="run.csv")
    (table,) = find_tables(grid)
    assert (table.body, table.footer) == (range(1, 11), range(11, 12))
    assert table.warnings == (_note_warning("run.csv!A12", footer),)


def test_several_note_lines_and_blank_rows_under_the_data(write_csv):
    path = write_csv(HEADER + DATA + "Printed 2026-12-01 by A. Analyst\n\n,End of report\n\n")
    run = read_run(path)
    assert len(run.points) == 10
    assert run.metadata["notes"] == "Printed 2026-12-01 by A. Analyst; End of report"
    rows = [line.split(",") for line in (HEADER + DATA).splitlines()]
    rows += [["Printed 2026-12-01 by A. Analyst"], [], ["", "End of report"], []]
    (table,) = find_tables(Grid(rows, file="run.csv", label="run.csv"))
    assert table.body == range(1, 11)
    # Only the line right under the data is new; one after a blank row was a note before.
    assert table.warnings == (_note_warning("run.csv!A12", "Printed 2026-12-01 by A. Analyst"),)
    assert table.footer == range(11, 15)


def test_the_note_line_in_a_workbook(write_xlsx):
    rows = [line.split(",") for line in HEADER.splitlines()]
    rows += [[a, s, float(c), float(y)] for a, s, c, y in
             (line.split(",") for line in DATA.splitlines())]
    path = write_xlsx({"Run": [*rows, ["End of report"]]})
    run = read_run(path)
    assert len(run.points) == 10 and run.metadata["notes"] == "End of report"


def test_the_run_warnings_name_the_note_line(write_csv):
    path = write_csv(HEADER + DATA + "End of report\n")
    assert _note_warning("run.csv!A12", "End of report") in read_run(path).warnings


def test_an_empty_response_inside_the_table_is_still_refused(write_csv):
    lines = DATA.splitlines()
    lines[4] = "Fluoride,Cal-3,0.5,"
    path = write_csv(HEADER + "\n".join(lines) + "\nEnd of report\n")
    assert message(path) == f"{path}, row 6, column D (Peak area (µS·min)): {EMPTY_RESPONSE}"


def test_a_note_line_with_data_rows_after_it_is_still_refused(write_csv):
    lines = DATA.splitlines()
    path = write_csv(HEADER + "\n".join(lines[:8]) + "\nEnd of report\n"
                     + "\n".join(lines[8:]) + "\n")
    assert message(path) == f"{path}, row 10, column D (Peak area (µS·min)): {EMPTY_RESPONSE}"


@pytest.mark.parametrize("last, row, column", [
    (",Cal-6", 12, "A (Analyte)"),  # a standard named like those above
    ("Fluoride", 12, "D (Peak area (µS·min))"),  # the table's own analyte
    ("Fluoride,Cal-6,4.0,", 12, "D (Peak area (µS·min))"),  # a standard without a response
])
def test_a_last_row_missing_its_values_is_still_refused(write_csv, last, row, column):
    path = write_csv(HEADER + DATA + last + "\n")
    found = message(path)
    assert found.startswith(f"{path}, row {row}, column {column}: found an empty cell")


def test_a_lone_value_in_a_settings_column_is_not_a_note():
    # "yes" alone in the Include column: a standard whose values are missing.
    rows = [["Sample", "Conc", "Area", "Include"], ["Cal-1", 1.0, 2.0, "yes"],
            ["Cal-2", 2.0, 4.1, "yes"], ["Cal-3", 4.0, 8.3, "yes"], ["", "", "", "yes"]]
    (table,) = find_tables(Grid(rows, file="run.csv", label="run.csv"))
    assert table.body == range(1, 5) and table.warnings == ()
