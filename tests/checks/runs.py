"""Invented runs whose back-calculated deviations are known exactly, for boundary tests.

Standards come in replicate sets placed symmetrically about the line
y = a + b·x: at a level, replicate j has response a + b·x·(1 + dⱼ) with the
dⱼ summing to zero.  For any weighting that depends on x only (none, 1/x,
1/x²) the weighted least-squares normal equations then hold for (a, b)
exactly, so the fitted line is the designed one and each standard reads back
at exactly x·(1 + dⱼ), a deviation of dⱼ.  :func:`assert_fit_is_designed`
confirms this with numpy's own weighted polynomial fit, outside calib.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from calib.options import SampleType
from calib.run import Point, Run, SourceInfo

A, B = 0.002, 0.0123  # designed intercept and slope (invented)
BIO_LEVELS = (1, 2, 5, 10, 50, 100, 500, 1000)  # ng/mL, the Kestrel KX-214 scenario (SPEC §11)
EPA_LEVELS = (0.5, 1, 2, 5, 10)  # mg/L, Fernbrook Water Laboratory (SPEC §11)


def spread(pct: float, n: int = 2) -> tuple[float, ...]:
    """Replicate deviations in % summing to zero: ±pct pairs, and a 0 for an odd count."""
    half = [pct] * (n // 2)
    return (*half, *(-d for d in half), *([0.0] if n % 2 else []))


def curve_points(levels: Sequence[float], *, deviations: Mapping[float, Sequence[float]] | None = None,
                 noise: float = 0.5, replicates: int = 2, a: float = A, b: float = B,
                 analyte: str = "KX-214", first_row: int = 2) -> list[Point]:
    """Standards at ``levels``: replicate deviations from ``deviations`` (in %), else ±noise."""
    deviations = deviations or {}
    points, row = [], first_row
    for x in levels:
        for d in deviations.get(x, spread(noise, replicates)):
            points.append(Point(analyte, float(x), a + b * x * (1 + d / 100), f"Run!D{row}",
                                replicate=None, injection_order=row - 1))
            row += 1
    return points


def qc_points(concentrations: Sequence[float] = (3, 80, 800), *, a: float = A, b: float = B,
              analyte: str = "KX-214", first_row: int = 100) -> list[Point]:
    """QC samples in duplicate reading back exactly at nominal."""
    return [Point(analyte, float(c), a + b * c, f"Run!D{first_row + i}", sample_type=SampleType.QC)
            for i, c in enumerate(c for c in concentrations for _ in range(2))]


def make_run(points: Sequence[Point], *, file: str = "kestrel-kx214.csv") -> Run:
    return Run(SourceInfo(file=file, sha256="0" * 64, sheet="Run"), tuple(points))


def assert_fit_is_designed(points: Sequence[Point], *, weighting: str, a: float = A,
                           b: float = B) -> None:
    """numpy's weighted polyfit on the fitted standards gives the designed line (rel 1e-9)."""
    used = [p for p in points if p.included and p.concentration != 0]
    x = np.array([p.concentration for p in used])
    y = np.array([p.response for p in used])
    w = {"none": np.ones_like(x), "1/x": 1 / x, "1/x2": 1 / x**2}[weighting]
    slope, intercept = np.polyfit(x, y, 1, w=np.sqrt(w))  # polyfit weights multiply residuals
    assert abs(slope - b) <= 1e-9 * b and abs(intercept - a) <= 1e-9 * max(abs(a), b)
