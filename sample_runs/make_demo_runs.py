"""Write the invented demo runs of the fictional Fernbrook Water Laboratory.

Run from the repository root to regenerate the files beside this script::

    python sample_runs/make_demo_runs.py

The numbers are invented with a fixed seed; no real laboratory, instrument or
person is described.

- ``fernbrook_nitrate_2026-11-30.xlsx``: nitrate-N by ion chromatography, six
  levels 0.5–10 mg/L in triplicate, an unweighted straight line through a
  clean blank: the curve is accepted.
- ``fernbrook_fluoride_2026-11-30.csv``: fluoride by ion chromatography, six
  levels 0.1–2 mg/L in triplicate, prepared with contaminated dilution water
  that adds a constant response to every standard: the intercept differs
  significantly from zero and the curve is flagged for review.
"""

from __future__ import annotations

import csv
from datetime import datetime
from pathlib import Path

import numpy as np
from openpyxl import Workbook

HERE = Path(__file__).resolve().parent
SEED = 20261130


def _metadata(analyte: str) -> list[tuple[str, str]]:
    return [
        ("Laboratory", "Fernbrook Water Laboratory (fictional)"),
        ("Method", f"FWL-IC-07 {analyte} in drinking water by ion chromatography"),
        ("Instrument", "IC-2 (conductivity detector)"),
        ("Run date", "2026-11-30"),
        ("Operator", "R. Okafor"),
    ]


def nitrate_rows(rng: np.random.Generator) -> list[list[object]]:
    """Nitrate-N standards: slope 0.0842 area units per mg/L, no intercept, 1.2 % noise."""
    rows = []
    for level, conc in enumerate([0.5, 1.0, 2.0, 4.0, 6.0, 10.0], start=1):
        for rep in (1, 2, 3):
            area = 0.0842 * conc * (1 + rng.normal(0, 0.012))
            rows.append(["Nitrate-N", f"Cal-{level}", conc, round(area, 5), rep, "yes", ""])
    return rows


def fluoride_rows(rng: np.random.Generator) -> list[list[object]]:
    """Fluoride standards: slope 0.215 per mg/L plus 0.0118 from contaminated water."""
    rows = []
    for level, conc in enumerate([0.1, 0.2, 0.5, 1.0, 1.5, 2.0], start=1):
        for rep in (1, 2, 3):
            area = 0.0118 + 0.215 * conc + rng.normal(0, 0.0015)
            rows.append(["Fluoride", f"Cal-{level}", conc, round(area, 5), rep, "yes", ""])
    return rows


HEADER = ["Analyte", "Sample", "Concentration (mg/L)", "Peak area (µS·min)", "Replicate",
          "Include", "Exclusion reason"]


def write_nitrate(path: Path, rows: list[list[object]]) -> None:
    wb = Workbook()
    ws = wb.active
    ws.title = "Run"
    ws.append(["Nitrate-N calibration, ion chromatography"])
    for key, value in _metadata("Nitrate-N"):
        ws.append([f"{key}: {value}"])
    ws.append([])
    ws.append(HEADER)
    for row in rows:
        ws.append(row)
    # openpyxl stamps the current time into the file; pin it so the bytes are reproducible.
    wb.properties.created = wb.properties.modified = datetime(2026, 11, 30, 8, 0)
    wb.save(path)


def write_fluoride(path: Path, rows: list[list[object]]) -> None:
    with path.open("w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh)
        out.writerow(["Fluoride calibration, ion chromatography"])
        for key, value in _metadata("Fluoride"):
            out.writerow([f"{key}: {value}"])
        out.writerow([])
        out.writerow(HEADER)
        out.writerows(rows)


def main() -> None:
    rng = np.random.default_rng(SEED)
    write_nitrate(HERE / "fernbrook_nitrate_2026-11-30.xlsx", nitrate_rows(rng))
    write_fluoride(HERE / "fernbrook_fluoride_2026-11-30.csv", fluoride_rows(rng))


if __name__ == "__main__":
    main()
