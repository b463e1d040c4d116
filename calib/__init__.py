"""calib: validate laboratory calibration curves and issue calibration records.

The pipeline, one sub-package per stage::

    calib.io       read_run(path) -> Run             spreadsheet / CSV in
    calib.fit      fit_curve(x, y, ...) -> CurveFit   weighted least squares, t-inference
    calib.checks   evaluate_run(run) -> RunAssessment acceptance profile, verdicts
    calib.record   build_record(assessment) -> Record canonical JSON, digest, id
    calib.report   write_pdf(...) -> bytes            the PDF calibration record

Names are imported lazily so that ``calib --help`` starts fast.

Examples
--------
>>> import calib
>>> fit = calib.fit_curve([1, 2, 3, 4, 5], [2.1, 3.9, 6.2, 8.1, 9.8])
>>> fit.model.value
'linear'
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.2.0"

_EXPORTS = {
    "CalibError": "calib.errors",
    "InputError": "calib.errors",
    "NotAcceptedError": "calib.errors",
    "ProfileError": "calib.errors",
    "TemplateError": "calib.errors",
    "Model": "calib.options",
    "Weighting": "calib.options",
    "SampleType": "calib.options",
    "Point": "calib.run",
    "Run": "calib.run",
    "SourceInfo": "calib.run",
    "read_run": "calib.io",
    "CurveFit": "calib.fit",
    "fit_curve": "calib.fit",
    "CheckResult": "calib.checks",
    "CurveAssessment": "calib.checks",
    "CurveVerdict": "calib.checks",
    "Profile": "calib.checks",
    "RunAssessment": "calib.checks",
    "Severity": "calib.checks",
    "Verdict": "calib.checks",
    "evaluate_run": "calib.checks",
    "load_profile": "calib.checks",
    "Record": "calib.record",
    "build_record": "calib.record",
    "check_document": "calib.record",
    "write_pdf": "calib.report",
    "CAUTIONS": "calib.cautions",
}

__all__ = [
    "CAUTIONS", "CalibError", "CheckResult", "CurveAssessment", "CurveFit", "CurveVerdict",
    "InputError", "Model", "NotAcceptedError", "Point", "Profile", "ProfileError", "Record", "Run",
    "RunAssessment", "SampleType", "Severity", "SourceInfo", "TemplateError", "Verdict",
    "Weighting", "__version__", "build_record", "check_document", "evaluate_run", "fit_curve",
    "load_profile", "read_run", "write_pdf",
]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'calib' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
