"""Record dicts of the ``calib.record/1`` shape, filled from real fits of invented runs.

The runs belong to the fictional Fernbrook Water Laboratory (SPEC §11) and the
fictional Kestrel Bioanalytical; numbers come from a fixed seed.  The fits use
:func:`calib.fit.fit_curve`, so every figure in a record agrees with the others.
"""

from __future__ import annotations

import hashlib
import io
import json
from dataclasses import dataclass

import numpy as np
import pytest

from calib.fit import fit_curve, ich_limits

PREPARED_BY = "Zoë Łukasiewicz-Ng"  # invented


@dataclass(frozen=True)
class Standard:
    cell: str
    level: int
    x: float
    y: float
    excluded: str | None = None


def nitrate_standards() -> list[Standard]:
    """6 levels 0.5–10 mg/L in triplicate; one injection excluded with a reason."""
    rng = np.random.default_rng(20261130)
    out = []
    row = 7
    for level, x in enumerate([0.5, 1.0, 2.0, 5.0, 8.0, 10.0], start=1):
        for rep in range(3):
            y = 0.0003 + 0.24362 * x + rng.normal(0, 0.0021)
            reason = None
            if level == 4 and rep == 2:
                y *= 1.31
                reason = "Air bubble in the sample loop (peak split); re-injection at C22"
            out.append(Standard(f"Run!C{row}", level, x, float(y), reason))
            row += 1
    return out


def fluoride_standards() -> list[Standard]:
    """A contaminated blank: the line sits well above zero."""
    rng = np.random.default_rng(7)
    out = []
    row = 7
    for level, x in enumerate([0.1, 0.2, 0.5, 1.0, 1.5, 2.0], start=1):
        for _ in range(3):
            y = 0.0452 + 0.3107 * x + rng.normal(0, 0.0018)
            out.append(Standard(f"Fluoride!D{row}", level, x, float(y)))
            row += 1
    return out


def kx214_standards() -> list[Standard]:
    """8 levels 1–1000 ng/mL in duplicate, proportional error (fitted with 1/x²)."""
    rng = np.random.default_rng(214)
    out = []
    row = 5
    for level, x in enumerate([1, 2, 5, 20, 100, 250, 800, 1000], start=1):
        for rep in range(2):
            y = (0.00002 + 0.01193 * x) * (1 + rng.normal(0, 0.03))
            reason = None
            if level == 3 and rep == 1:
                y *= 0.58
                reason = "Internal standard area 45 % below the batch mean"
            out.append(Standard(f"Plate!F{row}", level, float(x), float(y), reason))
            row += 1
    return out


def _check(cid, title, verdict, severity, value, limit, detail):
    return {"id": cid, "title": title, "verdict": verdict, "severity": severity,
            "value": value, "limit": limit, "detail": detail}


def curve_record(analyte: str, standards: list[Standard], *, weighting: str = "none",
                 model: str = "linear", tolerance: float = 15.0) -> tuple[dict, dict]:
    """The ``check.curves`` entry and the ``fit_details`` entry of one analyte."""
    used = [s for s in standards if s.excluded is None]
    fit = fit_curve([s.x for s in used], [s.y for s in used], model=model, weighting=weighting)
    lod, loq = ich_limits(fit)
    coefficients = {
        row.name: {"estimate": row.estimate, "std_error": row.std_error, "t_value": row.t_value,
                   "p_value": row.p_value, "ci_low": row.ci_low, "ci_high": row.ci_high}
        for row in fit.coefficient_table()
    }
    points = []
    for s in standards:
        fitted = float(fit.predict(s.x)[0])
        back = float(fit.back_calculate(s.y)[0])
        points.append({
            "source_cell": s.cell, "level": s.level, "concentration": s.x, "response": s.y,
            "fitted": fitted, "back_calculated": back,
            "deviation_pct": 100 * (back - s.x) / s.x,
            "included": s.excluded is None, "exclusion_reason": s.excluded,
        })
    within = [abs(p["deviation_pct"]) <= tolerance for p in points if p["included"]]
    share = 100 * sum(within) / len(within)
    levels = len({s.x for s in used})
    checks = [
        _check("min-levels", "At least 5 concentration levels", "pass" if levels >= 5 else "fail",
               "reject", levels, 5, f"{levels} levels in the fit."),
        _check("back-calculation", f"Every standard back-calculates within ±{tolerance:g} %",
               "pass" if share == 100 else "fail", "reject", share, 100,
               f"{sum(within)} of {len(within)} standards within ±{tolerance:g} %."),
        _check("correlation", "Correlation coefficient r ≥ 0.995",
               "pass" if fit.r >= 0.995 else "fail", "review", fit.r, 0.995,
               "r alone never proves linearity; see the back-calculation check."),
        _check("drift", "No trend of residuals with injection order", "not-evaluated", "info",
               None, None, "The file gives no injection order."),
    ]
    if "intercept" in coefficients:
        p = coefficients["intercept"]["p_value"]
        checks.insert(1, _check(
            "intercept-zero", "Intercept does not differ significantly from zero",
            "pass" if p >= 0.05 else "fail", "reject", p, 0.05,
            f"t = {coefficients['intercept']['t_value']:.3f} on {fit.residual_df} df; "
            "p ≤ 0.05 means the intercept is not zero (blank contamination?)."))
    verdict = "accepted"
    if any(c["verdict"] == "fail" and c["severity"] == "reject" for c in checks):
        verdict = "rejected"
    elif any(c["verdict"] in ("fail", "warn") and c["severity"] == "review" for c in checks):
        verdict = "needs-review"
    curve = {
        "analyte": analyte, "model": model, "weighting": weighting, "confidence": 0.95,
        "n_points": fit.n_points, "n_levels": levels, "residual_df": fit.residual_df,
        "coefficients": coefficients, "residual_sd": fit.residual_sd,
        "r_squared": fit.r_squared, "r": fit.r,
        "lod": {"value": lod.value, "method": lod.method},
        "loq": {"value": loq.value, "method": loq.method},
        "points": points, "checks": checks, "verdict": verdict,
    }
    details = {"analyte": analyte, "coefficient_names": list(fit.names),
               "covariance": fit.covariance.tolist(), "t_critical": fit.t_critical(),
               "x_min": float(fit.x.min()), "x_max": float(fit.x.max())}
    return curve, details


