"""Control-chart statistics: limits from a baseline, and the run rules.

An individuals control chart of one quantity over time (for calib, a
calibration's slope, intercept or residual SD; see :mod:`calib.archive.trend`).

Limits
    The mean x̄ and the sample standard deviation s (divisor n − 1) of a
    *baseline*: the first N accepted curves (N = 10 unless chosen; all of
    them when there are fewer, and never fewer than 3).  Warning limits
    x̄ ± 2s, action limits x̄ ± 3s.  A baseline should come from a period the
    lab knows was in control (after installation, service or a new lot of
    standards); choosing it is the lab's decision, not the tool's.
Screening the baseline (Phase I)
    One bad value inside a short baseline widens its own limits so much that
    it can never lie beyond them: with n values and the sample SD, no value
    is more than (n − 1)/√n SDs from their mean (Samuelson's inequality), which
    is under 3 for n ≤ 10.  So, when asked to screen, each baseline value is
    judged against the mean and SD of the *other* baseline values
    (leave-one-out): its distance in their SDs, divided by √(1 + 1/m) for m
    others, follows Student's t with m − 1 degrees of freedom for an
    in-control normal series, and the largest one is compared with the
    Bonferroni critical value at 5 % over the n baseline values (t at
    1 − 0.05/(2n)); this is Grubbs' outlier test written the leave-one-out way
    (from memory), so an in-control baseline loses a value in at most about 5 %
    of charts.  The worst value beyond that (and beyond 3s) is set aside and
    the screening repeats, setting aside at most a third of the baseline.  The
    limits come from the values kept; the values set aside stay on the chart
    and are judged by the rules like any other.
Rules
    The common control-chart run rules (Western Electric, *Statistical Quality
    Control Handbook*, 1956, rules 1 to 4; the trend rule as in Nelson,
    *J. Quality Technology* 16, 1984; both from memory, and common practice
    in laboratory quality control):

    ``beyond-3s``         one point beyond x̄ ± 3s;
    ``2-of-3-beyond-2s``  2 of 3 points in a row beyond 2s on the same side;
    ``4-of-5-beyond-1s``  4 of 5 points in a row beyond 1s on the same side;
    ``8-one-side``        8 points in a row on the same side of x̄;
    ``6-trend``           6 points in a row each higher (or each lower) than the one before.

    A rule is reported at the point that completes it, and only when that
    point itself takes part (so a window is not flagged twice for one old
    point); at the start of a series the window is the points there are
    (the first two points both beyond 2s complete "2 of 3").  "Beyond" is
    strict: a point on a limit is inside.  A point on the mean, or a missing
    value, breaks a run.  The rules are applied to every point, baseline
    included: a flag inside the baseline says the baseline itself was not in
    control.

A single point beyond 2s but within 3s is a *warning*, shown but not a flag.
These are pure functions on plain numbers: no archive, no printing.
"""

from __future__ import annotations

import itertools
import math
import statistics
from collections.abc import Sequence
from dataclasses import dataclass

from calib.fit.distributions import t_ppf

__all__ = [
    "DEFAULT_BASELINE",
    "MIN_BASELINE",
    "RULES",
    "ControlChart",
    "ControlLimits",
    "RuleHit",
    "SetAside",
    "check_baseline",
    "control_chart",
    "control_limits",
    "run_rules",
    "screened_limits",
]

DEFAULT_BASELINE = 10
MIN_BASELINE = 3
#: Family false-alarm rate of the baseline screening (over the baseline's values).
_SCREEN_ALPHA = 0.05

#: Rule id → what it means, in the order they are checked.
RULES: dict[str, str] = {
    "beyond-3s": "a point beyond the 3s action limit",
    "2-of-3-beyond-2s": "2 of 3 points in a row beyond 2s on the same side",
    "4-of-5-beyond-1s": "4 of 5 points in a row beyond 1s on the same side",
    "8-one-side": "8 points in a row on the same side of the mean",
    "6-trend": "6 points in a row steadily rising or falling",
}


