"""Rules on outliers: suggested, never removed.

The ``outliers`` rule names the standards that stand out and why, from
:mod:`calib.fit.outliers`; it warns and leaves the decision (and the reason for
any exclusion) to the analyst.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from calib.checks.context import CurveContext, StandardResult
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, not_evaluated, result
from calib.fit.outliers import Influence, grubbs, influence

__all__ = ["OUTLIERS_RULES"]

_HANDS_OFF = ("calib does not remove points: the analyst decides, and any exclusion "
              "needs a reason.")


def _grubbs_by_level(used: tuple[StandardResult, ...], y: np.ndarray, alpha: float,
                     per_level: float | None) -> tuple[int, float, dict[int, str]]:
    """Levels tested, the α used at each, and a finding per suspect (index into the fit)."""
    by_level: dict[int, list[int]] = {}
    for i, standard in enumerate(used):
        by_level.setdefault(standard.level, []).append(i)
    replicated = {level: m for level, m in sorted(by_level.items()) if len(m) >= 3}
    # Tested at α each, six levels would raise a false alarm on about one curve in four;
    # sharing α over the levels keeps the curve's false-alarm rate at α.
    level_alpha = per_level if per_level is not None else alpha / max(len(replicated), 1)
    found: dict[int, str] = {}
    for level, members in replicated.items():
        test = grubbs(y[members], alpha=level_alpha)
        if test.outlier:
            # With 3 values G nears its bound (n − 1)/√n whenever two of them nearly coincide.
            close = ("; with 3 replicates this also happens when the other two agree unusually "
                     "closely" if test.n == 3 else "")
            found[members[test.index]] = (f"Grubbs G = {test.statistic:.4f} > {test.critical:.4f} "
                                          f"at level {level} (α = {level_alpha:.3g} per level"
                                          f"{close})")
    return len(replicated), level_alpha, found


def _residual_findings(infl: Influence, alpha: float) -> dict[int, list[str]]:
    found: dict[int, list[str]] = {}
    crit = infl.bonferroni_critical(alpha)
    for i in infl.suggested(alpha):
        found.setdefault(int(i), []).append(
            f"studentized residual {infl.studentized[i]:+.2f} beyond ±{crit:.2f} "
            f"(Bonferroni, α = {alpha:g})")
    return found


def _influence_note(infl: Influence, cells: list[str]) -> str:
    """Points that move the whole curve: reported, but not outliers by themselves.

    A standard far from the others (1, 2, 5, 10, 100) carries a high leverage
    and a large Cook's distance even when it reads true, so Cook's distance
    informs the analyst without raising a warning.
    """
    ref = infl.cooks_reference
    strong = infl.influential()
    if strong.size:
        listed = ", ".join(f"{cells[i]} ({infl.cooks_distance[i]:.2f})" for i in strong)
        return (f"Cook's distance above {ref:.2f} (median of F({infl.n_params}, "
                f"{infl.residual_df})): {listed}; such points move the whole curve")
    cook = int(np.nanargmax(infl.cooks_distance))
    return (f"Largest Cook's distance {infl.cooks_distance[cook]:.2f} ({cells[cook]}), below "
            f"{ref:.2f}")


def outliers_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Suggested outliers; value max |studentized residual|, limit the Bonferroni t.

    ``alpha`` is the curve's false-alarm rate for the residuals (Bonferroni over
    the N points) and for Grubbs' test (shared over the levels tested), unless
    ``grubbs_alpha`` sets the level of each Grubbs test on its own.
    """
    fit = ctx.fit
    if fit is None:
        return not_evaluated("outliers", sev, ctx.unfitted_reason)
    alpha = p["alpha"]
    cells = [s.point.source_cell for s in ctx.used]
    try:
        infl: Influence | None = influence(fit)
        why_not = ""
    except ValueError as exc:
        infl, why_not = None, str(exc)
    findings: dict[int, list[str]] = {}
    value = limit = None
    if infl is not None:
        findings = _residual_findings(infl, alpha)
        limit = infl.bonferroni_critical(alpha)
        magnitude = np.abs(infl.studentized)
        if np.any(np.isfinite(magnitude)):
            value = float(np.nanmax(magnitude))
    tested, level_alpha, suspects = _grubbs_by_level(ctx.used, fit.y, alpha,
                                                       p.get("grubbs_alpha"))
    for i, finding in suspects.items():
        findings.setdefault(i, []).append(finding)
    grubbs_note = (f"Grubbs' test at {tested} level{'s' if tested != 1 else ''} with 3 or more "
                   f"replicates (α = {level_alpha:.3g} per level)" if tested
                   else "no level has 3 or more replicates for Grubbs' test")

    cook_note = "" if infl is None or value is None else f" {_influence_note(infl, cells)}."
    if findings:
        listed = "; ".join(f"{cells[i]}: {' and '.join(findings[i])}" for i in sorted(findings))
        detail = (f"Suggested outlier{'s' if len(findings) > 1 else ''}: {listed}."
                  f"{cook_note} {_HANDS_OFF}")
        return result("outliers", sev, Verdict.WARN, value, limit, detail)
    if infl is None:
        return not_evaluated("outliers", sev, f"Studentized residuals not evaluated: {why_not}; "
                             f"{grubbs_note}{' finds no outlier' if tested else ''}.")
    if value is None or limit is None:
        return not_evaluated("outliers", sev, "Every standard fixes the curve (leverage 1), so "
                             "no residual can be judged.")
    worst = int(np.nanargmax(np.abs(infl.studentized)))
    detail = (f"No standard stands out: largest |studentized residual| {value:.2f} ({cells[worst]}) "
              f"within ±{limit:.2f} (Bonferroni, α = {alpha:g}); {grubbs_note}"
              f"{' finds no outlier' if tested else ''}; largest leverage "
              f"{float(np.max(infl.leverage)):.2f}.{cook_note}")
    return result("outliers", sev, Verdict.PASS, value, limit, detail)


OUTLIERS_RULES: tuple[Rule, ...] = (
    Rule("outliers", "Suggested outliers (studentized residuals, Cook's distance, Grubbs)",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True),
          "grubbs_alpha": Param(float, low=0, high=0.5, low_open=True)},
         outliers_rule),
)
