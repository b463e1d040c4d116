"""The column-wise reading of plain rows against the row-by-row reader.

The reference here is the row-by-row reader of calib.io.rows (every plain row
is read by both, so the two must agree exactly: same points, in the same order,
same internal-standard list, same warnings and the same refusal message).
"""

from __future__ import annotations

import dataclasses
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calib.errors import InputError
from calib.io import rows as rows_module
from calib.io.layout import find_tables
from calib.io.rows import read_table
from calib.io.sampletypes import SampleTyper
from calib.io.table import Grid
from calib.options import SampleType
from calib.run import Point, PointColumns

HEADER = ["Analyte", "Sample", "Type", "Conc (ng/mL)", "Area", "IS area", "Rep", "Order",
          "Include", "Reason"]


def _read(grid: Grid, *, column_wise: bool, monkeypatch: pytest.MonkeyPatch):
    with monkeypatch.context() as patch:
        if not column_wise:
            patch.setattr(rows_module._TableReader, "plan", lambda self, summaries, cut: None)
        try:
            table = find_tables(grid)[0]
            read = read_table(grid, table, analyte=None, typer=SampleTyper())
        except InputError as exc:
            return ("refused", str(exc))
    return (read.points, read.rows, read.internal_standards, read.warnings, read.units,
            read.columns)


def _same(found, expected) -> None:
    # NaN != NaN: compare points field by field with NaN equal to NaN.
    if found[0] == "refused" or expected[0] == "refused":
        assert found == expected
        return
    assert len(found[0]) == len(expected[0])
    for a, b in zip(found[0], expected[0]):
        assert repr(a) == repr(b)
        assert type(a.replicate) is type(b.replicate)
        assert type(a.injection_order) is type(b.injection_order)
    assert found[1:] == expected[1:]


def test_point_made_column_wise_is_the_dataclass_point():
    values = ("KX-214", 2.5, 0.125, "Run!E9", SampleType.QC, 2, True, None, "QC-M", 17,
              101000.0, 12625.0, "M")
    names = [field.name for field in dataclasses.fields(Point)]
    columns = PointColumns({name: [value] for name, value in zip(names, values)})
    (made,), reference = columns.points(), Point(*values)
    assert made == reference and hash(made) == hash(reference) and repr(made) == repr(reference)
    assert columns[0] == reference and columns[-1:] == [reference]
    with pytest.raises(AttributeError):  # still frozen
        made.response = 1.0  # type: ignore[misc]


def test_mixed_table_reads_the_same_both_ways(monkeypatch):
    rows = [
        ["Kestrel Bioanalytical"],
        HEADER,
        ["KX-214", "Cal 1", "standard", 1.0, 2050.0, 101000.0, 1.0, 1.0, "yes", None],
        ["KX-214", "Cal 2", "standard", "2,0", 4100.0, 100000.0, 1.0, 2.0, "", ""],
        ["KX-214", "Cal 3", "standard", 5.0, "ND", 99000.0, 1.0, 3.0, None, None],
        ["KX-214", "Cal 4", "standard", 10.0, 20500.0, 98000.0, 1.0, 4.0, "no", "vial cracked"],
        ["KX-214", "Cal 5", "standard", 20.0, 41000, 0.0, 1.0, 5.0, None, None],
        ["KX-214", "Blank", None, "", "ND", "", None, 6.0, None, None],
        [None] * 10,
        ["KX-214", "QC-L", "qc", 3.0, 6210.0, 99500.0, "2", 7.0, "y", None],
        ["KX-214", "Cal 6", "standard", 50.0, "102 500", 100500.0, 1.0, 8.0, None, None],
        ["KX-214", "Cal 7", "standard", 100.0, 205000.0, 101500.0, 1.0, 9.0, True, None],
        ["KX-214", "Mean", None, 27.0, 55000.0, 100000.0, None, None, None, None],
    ]
    grid = Grid(rows, file="kx.xlsx", label="Run", sheet="Run")
    plain = _read(grid, column_wise=True, monkeypatch=monkeypatch)
    reference = _read(grid, column_wise=False, monkeypatch=monkeypatch)
    _same(plain, reference)
    assert plain[0] and plain[0][0].source_cell == "Run!E3"  # the response cell, row 3
    assert math.isclose(plain[0][0].response, 2050.0 / 101000.0, rel_tol=1e-12)


