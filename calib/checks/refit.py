"""Rejected standards leave the fit, and the curve is refitted before the QCs are judged.

ICH M10 (2022), section 3.3.2 (from memory): a calibration standard outside
its tolerance is rejected, and the curve is re-evaluated without it,
regression included; the QCs are then read against the curve without it.  A
failing standard left in the fit pulls the curve towards itself and can
rescue (or sink) the QCs near it, so judging them on that curve misjudges the
run.  A profile asks for this with ``refit_without_rejected = true`` on its
``back-calculation`` rule.

The rejection is repeated on the refitted curve until no standard in the fit
is outside its tolerance (a standard once rejected stays out; common
practice).  The LLOQ or ULOQ never leaves the fit this way: when every
standard of an end level fails they all stay, the ``back-calculation`` rule
fails on that end, and only a working range the analyst applies can move it.
The record keeps the first fit's figures and verdict beside the refitted
curve, with each rejected standard and why.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from calib.checks.context import StandardResult
from calib.checks.result import CheckResult, CurveVerdict
from calib.checks.rules.standards import rejected_standards, tolerances
from calib.fit.curve import CurveFit

__all__ = ["MAX_ROUNDS", "Refit", "RejectedStandard", "refit_without_rejected"]

#: Refits at most; a curve still shedding standards after this many is no curve to trust,
#: and a hostile file must not make calib refit a large curve once per standard.
MAX_ROUNDS = 20

#: Fits ``(points in the fit)`` -> (fit or None, reason there is none).
Fitter = Callable[[Sequence[int]], tuple[CurveFit | None, str]]
#: Back-calculates every standard on a fit, given each one's exclusion reason.
Reader = Callable[[Sequence[str | None], CurveFit], tuple[StandardResult, ...]]


@dataclass(frozen=True)
class RejectedStandard:
    """A standard rejected for its back-calculated deviation and left out of the fit.

    Attributes
    ----------
    source_cell : str
        Where its response was read.
    concentration : float
        Nominal concentration.
    deviation_pct : float or None
        Its deviation on the curve it was rejected from (None: not readable).
    allowed_pct : float
        The tolerance it broke.
    round : int
        1 when rejected from the first fit, 2 from the first refit, and so on.
    """

    source_cell: str
    concentration: float
    deviation_pct: float | None
    allowed_pct: float
    round: int


@dataclass(frozen=True)
class Refit:
    """How a curve was refitted without its rejected standards.

    Attributes
    ----------
    rejected : tuple of RejectedStandard
        Every standard that left the fit, in the order rejected.
    first_fit : CurveFit
        The fit with every standard in it.
    first_checks : tuple of CheckResult
        The profile's checks on that first fit (QCs read against it).
    first_verdict : CurveVerdict
        The verdict the first fit would have had.
    note : str
        Why the rejection stopped early (a refit that could not be made), or ``""``.
    """

    rejected: tuple[RejectedStandard, ...]
    first_fit: CurveFit
    first_checks: tuple[CheckResult, ...]
    first_verdict: CurveVerdict
    note: str = ""

    @property
    def rounds(self) -> int:
        """How many times the curve was refitted."""
        return max((r.round for r in self.rejected), default=0)

    @property
    def reason(self) -> str:
        """Why, in one sentence."""
        cells = ", ".join(f"{r.source_cell} ({_dev(r.deviation_pct)}, outside "
                          f"±{r.allowed_pct:g} %)" for r in self.rejected)
        times = "once" if self.rounds == 1 else f"{self.rounds} times"
        text = (f"Standards outside their tolerance were rejected and the curve refitted "
                f"without them ({times}) before the QCs were read (ICH M10 3.3.2, from memory): "
                f"{cells}. On the first fit, with them, the curve would have "
                f"{_WOULD[self.first_verdict.value]}.")
        return f"{text} {self.note}" if self.note else text


_WOULD = {"accepted": "been accepted", "rejected": "been rejected",
          "needs-review": "needed review"}


def _dev(value: float | None) -> str:
    return "not readable" if value is None else f"{value:+.1f} %"


def refit_without_rejected(
    results: tuple[StandardResult, ...],
    reasons: Sequence[str | None],
    fit: CurveFit,
    params: Mapping[str, Any],
    *,
    fitter: Fitter,
    reader: Reader,
) -> tuple[tuple[StandardResult, ...], list[str | None], CurveFit, list[RejectedStandard], str]:
    """Reject the failing standards and refit, until none in the fit fails.

    Parameters
    ----------
    results : tuple of StandardResult
        Every standard back-calculated on ``fit``.
    reasons : sequence of str or None
        Each standard's exclusion reason (None: in the fit).
    fit : CurveFit
        The fit with every usable standard.
    params : mapping
        The ``back-calculation`` rule's parameters (tolerances).
    fitter, reader : callable
        Fit the standards at the given indices; back-calculate every standard on a fit.

    Returns
    -------
    (results, reasons, fit, rejected, note)
        The standards on the final fit, their reasons, the final fit, the rejected
        standards and why the rejection stopped early (or ``""``).
    """
    reasons = list(reasons)
    rejected: list[RejectedStandard] = []
    note = ""
    for round_ in range(1, MAX_ROUNDS + 2):
        failing = {id(s) for s in rejected_standards(results, params)}
        if not failing:
            break
        if round_ > MAX_ROUNDS:
            note = (f"The rejection stopped after {MAX_ROUNDS} "
                    f"refit{'s' if MAX_ROUNDS != 1 else ''}; the standards still "
                    "outside their tolerance stay in the fit and count as failing.")
            break
        tol = tolerances(results, params)
        if tol is None:  # cannot happen: a failing standard is in the fit
            break
        trial = list(reasons)
        now = []
        for i, s in enumerate(results):
            if id(s) in failing:
                allowed = tol.allowed(s)
                trial[i] = (f"rejected: read back {_dev(s.deviation_pct)} from nominal, outside "
                            f"±{allowed:g} %, on the curve fitted with it"
                            + (f" (refit {round_ - 1})" if round_ > 1 else "")
                            + "; left out and the curve refitted (ICH M10 3.3.2, from memory)")
                now.append(RejectedStandard(s.point.source_cell, s.point.concentration,
                                            s.deviation_pct, allowed, round_))
        refitted, why = fitter([i for i, r in enumerate(trial) if r is None])
        if refitted is None:
            note = (f"Rejecting {', '.join(r.source_cell for r in now)} too would leave no "
                    f"curve ({why}), so they stay in the fit and count as failing.")
            break
        reasons, fit, results = trial, refitted, reader(trial, refitted)
        rejected += now
    return results, reasons, fit, rejected, note
