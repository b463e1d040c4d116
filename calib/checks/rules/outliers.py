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
from calib.checks.rules.base import Param, Rule, not_evaluated, result, with_test
from calib.fit.distributions import t_sf
from calib.fit.outliers import Influence, grubbs, influence

__all__ = ["OUTLIERS_RULES"]

_HANDS_OFF = ("calib does not remove points: the analyst decides, and any exclusion "
              "needs a reason.")


def _grubbs_by_level(used: tuple[StandardResult, ...], y: np.ndarray, alpha: float,
                     per_level: float | None) -> tuple[int, float, dict[int, str]]:
    """Grubbs' test at each level with 4 or more replicates, for information only.

    With 3 replicates G cannot exceed (n − 1)/√n = 1.1547 and reaches its critical value
    whenever two replicates nearly coincide, whatever the third: the test is degenerate
    there and is not evaluated.  The findings never decide the rule (one test decides,
    see :func:`_outliers_rule`); they say at which level a suspect stands out.
    """
    by_level: dict[int, list[int]] = {}
    for i, standard in enumerate(used):
        by_level.setdefault(standard.level, []).append(i)
    replicated = {level: m for level, m in sorted(by_level.items()) if len(m) >= 4}
    level_alpha = per_level if per_level is not None else alpha / max(len(replicated), 1)
    found: dict[int, str] = {}
    for level, members in replicated.items():
        test = grubbs(y[members], alpha=level_alpha)
        if test.outlier:
            found[members[test.index]] = (f"Grubbs G = {test.statistic:.4f} > {test.critical:.4f} "
                                          f"at level {level} (α = {level_alpha:.3g} per level; "
                                          "for information)")
    return len(replicated), level_alpha, found


def _residual_findings(infl: Influence, alpha: float) -> dict[int, list[str]]:
    found: dict[int, list[str]] = {}
    crit = infl.bonferroni_critical(alpha)
    for i in infl.suggested(alpha):
        p = min(1.0, 2 * infl.n_points * float(t_sf(abs(infl.studentized[i]),
                                                           infl.residual_df - 1)))
        found.setdefault(int(i), []).append(
            f"studentized residual {infl.studentized[i]:+.2f} beyond ±{crit:.2f} "
            f"(Bonferroni, α = {alpha:g}; Bonferroni p = {p:.3g})")
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


def _outliers_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Suggested outliers; value max |studentized residual|, limit the Bonferroni t.

    One test decides, at ``alpha`` for the whole curve: the largest externally
    studentized residual against t(1 − α/(2N), ν − 1) (Bonferroni over the N points,
    whatever their levels).  Grubbs' test per level (4 or more replicates, α shared over
    the levels unless ``grubbs_alpha`` sets it) is reported for information only.
    """
    fit = ctx.fit
    if fit is None:
        return not_evaluated("outliers", sev, ctx.unfitted_reason)
    alpha = p["alpha"]
    cells = [s.point.source_cell for s in ctx.used]
    try:
        infl: Influence | None = ctx.shared("influence", lambda: influence(fit))
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
    grubbs_note = (f"Grubbs' test, for information, at {tested} level{'s' if tested != 1 else ''} "
                   f"with 4 or more replicates (α = {level_alpha:.3g} per level)" if tested
                   else "Grubbs' test not evaluated: no level has 4 or more replicates (with 3, "
                        "G reaches its critical value whenever two replicates nearly agree)")
    if suspects:
        grubbs_note += " flags " + ", ".join(f"{cells[i]} ({f})" for i, f in sorted(suspects.items()))
    n_points = infl.n_points if infl is not None else 0
    df_t = infl.residual_df - 1 if infl is not None else 0
    p_value = (min(1.0, 2 * n_points * float(t_sf(value, df_t)))
               if value is not None and df_t >= 1 else None)

    def test_of(check: CheckResult) -> CheckResult:
        # One test decides: the largest |externally studentized residual| against
        # t(ν − 1), Bonferroni over the N points; its p-value is N·2·P(T > |t|max) capped at 1.
        return with_test(check, statistic="max |t| (externally studentized residual)",
                         statistic_value=value, p_value=p_value, alpha=alpha,
                         critical_value=limit)

    cook_note = "" if infl is None or value is None else f" {_influence_note(infl, cells)}."
    if findings:
        if suspects:
            cook_note += f" {grubbs_note[0].upper()}{grubbs_note[1:]}."
        listed = "; ".join(f"{cells[i]}: {' and '.join(findings[i])}" for i in sorted(findings))
        detail = (f"Suggested outlier{'s' if len(findings) > 1 else ''}: {listed}."
                  f"{cook_note} {_HANDS_OFF}")
        return test_of(result("outliers", sev, Verdict.WARN, value, limit, detail,
                              cells=[cells[i] for i in sorted(findings)]))
    if infl is None:
        return not_evaluated("outliers", sev, f"Studentized residuals not evaluated: {why_not}; "
                             f"{grubbs_note}{' finds no outlier' if tested else ''}.")
    if value is None or limit is None:
        return not_evaluated("outliers", sev, "Every standard fixes the curve (leverage 1), so "
                             "no residual can be judged.")
    worst = int(np.nanargmax(np.abs(infl.studentized)))
    shown_p = f", Bonferroni p = {p_value:.3g}" if p_value is not None else ""
    detail = (f"No standard stands out: largest |studentized residual| {value:.2f} ({cells[worst]}) "
              f"within ±{limit:.2f} (Bonferroni, α = {alpha:g}{shown_p}); {grubbs_note}"
              f"{'' if suspects or not tested else ' finds no outlier'}; largest leverage "
              f"{float(np.max(infl.leverage)):.2f}.{cook_note}")
    return test_of(result("outliers", sev, Verdict.PASS, value, limit, detail))


OUTLIERS_RULES: tuple[Rule, ...] = (
    Rule("outliers", "Suggested outliers (studentized residuals, Cook's distance, Grubbs)",
         {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True),
          "grubbs_alpha": Param(float, low=0, high=0.5, low_open=True)},
         _outliers_rule),
)
