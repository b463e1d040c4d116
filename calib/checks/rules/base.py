"""What every rule is made of: declared parameters and a function of one curve."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict

__all__ = ["Param", "Rule", "as_shown", "fmt", "not_evaluated", "result", "with_test"]


@dataclass(frozen=True)
class Param:
    """A rule parameter: its type, the range allowed and its default (None = optional).

    ``kind`` is ``float``, ``int`` or ``bool`` (a switch, ``true`` or ``false`` in TOML).
    """

    kind: type
    low: float | None = None
    high: float | None = None
    default: Any = None
    low_open: bool = False
    nonzero: bool = False

    def check(self, value: Any) -> str | None:
        """Why ``value`` is not allowed, or None.

        Examples
        --------
        >>> Param(bool, default=False).check(1)
        'must be true or false, got 1'
        >>> Param(float, low=0, high=100).check(120)
        'must be at most 100, got 120'
        """
        if self.kind is bool:
            return None if isinstance(value, bool) else f"must be true or false, got {value!r}"
        if isinstance(value, bool) or not isinstance(value, (int, float) if self.kind is float else int):
            return f"must be {'a number' if self.kind is float else 'a whole number'}, got {value!r}"
        if not math.isfinite(value):
            return f"must be a finite number, got {value!r}"
        if self.nonzero and value == 0:
            return "must not be 0"
        if self.low is not None and (value <= self.low if self.low_open else value < self.low):
            return f"must be {'above' if self.low_open else 'at least'} {self.low:g}, got {value!r}"
        if self.high is not None and value > self.high:
            return f"must be at most {self.high:g}, got {value!r}"
        return None


@dataclass(frozen=True)
class Rule:
    """A check that profiles can name by ``id``."""

    id: str
    title: str
    params: Mapping[str, Param]
    run: Callable[[CurveContext, Mapping[str, Any], Severity], CheckResult]
    #: Checks the parameters together (one excludes another, one needs another); returns
    #: what is wrong in words, or None.  Called on the parameters the profile gives.
    validate: Callable[[Mapping[str, Any]], str | None] | None = None

    def __post_init__(self) -> None:
        # Each rule's title is known here as soon as its module defines it, so a result
        # names its rule without this module importing the registry that imports every rule.
        _TITLES[self.id] = self.title


#: Rule id → title, filled as the rule modules define their rules.
_TITLES: dict[str, str] = {}


def result(rule_id: str, severity: Severity, verdict: Verdict, value: float | None,
           limit: float | None, detail: str, *, cells: Sequence[str] = ()) -> CheckResult:
    """A CheckResult carrying the title of the rule ``rule_id`` (and the cells it flags)."""
    return CheckResult(rule_id, _TITLES[rule_id], verdict, severity, value, limit, detail,
                       cells=tuple(cells))


def not_evaluated(rule_id: str, severity: Severity, reason: str) -> CheckResult:
    """A ``not-evaluated`` result with its reason."""
    return result(rule_id, severity, Verdict.NOT_EVALUATED, None, None, reason)


def fmt(value: float) -> str:
    """A figure in four significant digits for explanations."""
    return f"{value:.4g}"




def as_shown(value: float, decimals: int) -> float:
    """``value`` as the record prints it, with ``decimals`` digits after the point.

    Limits are inclusive at the precision the record reports: a figure is
    rounded to the digits it is printed with before it is compared with its
    limit, so an exact ±15 % computed as 15.000000000000018 reads "+15.0 %"
    and passes ±15 %, and the record never shows a figure "outside" a limit
    it equals.  The rounding is Python's own formatting, the same that prints
    the figure, so the comparison and the printed text cannot disagree.

    Examples
    --------
    >>> as_shown(15.000000000000018, 1), as_shown(-20.000000000000007, 1)
    (15.0, -20.0)
    >>> as_shown(15.04999, 1) <= 15, as_shown(15.05001, 1) <= 15
    (True, False)
    """
    return float(f"{value:.{decimals}f}") if math.isfinite(value) else value


def with_test(check: CheckResult, *, statistic: str, statistic_value: float | None,
              p_value: float | None, alpha: float | None, critical_value: float | None = None,
              passes_when: str = "p ≥ α",
              detectable: tuple[tuple[str, float], ...] = ()) -> CheckResult:
    """``check`` with its test named: statistic, raw p, α, critical value and passing side.

    Non-finite figures are kept as None so that the JSON never carries NaN.
    """
    def finite(v: float | None) -> float | None:
        return None if v is None or not math.isfinite(v) else float(v)

    # Built directly (not dataclasses.replace): every statistical check of every curve
    # passes here, and replace's field introspection cost more than the check.
    return CheckResult(check.id, check.title, check.verdict, check.severity, check.value,
                       check.limit, check.detail, statistic=statistic,
                       statistic_value=finite(statistic_value), p_value=finite(p_value),
                       alpha=alpha, critical_value=finite(critical_value),
                       passes_when=passes_when,
                       detectable=tuple((k, float(v)) for k, v in detectable
                                        if math.isfinite(v)),
                       adjusted_p=check.adjusted_p, family_alpha=check.family_alpha,
                       cells=check.cells)
