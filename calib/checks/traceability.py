"""The ``standards-expiry`` check: no curve may rest on a reference material past its expiry.

A material that expired before the run date does not make the curve wrong by
itself, but its certified value is no longer vouched for, so the curve goes to
a reviewer (severity ``review``; common practice under ISO/IEC 17025 §6.5, a
reviewer decides whether the result stands).  The material counts as valid on
its expiry date itself.
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import replace
from typing import TYPE_CHECKING

from calib.checks.result import CheckResult, CurveVerdict, Severity, Verdict, worst

if TYPE_CHECKING:
    from calib.checks.evaluate import CurveAssessment, RunAssessment
    from calib.io.standards import Standards

__all__ = ["run_date", "with_standards"]

_EXPIRY_ID = "standards-expiry"
TITLE = "Reference materials within their expiry date on the run date"


def run_date(text: str | None) -> dt.date | None:
    """The run date from the run's metadata: ``YYYY-MM-DD`` (time allowed) or ``DD.MM.YYYY``.

    Dates written with slashes are refused (None): 03/04/2026 is March or April
    depending on the country, and a guess is worse than no date.

    Examples
    --------
    >>> run_date("2026-12-03"), run_date("2026-12-03T09:15:00"), run_date("05.12.2026")
    (datetime.date(2026, 12, 3), datetime.date(2026, 12, 3), datetime.date(2026, 12, 5))
    >>> run_date("03/04/2026") is None, run_date(None) is None
    (True, True)
    """
    if not text:
        return None
    text = text.strip()
    try:
        if re.fullmatch(r"\d{4}-\d{2}-\d{2}([T ].*)?", text):
            return dt.date.fromisoformat(text[:10])
        found = re.fullmatch(r"(\d{1,2})\.(\d{1,2})\.(\d{4})", text)
        if found:  # day.month.year: the dotted order is day first wherever it is used
            return dt.date(int(found[3]), int(found[2]), int(found[1]))
    except ValueError:
        return None
    return None


def _expiry_check(analyte: str, standards: Standards, on: dt.date | None,
                 written: str | None = None) -> CheckResult:
    """Judge the materials behind ``analyte`` against the run date ``on``.

    Examples
    --------
    >>> from calib.io.standards import Material, Standards
    >>> m = Material("FWL-RM-0412", "stock", "L24-118", 1000.0, 2.0, "mg/L",
    ...              dt.date(2026, 11, 30))
    >>> s = Standards("s.toml", "0" * 64, (m,))
    >>> _expiry_check("Pb", s, dt.date(2026, 12, 3)).detail
    'Expired on the run date 2026-12-03: FWL-RM-0412 lot L24-118 (expired 2026-11-30).'
    >>> _expiry_check("Pb", s, dt.date(2026, 11, 30)).verdict.value
    'pass'
    """
    materials = standards.for_analyte(analyte)
    if not materials:
        return CheckResult(_EXPIRY_ID, TITLE, Verdict.NOT_EVALUATED, Severity.REVIEW, None, None,
                           f"The standards file {standards.file} names no material for "
                           f"{analyte}.")
    if on is None:
        why = (f"the run date {written!r} is not written YYYY-MM-DD or DD.MM.YYYY" if written
               else "the run file gives no run date")
        return CheckResult(_EXPIRY_ID, TITLE, Verdict.NOT_EVALUATED, Severity.REVIEW, None, None,
                           f"Expiry not judged: {why}.")
    expired = [m for m in materials if m.expires < on]
    if expired:
        names = "; ".join(f"{m.id} lot {m.lot} (expired {m.expires.isoformat()})"
                          for m in expired)
        return CheckResult(_EXPIRY_ID, TITLE, Verdict.FAIL, Severity.REVIEW, float(len(expired)),
                           0.0, f"Expired on the run date {on.isoformat()}: {names}.")
    names = ", ".join(f"{m.id} lot {m.lot} to {m.expires.isoformat()}" for m in materials)
    return CheckResult(_EXPIRY_ID, TITLE, Verdict.PASS, Severity.REVIEW, 0.0, 0.0,
                       f"Within expiry on the run date {on.isoformat()}: {names}.")


def with_standards(assessment: RunAssessment, standards: Standards) -> RunAssessment:
    """The assessment with the standards attached and ``standards-expiry`` judged per curve."""
    written = assessment.run.metadata.get("run_date")
    on = run_date(written)
    curves = tuple(_judged(c, _expiry_check(c.analyte, standards, on, written))
                   for c in assessment.curves)
    return replace(assessment, curves=curves, standards=standards)


def _judged(curve: CurveAssessment, check: CheckResult) -> CurveAssessment:
    verdict = curve.verdict
    if check.verdict is Verdict.FAIL:
        verdict = worst([verdict, CurveVerdict.NEEDS_REVIEW])
    return replace(curve, checks=(*curve.checks, check), verdict=verdict)
