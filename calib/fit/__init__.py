"""Fitting calibration curves: design, weighted least squares, inference, diagnostics.

One curve: :func:`fit_curve` → :class:`CurveFit`; many at once: :func:`fit_batch`.
Diagnostics take a fit and return named result objects: linearity
(:func:`lack_of_fit`, :func:`mandel_test`, :func:`quadratic_term`,
:func:`residual_runs`, :func:`residual_drift`), variance (:func:`variance_ends`,
:func:`variance_levels`, :func:`recommend_weighting`), outliers
(:func:`influence`, :func:`grubbs`), limits (:func:`detection_limits`,
:func:`ich_limits`, :func:`iso11843_limits`, :func:`method_sd`), bands
(:func:`mean_band`, :func:`prediction_band`) and two-curve comparison
(:func:`compare_curves`).
"""

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
    DriftTest,
    LackOfFit,
    MandelTest,
    QuadraticTerm,
    RunsTest,
    lack_of_fit,
    mandel_test,
    quadratic_term,
    residual_drift,
    residual_runs,
)
from calib.fit.outliers import GrubbsResult, Influence, grubbs, influence
from calib.fit.response_factor import ResponseFactors, response_factors
from calib.fit.variance import (
    LevelVarianceTest,
    VarianceEndsTest,
    WeightingAdvice,
    recommend_weighting,
    variance_ends,
    variance_levels,
)

__all__ = [
    "BatchFit", "CoefficientRow", "CurveComparison", "CurveFit", "DetectionLimit", "DriftTest",
    "GrubbsResult", "Influence", "Iso11843Limits", "LackOfFit", "LevelVarianceTest",
    "MandelTest", "MethodSd", "QuadraticTerm", "ResponseFactors", "RunsTest",
    "VarianceEndsTest", "WeightingAdvice", "compare_curves", "detection_limits", "fit_batch",
    "fit_curve", "grubbs", "ich_limits", "influence", "iso11843_limits", "lack_of_fit",
    "mandel_test", "mean_band", "method_sd", "prediction_band", "quadratic_term",
    "recommend_weighting", "residual_drift", "residual_runs", "response_factors",
    "variance_ends", "variance_levels",
]
