"""What each page shows, taken from the library's results: words, rows and charts.

Only presentation: every figure here was computed by the library.
"""

from __future__ import annotations

import datetime as dt
import json
import math
from collections.abc import Mapping, Sequence
from typing import Any

from calib.verdict_words import VERDICT_LABELS

__all__ = ["check_word", "choices", "curve_view", "flagged_cells", "neighbours", "num",
           "quantify_view", "record_view", "run_summary", "size_text", "summary_order",
           "trend_view", "verdict_word", "verify_view"]

#: Verdicts in words, each with a symbol so that no verdict rests on colour.
_VERDICTS = {code: (VERDICT_LABELS[code], mark)
             for code, mark in (("accepted", "✓"), ("rejected", "✗"), ("needs-review", "!"))}
_CHECKS = {"pass": "Pass", "fail": "Fail", "warn": "Warning", "not-evaluated": "Not evaluated"}
_FILTERS = (("all", "All curves"),
           *((code, VERDICT_LABELS[code]) for code in ("rejected", "needs-review", "accepted")))


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
        from calib.errors import PageError

        label = "From" if which == "from" else "To"
        raise PageError(f"The {label} date must be written YYYY-MM-DD, e.g. 2026-11-30; "
                        f"got {text!r}.") from None


def form_options(profile: str, model: str | None, weighting: str | None,
                 confidence: str | None) -> dict[str, Any]:
    """The settings form's model, weighting and confidence, typed and checked with the profile.

    None stands for "the profile's".  A value not in the lists, a confidence that is
    not a fraction from 0.5 to below 1, or a model and weighting that cannot go
    together (with each other, the profile or its ``[[analyte]]`` entries) is a
    :class:`~calib.errors.PageError` (400) with the sentence to show by the form.
    """
    from calib.checks.overrides import given_options
    from calib.checks.profile import load_profile
    from calib.errors import OptionError, PageError
    from calib.options import Model, Weighting

    if model is not None and model not in {m.value for m in Model}:
        raise PageError(f"Unknown model {model!r}: choose one from the list.")
    if weighting is not None and weighting not in {w.value for w in Weighting}:
        raise PageError(f"Unknown weighting {weighting!r}: choose one from the list.")
    try:
        options = given_options(load_profile(profile), model, weighting, confidence)
    except OptionError as exc:
        text = str(exc)
        raise PageError(f"{text[:1].upper()}{text[1:]}.") from None
    return {"profile": profile, "model": None if model is None else options.model,
            "weighting": None if weighting is None else options.weighting,
            "confidence": None if confidence is None else options.confidence}


def choices(profiles: Sequence[str]) -> dict[str, Sequence[str]]:
    """The options of the profile, model and weighting lists."""
    from calib.options import Model, Weighting

    return {"profiles": profiles, "models": [m.value for m in Model],
            "weightings": [w.value for w in Weighting]}


#: Summary order: the curves that need the reviewer first.
_SEVERITY = {"rejected": 0, "needs-review": 1, "accepted": 2}
#: Checks that name a verdict reason (a failed rule that rejects or asks for review).
_WEIGHTY = {"reject", "review"}


def _short_check_name(title: str) -> str:
    """A check's title without its parenthesised method, for a summary cell.

    Examples
    --------
    >>> _short_check_name("Lack of fit against replicate error (F-test)")
    'Lack of fit against replicate error'
    >>> _short_check_name("Weighting advice")
    'Weighting advice'
    """
    return title.split(" (", 1)[0].strip() or title


#: How a flagged cell is described, by the check that flags it (else its short title).
_FLAG_WORDS = {"outliers": "suggested outlier", "back-calculation": "outside tolerance"}


