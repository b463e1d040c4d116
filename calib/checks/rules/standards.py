"""Rules on the standards themselves: back-calculation, replicates, exclusions.

``back-calculation`` carries the bioanalytical acceptance of standards: a
share of all standards within tolerance, tolerances of their own at the
lowest and highest level, levels that pass, and the LLOQ and ULOQ that must
not fail (ICH M10, 2022, section 3.3.2, from memory).  ``exclusions`` limits
how many standards may be left out and whether they may come from the
interior of the range (US EPA SW-846 Method 8000D: only from the ends, from
memory).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from calib.checks.context import CurveContext, StandardResult
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, as_shown, fmt, not_evaluated, result

__all__ = ["STANDARDS_RULES", "Tolerances", "rejected_standards", "tolerances"]


def _nonzero(standards: tuple[StandardResult, ...]) -> list[StandardResult]:
    return [s for s in standards if s.point.concentration != 0]


#: Deviations are printed with one decimal ("+15.0 %") and compared as printed.
_DEVIATION_DECIMALS = 1


def _within(s: StandardResult, allowed: float) -> bool:
    dev = s.deviation_pct
    return dev is not None and math.isfinite(dev) and abs(as_shown(dev, _DEVIATION_DECIMALS)) <= allowed


def _shown(s: StandardResult) -> str:
    dev = s.deviation_pct
    shown = "not readable" if dev is None or not math.isfinite(dev) else f"{dev:+.1f} %"
    return f"{s.point.source_cell} ({shown})"


def _level_words(conc: float, which: str) -> str:
    return f"the {which} level ({fmt(conc)}, {'LLOQ' if which == 'lowest' else 'ULOQ'})"


@dataclass(frozen=True)
class Tolerances:
    """The tolerance each standard of a curve is held to under a ``back-calculation`` rule.

    Attributes
    ----------
    lowest, highest : float
        The lowest and highest non-zero level in the fit: the curve's LLOQ and ULOQ.
    low, main, high : float
        Allowed |deviation| in % at the lowest level, inside the range, at the highest.
    notes : tuple of str
        Why an end is held to the main tolerance (it is not the run's own end).
    """

    lowest: float
    highest: float
    low: float
    main: float
    high: float
    notes: tuple[str, ...] = ()

    def allowed(self, s: StandardResult) -> float:
        """The tolerance of one standard, by its level."""
        if s.point.concentration == self.lowest:
            return self.low
        if s.point.concentration == self.highest:
            return self.high
        return self.main


def tolerances(standards: tuple[StandardResult, ...], p: Mapping[str, Any]) -> Tolerances | None:
    """The tolerances of a ``back-calculation`` rule (parameters ``p``) for these standards.

    The lowest level of the fit gets ``lowest_level_tolerance_pct`` and the
    highest ``highest_level_tolerance_pct`` (else the main tolerance).  With
    ``narrowed_ends_at_main_tolerance``, an end of the fit that is not the
    run's own end (its standards below or above were excluded or narrowed
    away) is held to the main tolerance: ICH M10 (2022) 3.3.2 makes the next
    standard the new LLOQ only if it meets ±15 % (from memory).  None when no
    non-zero standard is in the fit.
    """
    used = [s.point.concentration for s in _nonzero(standards) if s.used]
    if not used:
        return None
    every = [s.point.concentration for s in _nonzero(standards)]
    lowest, highest = min(used), max(used)
    main = p["tolerance_pct"]
    low = p["lowest_level_tolerance_pct"]
    high = p.get("highest_level_tolerance_pct")
    high = main if high is None else high
    notes = []
    if p.get("narrowed_ends_at_main_tolerance"):
        if lowest > min(every) and low != main:
            notes.append(f"the lowest level in the fit ({fmt(lowest)}) is not the run's lowest "
                         f"standard ({fmt(min(every))}, left out), so as the new LLOQ it is held "
                         f"to ±{main:g} %, not ±{low:g} % (ICH M10 3.3.2, from memory)")
            low = main
        if highest < max(every) and high != main:
            notes.append(f"the highest level in the fit ({fmt(highest)}) is not the run's "
                         f"highest standard ({fmt(max(every))}, left out), so as the new ULOQ it "
                         f"is held to ±{main:g} %")
            high = main
    return Tolerances(lowest, highest, low, main, high, tuple(notes))


def rejected_standards(standards: tuple[StandardResult, ...],
                       p: Mapping[str, Any]) -> list[StandardResult]:
    """The standards in the fit outside their tolerance that may leave the fit.

    A failing standard leaves the fit (ICH M10 3.3.2: a rejected standard is
    left out and the curve re-evaluated without it, from memory) unless every
    standard of the lowest or highest level fails: the LLOQ or ULOQ is never
    dropped this way, so the rule fails on it and the range can only change by
    a narrowing the analyst applies, in the open.
    """
    tol = tolerances(standards, p)
    if tol is None:
        return []
    judged = [s for s in _nonzero(standards) if s.used]
    failing = [s for s in judged if not _within(s, tol.allowed(s))]
    keep_ends = set()
    for end in (tol.lowest, tol.highest):
        members = [s for s in judged if s.point.concentration == end]
        if all(not _within(s, tol.allowed(s)) for s in members):
            keep_ends.add(end)
    return [s for s in failing if s.point.concentration not in keep_ends]


def _back_calculation(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Share of standards whose back-calculated concentration is within tolerance.

    The lowest level of the fit (the LLOQ) and, when the profile says so, the
    highest (the ULOQ) have tolerances of their own (see :func:`tolerances`).
    With ``ends_must_pass`` the curve fails when every standard of either end
    fails; with ``min_passing_levels`` at least that many levels must pass, a
    level passing when at least ``min_level_pass_pct`` of its standards
    (default: one of them) are within tolerance.  With ``count_excluded`` the
    non-zero standards left out of the fit count as failing in the share, and
    at their level when it lies inside the range of the fit.  Deviations are
    compared as the record prints them, to 0.1 % (limits are inclusive).
    """
    if ctx.fit is None:
        return not_evaluated("back-calculation", sev, ctx.unfitted_reason)
    need = p["min_pass_pct"]
    tol = tolerances(ctx.standards, p)
    judged = _nonzero(ctx.used)
    if tol is None or not judged:
        return not_evaluated("back-calculation", sev, "no non-zero standard in the fit")
    lowest, highest = tol.lowest, tol.highest
    allowed = tol.allowed

    passing = {id(s) for s in judged if _within(s, allowed(s))}
    failing = [s for s in judged if id(s) not in passing]
    outside = [_shown(s) for s in failing]
    flagged = [s.point.source_cell for s in failing]
    left_out = [s for s in _nonzero(ctx.standards) if not s.used] if p["count_excluded"] else []
    total = len(judged) + len(left_out)
    share = 100 * len(passing) / total
    ends = f"±{tol.low:g} % at the lowest level"
    if tol.high != tol.main:
        ends += f", ±{tol.high:g} % at the highest"
    counted = (f" ({len(left_out)} left out of the fit counted as failing)" if left_out else "")
    detail = (f"{len(passing)} of {total} standards within ±{tol.main:g} % ({ends}){counted}; "
              f"at least {need:g} % must pass")
    if tol.notes:
        detail += "; " + "; ".join(tol.notes)
    problems = []
    if as_shown(share, 1) < need:  # compared as printed, to 0.1 %
        problems.append(f"only {share:.1f} % of the standards pass")

    levels: dict[float, list[StandardResult]] = {}
    for s in judged:
        levels.setdefault(s.point.concentration, []).append(s)
    for s in left_out:  # a rejected end replicate counts at its end level too
        if lowest <= s.point.concentration <= highest:
            levels.setdefault(s.point.concentration, []).append(s)
    if p["ends_must_pass"]:
        for conc, which in ((lowest, "lowest"), (highest, "highest")):
            members = [s for s in levels[conc] if s.used]
            if all(id(s) not in passing for s in members):
                every = {1: "its only standard", 2: "both standards"}.get(
                    len(members), f"all {len(members)} standards")
                end = "LLOQ" if which == "lowest" else "ULOQ"
                nxt = "next" if which == "lowest" else "next lower"
                held = (f", held to ±{tol.main:g} %" if p.get("narrowed_ends_at_main_tolerance")
                        else "")
                problems.append(f"{_level_words(conc, which)} fails: {every} outside "
                                f"±{allowed(members[0]):g} %, so the {end} cannot be reported "
                                f"there (narrow the working range to make the {nxt} level the "
                                f"{end}{held})")
    want_levels = p.get("min_passing_levels")
    if want_levels is not None:
        level_need = p.get("min_level_pass_pct")
        good = [c for c, members in levels.items()
                if _level_passes(members, passing, level_need)]
        rule = (f"at least {level_need:g} % of its standards" if level_need is not None
                else "at least one standard")
        detail += (f"; {len(good)} of {len(levels)} levels pass ({rule} within tolerance), "
                   f"at least {want_levels} must")
        if len(good) < want_levels:
            problems.append(f"only {len(good)} levels pass")
    if outside:
        detail += "; outside: " + ", ".join(outside)
    if left_out:
        detail += "; left out of the fit: " + ", ".join(_shown(s) for s in left_out)
    if problems:
        detail += ". The curve fails: " + "; ".join(problems) + "."
        return result("back-calculation", sev, Verdict.FAIL, share, float(need), detail,
                      cells=flagged)
    return result("back-calculation", sev, Verdict.PASS, share, float(need), detail,
                  cells=flagged)


