"""The tables every export shares, read from a ``calib.check/1`` document.

Exports work from the document, not from the live assessment, so the XLSX,
the CSV and the JSON always say the same thing, and a record's embedded
document can be exported again later.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

__all__ = ["CHECK_COLUMNS", "COEFFICIENT_COLUMNS", "POINT_COLUMNS", "SUMMARY_COLUMNS",
           "check_rows", "coefficient_rows", "point_rows", "summary_rows"]

#: (key, heading) of the summary table: one row per curve.
SUMMARY_COLUMNS: tuple[tuple[str, str], ...] = (
    ("analyte", "Analyte"),
    ("verdict", "Verdict"),
    ("model", "Model"),
    ("weighting", "Weighting"),
    ("confidence", "Confidence"),
    ("n_points", "N"),
    ("n_levels", "Levels"),
    ("residual_df", "Residual df"),
    ("slope", "Slope"),
    ("slope_se", "SE slope"),
    ("slope_ci_low", "Slope CI low"),
    ("slope_ci_high", "Slope CI high"),
    ("intercept", "Intercept"),
    ("intercept_se", "SE intercept"),
    ("intercept_p", "p intercept"),
    ("intercept_ci_low", "Intercept CI low"),
    ("intercept_ci_high", "Intercept CI high"),
    ("quadratic", "Quadratic"),
    ("quadratic_se", "SE quadratic"),
    ("residual_sd", "Residual SD"),
    ("r_squared", "R²"),
    ("r", "r"),
    ("lod", "LOD"),
    ("loq", "LOQ"),
    ("lloq", "LLOQ"),
    ("uloq", "ULOQ"),
    ("range_applied", "Range applied"),
    ("range_reason", "Range reason"),
    ("range_proposed", "Range proposed"),
    ("proposed_verdict", "Verdict on the proposed range"),
    ("failing_checks", "Checks not passed"),
    ("reasons", "Reasons"),
)

COEFFICIENT_COLUMNS = (("name", "Coefficient"), ("estimate", "Estimate"),
                       ("std_error", "SE"), ("t_value", "t"), ("p_value", "p"),
                       ("ci_low", "CI low"), ("ci_high", "CI high"))
CHECK_COLUMNS = (("id", "Check"), ("title", "Title"), ("verdict", "Verdict"),
                 ("severity", "Severity"), ("value", "Value"), ("limit", "Limit"),
                 ("detail", "Explanation"))
POINT_COLUMNS = (("source_cell", "Source cell"), ("level", "Level"),
                 ("concentration", "Concentration"), ("response", "Response"),
                 ("fitted", "Fitted response"), ("back_calculated", "Back-calculated"),
                 ("deviation_pct", "Deviation %"), ("included", "In the fit"),
                 ("exclusion_reason", "Exclusion reason"))


def _get(mapping: Any, *keys: str) -> Any:
    for key in keys:
        if not isinstance(mapping, Mapping):
            return None
        mapping = mapping.get(key)
    return mapping


def _range(low: Any, high: Any) -> str | None:
    if low is None or high is None:
        return None
    return f"{low:g} to {high:g}"


def summary_rows(document: Mapping[str, Any]) -> list[dict[str, Any]]:
    """One row per curve, keyed as :data:`SUMMARY_COLUMNS`.

    Examples
    --------
    >>> doc = {"curves": [{"analyte": "A", "verdict": "accepted", "checks": [],
    ...                    "coefficients": {"slope": {"estimate": 2.0}}}]}
    >>> row = summary_rows(doc)[0]
    >>> row["analyte"], row["slope"], row["intercept"], row["failing_checks"]
    ('A', 2.0, None, '')
    """
    rows = []
    for curve in document.get("curves", []):
        coef = curve.get("coefficients") or {}
        span = curve.get("working_range") or {}
        applied, proposed = span.get("applied"), span.get("proposed")
        failing = [c["id"] for c in curve.get("checks", [])
                   if c.get("verdict") in ("fail", "warn")]
        rows.append({
            "analyte": curve.get("analyte"),
            "verdict": curve.get("verdict"),
            "model": curve.get("model"),
            "weighting": curve.get("weighting"),
            "confidence": curve.get("confidence"),
            "n_points": curve.get("n_points"),
            "n_levels": curve.get("n_levels"),
            "residual_df": curve.get("residual_df"),
            "slope": _get(coef, "slope", "estimate"),
            "slope_se": _get(coef, "slope", "std_error"),
            "slope_ci_low": _get(coef, "slope", "ci_low"),
            "slope_ci_high": _get(coef, "slope", "ci_high"),
            "intercept": _get(coef, "intercept", "estimate"),
            "intercept_se": _get(coef, "intercept", "std_error"),
            "intercept_p": _get(coef, "intercept", "p_value"),
            "intercept_ci_low": _get(coef, "intercept", "ci_low"),
            "intercept_ci_high": _get(coef, "intercept", "ci_high"),
            "quadratic": _get(coef, "quadratic", "estimate"),
            "quadratic_se": _get(coef, "quadratic", "std_error"),
            "residual_sd": curve.get("residual_sd"),
            "r_squared": curve.get("r_squared"),
            "r": curve.get("r"),
            "lod": _get(curve, "lod", "value"),
            "loq": _get(curve, "loq", "value"),
            "lloq": span.get("lloq"),
            "uloq": span.get("uloq"),
            "range_applied": _range(_get(applied, "low"), _get(applied, "high")),
            "range_reason": _get(applied, "reason"),
            "range_proposed": _range(_get(proposed, "lloq"), _get(proposed, "uloq")),
            "proposed_verdict": _get(proposed, "verdict"),
            "failing_checks": ", ".join(failing),
            "reasons": " | ".join(curve.get("reasons") or []),
        })
    return rows


def coefficient_rows(curve: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The fit table of one curve, keyed as :data:`COEFFICIENT_COLUMNS`."""
    return [{"name": name, **values} for name, values in (curve.get("coefficients") or {}).items()]


def check_rows(curve: Mapping[str, Any]) -> Sequence[Mapping[str, Any]]:
    """The checks of one curve, keyed as :data:`CHECK_COLUMNS`."""
    return list(curve.get("checks") or [])


def point_rows(curve: Mapping[str, Any]) -> Sequence[Mapping[str, Any]]:
    """The standards of one curve, keyed as :data:`POINT_COLUMNS`."""
    return list(curve.get("points") or [])