def flagged_cells(curve: Any) -> dict[str, str]:
    """Cells the checks single out, each with why: suggested outliers, standards out of tolerance.

    Taken from each check's ``cells`` (no sentence is parsed, no statistic computed):
    a standard read back outside its tolerance whatever the check's verdict, the cells
    of any other check while it warns or fails (a suggested outlier the review family
    does not confirm is not marked).
    """
    out: dict[str, str] = {}
    for check in sorted(curve.checks, key=lambda c: c.id != "outliers"):  # outliers named first
        if not check.cells or (check.id != "back-calculation"
                               and check.verdict.value not in ("warn", "fail")):
            continue
        why = _FLAG_WORDS.get(check.id, _short_check_name(check.title))
        for cell in check.cells:
            out[cell] = f"{out[cell]}; {why}" if cell in out else why
    return out


def _worst(curve: Any) -> tuple[float | None, str]:
    """The largest back-calculated deviation (%) of a standard in the fit, and its cell."""
    best: tuple[float | None, str] = (None, "")
    for s in curve.standards:
        dev = s.deviation_pct
        if (s.used and dev is not None and math.isfinite(dev)
                and (best[0] is None or abs(dev) > abs(best[0]))):
            best = (dev, s.point.source_cell)
    return best


def _failed_checks(checks: Sequence[tuple[str, str, str]], verdict: str) -> list[str]:
    """Short names of the checks behind a verdict, from (title, result, severity) triples.

    The failed rules that reject or ask for review; for a curve needing review
    with none failed, the warnings that ask for review (a suggested outlier).

    Examples
    --------
    >>> _failed_checks([("Suggested outliers (Grubbs)", "warn", "review"),
    ...                ("Weighting advice", "warn", "info")], "needs-review")
    ['Suggested outliers']
    """
    names = [_short_check_name(t) for t, r, sev in checks if r == "fail" and sev in _WEIGHTY]
    if not names and verdict != "accepted":
        names = [_short_check_name(t) for t, r, sev in checks if r == "warn" and sev in _WEIGHTY]
    return names


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
        failed = _failed_checks([(c.title, c.verdict.value, c.severity.value)
                                for c in curve.checks], verdict)
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
    return {"rows": rows, "counts": counts, "filters": _FILTERS, "total": len(assessment.curves)}


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
        "charts": _curve_plots(curve, index, unit_x=units.get("concentration", ""),
                              unit_y=units.get("response", "")),
        "coefficients": fit.coefficient_table() if fit else (),
        "fit": fit, "unfitted": curve.unfitted_reason, "lod": curve.lod, "loq": curve.loq,
        "checks": curve.checks, "standards": standards,
        "units": units, "lloq": curve.lloq, "uloq": curve.uloq,
        "neighbours": neighbours(assessment, index), "total": len(assessment.curves),
    }


def _titles(unit_x: str, unit_y: str) -> tuple[str, str, str]:
    return ("Concentration" + (f" ({unit_x})" if unit_x else ""),
            "Response" + (f" ({unit_y})" if unit_y else ""),
            "Residual" + (f" ({unit_y})" if unit_y else ""))


