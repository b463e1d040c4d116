"""The invented 12-day copper series (Fernbrook Water Laboratory, fictional; ICP-OES-2).

Twelve daily Cu 324.754 calibrations: the day-to-day slope scatter is 1 % (a
plausible figure for plasma emission, our own choice), three runs go to review
with a raised intercept (left out of the trend), and on day 7 the slope is
15 % low while the curve itself passes its own checks: the case a trend must
flag without being told which runs to trust.
"""

from __future__ import annotations

import numpy as np

from calib.archive import Archive
from tests.archive.helpers import make_record, pdf_for

ANALYTE = "Cu 324.754"
INSTRUMENT = "ICP-OES-2"
BAD_DAY = 6           # 0-based: the seventh run
REVIEW_DAYS = (2, 5, 9)


def cu_record(day: int, slope: float, *, intercept: float = 0.0):
    return make_record(slope=slope, intercept=intercept, seed=900 + day, run=day,
                       analyte=ANALYTE, instrument=INSTRUMENT)


def cu_slopes(days: int = 12, *, seed: int = 21) -> list[float]:
    rng = np.random.default_rng(seed)
    slopes = [0.25 * (1 + rng.normal(0, 0.01)) for _ in range(days)]
    slopes[BAD_DAY] *= 0.85
    return slopes


def fill_cu_archive(path, days: int = 12) -> list[str]:
    """Append the series to the archive at ``path``; returns each run's verdict."""
    verdicts = []
    with Archive(path) as archive:
        for day, slope in enumerate(cu_slopes(days)):
            record = cu_record(day, slope, intercept=0.05 if day in REVIEW_DAYS else 0.0)
            archive.append(record, pdf_for(record), kind="issued")
            verdicts.append(record.body["check"]["verdict"])
    return verdicts
