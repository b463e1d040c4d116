"""Column-at-a-time quantifying gives what the one-row, one-sample paths give.

The samples reader reads plain rows a column at a time and leaves the rest to
the row reader; the batch is worked out over arrays; the ``--json`` text is
written a column at a time.  Each is compared here with the path it stands in
for: the row reader alone, :func:`calib.quantify.batch.quantify_sample` one
sample at a time (itself checked against the CG 4 closed form and Miller &
Miller in test_inverse.py), and Python's own ``json.dumps``.
"""

from __future__ import annotations

import json
import math
from dataclasses import fields, replace

import numpy as np
import pytest

import calib.quantify.samples as samples_module
from calib.errors import InputError
from calib.fit import fit_curve
from calib.fit.calcurve import CalibrationCurve
from calib.options import SampleType
from calib.quantify.batch import ReportingConvention, group_readings, quantify, quantify_sample
from calib.quantify.document import quantify_document, quantify_json
from calib.quantify.samples import Reading, read_samples
from calib.quantify.sampletable import SampleRows
from calib.quantify.workflow import quantify_files
from calib.run import Point
from tests.quantify.helpers import response_at, standards, write_run_csv

MIXED = """Fernbrook Water Laboratory (fictional), mixed batch
Sample ID,Analyte,Sample type,Peak area,IS area,Dilution factor,Replicate,Level,Include,Reason,Nominal (mg/L)
FB-1,Nitrate-N,unknown,0.5071,1.002,,1,,yes,,
FB-1,Nitrate-N,unknown,0.5102,0.998,,2,,yes,,
FB-2,Nitrate-N,unknown, 1.2034 ,1.01,10,1,,,,
FB-3,Nitrate-N,unknown,ND,1.0,,1,,,,
FB-4,Nitrate-N,unknown,1.2E-1,1.0,,1,,,,
FB-5,Nitrate-N,,0.9031,0.0,,1,,,,
QC-L,Nitrate-N,,0.3051,1.0,,1,,,,1.5
QC-M,Nitrate-N,QC,0.8110,1.003,,1,QM,no,carry-over,4.0
Cal-3,Nitrate-N,standard,0.4051,1.0,,1,,,,2.0
FB-6,Nitrate-N,unknown,#VALUE!,1.0,,2,,,,
FB-7,Nitrate-N,Probe,1.5006,0.999,2.5,1,,,,
FB-8,Nitrate-N,unknown,0.7003,,,1,,,,
,Nitrate-N,unknown,0.6020,1.0,,,,,,
FB-9,Nitrate-N,unknown,0.6020,1.0,,3.0,,,,

Checked by: A. Reviewer (fictional)
"""


def _row_reader_only(monkeypatch):
    """Leave every row to the row reader, as calib read samples before the column pass."""
    def none(reader, start, stop):
        return SampleRows.from_readings(()), [], list(range(start, stop))

    monkeypatch.setattr(samples_module, "read_plain_rows", none)


def _same(a, b) -> bool:
    """Equal, NaN equal to NaN (dataclasses compared field by field)."""
    if hasattr(a, "__dataclass_fields__") and type(a) is type(b):
        return all(_same(getattr(a, f.name), getattr(b, f.name)) for f in fields(a))
    if isinstance(a, tuple) and isinstance(b, tuple):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b, strict=True))
    if isinstance(a, float) and isinstance(b, float):
        return a == b or (math.isnan(a) and math.isnan(b))
    return a == b and type(a) is type(b)


def test_the_column_pass_reads_what_the_row_reader_reads(tmp_path, monkeypatch):
    path = tmp_path / "mixed.csv"
    path.write_text(MIXED, encoding="utf-8")
    read_plain = samples_module.read_plain_rows
    plain_rows: list[int] = []

    def spy(reader, start, stop):
        rows, at, left = read_plain(reader, start, stop)
        plain_rows.extend(at)
        return rows, at, left

    monkeypatch.setattr(samples_module, "read_plain_rows", spy)
    fast = read_samples(path, dilution_below_one=True)
    assert len(plain_rows) >= 5  # the plain rows did take the column pass
    _row_reader_only(monkeypatch)
    slow = read_samples(path, dilution_below_one=True)
    assert len(fast.readings) == len(slow.readings) == 13
    for a, b in zip(fast.readings, slow.readings, strict=True):
        assert _same(a, b), (a, b)
    assert fast.notes == slow.notes and fast.internal_standard == slow.internal_standard
    # Ratios formed the same way: the analyte's area over the IS area.
    first = fast.readings[0].point
    assert first.response == 0.5071 / 1.002 and first.analyte_response == 0.5071