@dataclass(frozen=True)
class ControlLimits:
    """Centre line and limits of a control chart.

    Attributes
    ----------
    mean : float
        Mean x̄ of the baseline values.
    sd : float
        Sample standard deviation s of the baseline values (divisor n − 1).
    baseline : int
        Number of values x̄ and s were computed from.
    """

    mean: float
    sd: float
    baseline: int

    def limit(self, k: float) -> tuple[float, float]:
        """``(x̄ − k·s, x̄ + k·s)``.

        Examples
        --------
        >>> ControlLimits(10.0, 0.5, 10).limit(2)
        (9.0, 11.0)
        """
        return self.mean - k * self.sd, self.mean + k * self.sd

    @property
    def warning(self) -> tuple[float, float]:
        """The ±2s warning limits."""
        return self.limit(2)

    @property
    def action(self) -> tuple[float, float]:
        """The ±3s action limits."""
        return self.limit(3)

    def z(self, value: float) -> float:
        """How many SDs ``value`` lies from the mean (NaN for a missing value)."""
        return (value - self.mean) / self.sd


@dataclass(frozen=True)
class RuleHit:
    """A run rule that fired.

    Attributes
    ----------
    rule : str
        Rule id, a key of :data:`RULES`.
    index : int
        0-based index of the point that completes the pattern.
    points : tuple of int
        Indices of the points that make the pattern.
    side : str
        ``above`` or ``below`` the mean; ``rising`` or ``falling`` for ``6-trend``.
    """

    rule: str
    index: int
    points: tuple[int, ...]
    side: str

    @property
    def description(self) -> str:
        """The rule in words."""
        return RULES[self.rule]


@dataclass(frozen=True)
class SetAside:
    """A baseline value left out of the limits by the screening.

    Attributes
    ----------
    index : int
        0-based index of the value in the series.
    z : float
        Its distance from the mean of the other kept baseline values, in their SDs.
    critical : float
        The distance beyond which a value is set aside (in the same SDs).
    """

    index: int
    z: float
    critical: float = 3.0

    @property
    def reason(self) -> str:
        """Why it was set aside, in words.

        Examples
        --------
        >>> SetAside(4, -7.25, 5.11).reason
        '7.2 SDs below the other baseline curves (set aside beyond 5.11)'
        """
        side = "above" if self.z > 0 else "below"
        return (f"{abs(self.z):.1f} SDs {side} the other baseline curves "
                f"(set aside beyond {self.critical:.2f})")


@dataclass(frozen=True)
class ControlChart:
    """One quantity's control chart: values, limits and the rules that fired.

    Attributes
    ----------
    quantity : str
        What is charted (``slope``, ``intercept``, ``residual_sd`` or any name).
    values : tuple of float
        The series in time order; NaN where a value is missing.
    limits : ControlLimits or None
        None when the chart could not be evaluated (see :attr:`reason`).
    hits : tuple of RuleHit
        Rules that fired, by point then rule order.
    reason : str
        Why the chart was not evaluated; empty when it was.
    set_aside : tuple of SetAside
        Baseline values the screening left out of the limits (see the module notes).
    """

    quantity: str
    values: tuple[float, ...]
    limits: ControlLimits | None
    hits: tuple[RuleHit, ...] = ()
    reason: str = ""
    set_aside: tuple[SetAside, ...] = ()

    @property
    def evaluated(self) -> bool:
        """Whether limits could be computed."""
        return self.limits is not None

    @property
    def flagged(self) -> bool:
        """Whether any rule fired."""
        return bool(self.hits)

    def rules_at(self, index: int) -> tuple[str, ...]:
        """Ids of the rules that fired at point ``index``."""
        return tuple(h.rule for h in self.hits if h.index == index)

    def hits_text(self, index: int) -> str:
        """The rules that fired at point ``index``, grouped by side; empty when none did.

        Examples
        --------
        >>> chart = control_chart([1.0, 1.1, 0.9, 1.0, 1.05, 0.95, 0.6], baseline=6)
        >>> chart.hits_text(6), chart.hits_text(0)
        ('beyond-3s (below)', '')
        """
        sides: dict[str, list[str]] = {}
        for hit in self.hits:
            if hit.index == index:
                sides.setdefault(hit.side, []).append(hit.rule)
        return "; ".join(f"{', '.join(rules)} ({side})" for side, rules in sides.items())

    def flagged_points(self) -> tuple[int, ...]:
        """Indices of points where a rule fired, ascending."""
        return tuple(sorted({h.index for h in self.hits}))

    def warnings(self) -> tuple[int, ...]:
        """Indices of points beyond 2s but not beyond 3s (shown, not flagged)."""
        if self.limits is None:
            return ()
        z = [self.limits.z(v) for v in self.values]
        return tuple(i for i, zi in enumerate(z) if 2 < abs(zi) <= 3)


