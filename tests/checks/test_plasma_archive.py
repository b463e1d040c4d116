"""The plasma-spectrometry profile end to end: ``calib check --archive`` compares today's Cu slope
with the analyte's recent accepted curves, and the 12-day case goes to review the day it happens.

Invented runs of the Fernbrook Water Laboratory (fictional), Cu 324.754 on ICP-OES-2: a calibration
blank, six standards 0.01–5 mg/L in triplicate, an ICV and a CCV.
"""

from __future__ import annotations

import csv
from datetime import UTC, datetime

import numpy as np

from calib.archive import Archive
from calib.cli.main import main
from calib.workflow import check_file, issue_record

LEVELS = (0.01, 0.05, 0.1, 0.5, 1.0, 5.0)
A, B = 120.0, 48_000.0


def write_cu_run(path, *, day: int, slope: float, seed: int):
    rng = np.random.default_rng(seed)
    rows = [["Cu calibration, ICP-OES"], ["Laboratory: Fernbrook Water Laboratory (fictional)"],
            ["Instrument: ICP-OES-2"], [f"Run date: 2026-11-{day:02d}"], [],
            ["Analyte", "Sample", "Sample type", "Concentration (mg/L)", "Intensity (counts)",
             "Replicate"],
            ["Cu 324.754", "Cal blank", "blank", 0, round(A + rng.normal(0, 20), 1), 1]]
    for k, x in enumerate(LEVELS):
        for rep in (1, 2, 3):
            # Counting statistics: variance grows with the signal (the case 1/x is made for).
            y = A + slope * x + rng.normal(0, 0.004 * np.sqrt(slope * x * 100))
            rows.append(["Cu 324.754", f"Cal-{k + 1}", "standard", x, round(float(y), 3), rep])
    for name, x in (("ICV", 1.0), ("CCV", 0.5)):
        rows.append(["Cu 324.754", name, "QC", x, round(A + slope * x * 1.01, 1), 1])
    with path.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)
    return path


def test_a_cu_curve_15_pct_low_goes_to_review_against_the_archive(tmp_path):
    db = tmp_path / "records.sqlite"
    rng = np.random.default_rng(12)
    with Archive(db) as archive:
        for day in range(1, 7):
            # Noise seeds 10, 20, ... give runs the outlier rule (review) stays quiet on: this
            # test is about the slope comparison, not about that rule.
            run = write_cu_run(tmp_path / f"cu_{day}.csv", day=day, seed=10 * day,
                               slope=B * (1 + rng.normal(0, 0.01)))
            assessment = check_file(run, profile="plasma-spectrometry", archive=db)
            assert assessment.curves[0].verdict.value == "accepted", assessment.curves[0].checks
            record, pdf = issue_record(assessment, prepared_by="R. Okafor",
                                       created_at=datetime(2026, 11, day, 15, tzinfo=UTC))
            archive.append(record, pdf, kind="issued")
    low = write_cu_run(tmp_path / "cu_7.csv", day=7, seed=70, slope=B * 0.85)
    curve = check_file(low, profile="plasma-spectrometry", archive=db).curves[0]
    check = next(c for c in curve.checks if c.id == "slope-reference")
    assert check.verdict.value == "fail" and -16 < check.value < -14
    assert "the mean slope of the 6 most recent accepted curves in records.sqlite" in check.detail
    assert curve.verdict.value == "needs-review"
    # Every standard still reads back on its own (low) line: only the history sees it.
    assert next(c for c in curve.checks if c.id == "back-calculation").verdict.value == "pass"
    # And from the command line, the same run: exit 1 (not accepted).
    assert main(["check", str(low), "--profile", "plasma-spectrometry", "--archive", str(db),
                 "--json"]) == 1
    # Without the archive the comparison is not evaluated and the curve is accepted.
    alone = check_file(low, profile="plasma-spectrometry").curves[0]
    assert alone.verdict.value == "accepted"
