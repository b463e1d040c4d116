"""The ``calib.quantify/1`` document: a quantified batch as plain JSON-ready data.

Top level: ``schema``, ``tool_version``, ``created_at``, ``curve`` (where the
curve came from: the record id and digest, or the run file and its SHA-256,
and the profile), ``samples_source``, ``confidence``, ``forced`` (true when a
rejected curve was used on request; ``forced_analytes`` names them),
``refused`` (analytes whose samples were not quantified, with the reason),
``curves`` (per analyte: model, weighting, verdict, range, LLOQ, ULOQ, LOD,
how the intervals were worked out), ``samples``, ``qc``, ``verdict``,
``reasons``, ``notes`` and ``cautions``.

Each sample: ``sample_id``, ``analyte``, ``sample_type``, ``n_replicates``,
``mean_response``, ``concentration``, ``std_error``, ``ci_low``, ``ci_high``
(dilution applied; null outside the calibrated range), ``confidence``,
``dilution_factor``, ``flags``, ``reported``, ``note``, ``source_cells``,
``set_aside`` (readings not used, with the reason) and, for QCs, ``nominal``,
``found`` and ``deviation_pct``; ``content`` and ``content_unit`` (the
sample's content C × V / m, null without a weight and final volume) with
``sample_weight_kg`` and ``final_volume_l``.  Numbers keep full double precision; what
cannot be computed is null.  The PDF and XLSX writers render this document,
never live objects.
"""

from __future__ import annotations

import json
import math
from typing import Any

from calib import __version__
from calib.cautions import CAUTIONS
from calib.options import Model
from calib.quantify.batch import Batch
from calib.quantify.inverse import CLOSED_FORM, DELTA_METHOD
from calib.quantify.qc import QcSummary
from calib.quantify.workflow import QuantifyReport

__all__ = ["QUANTIFY_SCHEMA", "quantify_document", "quantify_json"]

QUANTIFY_SCHEMA = "calib.quantify/1"


def _num(value: float | None) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _qc(summary: QcSummary) -> dict[str, Any]:
    return {
        "analyte": summary.analyte,
        "verdict": summary.verdict,
        "severity": summary.rule.severity,
        "n": summary.n,
        "n_within": summary.n_within,
        "share_pct": _num(summary.share_pct),
        "detail": summary.detail,
        "levels": [{"nominal": lv.nominal, "n": lv.n, "n_within": lv.n_within,
                    "share_pct": lv.share_pct, "ok": lv.ok} for lv in summary.levels],
        "outcomes": [{"sample_id": o.sample_id, "nominal": o.nominal, "found": _num(o.found),
                      "deviation_pct": _num(o.deviation_pct), "allowed_pct": o.allowed_pct,
                      "at_lloq": o.at_lloq, "within": o.within} for o in summary.outcomes],
    }


def quantify_document(report: QuantifyReport, *, samples: bool = True) -> dict[str, Any]:
    """Build the ``calib.quantify/1`` document of a quantified batch.

    Parameters
    ----------
    report : QuantifyReport
        From :func:`calib.quantify.workflow.quantify_files`.
    samples : bool
        False leaves ``samples`` an empty list (for :func:`quantify_json`, which
        writes them from the batch's columns).

    Returns
    -------
    dict
        JSON-ready data (no NaN: missing figures are None).
    """
    batch, source = report.batch, report.curve
    curves: list[dict[str, Any]] = []
    for analyte, c in source.curves.items():
        level = batch.confidence if batch.confidence is not None else c.confidence
        status = ("forced" if analyte in batch.forced else
                  "refused" if analyte in batch.refused else "used")
        closed = c.model is Model.LINEAR and c.unweighted
        curves.append({
            "analyte": analyte, "model": c.model.value, "weighting": c.weighting.value,
            "verdict": c.verdict, "status": status, "unit": c.unit, "confidence": level,
            "n_points": c.n_points, "residual_df": c.residual_df,
            "residual_sd": _num(c.residual_sd), "t_critical": _num(c.t_critical(level)),
            "x_min": c.x_min, "x_max": c.x_max, "lloq": c.lloq, "uloq": c.uloq,
            "lod": _num(c.lod), "lod_method": c.lod_method, "loq": _num(c.loq),
            "interval_method": CLOSED_FORM if closed else DELTA_METHOD,
        })
    for analyte, reason in source.unfitted.items():
        curves.append({"analyte": analyte, "verdict": "rejected", "status": "refused",
                       "not_fitted": reason})
    summaries = [_qc(s) for s in batch.qc]
    verdicts = {s["verdict"] for s in summaries}
    overall = "fail" if "fail" in verdicts else "pass" if "pass" in verdicts else "not-evaluated"
    info = report.samples_source
    return {
        "schema": QUANTIFY_SCHEMA,
        "tool_version": __version__,
        "created_at": report.created_at,
        "curve": {
            "kind": source.kind, "file": source.file, "sha256": source.sha256,
            "record_id": source.record_id, "digest": source.digest, "profile": source.profile,
        },
        "samples_source": {"file": info.file, "sha256": info.sha256, "sheet": info.sheet,
                           "from_run": report.samples_from_run},
        "confidence": batch.confidence,
        "forced": bool(batch.forced),
        "forced_analytes": list(batch.forced),
        "refused": dict(batch.refused),
        "curves": curves,
        "samples": batch.table.document_samples() if samples else [],
        "qc": {"rule": source.qc_rule.as_dict(), "verdict": overall, "analytes": summaries},
        "verdict": batch.verdict,
        "reasons": list(batch.reasons),
        "notes": list(report.notes),
        "cautions": CAUTIONS,
    }


def quantify_json(document: dict[str, Any], batch: Batch) -> str:
    """The document as ``json.dumps(..., ensure_ascii=False, allow_nan=False)`` writes it.

    The samples are written from ``batch`` a column at a time, so ``document``
    may leave them out (:func:`quantify_document` with ``samples=False``); it
    must be the document of a report whose batch is ``batch``.
    """
    parts = []
    for key, value in document.items():
        text = batch.table.samples_json() if key == "samples" else json.dumps(
            value, ensure_ascii=False, allow_nan=False)
        parts.append(f"{json.dumps(key, ensure_ascii=False)}: {text}")
    return "{" + ", ".join(parts) + "}"