def unfitted_curve(analyte: str) -> dict:
    """A curve that could not be fitted: no coefficients, null statistics, no fit_details."""
    return {
        "analyte": analyte, "model": "linear", "weighting": "none", "confidence": 0.95,
        "n_points": 1, "n_levels": 1, "residual_df": None, "coefficients": {},
        "residual_sd": None, "r_squared": None, "r": None, "lod": None, "loq": None,
        "points": [{"source_cell": "Run!E9", "level": 1, "concentration": 0.0,
                    "response": 0.0012, "fitted": None, "back_calculated": None,
                    "deviation_pct": None, "included": True, "exclusion_reason": None}],
        "checks": [_check("min-levels", "At least 5 concentration levels", "fail", "reject",
                          1, 5, "Only one level: no curve can be fitted.")],
        "verdict": "rejected",
    }


def make_record(curves: list[tuple[dict, dict | None]], *, prepared_by=PREPARED_BY,
                signatures=None, units=None) -> dict:
    check_verdict = "accepted"
    if any(c["verdict"] == "rejected" for c, _ in curves):
        check_verdict = "rejected"
    elif any(c["verdict"] == "needs-review" for c, _ in curves):
        check_verdict = "needs-review"
    source = {"file": "nitrate_2026-11-30.xlsx", "sha256": hashlib.sha256(b"run").hexdigest(),
              "sheet": "Run"}
    profile = {"name": "default", "version": "1", "sha256": hashlib.sha256(b"p").hexdigest()}
    return {
        "schema": "calib.record/1",
        "created_at": "2026-12-01T09:30:00Z",
        "tool": {"name": "calib", "version": "0.1.0"},
        "libraries": {"python": "3.11.7", "numpy": "1.26.4", "scipy": "1.11.4",
                      "reportlab": "4.1.0"},
        "prepared_by": prepared_by,
        "signatures": signatures if signatures is not None else [],
        "run": {**source, "layout": "long",
                "metadata": {"Instrument": "IC-2 (conductivity detector)",
                             "Method": "FWL-IC-014 anions", "Run date": "2026-11-30"},
                "units": units if units is not None
                else {"concentration": "mg/L", "response": "µS·min"}},
        "settings": {"model": "linear", "weighting": "none", "confidence": 0.95},
        "profile": {**profile, "text": "name = \"default\"\n"},
        "cautions": "Results decide whether samples are released.",
        "check": {"schema": "calib.check/1", "tool_version": "0.1.0", "source": source,
                  "profile": profile, "verdict": check_verdict,
                  "curves": [c for c, _ in curves]},
        "fit_details": [d for _, d in curves if d is not None],
    }


def canonical(record: dict) -> bytes:
    return json.dumps(record, sort_keys=True, ensure_ascii=False, separators=(",", ":"),
                      allow_nan=False).encode("utf-8")


def ident(record: dict) -> tuple[bytes, str, str]:
    """(attachment, digest, record_id) of a record, computed as the record module does."""
    data = canonical(record)
    digest = hashlib.sha256(data).hexdigest()
    return data, digest, "CR-" + digest[:12].upper()


def render(record: dict, **kwargs) -> bytes:
    from calib.report import write_pdf

    data, digest, record_id = ident(record)
    return write_pdf(record, digest=digest, record_id=record_id, attachment=data, **kwargs)


def pdf_pages_text(pdf: bytes) -> list[str]:
    from pypdf import PdfReader

    return [page.extract_text() for page in PdfReader(io.BytesIO(pdf)).pages]


@pytest.fixture(scope="session")
def nitrate() -> tuple[dict, dict]:
    return curve_record("Nitrate-N", nitrate_standards())


@pytest.fixture(scope="session")
def fluoride() -> tuple[dict, dict]:
    return curve_record("Fluoride", fluoride_standards())


@pytest.fixture(scope="session")
def kx214() -> tuple[dict, dict]:
    return curve_record("KX-214", kx214_standards(), weighting="1/x2", tolerance=20.0)


@pytest.fixture(scope="session")
def nitrate_record(nitrate) -> dict:
    return make_record([nitrate])


@pytest.fixture(scope="session")
def nitrate_pdf(nitrate_record) -> bytes:
    return render(nitrate_record)