def _baseline_problem(values: Sequence[float], baseline: int | None) -> str:
    """Why no limits can be drawn from ``values``; empty when they can."""
    check_baseline(baseline)
    chosen = [v for v in values[:baseline] if math.isfinite(v)]
    if len(chosen) < MIN_BASELINE:
        return (f"a control chart needs at least {MIN_BASELINE} values in its baseline; "
                f"there {'is' if len(chosen) == 1 else 'are'} {len(chosen)}")
    if statistics.stdev(chosen) == 0:
        return "the baseline values do not vary (SD 0), so no limits can be drawn"
    return ""


def check_baseline(baseline: int | None) -> None:
    """Raise ValueError unless ``baseline`` is None or a whole number of at least 3."""
    if baseline is not None and (
        isinstance(baseline, bool) or not isinstance(baseline, int) or baseline < MIN_BASELINE
    ):
        raise ValueError(
            f"baseline must be a whole number of at least {MIN_BASELINE} values; got {baseline!r}")


def control_limits(values: Sequence[float], *, baseline: int | None = DEFAULT_BASELINE,
                   ) -> ControlLimits:
    """Mean and SD of the baseline: the first ``baseline`` values (all when fewer).

    Parameters
    ----------
    values : sequence of float
        The series in time order; missing values (NaN) are left out of the baseline.
    baseline : int or None
        How many leading values form the baseline (at least 3); None for all.

    Returns
    -------
    ControlLimits

    Raises
    ------
    ValueError
        If ``baseline`` is below 3, the baseline holds fewer than 3 values, or
        its values do not vary.

    Notes
    -----
    x̄ = Σxᵢ / n and s = √(Σ(xᵢ − x̄)² / (n − 1)) over the n baseline values;
    limits x̄ ± 2s (warning) and x̄ ± 3s (action).

    Examples
    --------
    >>> lim = control_limits([1.0, 1.2, 0.8, 1.1, 0.9, 5.0], baseline=5)
    >>> round(lim.mean, 10), round(lim.sd, 10), lim.baseline
    (1.0, 0.158113883, 5)
    """
    problem = _baseline_problem(values, baseline)
    if problem:
        raise ValueError(problem)
    chosen = [v for v in values[:baseline] if math.isfinite(v)]
    return ControlLimits(statistics.fmean(chosen), statistics.stdev(chosen), len(chosen))


def _sides(z: Sequence[float], k: float) -> list[int]:
    """+1 above x̄ + k·s, −1 below x̄ − k·s, 0 otherwise (NaN is 0)."""
    return [1 if zi > k else -1 if zi < -k else 0 for zi in z]


def _k_of_n(z: Sequence[float], rule: str, *, k: float, of: int, need: int) -> list[RuleHit]:
    sides = _sides(z, k)
    hits = []
    for i in range(need - 1, len(z)):
        side = sides[i]
        if side == 0:
            continue
        # At the start of the series the window is what there is: 2 of the first 2 count.
        window = range(max(0, i - of + 1), i + 1)
        members = tuple(j for j in window if sides[j] == side)
        if len(members) >= need:
            hits.append(RuleHit(rule, i, members, "above" if side > 0 else "below"))
    return hits


def _one_side(z: Sequence[float], *, run: int) -> list[RuleHit]:
    sides = _sides(z, 0)
    hits = []
    for i in range(run - 1, len(z)):
        window = sides[i - run + 1:i + 1]
        if window[0] != 0 and all(s == window[0] for s in window):
            hits.append(RuleHit("8-one-side", i, tuple(range(i - run + 1, i + 1)),
                                "above" if window[0] > 0 else "below"))
    return hits


