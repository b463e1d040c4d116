"""calib: validate laboratory calibration curves and issue calibration records.

The pipeline, one sub-package per stage::

    calib.io       read_run(path) -> Run             spreadsheet / CSV in
    calib.fit      fit_curve(x, y, ...) -> CurveFit   weighted least squares, t-inference
    calib.checks   evaluate_run(run) -> RunAssessment acceptance profile, verdicts
    calib.record   build_record(assessment) -> Record canonical JSON, digest, id
    calib.report   write_pdf(...) -> bytes            the PDF calibration record

``calib.service`` is what the commands do as library calls (check, issue,
export, file, quantify, trend, sign, verify); :func:`quantify_files` reads
unknowns against a checked curve.  The names in ``__all__`` are the public
face; the errors are those a library call can raise to its caller (all
:class:`CalibError`).  Names are imported lazily so that ``calib --help``
starts fast.

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

__version__ = "0.3.0"

_EXPORTS = {
    "ArchiveError": "calib.errors",
    "BaselineError": "calib.errors",
    "CalibError": "calib.errors",
    "ConfigError": "calib.errors",
    "InputError": "calib.errors",
    "IntegrityError": "calib.errors",
    "KeyFileError": "calib.errors",
    "NotAcceptedError": "calib.errors",
    "PassphraseError": "calib.errors",
    "ProfileError": "calib.errors",
    "RangeError": "calib.errors",
    "RefusedAction": "calib.errors",
    "SignOffError": "calib.errors",
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
    "QuantifyReport": "calib.quantify.workflow",
    "quantify_files": "calib.quantify.workflow",
}

#: Sub-modules that are part of the public face as a whole.
_MODULES = {"service": "calib.service"}

__all__ = [
    "CAUTIONS", "ArchiveError", "BaselineError", "CalibError", "CheckResult", "ConfigError",
    "CurveAssessment", "CurveFit", "CurveVerdict", "InputError", "IntegrityError", "KeyFileError",
    "Model", "NotAcceptedError", "PassphraseError", "Point", "Profile", "ProfileError",
    "QuantifyReport", "RangeError", "Record", "RefusedAction", "Run", "RunAssessment",
    "SampleType", "Severity", "SignOffError", "SourceInfo", "TemplateError", "Verdict",
    "Weighting", "__version__", "build_record", "check_document", "evaluate_run", "fit_curve",
    "load_profile", "quantify_files", "read_run", "service", "write_pdf",
]


def __getattr__(name: str) -> Any:
    if name in _MODULES:
        return importlib.import_module(_MODULES[name])
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'calib' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
