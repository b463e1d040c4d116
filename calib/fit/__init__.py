"""Fitting calibration curves: design, weighted least squares, inference."""

from calib.fit.curve import CoefficientRow, CurveFit, fit_curve
from calib.fit.limits import DetectionLimit, ich_limits

__all__ = ["CoefficientRow", "CurveFit", "DetectionLimit", "fit_curve", "ich_limits"]