def _trend(values: Sequence[float], *, run: int) -> list[RuleHit]:
    hits = []
    for i in range(run - 1, len(values)):
        window = values[i - run + 1:i + 1]
        steps = [b - a for a, b in itertools.pairwise(window)]
        # NaN compares false both ways, so a missing value breaks the trend.
        for side, ok in (("rising", all(d > 0 for d in steps)),
                         ("falling", all(d < 0 for d in steps))):
            if ok:
                hits.append(RuleHit("6-trend", i, tuple(range(i - run + 1, i + 1)), side))
    return hits


def run_rules(values: Sequence[float], limits: ControlLimits, *,
              rules: Sequence[str] = tuple(RULES)) -> tuple[RuleHit, ...]:
    """Apply the control-chart run rules to a series.

    Parameters
    ----------
    values : sequence of float
        The series in time order (NaN where missing).
    limits : ControlLimits
        Mean and SD the rules measure against.
    rules : sequence of str
        Rule ids to apply (keys of :data:`RULES`); all by default.

    Returns
    -------
    tuple of RuleHit
        Sorted by point, then by the order of :data:`RULES`.

    Raises
    ------
    ValueError
        If a rule id is unknown.

    Examples
    --------
    >>> lim = ControlLimits(0.0, 1.0, 10)
    >>> [(h.rule, h.index, h.side) for h in run_rules([0.5, 2.5, -0.3, 2.1, 3.4], lim)]
    [('2-of-3-beyond-2s', 3, 'above'), ('beyond-3s', 4, 'above'), ('2-of-3-beyond-2s', 4, 'above')]
    """
    unknown = [r for r in rules if r not in RULES]
    if unknown:
        raise ValueError(f"rules: unknown rule {unknown[0]!r}; choose from {', '.join(RULES)}")
    values = [float(v) for v in values]
    z = [limits.z(v) for v in values]
    found: list[RuleHit] = []
    if "beyond-3s" in rules:
        found += [RuleHit("beyond-3s", i, (i,), "above" if s > 0 else "below")
                  for i, s in enumerate(_sides(z, 3)) if s]
    if "2-of-3-beyond-2s" in rules:
        found += _k_of_n(z, "2-of-3-beyond-2s", k=2, of=3, need=2)
    if "4-of-5-beyond-1s" in rules:
        found += _k_of_n(z, "4-of-5-beyond-1s", k=1, of=5, need=4)
    if "8-one-side" in rules:
        found += _one_side(z, run=8)
    if "6-trend" in rules:
        found += _trend(values, run=6)
    order = {rule: n for n, rule in enumerate(RULES)}
    return tuple(sorted(found, key=lambda h: (h.index, order[h.rule])))


