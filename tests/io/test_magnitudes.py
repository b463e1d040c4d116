"""check_magnitudes: the whole-run pass agrees with the point-by-point rule.

The rule (calib.io.limits.LARGEST_VALUE): a concentration or response is usable when it is
missing, NaN, zero, or of magnitude between 1/LARGEST_VALUE and LARGEST_VALUE.  The bounds are
the module's own; the cases below are worked by hand from that rule.
"""

from __future__ import annotations

import math

import pytest

from calib.errors import InputError
from calib.io.limits import LARGEST_VALUE, check_magnitudes
from calib.run import Point


def _run(n: int = 200) -> list[Point]:
    return [Point("Zn", float(i % 8), 100.0 + i, f"Run!C{i + 2}", replicate=1 + i % 3)
            for i in range(n)]


def test_usable_values_pass_including_zero_nan_and_the_bounds() -> None:
    points = _run()
    points[3] = Point("Zn", 0.0, math.nan, "Run!C5")
    points[4] = Point("Zn", LARGEST_VALUE, 1.0 / LARGEST_VALUE, "Run!C6", is_response=2.0,
                      analyte_response=4.0)
    check_magnitudes(points, file="run.xlsx")
    check_magnitudes(iter(points), file="run.xlsx")  # any iterable, not only a list


@pytest.mark.parametrize(("field", "value", "words"), [
    ("response", LARGEST_VALUE * 10, "response"),
    ("response", math.inf, "response"),
    ("concentration", 1.0 / LARGEST_VALUE / 10, "concentration"),
    ("is_response", -math.inf, "internal-standard response"),
])
def test_each_kind_of_value_out_of_range_is_refused_naming_its_cell(
        field: str, value: float, words: str) -> None:
    points = _run()
    fields = {"analyte": "Zn", "concentration": 1.0, "response": 5.0,
              "source_cell": "Run!C150"}
    fields[field] = value
    points[148] = Point(**fields)  # type: ignore[arg-type]
    with pytest.raises(InputError, match=rf"the {words} .* Run!C150"):
        check_magnitudes(points, file="run.xlsx")


def test_the_first_offending_point_in_file_order_is_named() -> None:
    points = _run()
    points[120] = Point("Zn", 1.0, -1e40, "Run!C122")
    points[60] = Point("Zn", 1e-40, 5.0, "Run!C62")  # earlier row, another kind of value
    with pytest.raises(InputError, match=r"concentration 1e-40 in the row of Run!C62"):
        check_magnitudes(points, file="run.xlsx")