def _curve_plots(curve: Any, index: int, *, unit_x: str = "", unit_y: str = "") -> list[str]:
    """Calibration plot (with the fitted curve and its confidence band) and residual plot.

    Each standard is a link to its row of the standards table (``#std-CURVE-ROW``)
    named by its cell.
    """
    import numpy as np

    from calib.report.charts import wants_log_axis
    from calib.web.plot import Mark, chart_svg, residual_marks

    x_title, y_title, r_title = _titles(unit_x, unit_y)
    flags = flagged_cells(curve)
    marks = [Mark(s.point.concentration, s.point.response, s.used, f"#std-{index}-{k}",
                  f"{s.point.source_cell}: nominal {num(s.point.concentration)}, response "
                  f"{num(s.point.response)}{'' if s.used else ' (excluded)'}"
                  + (f"; flagged: {flags[s.point.source_cell]}"
                     if s.point.source_cell in flags else ""),
                  s.point.source_cell in flags)
             for k, s in enumerate(curve.standards, start=1)]
    xs = [m.x for m in marks]
    log_x = wants_log_axis(xs)
    line: list[tuple[float, float]] = []
    band: list[tuple[float, float, float]] = []
    limits: list[tuple[float, float, float]] = []
    fit = curve.fit
    if fit is not None and xs:
        lo, hi = min(xs), max(xs)
        grid = np.geomspace(lo, hi, 80) if log_x and lo > 0 else np.linspace(lo, hi, 80)
        yhat, half = fit.predict(grid), fit.confidence_band(grid)
        if np.all(np.isfinite(yhat)):
            line = list(zip(grid.tolist(), yhat.tolist()))
            if np.all(np.isfinite(half)):
                band = [(x, y - h, y + h) for x, y, h in zip(grid.tolist(), yhat.tolist(),
                                                              half.tolist())]
            pred = fit.prediction_band(grid)
            if np.all(np.isfinite(pred)):
                limits = [(x, y - h, y + h) for x, y, h in zip(grid.tolist(), yhat.tolist(),
                                                                pred.tolist())]
    words = f"{curve.confidence * 100:g} % confidence band of the mean"
    plots = [chart_svg(marks, x_title=x_title, y_title=y_title, curve=line, band=band,
                       band_words=words, limits=limits, log_x=log_x,
                       limits_words=f"{curve.confidence * 100:g} % prediction limits for one "
                                    "reading",
                       label=f"{curve.analyte}: response against concentration")]
    residuals = residual_marks(marks, [s.fitted for s in curve.standards])
    if residuals:
        plots.append(chart_svg(residuals, x_title=x_title, y_title=r_title, zero_line=True,
                               log_x=log_x, label=f"{curve.analyte}: residuals"))
    return plots


def record_curves(body: Mapping[str, Any], *, plots: bool = True) -> list[dict[str, Any]]:
    """Each curve of a record body: verdict, failed checks by short name, reasons, plots.

    What a signer reads before signing; drawn from the record itself, so it is
    exactly what the signature will cover.
    """
    from calib.web.plot import Mark, chart_svg, residual_marks

    check = body.get("check") if isinstance(body.get("check"), Mapping) else {}
    run = body.get("run") if isinstance(body.get("run"), Mapping) else {}
    units = run.get("units") if isinstance(run.get("units"), Mapping) else {}
    out = []
    curves = check.get("curves") if isinstance(check.get("curves"), list) else []
    for index, c in enumerate(x for x in curves if isinstance(x, Mapping)):
        checks = [k for k in c.get("checks") or () if isinstance(k, Mapping)]
        failed = _failed_checks([(str(k.get("title") or k.get("id")), str(k.get("verdict")),
                                 str(k.get("severity"))) for k in checks],
                               str(c.get("verdict", "")))
        points = [p for p in c.get("points") or () if isinstance(p, Mapping)]
        charts: list[str] = []
        if plots and points:
            x_title, y_title, r_title = _titles(str(units.get("concentration") or ""),
                                                str(units.get("response") or ""))
            marks, fitted = [], []
            for p in points:
                x, y = p.get("concentration"), p.get("response")
                if isinstance(x, (int, float)) and isinstance(y, (int, float)):
                    marks.append(Mark(float(x), float(y), bool(p.get("included", True)), "",
                                      f"{p.get('source_cell', '')}: nominal {num(x)}, "
                                      f"response {num(y)}"))
                    f = p.get("fitted")
                    fitted.append(float(f) if isinstance(f, (int, float)) else None)
            pairs = sorted((m.x, f) for m, f in zip(marks, fitted) if f is not None)
            analyte = str(c.get("analyte", ""))
            if marks:
                charts.append(chart_svg(marks, x_title=x_title, y_title=y_title, curve=pairs,
                                        label=f"{analyte}: response against concentration"))
                residuals = residual_marks(marks, fitted)
                if residuals:
                    charts.append(chart_svg(residuals, x_title=x_title, y_title=r_title,
                                            zero_line=True, label=f"{analyte}: residuals"))
        out.append({"index": index, "analyte": str(c.get("analyte", "")),
                    "rank": _SEVERITY.get(str(c.get("verdict", "")), 3),
                    "verdict": str(c.get("verdict", "")), "checks": failed,
                    "reasons": [str(r) for r in c.get("reasons") or ()], "charts": charts})
    return sorted(out, key=lambda c: (c["rank"], c["index"]))


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
            "review": record_curves(body),
            "signatures": body.get("signatures") or [], "intact": latest.digest_matches}


