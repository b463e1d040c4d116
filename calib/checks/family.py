"""The review family: the profile's review-level diagnostics judged together (Holm).

A curve meets several statistical diagnostics at once (lack of fit, curvature, drift,
outliers...).  Each tested at 5 % on its own, a sound curve would be sent to a reviewer
far more often than 5 % of the time.  A profile may therefore declare a ``[review_family]``:
every ``review`` check whose alarm means "p below α" — except the ones the family leaves
out, by default the intercept t-test, the user's headline check kept at its own level —
is judged by Holm's step-down procedure at the family's level, so that on a sound curve
the family together sends it to review at most ``alpha`` of the time (Holm, Scand. J.
Statist. 6 (1979) 65–70: strong control of the familywise error rate).

Each check keeps its raw p-value; the Holm-adjusted p-value and the family level are kept
beside it, and an alarm the family does not confirm becomes ``pass`` with the reason in
its detail (never hidden).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

from calib.checks.result import CheckResult, Severity, Verdict

__all__ = ["ReviewFamily", "apply_family", "holm_adjust", "parse_review_family"]

_KEYS = ("alpha", "leave_out")


@dataclass(frozen=True)
class ReviewFamily:
    """The ``[review_family]`` table of a profile.

    Attributes
    ----------
    alpha : float
        Familywise level of the review diagnostics together.
    leave_out : tuple of str
        Check ids judged on their own level, outside the family.
    """

    alpha: float = 0.01
    leave_out: tuple[str, ...] = ("intercept-zero",)


def parse_review_family(table: Any, where: str) -> ReviewFamily | None:
    """The family a profile declares (None when the table is absent).

    Raises
    ------
    ValueError
        With ``where`` in the message, when the table is malformed.

    Examples
    --------
    >>> parse_review_family({"alpha": 0.01}, "profile")
    ReviewFamily(alpha=0.01, leave_out=('intercept-zero',))
    >>> parse_review_family({"alpha": 0.7}, "profile x")
    Traceback (most recent call last):
    ValueError: profile x: [review_family] alpha must be a number above 0 and at most 0.5, got 0.7
    """
    if table is None:
        return None
    if not isinstance(table, dict):
        raise ValueError(f"{where}: 'review_family' must be a table")
    for key in table:
        if key not in _KEYS:
            raise ValueError(f"{where}: unknown key {key!r} in [review_family]; expected one of "
                             f"{', '.join(_KEYS)}")
    alpha = table.get("alpha", 0.01)
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) or not 0 < alpha <= 0.5:
        raise ValueError(f"{where}: [review_family] alpha must be a number above 0 and at most "
                         f"0.5, got {alpha!r}")
    leave_out = table.get("leave_out", ["intercept-zero"])
    if not isinstance(leave_out, list) or not all(isinstance(s, str) for s in leave_out):
        raise ValueError(f"{where}: [review_family] leave_out must be a list of check ids")
    return ReviewFamily(float(alpha), tuple(leave_out))


def holm_adjust(p_values: Sequence[float]) -> list[float]:
    """Holm's step-down adjusted p-values, in the order given.

    Examples
    --------
    Checked against statsmodels ``multipletests(method="holm")`` in the tests.

    >>> [round(p, 4) for p in holm_adjust([0.01, 0.04, 0.03])]
    [0.03, 0.06, 0.06]
    """
    k = len(p_values)
    order = sorted(range(k), key=lambda i: p_values[i])
    adjusted = [1.0] * k
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (k - rank) * p_values[i]))
        adjusted[i] = running
    return adjusted


def _member(check: CheckResult, family: ReviewFamily) -> bool:
    return (check.severity is Severity.REVIEW and check.id not in family.leave_out
            and check.p_value is not None and check.passes_when == "p ≥ α"
            and check.verdict in (Verdict.PASS, Verdict.FAIL, Verdict.WARN))


def apply_family(checks: Sequence[CheckResult], family: ReviewFamily | None) -> tuple[CheckResult, ...]:
    """The checks with the family's Holm decision applied to its members.

    A member raises its alarm only when its own test does and its Holm-adjusted p-value is
    below the family level; otherwise it passes, and its detail says so with both figures.
    """
    if family is None:
        return tuple(checks)
    members = [i for i, c in enumerate(checks) if _member(c, family)]
    if not members:
        return tuple(checks)
    adjusted = holm_adjust([checks[i].p_value for i in members])  # type: ignore[misc]
    out = list(checks)
    k = len(members)
    for i, p_adj in zip(members, adjusted):
        check = checks[i]
        alarm = check.verdict in (Verdict.FAIL, Verdict.WARN)
        confirmed = alarm and p_adj < family.alpha
        words = (f" Review family ({k} diagnostics, Holm at {family.alpha:g}): adjusted "
                 f"p = {p_adj:.3g}")
        if alarm and not confirmed:
            words += (f" ≥ {family.alpha:g}, so this alone does not send the curve to review "
                      f"(raw p = {check.p_value:.3g} < {check.alpha:g} on its own).")
            out[i] = replace(check, verdict=Verdict.PASS, adjusted_p=p_adj,
                             family_alpha=family.alpha, detail=check.detail + words)
        else:
            words += f" {'<' if confirmed else '≥'} {family.alpha:g}."
            out[i] = replace(check, adjusted_p=p_adj, family_alpha=family.alpha,
                             detail=check.detail + words)
    return tuple(out)
