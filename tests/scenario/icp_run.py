"""An invented six-element ICP-OES run at the Fernbrook Water Laboratory, generated in code.

Seven calibration levels × three replicates per element, a calibration blank,
calibration-verification standards (ICV/CCV at 10 µg/L) as the trade runs
them, and two water samples.  Responses are slope × concentration (+ a blank emission) with a scatter
growing as the square root of the signal, from a seeded generator; lead bends (a quadratic term) as a
plasma line does near its upper range.  Everything here is invented.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

LEVELS = (1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0)  # µg/L
REPLICATES = 3
ELEMENTS = {  # name: (slope cps per µg/L, blank cps, quadratic coefficient)
    "Pb 220.353": (310.0, 40.0, -0.35),
    "Cu 324.754": (1480.0, 120.0, 0.0),
    "Cd 228.802": (2150.0, 60.0, 0.0),
    "Zn 213.857": (1890.0, 210.0, 0.0),
    "Ni 231.604": (690.0, 35.0, 0.0),
    "As 188.980": (380.0, 22.0, 0.0),
}
RUN_DATE = "2026-12-03"
SAMPLES = {"FW-1203-01 tap Elm St": 3.7, "FW-1203-02 well 4": 42.0}  # true µg/L (invented)


def response(element: str, x: float, rng: np.random.Generator) -> float:
    slope, blank, bend = ELEMENTS[element]
    mean = blank + slope * x + bend * x * x
    # Scatter grows as the square root of the signal (counting statistics), as 1/x weighting
    # assumes (common practice for plasma emission).
    return round(mean + rng.normal(0, 1.5 * np.sqrt(mean)), 2)


def write_run(path: Path, *, seed: int = 20261203, run_date: str = RUN_DATE) -> Path:
    """Write the run as a CSV export with metadata lines above the table."""
    rng = np.random.default_rng(seed)
    samples_rng = np.random.default_rng(seed + 1)  # its own stream: standards stay as they were
    lines = [
        "ICP-OES metals calibration (invented demo data)",
        "Laboratory: Fernbrook Water Laboratory (fictional)",
        "Method: FWL-ICP-03 Metals in drinking water by ICP-OES",
        "Instrument: ICP-OES-2",
        f"Run date: {run_date}",
        "Operator: R. Okafor",
        "",
        "Analyte,Sample,Sample type,Concentration (µg/L),Intensity (cps),Replicate",
    ]
    for element in ELEMENTS:
        for rep in range(1, REPLICATES + 1):
            lines.append(f"{element},Cal-0,blank,0,{response(element, 0.0, rng)},{rep}")
        for i, x in enumerate(LEVELS, start=1):
            for rep in range(1, REPLICATES + 1):
                lines.append(f"{element},Cal-{i},standard,{x:g},{response(element, x, rng)},{rep}")
        for name in ("ICV", "CCV-1"):
            lines.append(f"{element},{name},qc,10,{response(element, 10.0, rng)},1")
        for name, x in SAMPLES.items():
            lines.append(f"{element},{name},unknown,,{response(element, x, samples_rng)},1")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path
