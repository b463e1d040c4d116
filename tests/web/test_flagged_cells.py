"""The curve page marks the cells the checks list in ``CheckResult.cells``.

The run is invented (ten standards on y = 2x, one reading 0.6 high, one 40 % high);
which cells are outliers and which read back outside ±15 % is worked out here with
statsmodels (externally studentized residuals against scipy's Bonferroni t) and
numpy's least-squares line, outside calib.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import statsmodels.api as sm
from scipy import stats

from calib.checks import evaluate_run, load_profile
from calib.web.pages import flagged_cells
from tests.conftest import make_run


def _curve():
    x = np.arange(1.0, 11.0)
    y = 2.0 * x + np.array([0.03, -0.05, 0.02, 0.04, -0.03, 0.01, 0.6, -0.02, 0.05, -0.04])
    y[1] = 2.0 * 2 * 1.6  # large enough for the review family (Holm at 0.5 %) to confirm it
    return x, y, evaluate_run(make_run(x, y), profile=load_profile("default")).curves[0]


def test_flags_come_from_the_structured_cells():
    x, y, curve = _curve()
    cells = [s.point.source_cell for s in curve.standards]
    t_ext = sm.OLS(y, sm.add_constant(x)).fit().get_influence().resid_studentized_external
    outlier = {c for c, t in zip(cells, t_ext) if abs(t) > stats.t.isf(0.05 / 20, 7)}
    slope, intercept = np.polyfit(x, y, 1)
    dev = np.abs(((y - intercept) / slope - x) / x)
    outside = {c for c, d, xi in zip(cells, dev, x) if d > (0.20 if xi == 1 else 0.15)}
    assert outlier and outside
    expected = {}
    for cell in cells:
        words = (["suggested outlier"] if cell in outlier else []) + (
            ["outside tolerance"] if cell in outside else [])
        if words:
            expected[cell] = "; ".join(words)
    assert flagged_cells(curve) == expected
    # No sentence is read: with every detail blanked the same cells are marked.
    blank = replace(curve, checks=tuple(replace(c, detail="") for c in curve.checks))
    assert flagged_cells(blank) == expected


def test_an_outlier_the_review_family_does_not_confirm_is_not_marked():
    _, _, curve = _curve()
    calmed = tuple(replace(c, verdict=type(c.verdict).PASS) if c.id == "outliers" else c
                   for c in curve.checks)
    marked = flagged_cells(replace(curve, checks=calmed))
    assert all("suggested outlier" not in why for why in marked.values())
    assert marked  # the standards outside tolerance stay marked
