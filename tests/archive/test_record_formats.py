"""Curves of records of both formats in one archive: one fit reads as one weighting.

``calib.record/2`` states a curve's weighting once, the fit's: a ``mean-rf`` curve
(mean response factor, the least-squares slope of y = RF·x with weights 1/x²,
from memory) says ``1/x2``.  ``calib.record/1`` said ``none`` for the very same
fit and kept the fit's weights in ``fit_details[i].weight_function`` (and the run's
weighting in ``settings.weighting``).  The golden records of calib 0.2.0 (format /1)
and 0.3.0 (format /2) in tests/data/golden differ in exactly those two fields,
which is how the /1 records below are written from /2 ones.

A trend or a baseline that read ``none`` and ``1/x2`` as two fits would call a
series of one method "mixed" and refuse to freeze its baseline.
"""

from __future__ import annotations

import copy
import json
import sqlite3
from datetime import timedelta
from pathlib import Path

import numpy as np
import pytest

from calib.archive import Archive
from calib.archive import figures as figures_module
from calib.archive.baseline import establish_baseline
from calib.checks import evaluate_run
from calib.record import Record, build_record
from calib.run import Point, Run, SourceInfo
from tests.archive.helpers import LEVELS, T0, TEST_PROFILE, pdf_for

GOLDEN = Path(__file__).resolve().parent.parent / "data" / "golden"
ANALYTE = "Nitrate-N"
STAMP = "2026-12-02T10:00:00Z"
MIXED = "the series mixes models or weightings"


def _record(day: int, *, model: str = "mean-rf") -> Record:
    """An invented nitrate run (Fernbrook, fictional) of day ``day``, response factor ≈ 0.25."""
    rng = np.random.default_rng(700 + day)
    points = tuple(
        Point(analyte=ANALYTE, concentration=x,
              response=float(0.25 * x * (1 + rng.normal(0, 0.01))),
              source_cell=f"run.csv!D{row + 9}", replicate=row % 3 + 1, level=f"Cal-{row // 3 + 1}")
        for row, x in enumerate(x for x in LEVELS for _ in range(3)))
    when = T0 + timedelta(days=day)
    run = Run(SourceInfo(file=f"nitrate_{when.date()}.csv", sha256=f"{700 + day:064x}"), points,
              metadata={"Run date": when.date().isoformat(), "Instrument": "IC-2"},
              units={"concentration": "mg/L", "response": "µS·min"})
    assessment = evaluate_run(run, profile=TEST_PROFILE, model=model)
    return build_record(assessment, prepared_by="R. Okafor", created_at=when + timedelta(hours=2))


def _as_format_1(record: Record) -> Record:
    """``record`` as calib 0.2.0 wrote a record of the same fit (``calib.record/1``)."""
    body = copy.deepcopy(record.body)
    body["schema"] = "calib.record/1"
    body["settings"]["weighting"] = "none"
    curves = body["check"]["curves"]
    for curve in curves:
        curve["weighting"] = "none"  # /1: the option given, which mean-rf took as none
    for curve, details in zip(curves, body["fit_details"], strict=True):
        details["weight_function"] = "1/x2" if curve["model"] == "mean-rf" else "none"
    return Record(body)


def _paths(value, prefix=""):
    if isinstance(value, dict):
        return {p for k, v in value.items() for p in {f"{prefix}/{k}"} | _paths(v, f"{prefix}/{k}")}
    if isinstance(value, list) and value:
        return _paths(value[0], prefix + "[]")
    return set()


def _fill(location, records):
    with Archive(location) as archive:
        for record in records:
            archive.append(record, pdf_for(record), kind="issued")


def test_the_format_1_records_here_are_laid_out_as_the_golden_ones():
    golden_1 = json.loads((GOLDEN / "0.2.0" / "nitrate.issued.json").read_bytes())
    golden_2 = json.loads((GOLDEN / "0.3.0" / "nitrate.issued.json").read_bytes())
    assert (golden_1["schema"], golden_2["schema"]) == ("calib.record/1", "calib.record/2")
    record = _record(0)
    old = _as_format_1(record)
    assert _paths(old.body) - _paths(record.body) == _paths(golden_1) - _paths(golden_2) == {
        "/fit_details[]/weight_function", "/settings/weighting"}
    assert _paths(record.body) - _paths(old.body) == _paths(golden_2) - _paths(golden_1) == set()
    assert Record.from_json(old.canonical).body == old.body


