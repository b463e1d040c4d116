"""Check results and the verdicts they add up to.

A failed check is data, not an exception: callers read ``verdict``; raising is
opt-in through :meth:`CurveAssessment.raise_for_verdict` in
:mod:`calib.checks.evaluate`.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from enum import StrEnum

__all__ = ["CheckResult", "CurveVerdict", "Severity", "Verdict", "combine_verdicts",
           "verdict_reasons", "worst"]


class Verdict(StrEnum):
    """Outcome of one check."""

    PASS = "pass"
    FAIL = "fail"
    WARN = "warn"
    NOT_EVALUATED = "not-evaluated"


class Severity(StrEnum):
    """What a check's failure does to the curve's verdict."""

    REJECT = "reject"  # a fail rejects the curve
    REVIEW = "review"  # a fail sends the curve to a reviewer
    INFO = "info"  # reported only


class CurveVerdict(StrEnum):
    """Verdict on a curve, or on a run (the worst of its curves)."""

    ACCEPTED = "accepted"
    NEEDS_REVIEW = "needs-review"
    REJECTED = "rejected"


_RANK = {CurveVerdict.ACCEPTED: 0, CurveVerdict.NEEDS_REVIEW: 1, CurveVerdict.REJECTED: 2}


@dataclass(frozen=True)
class CheckResult:
    """One acceptance check on one curve.

    Attributes
    ----------
    id : str
        Stable check id (``intercept-zero``, ``back-calculation``...).
    title : str
        Plain-words title.
    verdict : Verdict
        ``pass``, ``fail``, ``warn`` or ``not-evaluated`` (then ``detail`` says why).
    severity : Severity
        From the profile rule.
    value : float or None
        The measured quantity or test statistic (for ``intercept-zero`` the p-value).
    limit : float or None
        The limit ``value`` is judged against.
    detail : str
        One-line explanation in plain words.
    statistic : str or None
        Name of the test statistic for a statistical test (``t``, ``F``, ``G``,
        ``runs``, ``chi2``...); None for a check against a fixed limit.
    statistic_value : float or None
        The statistic's value.
    p_value : float or None
        The test's own (raw) p-value, before any family adjustment.
    alpha : float or None
        The significance level the check was tested at on its own.
    critical_value : float or None
        The statistic's critical value at ``alpha`` where one is defined.
    passes_when : str
        Which side passes, in words (``p ≥ α``, ``value ≤ limit``...).
    adjusted_p : float or None
        The p-value adjusted within the profile's review family (Holm), when
        the check belongs to it; the family decision is ``adjusted_p < family_alpha``.
    family_alpha : float or None
        The family's level when the check belongs to it.
    detectable : tuple of (str, float) pairs
        What the test would detect with 80 % power on this curve (named figures).
    cells : tuple of str
        Source cells of the standards the check singles out (a suggested outlier, a
        standard read back outside its tolerance), in the order of the curve; empty
        when it singles out none.  Front ends mark these cells without reading
        ``detail``.
    """

    id: str
    title: str
    verdict: Verdict
    severity: Severity
    value: float | None
    limit: float | None
    detail: str
    statistic: str | None = None
    statistic_value: float | None = None
    p_value: float | None = None
    alpha: float | None = None
    critical_value: float | None = None
    passes_when: str = ""
    adjusted_p: float | None = None
    family_alpha: float | None = None
    detectable: tuple[tuple[str, float], ...] = ()
    cells: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        # A NaN never passes: it can only mean the check could not be evaluated.
        if self.verdict is Verdict.PASS and self.value is not None and math.isnan(self.value):
            raise ValueError(f"check {self.id} cannot pass with a NaN value")


def combine_verdicts(checks: Iterable[CheckResult], *, fitted: bool = True) -> CurveVerdict:
    """Curve verdict from its checks.

    ``rejected`` when the curve could not be fitted or a ``reject`` check
    fails; ``needs-review`` when a ``review`` check fails or warns, or a
    ``reject`` check warns or could not be evaluated; ``accepted`` otherwise.
    ``info`` checks never change the verdict.

    Examples
    --------
    >>> c = CheckResult("intercept-zero", "t", Verdict.FAIL, Severity.REVIEW, 0.01, 0.05, "")
    >>> combine_verdicts([c])
    <CurveVerdict.NEEDS_REVIEW: 'needs-review'>
    """
    verdict = CurveVerdict.ACCEPTED if fitted else CurveVerdict.REJECTED
    for check in checks:
        if check.severity is Severity.REJECT:
            if check.verdict is Verdict.FAIL:
                verdict = worst([verdict, CurveVerdict.REJECTED])
            elif check.verdict in (Verdict.WARN, Verdict.NOT_EVALUATED):
                verdict = worst([verdict, CurveVerdict.NEEDS_REVIEW])
        elif check.severity is Severity.REVIEW and check.verdict in (Verdict.FAIL, Verdict.WARN):
            verdict = worst([verdict, CurveVerdict.NEEDS_REVIEW])
    return verdict


def worst(verdicts: Iterable[CurveVerdict]) -> CurveVerdict:
    """The worst of several verdicts (``accepted`` for none)."""
    return max(verdicts, key=_RANK.__getitem__, default=CurveVerdict.ACCEPTED)


def _weight(check: CheckResult) -> int | None:
    """Order of a check among the reasons for a verdict; None if it is no reason."""
    if check.severity is Severity.REJECT:
        return {Verdict.FAIL: 0, Verdict.WARN: 2, Verdict.NOT_EVALUATED: 3}.get(check.verdict)
    if check.severity is Severity.REVIEW:
        return {Verdict.FAIL: 1, Verdict.WARN: 4}.get(check.verdict)
    return None


def verdict_reasons(checks: Iterable[CheckResult], *, unfitted_reason: str = "") -> tuple[str, ...]:
    """The checks that keep a curve from being accepted, in plain words.

    Failing ``reject`` rules come first, then failing ``review`` rules, then
    ``reject`` rules that warn or could not be evaluated, then ``review``
    rules that warn; ``info`` rules are never a reason.  A curve that could
    not be fitted gives that reason first, and the rules that could therefore
    not be evaluated are not repeated.

    Examples
    --------
    >>> c = CheckResult("min-levels", "Number of levels", Verdict.FAIL,
    ...                 Severity.REJECT, 4.0, 5.0, "4 levels; at least 5 required")
    >>> verdict_reasons([c])
    ('Number of levels (min-levels, reject rule: fail): 4 levels; at least 5 required',)
    """
    ranked = sorted((w, i, c) for i, c in enumerate(checks)
                    if (w := _weight(c)) is not None
                    and not (unfitted_reason and c.verdict is Verdict.NOT_EVALUATED))
    out = [f"The curve could not be fitted: {unfitted_reason}"] if unfitted_reason else []
    out += [f"{c.title} ({c.id}, {c.severity.value} rule: {c.verdict.value}): {c.detail}"
            for _, _, c in ranked]
    return tuple(out)