def screened_limits(values: Sequence[float], *, baseline: int | None = DEFAULT_BASELINE,
                    ) -> tuple[ControlLimits, tuple[SetAside, ...]]:
    """Limits from the baseline after setting aside values beyond 3s of the others.

    Parameters
    ----------
    values : sequence of float
        The series in time order (NaN where missing).
    baseline : int or None
        How many leading values form the baseline (at least 3); None for all.

    Returns
    -------
    limits : ControlLimits
        Mean and SD of the baseline values kept.
    set_aside : tuple of SetAside
        The values left out, in the order they were set aside.

    Raises
    ------
    ValueError
        As :func:`control_limits`.

    Notes
    -----
    Repeatedly, over the n kept values: for each xᵢ, zᵢ = (xᵢ − x̄₋ᵢ)/s₋ᵢ with
    x̄₋ᵢ and s₋ᵢ the mean and SD of the m = n − 1 others; the value with the
    largest |zᵢ| is set aside when |zᵢ| > max(3, t₁₋α/(2n); m−1 · √(1 + 1/m)),
    α = 0.05, while more than 3 values and two thirds of the baseline remain.

    Examples
    --------
    >>> slopes = [1.00, 1.01, 0.99, 1.00, 1.02, 0.85, 0.98, 1.01, 0.99]
    >>> lim, out = screened_limits(slopes, baseline=None)
    >>> [o.index for o in out], lim.baseline, round(lim.mean, 10)
    ([5], 8, 1.0)
    >>> control_limits(slopes, baseline=None).action[0] < 0.85  # unscreened, it hides itself
    True
    """
    problem = _baseline_problem(values, baseline)
    if problem:
        raise ValueError(problem)
    kept = [i for i, v in enumerate(values[:baseline]) if math.isfinite(v)]
    floor = max(MIN_BASELINE, math.ceil(2 * len(kept) / 3))
    out: list[SetAside] = []
    while len(kept) > floor:
        n = len(kept)
        critical = max(3.0, float(t_ppf(1 - _SCREEN_ALPHA / (2 * n), n - 2))
                       * math.sqrt(1 + 1 / (n - 1)))
        worst: SetAside | None = None
        for i in kept:
            others = [values[j] for j in kept if j != i]
            sd = statistics.stdev(others)
            gap = values[i] - statistics.fmean(others)
            z = gap / sd if sd > 0 else (math.copysign(math.inf, gap) if gap else 0.0)
            if worst is None or abs(z) > abs(worst.z):
                worst = SetAside(i, z, critical)
        if worst is None or abs(worst.z) <= critical:
            break
        out.append(worst)
        kept.remove(worst.index)
    chosen = [values[i] for i in kept]
    sd = statistics.stdev(chosen)
    if sd == 0:
        raise ValueError("the baseline values kept do not vary (SD 0), so no limits can be drawn")
    return ControlLimits(statistics.fmean(chosen), sd, len(chosen)), tuple(out)


def control_chart(values: Sequence[float | None], *, quantity: str = "value",
                  baseline: int | None = DEFAULT_BASELINE,
                  rules: Sequence[str] = tuple(RULES), screen: bool = False,
                  limits: ControlLimits | None = None) -> ControlChart:
    """Limits from the baseline and the run rules over the whole series.

    Parameters
    ----------
    values : sequence of float or None
        The series in time order; None or NaN where missing.
    quantity : str
        Name of the charted quantity.
    baseline : int or None
        Leading values forming the baseline (at least 3); None for all.
    rules : sequence of str
        Rule ids to apply.
    screen : bool
        Set aside baseline values beyond 3s of the others before computing the
        limits (:func:`screened_limits`).
    limits : ControlLimits, optional
        Limits fixed beforehand (a frozen baseline); ``baseline`` and ``screen``
        are then not used.

    Returns
    -------
    ControlChart
        Not evaluated, with the reason, when the baseline is too short or flat.

    Examples
    --------
    >>> chart = control_chart([1.00, 1.01, 0.99, 1.00, 1.02, 0.98, 1.01, 0.99, 1.00, 1.00, 0.9],
    ...                       quantity="slope")
    >>> chart.flagged_points(), chart.rules_at(10)
    ((10,), ('beyond-3s',))
    >>> control_chart([1.0, 1.1], quantity="slope").reason
    'a control chart needs at least 3 values in its baseline; there are 2'
    >>> fixed = ControlLimits(1.0, 0.01, 8)
    >>> control_chart([1.0, 1.005, 0.96], limits=fixed).flagged_points()
    (2,)
    """
    series = tuple(math.nan if v is None else float(v) for v in values)
    if limits is not None:
        if not (math.isfinite(limits.mean) and math.isfinite(limits.sd) and limits.sd > 0):
            raise ValueError(f"limits need a finite mean and a positive SD; got {limits}")
        return ControlChart(quantity, series, limits, run_rules(series, limits, rules=rules))
    problem = _baseline_problem(series, baseline)
    if problem:
        return ControlChart(quantity, series, None, (), problem)
    set_aside: tuple[SetAside, ...] = ()
    if screen:
        try:
            found, set_aside = screened_limits(series, baseline=baseline)
        except ValueError as exc:
            return ControlChart(quantity, series, None, (), str(exc))
    else:
        found = control_limits(series, baseline=baseline)
    return ControlChart(quantity, series, found, run_rules(series, found, rules=rules), "",
                        set_aside)
