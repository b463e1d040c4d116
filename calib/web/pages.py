"""What each page shows, taken from the library's results: words, rows and charts.

Only presentation: every figure here was computed by the library.
"""

from __future__ import annotations

import datetime as dt
import json
import math
from collections.abc import Mapping, Sequence
from typing import Any

__all__ = [
    "check_word", "choices", "curve_view", "num", "quantify_view", "record_view", "run_summary",
    "size_text", "trend_view", "verdict_word", "verify_view",
]

#: Verdicts in words, each with a symbol so that no verdict rests on colour.
_VERDICTS = {"accepted": ("Accepted", "✓"), "rejected": ("Rejected", "✗"),
             "needs-review": ("Needs review", "!")}
_CHECKS = {"pass": "Pass", "fail": "Fail", "warn": "Warning", "not-evaluated": "Not evaluated"}
FILTERS = (("all", "All curves"), ("rejected", "Rejected"), ("needs-review", "Needs review"),
           ("accepted", "Accepted"))


def num(value: Any, digits: int = 4) -> str:
    """A figure with ``digits`` significant digits; a dash when there is none.

    Examples
    --------
    >>> num(0.0118765), num(None), num(float("nan")), num(12345.678)
    ('0.01188', '—', '—', '1.235e+04')
    """
    if value is None or isinstance(value, bool):
        return "—"
    value = float(value)
    if not math.isfinite(value):
        return "—"
    return f"{value:.{digits}g}"


def verdict_word(value: Any) -> str:
    """A curve or run verdict in words with its symbol.

    Examples
    --------
    >>> verdict_word("needs-review")
    '! Needs review'
    """
    word, mark = _VERDICTS.get(str(getattr(value, "value", value)), (str(value), "?"))
    return f"{mark} {word}"


def check_word(value: Any) -> str:
    """A check's result in words.

    Examples
    --------
    >>> check_word("not-evaluated")
    'Not evaluated'
    """
    return _CHECKS.get(str(getattr(value, "value", value)), str(value))


def size_text(n: int) -> str:
    """A byte count for people.

    Examples
    --------
    >>> size_text(20 * 1024 * 1024), size_text(1500)
    ('20 MB', '1.5 kB')
    """
    if n >= 1024 * 1024:
        return f"{n / (1024 * 1024):g} MB"
    return f"{n / 1000:g} kB"


def check_date(text: str, which: str) -> str:
    """A search date ``YYYY-MM-DD``; otherwise a page error naming the box."""
    try:
        return dt.date.fromisoformat(text).isoformat()
    except ValueError:
        from calib.web.app import PageError

        label = "From" if which == "from" else "To"
        raise PageError(f"The {label} date must be written YYYY-MM-DD, e.g. 2026-11-30; "
                        f"got {text!r}.") from None


def choices(profiles: Sequence[str]) -> dict[str, Sequence[str]]:
    """The options of the profile, model and weighting lists."""
    from calib.options import Model, Weighting

    return {"profiles": profiles, "models": [m.value for m in Model],
            "weightings": [w.value for w in Weighting]}


def run_summary(assessment: Any, *, show: str = "all") -> dict[str, Any]:
    """One row per curve (filtered by verdict), with the counts of each verdict."""
    rows, counts = [], {"accepted": 0, "rejected": 0, "needs-review": 0}
    for index, curve in enumerate(assessment.curves):
        verdict = curve.verdict.value
        counts[verdict] = counts.get(verdict, 0) + 1
        if show not in ("all", verdict):
            continue
        rows.append({"index": index, "analyte": curve.analyte, "verdict": verdict,
                     "reasons": curve.reasons, "n_used": sum(s.used for s in curve.standards),
                     "n": len(curve.standards),
                     "slope": curve.fit.coefficients.get("slope") if curve.fit else None,
                     "r_squared": curve.fit.r_squared if curve.fit else None})
    return {"rows": rows, "counts": counts, "filters": FILTERS, "total": len(assessment.curves)}


