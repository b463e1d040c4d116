"""Small runs and batches of the fictional Fernbrook Water Laboratory, built in code.

Nitrate-N by ion chromatography: six levels 0.5–10 mg/L in triplicate, response
≈ 0.001 + 0.2015·x (peak area in µS·min) with noise from a fixed seed; QCs at
1.5, 4 and 8 mg/L in duplicate; unknowns from the fictional Fernbrook wells.
Invented figures, for tests only.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

from calib.options import SampleType
from calib.quantify.samples import Reading
from calib.run import Point

LEVELS = (0.5, 1.0, 2.0, 5.0, 8.0, 10.0)
A, B = 0.001, 0.2015


def standards(seed: int = 3, *, slope: float = B, bend: float = 0.0) -> list[tuple[float, float]]:
    """(concentration, response) of the 18 standards."""
    rng = np.random.default_rng(seed)
    out = []
    for x in LEVELS:
        for _ in range(3):
            y = A + slope * x + bend * x * x + rng.normal(0, 0.004)
            out.append((x, round(float(y), 5)))
    return out


def response_at(x: float) -> float:
    return A + B * x


def reading(response: float, sample_id: str | None = None, *, dilution: float = 1.0,
            kind: SampleType = SampleType.UNKNOWN, nominal: float = math.nan,
            included: bool = True, reason: str | None = None, cell: str = "S!C2",
            analyte: str = "Nitrate-N") -> Reading:
    point = Point(analyte, nominal if kind is SampleType.QC else math.nan, response, cell,
                  sample_type=kind, sample_id=sample_id, included=included,
                  exclusion_reason=reason)
    return Reading(point, dilution)


def write_run_csv(path: Path, *, samples: bool = True, seed: int = 3, slope: float = B,
                  bend: float = 0.0, top_sample: float = 14.0) -> Path:
    """A long-layout run file: standards, then QCs and unknowns (when ``samples``)."""
    rows = [["Nitrate-N calibration, ion chromatography"],
            ["Laboratory: Fernbrook Water Laboratory (fictional)"], [],
            ["Analyte", "Sample", "Sample type", "Concentration (mg/L)", "Peak area",
             "Replicate"]]
    for i, (x, y) in enumerate(standards(seed, slope=slope, bend=bend)):
        rows.append(["Nitrate-N", f"Cal-{LEVELS.index(x) + 1}", "standard", x, y, i % 3 + 1])
    if samples:
        for name, nominal in (("QC-L", 1.5), ("QC-M", 4.0), ("QC-H", 8.0)):
            for rep, err in ((1, 0.002), (2, -0.003)):
                rows.append(["Nitrate-N", name, "QC", nominal,
                             round(response_at(nominal) + err, 5), rep])
        for name, x in (("Well FB-3", 3.2), ("Well FB-7", 6.75), ("Spring S-2", top_sample)):
            for rep, err in ((1, 0.001), (2, -0.001)):
                rows.append(["Nitrate-N", name, "unknown", "", round(response_at(x) + err, 5),
                             rep])
    with path.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)
    return path


def write_samples_csv(path: Path, rows: list[list[object]] | None = None) -> Path:
    """A samples file: unknowns with a dilution factor, and QCs with their nominal."""
    header = ["Sample ID", "Analyte", "Sample type", "Peak area", "Dilution factor", "Replicate",
              "Nominal (mg/L)"]
    if rows is None:
        rows = [
            ["FB-101", "Nitrate-N", "unknown", round(response_at(2.5), 5), "", 1, ""],
            ["FB-101", "Nitrate-N", "unknown", round(response_at(2.5) + 0.002, 5), "", 2, ""],
            ["FB-102", "Nitrate-N", "unknown", round(response_at(6.0), 5), 5, 1, ""],
            ["FB-103", "Nitrate-N", "unknown", round(response_at(25.0), 5), "", 1, ""],
            ["FB-104", "Nitrate-N", "unknown", "ND", "", 1, ""],
            ["QC-M", "Nitrate-N", "QC", round(response_at(4.1), 5), "", 1, 4.0],
            ["QC-M", "Nitrate-N", "QC", round(response_at(3.95), 5), "", 2, 4.0],
        ]
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["Fernbrook Water Laboratory (fictional) · nitrate batch 2026-12-01"])
        writer.writerow([])
        writer.writerow(header)
        writer.writerows(rows)
    return path
