"""Quantifying unknown samples against an accepted calibration curve.

The pipeline::

    calib.quantify.source    load_curves(path) -> CurveSource      run file (checked now) or record
    calib.quantify.samples   read_samples(path) -> SampleSheet     unknowns and QCs, dilution factors
    calib.quantify.sampletable  SampleRows                         the injections as columns
    calib.quantify.inverse   inverse_predict(curve, y0, m=...)     x₀, s(x₀) and its interval
    calib.quantify.batch     quantify(curves, readings) -> Batch   flags, reported values, verdict
    calib.quantify.results   ResultColumns                         every sample's result as columns
    calib.quantify.qc        judge_qcs(...) -> QcSummary           QC acceptance (2/3, half per level)
    calib.quantify.workflow  quantify_files(curve, samples)        all of the above in one call
    calib.quantify.document  quantify_document(report)             the calib.quantify/1 JSON

The curve object, inverse prediction and the QC judgement (with the grouping
of injections into samples and their means) live in :mod:`calib.fit`
(``calcurve``, ``inverse``, ``qc``), below both this package and
:mod:`calib.checks`: neither imports the other.  A samples file is read and
quantified a column at a time; :class:`Reading` and :class:`SampleResult`
objects are built only when asked for.  Names are imported
lazily, so that ``import calib.quantify`` stays light.
"""

from __future__ import annotations

import importlib
from typing import Any

_EXPORTS = {
    "CalibrationCurve": "calib.quantify.curve",
    "curves_from_record": "calib.quantify.curve",
    "InversePrediction": "calib.quantify.inverse",
    "cg4_std_error": "calib.quantify.inverse",
    "delta_std_error": "calib.quantify.inverse",
    "inverse_predict": "calib.quantify.inverse",
    "QcRule": "calib.quantify.qc",
    "QcSummary": "calib.quantify.qc",
    "judge_qcs": "calib.quantify.qc",
    "Reading": "calib.quantify.samples",
    "SampleSheet": "calib.quantify.samples",
    "read_samples": "calib.quantify.samples",
    "readings_from_run": "calib.quantify.samples",
    "Batch": "calib.quantify.batch",
    "Flag": "calib.quantify.batch",
    "ReportingConvention": "calib.quantify.batch",
    "SampleResult": "calib.quantify.batch",
    "quantify": "calib.quantify.batch",
    "CurveSource": "calib.quantify.source",
    "load_curves": "calib.quantify.source",
    "QuantifyReport": "calib.quantify.workflow",
    "quantify_files": "calib.quantify.workflow",
    "QUANTIFY_SCHEMA": "calib.quantify.document",
    "quantify_document": "calib.quantify.document",
}

__all__ = [
    "QUANTIFY_SCHEMA", "Batch", "CalibrationCurve", "CurveSource", "Flag", "InversePrediction",
    "QcRule", "QcSummary", "QuantifyReport", "Reading", "ReportingConvention", "SampleResult",
    "SampleSheet", "cg4_std_error", "curves_from_record", "delta_std_error", "inverse_predict",
    "judge_qcs", "load_curves", "quantify", "quantify_document", "quantify_files",
    "read_samples", "readings_from_run",
]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'calib.quantify' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
