"""Detection and quantitation limits from the calibration line."""

from __future__ import annotations

import math
from dataclasses import dataclass

from calib.fit.curve import CurveFit

__all__ = ["DetectionLimit", "ich_limits"]


@dataclass(frozen=True)
class DetectionLimit:
    """A limit in concentration units and the method that gave it."""

    value: float
    method: str


def ich_limits(fit: CurveFit) -> tuple[DetectionLimit, DetectionLimit]:
    """LOD = 3.3·σ/S and LOQ = 10·σ/S, σ the residual SD and S the slope.

    For the quadratic, S is the slope at concentration 0 (the linear term).

    References
    ----------
    ICH Q2(R2) Validation of analytical procedures (2023), detection and
    quantitation limit based on the standard deviation of the response and the slope.

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> lod, loq = ich_limits(fit_curve([1, 2, 3, 4, 5], [2.1, 3.9, 6.1, 8.0, 9.9]))
    >>> round(loq.value / lod.value, 6)
    3.030303
    """
    slope = abs(fit.coefficients["slope"])
    sigma = fit.residual_sd
    note = "ICH Q2: {k}·σ/S, σ = residual SD, S = slope"
    if slope == 0:
        return (DetectionLimit(math.nan, note.format(k="3.3")), DetectionLimit(math.nan, note.format(k="10")))
    return (
        DetectionLimit(3.3 * sigma / slope, note.format(k="3.3")),
        DetectionLimit(10 * sigma / slope, note.format(k="10")),
    )