@pytest.mark.parametrize(("bad", "row"), [("0.5", 4), ("abc", 4)])
def test_the_first_bad_row_is_refused_whichever_pass_meets_it(tmp_path, monkeypatch, bad, row):
    lines = ["Sample ID,Peak area,Dilution factor"] + [
        f"FB-{i},{0.2 + i / 100:.4f},{bad if i == 3 else ''}" for i in range(1, 8)]
    lines[6] = "FB-6,#N/A-ish,"  # a later row the row reader refuses too
    path = tmp_path / "bad.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    with pytest.raises(InputError) as fast:
        read_samples(path, analyte="Nitrate-N")
    _row_reader_only(monkeypatch)
    with pytest.raises(InputError) as slow:
        read_samples(path, analyte="Nitrate-N")
    assert str(fast.value) == str(slow.value)
    assert f"row {row}, column C" in str(fast.value)


def test_weights_and_volumes_read_the_same_either_way(tmp_path, monkeypatch):
    text = ("Sample ID,Peak area,Sample weight (g),Final volume (mL),Nominal (mg/L),Type\n"
            "Soil-1,0.5071,2.0,50,,unknown\nSoil-1,0.5102,2.0,50,,unknown\n"
            "Soil-2,0.9001,1.5,25,,unknown\nQC-M,0.8110,,,4.0,QC\n")
    path = tmp_path / "soils.csv"
    path.write_text(text, encoding="utf-8")
    fast = read_samples(path, analyte="Nitrate-N")
    _row_reader_only(monkeypatch)
    slow = read_samples(path, analyte="Nitrate-N")
    for a, b in zip(fast.readings, slow.readings, strict=True):
        assert _same(a, b), (a, b)
    assert fast.readings[0].mass_kg == 2.0 * 1e-3 and fast.readings[0].volume_l == 50 * 1e-3


def _curve(verdict: str = "accepted", analyte: str = "Nitrate-N", unit: str | None = "mg/L"):
    x, y = zip(*standards(), strict=True)
    return CalibrationCurve.from_fit(fit_curve(list(x), list(y)), analyte=analyte,
                                     verdict=verdict, lod=0.3, loq=0.9, unit=unit)


def _reading(y: float, name: str | None, *, kind=SampleType.UNKNOWN, nominal=math.nan,
             dilution=1.0, cell="S!D9", analyte="Nitrate-N", included=True, mass=None,
             volume=None, reason=None) -> Reading:
    point = Point(analyte, nominal if kind is SampleType.QC else math.nan, y, cell,
                  sample_type=kind, sample_id=name, included=included, exclusion_reason=reason)
    return Reading(point, dilution, mass_kg=mass, volume_l=volume)


def _batch_readings() -> list[Reading]:
    r = []
    for i, x in enumerate((0.05, 0.2, 0.45, 0.6, 2.5, 6.0, 9.99, 10.0, 12.0, 40.0)):
        r.append(_reading(response_at(x), f"FB-{i}", cell=f"S!D{i + 2}"))
    r.append(_reading(response_at(3.0), "FB-0", dilution=10.0, cell="S!D20"))  # same id, diluted
    for k in range(9):  # nine injections: numpy's mean, not a plain sum
        r.append(_reading(response_at(4.0) + 0.001 * k, "Multi", cell=f"S!D{30 + k}"))
    r.append(_reading(math.nan, "Gone", included=False, reason="not detected", cell="S!D50"))
    r.append(_reading(response_at(2.0), "Gone", included=False, reason="excluded by the analyst",
                      cell="S!D51"))
    r.append(_reading(response_at(2.0), None, cell="S!D52"))
    for name, nominal, x in (("QC-L", 1.5, 1.52), ("QC-M", 4.0, 4.9), ("QC-H", 8.0, 11.0)):
        r.append(_reading(response_at(x), name, kind=SampleType.QC, nominal=nominal,
                          cell=f"S!D6{int(nominal)}"))
    r.append(_reading(response_at(3.3), "Soil-1", mass=0.002, volume=0.05, cell="S!D70"))
    r.append(_reading(response_at(0.1), "Soil-2", mass=0.002, volume=0.05, cell="S!D71"))
    r.append(_reading(response_at(5.0), "Z-1", analyte="Zinc", cell="S!D80"))
    r.append(_reading(response_at(5.0), "B-1", analyte="Boron", cell="S!D81"))
    return r


