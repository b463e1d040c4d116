"""Fitting calibration curves: design, weighted least squares, inference, diagnostics.

One curve: :func:`fit_curve` → :class:`CurveFit`; many at once: :func:`fit_batch`.
Diagnostics take a fit and return named result objects: linearity
(:func:`lack_of_fit`, :func:`mandel_test`, :func:`quadratic_term`,
:func:`residual_runs`, :func:`residual_drift`; the last two in
``residual_patterns``), variance (:func:`variance_ends`,
:func:`variance_levels`), outliers
(:func:`influence`, :func:`grubbs`), limits (:func:`detection_limits`,
:func:`ich_limits`, :func:`iso11843_limits`, :func:`method_sd`), bands
(:func:`mean_band`, :func:`prediction_band`) and two-curve comparison
(:func:`compare_curves`).

Names are imported on first use (PEP 562), so that a caller that needs one
module (``calib quantify`` reading a record needs :mod:`calib.fit.inverse`)
does not load every diagnostic and its scipy dependencies.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from calib.fit.bands import mean_band, prediction_band
    from calib.fit.batch import BatchFit, fit_batch
    from calib.fit.compare import CurveComparison, compare_curves
    from calib.fit.curve import CoefficientRow, CurveFit, fit_curve
    from calib.fit.limits import (
        DetectionLimit,
        Iso11843Limits,
        MethodSd,
        detection_limits,
        ich_limits,
        iso11843_limits,
        method_sd,
    )
    from calib.fit.linearity import (
        LackOfFit,
        MandelTest,
        QuadraticTerm,
        lack_of_fit,
        mandel_test,
        quadratic_term,
    )
    from calib.fit.outliers import GrubbsResult, Influence, grubbs, influence
    from calib.fit.residual_patterns import DriftTest, RunsTest, residual_drift, residual_runs
    from calib.fit.response_factor import ResponseFactors, response_factors
    from calib.fit.variance import (
        LevelVarianceTest,
        VarianceEndsTest,
        variance_ends,
        variance_levels,
    )

_EXPORTS = {
    "BatchFit": "calib.fit.batch",
    "CoefficientRow": "calib.fit.curve",
    "CurveComparison": "calib.fit.compare",
    "CurveFit": "calib.fit.curve",
    "DetectionLimit": "calib.fit.limits",
    "DriftTest": "calib.fit.residual_patterns",
    "GrubbsResult": "calib.fit.outliers",
    "Influence": "calib.fit.outliers",
    "Iso11843Limits": "calib.fit.limits",
    "LackOfFit": "calib.fit.linearity",
    "LevelVarianceTest": "calib.fit.variance",
    "MandelTest": "calib.fit.linearity",
    "MethodSd": "calib.fit.limits",
    "QuadraticTerm": "calib.fit.linearity",
    "ResponseFactors": "calib.fit.response_factor",
    "RunsTest": "calib.fit.residual_patterns",
    "VarianceEndsTest": "calib.fit.variance",
    "compare_curves": "calib.fit.compare",
    "detection_limits": "calib.fit.limits",
    "fit_batch": "calib.fit.batch",
    "fit_curve": "calib.fit.curve",
    "grubbs": "calib.fit.outliers",
    "ich_limits": "calib.fit.limits",
    "influence": "calib.fit.outliers",
    "iso11843_limits": "calib.fit.limits",
    "lack_of_fit": "calib.fit.linearity",
    "mandel_test": "calib.fit.linearity",
    "mean_band": "calib.fit.bands",
    "method_sd": "calib.fit.limits",
    "prediction_band": "calib.fit.bands",
    "quadratic_term": "calib.fit.linearity",
    "residual_drift": "calib.fit.residual_patterns",
    "residual_runs": "calib.fit.residual_patterns",
    "response_factors": "calib.fit.response_factor",
    "variance_ends": "calib.fit.variance",
    "variance_levels": "calib.fit.variance",
}

__all__ = [
    "BatchFit", "CoefficientRow", "CurveComparison", "CurveFit", "DetectionLimit", "DriftTest",
    "GrubbsResult", "Influence", "Iso11843Limits", "LackOfFit", "LevelVarianceTest",
    "MandelTest", "MethodSd", "QuadraticTerm", "ResponseFactors", "RunsTest",
    "VarianceEndsTest", "compare_curves", "detection_limits", "fit_batch",
    "fit_curve", "grubbs", "ich_limits", "influence", "iso11843_limits", "lack_of_fit",
    "mandel_test", "mean_band", "method_sd", "prediction_band", "quadratic_term",
    "residual_drift", "residual_runs", "response_factors",
    "variance_ends", "variance_levels",
]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'calib.fit' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