def trend_view(trend: Any) -> dict[str, Any]:
    """A trend: its control charts as SVG, the limits, and each point's flags."""
    from calib.archive import RULES

    rows = []
    for i, p in enumerate(trend.points):
        fired = "; ".join(f"{c.quantity}: {c.hits_text(i)}" for c in trend.charts
                          if c.rules_at(i))
        rows.append({"n": i + 1, "run_date": p.run_date, "record_id": p.record_id,
                     "values": [getattr(p.figures, c.quantity) for c in trend.charts],
                     "fired": fired})
    fired_rules = [f"{r}: {RULES[r]}" for r in RULES
                   if any(h.rule == r for c in trend.charts for h in c.hits)]
    return {"analyte": trend.analyte, "charts": _trend_plots(trend) if trend.evaluated else [],
            "limits": trend.charts, "rows": rows, "flagged": trend.flagged,
            "fired_rules": fired_rules, "notes": trend.notes, "evaluated": trend.evaluated,
            "left_out": len(trend.left_out), "baseline": min(trend.baseline, len(trend.points))}


_QUANTITIES = {"slope": "Slope b", "intercept": "Intercept a", "residual_sd": "Residual SD"}


def _trend_plots(trend: Any) -> list[tuple[str, str]]:
    """(title, svg) of each control chart with limits, drawn against the run dates."""
    from calib.web.plot import trend_svg

    dates = [p.run_date for p in trend.points]
    out = []
    for chart in trend.charts:
        lim = chart.limits
        if lim is None:
            continue
        title = _QUANTITIES.get(chart.quantity, chart.quantity)
        out.append((title, trend_svg(
            dates, [float("nan") if v is None else float(v) for v in chart.values],
            y_title=title, label=f"{trend.analyte}: control chart of {title.lower()} by run date",
            mean=lim.mean, warning=lim.warning, action=lim.action, baseline=trend.baseline,
            span=trend.baseline_span, span_label=trend.baseline_label,
            flagged=chart.flagged_points())))
    return out


def quantify_view(document: Mapping[str, Any]) -> dict[str, Any]:
    """The ``calib.quantify/1`` document for the page: source, curves, samples, QC, refusals.

    Each sample row gets its analyte's unit; each QC its nominal, found value and
    deviation as the document holds them.
    """
    curves = [c for c in document.get("curves", []) if isinstance(c, Mapping)]
    units = {c.get("analyte"): c.get("unit") or "" for c in curves}
    samples = [{**s, "unit": units.get(s.get("analyte"), "")}
               for s in document.get("samples", []) if isinstance(s, Mapping)]
    qc = document.get("qc") if isinstance(document.get("qc"), Mapping) else {}
    qc_rows = [{**o, "analyte": a.get("analyte"), "unit": units.get(a.get("analyte"), "")}
               for a in qc.get("analytes", []) if isinstance(a, Mapping)
               for o in a.get("outcomes", []) if isinstance(o, Mapping)]
    source = document.get("curve") if isinstance(document.get("curve"), Mapping) else {}
    return {"verdict": document.get("verdict"), "curves": curves, "samples": samples,
            "qc": qc, "qc_rows": qc_rows, "source": source,
            "samples_source": document.get("samples_source") or {},
            "refused": document.get("refused", {}), "forced": document.get("forced"),
            "reasons": document.get("reasons", []),
            "cautions": document.get("cautions", ""), "notes": document.get("notes", [])}
