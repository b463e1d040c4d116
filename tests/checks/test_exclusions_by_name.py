"""Exclusions by sample name say what they removed; ambiguous names and unknowns are refused.

Issue 17: ``--exclude "Std 7=spike"`` removed 18 points across all 6 analytes without a word,
and an exclusion naming an unknown's cell was accepted and excluded nothing.  Common practice in
data review: an exclusion is explicit about what it leaves out.
"""

from __future__ import annotations

import pytest

from calib.checks.exclusions import apply_exclusions, parse_exclusion
from calib.errors import InputError
from calib.options import SampleType
from calib.run import Point
from tests.checks.runs import make_run


def _run():
    points = []
    for column, analyte in zip("CDE", ("Nitrate", "Sulfate", "Fluoride"), strict=True):
        for row, (name, conc) in enumerate((("Std 6", 5.0), ("Std 7", 10.0)), start=2):
            points.append(Point(analyte, conc, conc * 2, f"Run!{column}{row}", sample_id=name))
    points.append(Point("Nitrate", float("nan"), 3.1, "Run!C9", SampleType.UNKNOWN,
                        sample_id="Well 4"))
    return make_run(points)


def test_a_name_of_several_analytes_is_refused():
    with pytest.raises(InputError) as err:
        apply_exclusions(_run(), [parse_exclusion("Std 7=spike")])
    assert str(err.value) == (
        "exclusion 'Std 7' names a sample of 3 analytes (Nitrate, Sulfate, Fluoride); say which: "
        "Nitrate:Std 7=REASON, or *:Std 7=REASON for all of them"
    )


def test_an_analyte_prefix_narrows_the_name_and_the_run_says_what_was_removed():
    new, applied = apply_exclusions(_run(), [parse_exclusion("sulfate:Std 7=spike")])
    assert applied[0].cells == ("Run!D3",)
    assert [p.source_cell for p in new.points if not p.included] == ["Run!D3"]
    assert new.warnings == ("exclusion 'sulfate:Std 7' (spike) removed 1 point: 1 of Sulfate",)


def test_a_star_prefix_takes_every_analyte_and_says_so():
    new, applied = apply_exclusions(_run(), [parse_exclusion("*:Std 7=spike")])
    assert applied[0].analytes == ("Nitrate", "Sulfate", "Fluoride")
    assert new.warnings == ("exclusion '*:Std 7' (spike) removed 3 points: 1 of Nitrate, 1 of "
                            "Sulfate, 1 of Fluoride",)


def test_an_unknowns_cell_is_refused():
    with pytest.raises(InputError) as err:
        apply_exclusions(_run(), [parse_exclusion("Run!C9=bubble")])
    assert str(err.value) == (
        "kestrel-kx214.csv: exclusion 'Run!C9' names Run!C9, the response of an unknown sample "
        "(Well 4), which is not fitted: exclusions leave calibration points out; name a "
        "standard's cell or sample name"
    )


def test_an_unknowns_name_is_refused():
    with pytest.raises(InputError) as err:
        apply_exclusions(_run(), [parse_exclusion("Well 4=bubble")])
    assert "names Run!C9, the response of an unknown sample (Well 4)" in str(err.value)
