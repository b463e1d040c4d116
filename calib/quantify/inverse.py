"""Inverse prediction for ``calib quantify``: the figures of :mod:`calib.fit.inverse`.

The formulas live in :mod:`calib.fit.inverse`, below both the checks (the
``qc`` rule) and quantify, so that neither imports the other; this module
names them where the quantify pipeline is described.
"""

from __future__ import annotations

from calib.fit.inverse import (
    CLOSED_FORM,
    DELTA_METHOD,
    InverseBatch,
    InversePrediction,
    cg4_std_error,
    delta_std_error,
    inverse_predict,
    inverse_predict_many,
)

__all__ = [
    "CLOSED_FORM", "DELTA_METHOD", "InverseBatch", "InversePrediction", "cg4_std_error",
    "delta_std_error", "inverse_predict", "inverse_predict_many",
]
