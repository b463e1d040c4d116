"""Generated tables: whatever numbers, spellings and layout, calib reads back what was written."""

from __future__ import annotations

import re
import tempfile
from pathlib import Path

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calib.errors import InputError
from calib.io import read_run
from calib.io.columns import NOT_ANALYTES, read_heading, squash
from calib.io.numbers import decimal_evidence

SETTINGS = settings(max_examples=40, deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])

def _excel_precision(value: float) -> float:
    # Spreadsheets keep 15 significant digits, and openpyxl writes no more than that.
    return float(f"{value:.15g}")


def _distinct_levels(values: list[float]) -> bool:
    # Levels within 1e-9 (relative) of each other are read as one level (issue 17): a
    # formula's rounding, not a level of its own.
    ordered = sorted(values)
    return all(b - a > 1e-9 * b for a, b in zip(ordered, ordered[1:], strict=False))


concentrations = st.lists(
    st.floats(min_value=0.001, max_value=1e5, allow_nan=False, allow_infinity=False)
    .map(_excel_precision),
    min_size=3, max_size=8, unique=True,
).filter(_distinct_levels)
responses = st.one_of(
    st.just(0.0),
    st.floats(min_value=1e-6, max_value=1e9).map(_excel_precision),
    st.floats(min_value=-1e6, max_value=-1e-6).map(_excel_precision),
)
headings = st.sampled_from([
    ("Conc (mg/L)", "Area"), ("Konz. (mg/l)", "Fläche"), ("Concentración (µg/L)", "Área"),
    ("Concentration nominale (ng/mL)", "Aire du pic"), ("nominal conc", "Peak Height"),
])


def _not_a_heading(name: str) -> bool:
    # A wide table's analyte heading that is also a column heading ("Use" is an include
    # column, "Total" no analyte) is read as that column, as intended: not an analyte name.
    heading = read_heading(name)
    return heading.name is None and not heading.ignored and squash(name) not in NOT_ANALYTES


def _text(value: float, style: str) -> str:
    """A number as an export might write it."""
    if style == "plain":
        return repr(value)
    if style == "comma":
        return repr(value).replace(".", ",")
    if style == "exponent":
        return f"{value:.17E}"
    return repr(value) + " mg/L"


@SETTINGS
@given(concs=concentrations, data=st.data(), names=headings,
       style=st.sampled_from(["plain", "comma", "exponent"]),
       delimiter=st.sampled_from([",", ";", "\t"]),
       encoding=st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "cp1252"]))
def test_long_text_tables_round_trip(concs, data, names, style, delimiter, encoding):
    values = [data.draw(responses) for _ in concs]
    if delimiter == "," and style == "comma":
        delimiter = ";"
    lines = ["Fernbrook Water Laboratory (fictional)", delimiter.join(("Sample", *names))]
    for number, (conc, value) in enumerate(zip(concs, values, strict=True), start=1):
        lines.append(delimiter.join((f"Std {number}", _text(conc, style), _text(value, style))))
    texts = [_text(v, style) for v in (*concs, *values)]
    unclear = delimiter == ";" and all(decimal_evidence(t) is None for t in texts) and any(
        re.fullmatch(r"[+-]?\d{1,3}[,.]\d{3}", t) for t in texts)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder, "run.csv")
        try:
            path.write_bytes(("\n".join(lines) + "\n").encode(encoding))
        except UnicodeEncodeError:
            return  # a heading the code page cannot hold
        if unclear:
            # Issue 17: no number shows the decimal mark and 1,234 (or 1.234) reads two ways:
            # refused, not guessed from the semicolon.
            with pytest.raises(InputError, match="no number in the file shows which"):
                read_run(path)
            return
        run = read_run(path)
    assert [p.concentration for p in run.points] == concs
    assert [p.response for p in run.points] == values
    assert [p.sample_id for p in run.points] == [f"Std {n}" for n in range(1, len(concs) + 1)]
    assert run.points[-1].source_cell == f"run.csv!C{len(concs) + 2}"


@SETTINGS
@given(concs=concentrations, data=st.data(),
       analytes=st.lists(st.from_regex(r"[A-Z][a-z]{2,8}(-[0-9]{1,3})?", fullmatch=True)
                         .filter(_not_a_heading), min_size=1, max_size=5, unique=True),
       shared=st.booleans(), origin_row=st.integers(min_value=1, max_value=6))
def test_wide_workbooks_round_trip(concs, data, analytes, shared, origin_row):
    table: dict[str, list[float]] = {a: [data.draw(responses) for _ in concs] for a in analytes}
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Screen"
    for number in range(1, origin_row):
        sheet.cell(row=number, column=1, value=f"Note {number}: invented data")
    heading: list[str] = ["Level"]
    if shared:
        heading.append("Conc (µg/L)")
        heading += analytes
    else:
        for analyte in analytes:
            heading += [f"{analyte} conc (µg/L)", f"{analyte} area"]
    for column, text in enumerate(heading, start=1):
        sheet.cell(row=origin_row, column=column, value=text)
    for index, conc in enumerate(concs):
        row: list[object] = [f"L{index + 1}"]
        if shared:
            row += [conc, *(table[a][index] for a in analytes)]
        else:
            for analyte in analytes:
                row += [_excel_precision(conc * 2), table[analyte][index]]
        for column, value in enumerate(row, start=1):
            sheet.cell(row=origin_row + 1 + index, column=column, value=value)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder, "screen.xlsx")
        book.save(path)
        run = read_run(path)
    assert run.source.layout == "wide"
    assert run.analytes == tuple(analytes)
    for analyte in analytes:
        points = run.standards(analyte)
        assert [p.response for p in points] == table[analyte]
        expected = concs if shared else [_excel_precision(c * 2) for c in concs]
        assert [p.concentration for p in points] == expected