@pytest.mark.parametrize("bad, message", [
    (["KX-214", "Cal 9", "standard", -1.0, 100.0, 1000.0, 1.0, 99.0, None, None],
     "negative concentration"),
    (["KX-214", "Cal 9", "standard", 1.0, 100.0, 1000.0, 1.0, 99.0, "x", None], "the mark 'x'"),
    (["KX-214", "Cal 9", "standard", 1.0, 100.0, 1000.0, 1.5, 99.0, None, None],
     "whole number"),
    (["KX-214", "Cal 9", "standard", 1.0, 100.0, 1000.0, 1.0, 99.0, "yes", "bubble"],
     "exclusion reason 'bubble'"),
    ([None, "Cal 9", "standard", 1.0, 100.0, 1000.0, 1.0, 99.0, None, None], "analyte name"),
])
def test_a_refusal_after_plain_rows_is_the_same_both_ways(monkeypatch, bad, message):
    body = [["KX-214", f"Cal {i}", "standard", float(i), 100.0 * i, 1000.0, 1.0, float(i),
             None, None] for i in range(1, 6)]
    grid = Grid([HEADER, *body, bad, *body], file="kx.xlsx", label="Run", sheet="Run")
    plain = _read(grid, column_wise=True, monkeypatch=monkeypatch)
    reference = _read(grid, column_wise=False, monkeypatch=monkeypatch)
    assert plain == reference
    assert plain[0] == "refused" and message in plain[1] and "row 7" in plain[1]


_CELLS = {
    0: st.sampled_from(["KX-214", "Nitrate", " Nitrate ", None, 3.0]),
    1: st.sampled_from(["Cal 1", "Std 2", "Blank", "QC-L", "Sample 4", None, "", 7.0, "Spike 1"]),
    2: st.sampled_from(["standard", "qc", "blank", None, "", "unknown", "cal", "weird"]),
    3: st.one_of(st.sampled_from([0.0, 1.0, 2.5, -1.0, "1,5", "ND", None, "", 3, True,
                                  math.inf, math.nan]),
                 st.floats(0, 1e6, allow_nan=False)),
    4: st.one_of(st.sampled_from([100.0, "ND", None, "", 7, True, math.nan, "1 200", "<LOD"]),
                 st.floats(-1e6, 1e6, allow_nan=False)),
    5: st.sampled_from([1000.0, 0.0, -5.0, None, "", "ND", 990.0]),
    6: st.sampled_from([1.0, 2.0, 1.5, None, "", "3", True]),
    7: st.sampled_from([1.0, 2.0, 3.0, 4.0, None, 2.0 ** 60]),
    8: st.sampled_from([None, "", "yes", "no", "x", True, False, 1.0, 0.0]),
    9: st.sampled_from([None, "", "bubble", 0.0]),
}


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(*(_CELLS[i] for i in range(10))), min_size=1, max_size=12),
       st.booleans())
def test_any_table_reads_the_same_both_ways(body, with_is):
    header = HEADER if with_is else [h if h != "IS area" else "Spare" for h in HEADER]
    grid = Grid([header, *map(list, body)], file="kx.xlsx", label="Run", sheet="Run")
    with pytest.MonkeyPatch.context() as patch:
        plain = _read(grid, column_wise=True, monkeypatch=patch)
        reference = _read(grid, column_wise=False, monkeypatch=patch)
    _same(plain, reference)


def test_a_table_of_plain_rows_only_reads_the_same_both_ways(monkeypatch):
    body = [["KX-214" if i % 2 else "KX-215", f"Cal {i}", "standard", float(i), 100.0 * i,
             1000.0 + i, 1.0, float(i), "yes", ""] for i in range(1, 13)]
    grid = Grid([HEADER, *body], file="kx.xlsx", label="Run", sheet="Run")
    plain = _read(grid, column_wise=True, monkeypatch=monkeypatch)
    reference = _read(grid, column_wise=False, monkeypatch=monkeypatch)
    _same(plain, reference)
    # The internal-standard list names each cell of column F (rows 2 to 13), in row order.
    assert [cell for _, cell, _, _ in plain[2]] == [f"Run!F{r}" for r in range(2, 14)]
    assert plain[2][0][0] == "the internal standard of KX-214"


def test_reading_pauses_the_cycle_collector_and_resumes_it(tmp_path):
    # Python's gc module: isenabled() says whether the collector runs.
    import gc

    from calib.io import read_run

    path = tmp_path / "n.csv"
    path.write_text("Conc (mg/L),Area\n0.5,1010\n1.0,2032\n2.0,4071\n5.0,10150\n10,20290\n",
                    encoding="utf-8")
    seen = []

    class Spy:
        suffixes = (".csv",)

        def read(self, path, *, sheet=None, analyte=None):
            seen.append(gc.isenabled())
            from calib.io.csv_text import CsvReader
            return CsvReader().read(path, sheet=sheet, analyte=analyte)

    assert gc.isenabled()
    run = read_run(path, readers=(Spy(),))
    assert seen == [False] and gc.isenabled() and len(run.points) == 5
    gc.disable()
    try:
        read_run(path, readers=(Spy(),))
        assert not gc.isenabled()  # paused by someone else before: left paused
    finally:
        gc.enable()
    with pytest.raises(InputError):
        read_run(tmp_path / "missing.csv", readers=(Spy(),))
    assert gc.isenabled()