def _level_passes(members: list[StandardResult], passing: set[int], need: float | None) -> bool:
    n = sum(id(s) in passing for s in members)
    if need is None:
        return n >= 1
    return as_shown(100 * n / len(members), 1) >= need


def min_replicates(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """At least ``min_replicates`` standards at each non-zero level (or at the ends).

    Standards in the fit count, and so do replicates kept out of the regression for
    the variance test alone (profile ``fit_replicates = "first"``, ISO 8466-1).
    """
    levels: dict[float, int] = {}
    # Replicates kept for the variance test alone (ISO 8466-1) are replicates all the same.
    for s in _nonzero((*ctx.used, *ctx.variance_only)):
        levels[s.point.concentration] = levels.get(s.point.concentration, 0) + 1
    if not levels:
        return not_evaluated("min-replicates", sev, "no non-zero standard in the fit")
    need = p["min_replicates"]
    judged = sorted(levels)
    if p["ends_only"]:
        judged = sorted({judged[0], judged[-1]})
    fewest = min(levels[c] for c in judged)
    short = [f"{fmt(c)} ({levels[c]})" for c in judged if levels[c] < need]
    where = "the lowest and highest level" if p["ends_only"] else f"each of {len(judged)} levels"
    detail = (f"At least {need} standard{'s' if need != 1 else ''} in the fit at {where}; "
              f"fewest: {fewest}")
    if short:
        detail += "; too few at " + ", ".join(short)
        return result("min-replicates", sev, Verdict.FAIL, float(fewest), float(need), detail)
    return result("min-replicates", sev, Verdict.PASS, float(fewest), float(need), detail)


def exclusions(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Share of the non-zero standards left out of the fit, and whether any is interior.

    Every standard with a non-zero nominal concentration that is not in the
    fit counts, whatever the reason (the analyst's, an unreadable response, a
    narrowed range); each is listed with its reason.  Zero-concentration
    standards are left aside: profiles may keep them out on purpose.
    """
    standards = _nonzero(ctx.standards)
    if not standards:
        return not_evaluated("exclusions", sev, "no non-zero standard in the run")
    left_out = [s for s in standards if not s.used]
    used = [s.point.concentration for s in standards if s.used]
    share = 100 * len(left_out) / len(standards)
    limit = p.get("max_excluded_pct")
    detail = (f"{len(left_out)} of {len(standards)} non-zero standards ({share:.1f} %) left out "
              "of the fit")
    detail += f"; at most {limit:g} % allowed" if limit is not None else ""
    if left_out:
        detail += ": " + "; ".join(f"{s.point.source_cell} ({fmt(s.point.concentration)}): "
                                   f"{s.exclusion_reason}" for s in left_out)
    problems = []
    if limit is not None and share > limit:
        problems.append(f"{share:.1f} % left out is more than {limit:g} %")
    if not p["allow_interior"] and used:
        low, high = min(used), max(used)
        interior = [s for s in left_out if low < s.point.concentration < high]
        if interior:
            cells = ", ".join(f"{s.point.source_cell} ({fmt(s.point.concentration)})"
                              for s in interior)
            problems.append(f"{cells} left out from inside the range {fmt(low)} to {fmt(high)}; "
                            "the profile allows standards to be dropped only from the ends "
                            "(narrow the range instead)")
    if problems:
        text = "; ".join(problems)
        detail += f". {text[0].upper()}{text[1:]}."
        return result("exclusions", sev, Verdict.FAIL, share, limit, detail)
    return result("exclusions", sev, Verdict.PASS, share, limit, detail + ".")


def _tolerance(default: float | None = None) -> Param:
    return Param(float, low=0, high=100, default=default, low_open=True)


STANDARDS_RULES: tuple[Rule, ...] = (
    Rule("back-calculation", "Back-calculated standards within tolerance",
         {"tolerance_pct": _tolerance(15),
          "lowest_level_tolerance_pct": _tolerance(20),
          "highest_level_tolerance_pct": _tolerance(),
          "min_pass_pct": Param(float, low=0, high=100, default=75),
          "min_level_pass_pct": Param(float, low=0, high=100, low_open=True),
          "min_passing_levels": Param(int, low=1),
          "ends_must_pass": Param(bool, default=False),
          "count_excluded": Param(bool, default=False),
          "narrowed_ends_at_main_tolerance": Param(bool, default=False),
          "refit_without_rejected": Param(bool, default=False)},
         _back_calculation,
         validate=lambda p: ("min_level_pass_pct needs min_passing_levels beside it"
                             if "min_level_pass_pct" in p and "min_passing_levels" not in p
                             else None)),
    Rule("min-replicates", "Replicate standards at each level",
         {"min_replicates": Param(int, low=1, default=2), "ends_only": Param(bool, default=False)},
         min_replicates),
    Rule("exclusions", "Standards left out of the fit",
         {"max_excluded_pct": Param(float, low=0, high=100),
          "allow_interior": Param(bool, default=True)},
         exclusions),
)