def curve_view(assessment: Any, index: int) -> dict[str, Any]:
    """Everything the curve section shows: verdict sentence, charts, fit, checks, standards."""
    from calib.report import load_template
    from calib.report.wording import verdict_sentence
    from calib.web.svg import curve_charts

    curve = assessment.curves[index]
    units = assessment.run.units_of(curve.analyte)
    sentence = verdict_sentence({"verdict": curve.verdict.value, "checks": [
        {"title": c.title, "id": c.id, "verdict": c.verdict.value, "severity": c.severity.value}
        for c in curve.checks]}, load_template())
    analyst = {cell: reason for e in assessment.exclusions for cell in e.cells
               for reason in (e.reason,)}
    targets = {cell: e.target for e in assessment.exclusions for cell in e.cells}
    standards = []
    for s in curve.standards:
        cell = s.point.source_cell
        standards.append({
            "cell": cell, "sample": s.point.sample_id or "", "level": s.level,
            "concentration": s.point.concentration, "response": s.point.response,
            "fitted": s.fitted, "back": s.back_calculated, "deviation": s.deviation_pct,
            "used": s.used, "reason": s.exclusion_reason or "",
            "by_analyst": cell in analyst, "target": targets.get(cell, cell),
        })
    fit = curve.fit
    return {
        "index": index, "analyte": curve.analyte, "verdict": curve.verdict.value,
        "sentence": sentence, "reasons": curve.reasons, "model": curve.model.value,
        "weighting": curve.weighting.value, "confidence": curve.confidence,
        "charts": curve_charts(curve, unit_x=units.get("concentration", ""),
                               unit_y=units.get("response", "")),
        "coefficients": fit.coefficient_table() if fit else (),
        "fit": fit, "unfitted": curve.unfitted_reason, "lod": curve.lod, "loq": curve.loq,
        "checks": curve.checks, "standards": standards,
        "units": units, "lloq": curve.lloq, "uloq": curve.uloq,
    }


def verify_view(report: Any, label: str) -> dict[str, Any]:
    """A verification report as a sentence first, then the problems and what was checked."""
    count = len(report.problems)
    if report.ok:
        sentence = f"{label}: intact. Every check passed."
    else:
        sentence = (f"{label}: NOT VERIFIED, {count} problem{'s' if count != 1 else ''} found.")
    return {"ok": report.ok, "sentence": sentence,
            "problems": [p.message for p in report.problems], "notes": list(report.notes)}


def record_view(versions: Sequence[Any]) -> dict[str, Any]:
    """An archived record: its versions, curves and the latest signatures."""
    from calib.archive import record_facts

    latest = versions[-1]
    try:
        body = json.loads(latest.json)
    except ValueError:
        body = {}
    body = body if isinstance(body, dict) else {}
    facts = record_facts(body)
    return {"record_id": latest.record_id, "versions": versions, "latest": latest,
            "run": body.get("run") or {}, "curves": facts.curves,
            "signatures": body.get("signatures") or [], "intact": latest.digest_matches}


def trend_view(trend: Any) -> dict[str, Any]:
    """A trend: its control charts as SVG, the limits, and each point's flags."""
    from calib.archive import RULES
    from calib.web.svg import trend_charts

    rows = []
    for i, p in enumerate(trend.points):
        fired = "; ".join(f"{c.quantity}: {c.hits_text(i)}" for c in trend.charts
                          if c.rules_at(i))
        rows.append({"n": i + 1, "run_date": p.run_date, "record_id": p.record_id,
                     "values": [getattr(p.figures, c.quantity) for c in trend.charts],
                     "fired": fired})
    fired_rules = [f"{r}: {RULES[r]}" for r in RULES
                   if any(h.rule == r for c in trend.charts for h in c.hits)]
    return {"analyte": trend.analyte, "charts": trend_charts(trend) if trend.evaluated else [],
            "limits": trend.charts, "rows": rows, "flagged": trend.flagged,
            "fired_rules": fired_rules, "notes": trend.notes, "evaluated": trend.evaluated,
            "left_out": len(trend.left_out), "baseline": min(trend.baseline, len(trend.points))}


def quantify_view(document: Mapping[str, Any]) -> dict[str, Any]:
    """The ``calib.quantify/1`` document's curves, samples, QC and refusals, for the page."""
    return {"verdict": document.get("verdict"), "curves": document.get("curves", []),
            "samples": document.get("samples", []), "qc": document.get("qc", []),
            "refused": document.get("refused", {}), "forced": document.get("forced"),
            "cautions": document.get("cautions", ""), "notes": document.get("notes", [])}