def test_a_mean_rf_series_across_both_formats_is_one_fit(location):
    records = [_as_format_1(_record(d)) if d < 3 else _record(d) for d in range(6)]
    assert [r.body["check"]["curves"][0]["weighting"] for r in records] == ["none"] * 3 + ["1/x2"] * 3
    _fill(location, records)
    with Archive(location) as archive:
        history = archive.curve_history(ANALYTE)
        trend = archive.trend(ANALYTE)
        report = archive.verify_chain()
        entry = archive.verify_entry(records[0].digest)
    assert [(c.figures.model, c.figures.weighting) for c in history] == [("mean-rf", "1/x2")] * 6
    assert not [n for n in trend.notes if n.startswith(MIXED)]
    frozen = establish_baseline(history, analyte=ANALYTE, count=6, reviewed_by="M. Castellanos",
                                established_at=STAMP)
    assert (frozen.model, frozen.weighting, len(frozen.curves)) == ("mean-rf", "1/x2", 6)
    assert report.problems == () and not entry.problems


def test_different_fits_are_still_called_mixed(tmp_path):
    # The control: a linear curve (weighting none) among mean-rf ones is another fit.
    records = [_as_format_1(_record(0)), _record(1), _record(2, model="linear"), _record(3)]
    _fill(tmp_path / "a.sqlite", records)
    with Archive(tmp_path / "a.sqlite") as archive:
        history = archive.curve_history(ANALYTE)
        trend = archive.trend(ANALYTE)
    assert [c.figures.weighting for c in history] == ["1/x2", "1/x2", "none", "1/x2"]
    assert [n for n in trend.notes if n.startswith(MIXED)] == [
        (f"{MIXED} (mean-rf/1/x2 ×3, linear/none ×1); coefficients of different fits are not "
         "comparable")]
    with pytest.raises(Exception, match="the baseline curves mix models or weightings"):
        establish_baseline(history, analyte=ANALYTE, count=4, reviewed_by="M. Castellanos",
                           established_at=STAMP)


def test_an_index_written_before_still_verifies_and_reads_as_one_fit(tmp_path, monkeypatch):
    # Archives filled by earlier releases hold the /1 record's "none" in their curves table.
    path = tmp_path / "a.sqlite"
    with monkeypatch.context() as m:
        m.setattr(figures_module, "recorded_weighting", lambda model, weighting: weighting)
        _fill(path, [_as_format_1(_record(0)), _as_format_1(_record(1))])
    _fill(path, [_record(2), _record(3)])
    with sqlite3.connect(path) as db:
        stored = [r[0] for r in db.execute("SELECT weighting FROM curves ORDER BY seq")]
    assert stored == ["none", "none", "1/x2", "1/x2"]
    with Archive(path) as archive:
        assert archive.verify_chain().problems == ()
        assert [c.weighting for c in archive.figures(1)] == ["1/x2"]
        trend = archive.trend(ANALYTE)
    assert not [n for n in trend.notes if n.startswith(MIXED)]


def test_an_index_row_altered_to_another_weighting_is_still_found(tmp_path):
    path = tmp_path / "a.sqlite"
    _fill(path, [_as_format_1(_record(0))])
    with sqlite3.connect(path) as db:
        db.execute("DROP TRIGGER IF EXISTS curves_no_update")
        db.execute("UPDATE curves SET weighting = '1/y' WHERE seq = 1")
    with Archive(path) as archive:
        problems = [p.message for p in archive.verify_chain().problems]
    assert "the per-analyte figures stored for trends do not match its JSON" in problems


def test_the_golden_records_of_both_formats_trend_as_one_fit(tmp_path):
    # Linear curves, weighting none in either format: the records verify byte for byte
    # and the archive sees one fit.
    path = tmp_path / "a.sqlite"
    with Archive(path) as archive:
        for release in ("0.1.0", "2026-12-02", "0.2.0", "0.3.0"):
            data = (GOLDEN / release / "nitrate.issued.json").read_bytes()
            record = Record.from_json(data)
            assert record.canonical == data
            archive.append(record, (GOLDEN / release / "nitrate.issued.pdf").read_bytes(),
                           kind="issued")
        history = archive.curve_history(ANALYTE)
        trend = archive.trend(ANALYTE)
        assert archive.verify_chain().problems == ()
    schemas = {json.loads((GOLDEN / r / "nitrate.issued.json").read_bytes())["schema"]
               for r in ("0.1.0", "0.3.0")}
    assert schemas == {"calib.record/1", "calib.record/2"}
    assert {(c.figures.model, c.figures.weighting) for c in history} == {("linear", "none")}
    assert len(history) == 4 and not [n for n in trend.notes if n.startswith(MIXED)]
