"""The fitted curve and its bands on a record's calibration plot, from the stored figures only.

Part of the PDF story (:mod:`calib.report.story`): the confidence band
through :func:`calib.fit.bands.mean_band` and the prediction band through
:func:`calib.fit.bands.prediction_band`, from the record's coefficients,
covariance and weighting, so a stored record draws the same band again.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from calib.fit.bands import mean_band, prediction_band
from calib.report.charts import CurveBand
from calib.report.formatting import as_float
from calib.report.wording import as_list, as_mapping, fit_weighting

__all__ = ["curve_band"]

_BAND_POINTS = 41


def curve_band(details: Mapping[str, Any] | None, curve: Mapping[str, Any],
               log_x: bool) -> CurveBand | None:
    """Fitted curve and confidence band of ``curve`` from its stored fit ``details``, or None.

    Drawn on a grid of the calibrated range (logarithmic when ``log_x``), with
    prediction half-widths when the details hold what they need.
    """
    coefficients = as_mapping(curve.get("coefficients"))
    if not details or not coefficients:
        return None
    names = [str(n) for n in as_list(details.get("coefficient_names"))]
    beta = [as_float(as_mapping(coefficients.get(n)).get("estimate")) for n in names]
    cov = [[as_float(v) for v in as_list(row)] for row in as_list(details.get("covariance"))]
    t_crit = as_float(details.get("t_critical"))
    lo, hi = as_float(details.get("x_min")), as_float(details.get("x_max"))
    if not (
        names and None not in beta and t_crit is not None and lo is not None
        and hi is not None and hi > lo and len(cov) == len(names)
        and all(len(r) == len(names) and None not in r for r in cov)
    ):
        return None
    grid = (np.geomspace(lo, hi, _BAND_POINTS) if log_x and lo > 0
            else np.linspace(lo, hi, _BAND_POINTS))
    try:
        yhat, half = mean_band(str(curve.get("model")), np.array(beta), np.array(cov),
                               t_crit, grid)
    except ValueError:
        return None  # a model the band cannot draw: the points are shown alone
    if not (np.all(np.isfinite(yhat)) and np.all(np.isfinite(half))):
        return None
    return CurveBand(tuple(grid.tolist()), tuple(yhat.tolist()), tuple(half.tolist()),
                     as_float(curve.get("confidence")) or 0.95,
                     _prediction(details, curve, beta, cov, t_crit, grid))


def _prediction(details: Mapping[str, Any], curve: Mapping[str, Any], beta: list[Any],
                cov: list[list[Any]], t_crit: float, grid: np.ndarray) -> tuple[float, ...] | None:
    """Prediction half-widths on ``grid`` from the stored figures, or None if they are missing."""
    sd, scale = as_float(details.get("residual_sd")), as_float(details.get("weight_scale"))
    if sd is None or scale is None:
        return None
    try:
        _, half = prediction_band(
            str(curve.get("model")), np.array(beta), np.array(cov), t_crit, grid,
            residual_sd=sd, weight_function=fit_weighting(details, curve),
            weight_scale=scale, level_variances=as_list(details.get("level_variances")),
        )
    except ValueError:
        return None
    return tuple(half.tolist()) if np.all(np.isfinite(half)) else None
