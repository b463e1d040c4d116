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
    "check_word", "choices", "curve_view", "flagged_cells", "neighbours", "num", "quantify_view", "record_view", "run_summary",
    "short_check_name", "size_text", "summary_order", "trend_view", "verdict_word", "verify_view",
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


#: Summary order: the curves that need the reviewer first.
_SEVERITY = {"rejected": 0, "needs-review": 1, "accepted": 2}
#: Checks that name a verdict reason (a failed rule that rejects or asks for review).
_WEIGHTY = {"reject", "review"}


def short_check_name(title: str) -> str:
    """A check's title without its parenthesised method, for a summary cell.

    Examples
    --------
    >>> short_check_name("Lack of fit against replicate error (F-test)")
    'Lack of fit against replicate error'
    >>> short_check_name("Weighting advice")
    'Weighting advice'
    """
    return title.split(" (", 1)[0].strip() or title


def flagged_cells(curve: Any) -> dict[str, str]:
    """Cells the checks single out, each with why: suggested outliers, standards out of tolerance.

    Read from the outlier and back-calculation checks' own sentences, which name
    each cell (``CELL: finding`` and ``outside: CELL (+x %)``); no statistic is
    computed here.
    """
    out: dict[str, str] = {}
    details = {c.id: (c.verdict.value, c.detail) for c in curve.checks}
    verdict, detail = details.get("outliers", ("", ""))
    cells = [s.point.source_cell for s in curve.standards]
    if verdict == "warn":
        head = detail.split(". ", 1)[0]
        for cell in cells:
            if f"{cell}:" in head:
                out[cell] = "suggested outlier"
    verdict, detail = details.get("back-calculation", ("", ""))
    if "; outside: " in detail:
        tail = detail.split("; outside: ", 1)[1]
        for cell in cells:
            if f"{cell} (" in tail:
                out[cell] = (out[cell] + "; " if cell in out else "") + "outside tolerance"
    return out


def _worst(curve: Any) -> tuple[float | None, str]:
    """The largest back-calculated deviation (%) of a standard in the fit, and its cell."""
    best: tuple[float | None, str] = (None, "")
    for s in curve.standards:
        dev = s.deviation_pct
        if s.used and dev is not None and math.isfinite(dev):
            if best[0] is None or abs(dev) > abs(best[0]):
                best = (dev, s.point.source_cell)
    return best


def summary_order(assessment: Any) -> list[int]:
    """Curve indexes, rejected first, then needing review, then accepted (file order within)."""
    return sorted(range(len(assessment.curves)),
                  key=lambda i: (_SEVERITY.get(assessment.curves[i].verdict.value, 3), i))


def run_summary(assessment: Any, *, show: str = "all") -> dict[str, Any]:
    """One row per curve, worst verdict first (filtered by verdict), with each verdict's count.

    Each row names the failed checks by their short names, the worst
    back-calculated deviation and the cells the checks single out.
    """
    rows, counts = [], {"accepted": 0, "rejected": 0, "needs-review": 0}
    for curve in assessment.curves:
        counts[curve.verdict.value] = counts.get(curve.verdict.value, 0) + 1
    for index in summary_order(assessment):
        curve = assessment.curves[index]
        verdict = curve.verdict.value
        if show not in ("all", verdict):
            continue
        failed = [short_check_name(c.title) for c in curve.checks
                  if c.verdict.value == "fail" and c.severity.value in _WEIGHTY]
        if not failed and verdict != "accepted":
            failed = [short_check_name(c.title) for c in curve.checks
                      if c.verdict.value == "warn" and c.severity.value in _WEIGHTY]
        if curve.fit is None and curve.unfitted_reason:
            failed.insert(0, "Not fitted")
        worst, worst_cell = _worst(curve)
        rows.append({"index": index, "analyte": curve.analyte, "verdict": verdict,
                     "checks": failed, "worst": worst, "worst_cell": worst_cell,
                     "flagged": flagged_cells(curve),
                     "n_used": sum(s.used for s in curve.standards),
                     "n": len(curve.standards),
                     "slope": curve.fit.coefficients.get("slope") if curve.fit else None,
                     "r_squared": curve.fit.r_squared if curve.fit else None})
    return {"rows": rows, "counts": counts, "filters": FILTERS, "total": len(assessment.curves)}


def neighbours(assessment: Any, index: int) -> tuple[int | None, int | None]:
    """The previous and next curve not accepted, in the summary's order (None at either end)."""
    order = [i for i in summary_order(assessment)
             if assessment.curves[i].verdict.value != "accepted"]
    if index in order:
        at = order.index(index)
        return (order[at - 1] if at > 0 else None,
                order[at + 1] if at + 1 < len(order) else None)
    return (None, order[0]) if order else (None, None)


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
    flags = flagged_cells(curve)
    standards = []
    for s in curve.standards:
        cell = s.point.source_cell
        standards.append({
            "cell": cell, "sample": s.point.sample_id or "", "level": s.level,
            "concentration": s.point.concentration, "response": s.point.response,
            "fitted": s.fitted, "back": s.back_calculated, "deviation": s.deviation_pct,
            "used": s.used, "reason": s.exclusion_reason or "",
            "by_analyst": cell in analyst, "target": targets.get(cell, cell),
            "flag": flags.get(cell, ""),
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
        "neighbours": neighbours(assessment, index), "total": len(assessment.curves),
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
