"""A run's points held as columns: the same points, made only when asked for.

The reference is the dataclass itself: every point a :class:`PointColumns` makes must be equal
to, hash and print as the ``Point(...)`` of the same values, and a :class:`Run` built on
columns must be indistinguishable (``run.points`` a tuple of those points) from one built on
the tuple.  The import checks read columns, so reading a plain long export makes no point at
all until ``run.points`` is read: that is what keeps the reader near python-calamine's own
speed (bench/read_vs_calamine.py), and a test here keeps it so.
"""

from __future__ import annotations

import copy
import dataclasses
import math
import pickle

import pytest

from calib.io import read_run
from calib.options import SampleType
from calib.run import Point, PointColumns, Run, SourceInfo, held_points, point_values

_POINTS = [
    Point("Zn", 1.0, 10.5, "Run!E8", replicate=1, injection_order=1, sample_id="Cal 1"),
    Point("Zn", 2.0, 21.0, "Run!E9", replicate=1, injection_order=2, sample_id="Cal 2",
          level="L2"),
    Point("Cu", math.nan, 3.3, "Run!E10", SampleType.UNKNOWN, included=False,
          exclusion_reason="vial cracked", is_response=2.0, analyte_response=6.6),
]


def test_points_made_from_columns_are_the_dataclass_points():
    columns = PointColumns.from_points(_POINTS)
    made = columns.points()
    for one, reference in zip(made, _POINTS, strict=True):
        assert repr(one) == repr(reference) and hash(one) == hash(reference)
    assert made[:2] == _POINTS[:2] and columns[0] == _POINTS[0] and columns[-1:] == made[-1:]
    assert list(columns) == made and len(columns) == 3
    with pytest.raises(IndexError):
        columns[3]


def test_writing_a_point_back_changes_its_columns():
    columns = PointColumns.from_points(_POINTS)
    columns[1] = dataclasses.replace(_POINTS[1], concentration=2.5)
    assert columns.column("concentration")[:2] == [1.0, 2.5]
    columns.append(_POINTS[0])
    del columns[0]
    assert [p.source_cell for p in columns] == ["Run!E9", "Run!E10", "Run!E8"]


def test_source_cells_of_a_block_are_written_when_read():
    n = 3
    columns = PointColumns({
        "analyte": ["Zn"] * n, "concentration": [1.0, 2.0, 4.0], "response": [1.0, 2.0, 4.0],
        "sample_type": [SampleType.STANDARD] * n, "replicate": [None] * n,
        "included": [True] * n, "exclusion_reason": [None] * n, "sample_id": [None] * n,
        "injection_order": [None] * n, "is_response": [None] * n,
        "analyte_response": [None] * n, "level": [None] * n,
    }, cells=("Run!C", 8))
    assert columns[2].source_cell == "Run!C10"
    assert columns.column("source_cell") == ["Run!C8", "Run!C9", "Run!C10"]
    with pytest.raises(ValueError, match="different lengths"):
        PointColumns({"analyte": ["Zn"], "response": [1.0, 2.0]})


def test_a_run_on_columns_is_the_run_on_the_tuple():
    source = SourceInfo("r.xlsx", "0" * 64)
    on_columns = Run(source, PointColumns.from_points(_POINTS), warnings=("w",))
    on_tuple = Run(source, tuple(_POINTS), warnings=("w",))
    assert on_columns.column("analyte") == ["Zn", "Zn", "Cu"] and on_columns.analytes == (
        "Zn", "Cu")
    assert isinstance(held_points(on_columns), PointColumns)  # nothing made so far
    assert on_columns.standards("Zn") == tuple(_POINTS[:2])
    assert on_columns == on_tuple and hash(on_columns.points) == hash(on_tuple.points)
    assert isinstance(on_columns.points, tuple) and on_columns.points == tuple(_POINTS)
    assert held_points(on_columns) is on_columns.points  # made once, then kept
    copied, restored = copy.deepcopy(on_columns), pickle.loads(pickle.dumps(on_columns))
    assert repr(copied) == repr(on_tuple) == repr(restored)  # (NaN != NaN: compared as text)
    assert dataclasses.replace(on_columns, points=_POINTS[:1]).points == (_POINTS[0],)
    with pytest.raises(dataclasses.FrozenInstanceError):
        on_columns.points = ()  # type: ignore[misc]
    with pytest.raises(TypeError):
        Run(source)  # type: ignore[call-arg] - the points have no default


def test_point_values_read_a_list_of_points_too():
    assert point_values(_POINTS, "response") == [10.5, 21.0, 3.3]
    assert point_values(PointColumns.from_points(_POINTS), "level") == [None, "L2", None]


def test_reading_a_plain_long_export_makes_no_point_until_asked(tmp_path):
    # 3 analytes × 5 levels × 2 replicates, every row plain: the import checks (copies,
    # levels, names, two populations, magnitudes) read the columns only.
    lines = ["Analyte,Sample,Conc (mg/L),Area,Rep"]
    for analyte, slope in (("Zn", 1000.0), ("Cu", 800.0), ("Ni", 650.0)):
        for level, conc in enumerate((0.5, 1.0, 2.0, 5.0, 10.0), start=1):
            for rep in (1, 2):
                lines.append(f"{analyte},Cal {level},{conc},{slope * conc + 7 * rep:.1f},{rep}")
    path = tmp_path / "metals.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    run = read_run(path)
    assert isinstance(held_points(run), PointColumns)
    assert isinstance(held_points(pickle.loads(pickle.dumps(run))), PointColumns)
    assert run.analytes == ("Zn", "Cu", "Ni") and len(run.column("response")) == 30
    assert pickle.loads(pickle.dumps(run)).points == run.points  # (the web keeps runs so)
    first = run.points[0]
    assert (first.analyte, first.concentration, first.response, first.source_cell,
            first.replicate) == ("Zn", 0.5, 507.0, "metals.csv!D2", 1)
    assert run.points[-1].source_cell == "metals.csv!D31"