@pytest.mark.parametrize("case", ["accepted", "needs-review", "forced", "refused"])
def test_the_batch_gives_what_one_sample_at_a_time_gives(case):
    verdict = {"forced": "rejected", "refused": "rejected"}.get(case, case)
    curves = {"Nitrate-N": _curve(verdict), "Zinc": _curve(analyte="Zinc", unit="µg/L")}
    readings = _batch_readings()
    convention = ReportingConvention(digits=4)
    batch = quantify(curves, readings, force=case == "forced", unfitted={"Boron": "no standards"},
                     convention=convention, digits={"Zinc": 2}, confidence=0.99)
    groups = group_readings(readings)
    assert len(batch.samples) == len(groups)
    refused = {"Boron": "no fitted curve: no standards"}
    if case == "refused":
        refused["Nitrate-N"] = ("the curve was rejected; its samples are not quantified "
                                "(force quantifies them anyway, flagged)")
    for result, group in zip(batch.samples, groups, strict=True):
        analyte = group[0].point.analyte
        one = quantify_sample(
            curves.get(analyte), group, confidence=0.99,
            convention=replace(convention, digits=2) if analyte == "Zinc" else convention,
            refused=refused.get(analyte), forced=case == "forced" and analyte == "Nitrate-N")
        assert _same(result, one), (result, one)
    flags: dict[str, tuple[str, ...]] = {}
    for s in batch.samples:
        flags.setdefault(s.sample_id, s.flags)
    if case == "accepted":
        assert flags["FB-9"] == ("above-uloq", "outside-range")
        assert flags["FB-0"] == ("outside-range", "below-lloq", "below-lod")
        assert flags["Gone"] == ("no-reading",)


def test_reported_numbers_a_column_at_a_time_are_the_one_at_a_time_numbers():
    rng = np.random.default_rng(18)
    values = [0.0, -0.0, 9.995, 9.9949999, 0.0009995, 1e-7, 99999.5, 123456789.0, -2.5e-3,
              1.0, 10.0, 100.0, 0.001, 0.01, 1e15, 5e-324, float("nan"), float("inf"),
              -float("inf")]
    values += (10.0 ** rng.uniform(-8, 9, 2000) * rng.choice([-1, 1], 2000)).tolist()
    # Ties in decimal (83.35) as Python floats, which quantify formats.
    values += [round(v, 2) for v in rng.uniform(0, 1000, 500).tolist()]
    for digits in (1, 2, 3, 4, 6, 9):
        convention = ReportingConvention(digits=digits)
        assert convention.numbers(np.array(values)) == [convention.number(v) for v in values]


def test_the_json_text_is_json_dumps_of_the_document(tmp_path):
    run = write_run_csv(tmp_path / "run.csv")
    text = ("Sample ID,Analyte,Sample type,Peak area,Dilution factor,Nominal (mg/L)\n"
            f'"Brunnen ""Süd"" 1",Nitrate-N,unknown,{response_at(2.0):.5f},,\n'
            f"Brunnen Süd 1,Nitrate-N,unknown,{response_at(2.1):.5f},,\n"
            f"FB-2,Nitrate-N,unknown,ND,,\nFB-3,Nitrate-N,unknown,{response_at(30):.5f},2,\n"
            f"QC-M,Nitrate-N,QC,{response_at(4.2):.5f},,4.0\n"
            f"QC-M,Nitrate-N,QC,{response_at(3.9):.5f},,4.0\n")
    samples = tmp_path / "batch.csv"
    samples.write_text(text, encoding="utf-8")
    report = quantify_files(run, samples)
    whole = quantify_document(report)
    expected = json.dumps(whole, ensure_ascii=False, allow_nan=False)
    assert quantify_json(quantify_document(report, samples=False), report.batch) == expected
    assert quantify_json(whole, report.batch) == expected
    one = quantify_files(run, samples.parent / _one_sample(samples))
    assert quantify_json(quantify_document(one), one.batch) == json.dumps(
        quantify_document(one), ensure_ascii=False, allow_nan=False)


def _one_sample(samples):
    path = samples.parent / "one.csv"
    path.write_text(f"Sample ID,Peak area\nFB-1,{response_at(2.0):.5f}\n", encoding="utf-8")
    return path.name
