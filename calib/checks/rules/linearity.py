"""Rules on linearity: lack of fit, Mandel's test, the quadratic term, runs and drift.

Each rule turns one result of :mod:`calib.fit.linearity` into a check; the
statistics live there.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from calib.checks.context import CurveContext
from calib.checks.result import CheckResult, Severity, Verdict
from calib.checks.rules.base import Param, Rule, fmt, not_evaluated, result, with_test
from calib.checks.rules.base import result as _result
from calib.fit.curve import CurveFit
from calib.fit.linearity import (
    lack_of_fit,
    mandel_test,
    quadratic_term,
    residual_drift,
    residual_runs,
)
from calib.fit.power import detectable_bend_pct, detectable_f_noncentrality
from calib.options import Model

__all__ = ["LINEARITY_RULES"]


def _p(value: float) -> str:
    return f"{value:.3g}"


def _weights_note(weighted: bool, fit: CurveFit) -> str:
    return f", weighting {fit.weighting.value}" if weighted else ""


def _lack_of_fit_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Lack-of-fit F-test against replicate (pure) error; value F, limit α."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("lack-of-fit", sev, ctx.unfitted_reason)
    test = ctx.shared("lack_of_fit", lambda: lack_of_fit(fit))
    if test.reason is not None:
        return not_evaluated("lack-of-fit", sev, f"Lack of fit not tested: {test.reason}.")
    alpha = p["alpha"]
    sums = f"; weighted sums{_weights_note(test.weighted, fit)}" if test.weighted else ""
    figures = (f"F = {fmt(test.f_value)} on ({test.df_lack}, {test.df_pure}) df, "
               f"p = {_p(test.p_value)}, {test.n_levels} levels{sums}")
    # Weights taken from the replicate variances make the weighted pure error equal its
    # degrees of freedom whatever the data, so the F ratio then only indicates.
    caution = (" The weights come from the same replicate variances, so the test is only "
               "indicative." if fit.weighting == "1/s2" else "")
    crit = test.critical(alpha)
    bend = math.nan
    if fit.model is Model.LINEAR:
        lam = detectable_f_noncentrality(test.df_lack, test.df_pure, alpha)
        sigma2 = test.ss_pure / test.df_pure
        pre = ctx.precomputed
        shared = (pre.detectable_bend_pct(sigma2, lam) if pre is not None and pre.fit is fit
                  else None)
        bend = (detectable_bend_pct(fit.x, fit.weights, fit.predict(fit.x), sigma2, lam)
                if shared is None else shared)
    power_words = f" Critical F({1 - alpha:g}; {test.df_lack}, {test.df_pure}) = {fmt(crit)}."
    power_words += (f" With 80 % power this test detects a quadratic bend that leaves the "
                   f"straight line by {bend:.3g} % of the response at the highest standard."
                   if math.isfinite(bend) else "")

    def done(verdict: Verdict, detail: str) -> CheckResult:
        return with_test(result("lack-of-fit", sev, verdict, test.f_value, alpha, detail),
                         statistic="F", statistic_value=test.f_value, p_value=test.p_value,
                         alpha=alpha, critical_value=crit,
                         detectable=(("bend_at_top_80pct_power_pct", bend),))

    if test.significant(alpha):
        return done(Verdict.FAIL, f"Significant lack of fit ({figures}; p < {alpha:g}): the "
                    f"{fit.model.value} curve misses the level means by more than the "
                    f"replicates scatter.{caution}{power_words}")
    return done(Verdict.PASS, f"No significant lack of fit ({figures}; p ≥ {alpha:g}): the "
                f"{fit.model.value} curve follows the level means within the replicate "
                f"scatter.{caution}{power_words}")


def _mandel_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Mandel's fitting test (ISO 8466-1); value PG, limit F(confidence; 1, N − 3)."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("mandel", sev, ctx.unfitted_reason)
    if fit.model is not Model.LINEAR:
        return not_evaluated("mandel", sev, "Mandel's test compares a straight line with a "
                             f"quadratic; the curve is fitted as {fit.model.value}.")
    test = ctx.shared("mandel", lambda: mandel_test(fit))
    if test.reason is not None:
        return not_evaluated("mandel", sev, f"Mandel's test not evaluated: {test.reason}.")
    confidence = p["confidence"]
    crit = test.critical(confidence)
    weights = (f"; both fits weighted {fit.weighting.value}" if test.weighted else "")
    figures = (f"PG = {fmt(test.pg)}, F({confidence:g}; {test.df[0]}, {test.df[1]}) = "
               f"{fmt(crit)}; DS² = {fmt(test.ds2)}, s² of the line {fmt(test.s2_linear)}, "
               f"of the quadratic {fmt(test.s2_quadratic)}{weights}")
    figures += f", p = {_p(test.p_value)}"

    def done(verdict: Verdict, detail: str) -> CheckResult:
        return with_test(result("mandel", sev, verdict, test.pg, crit, detail), statistic="F",
                         statistic_value=test.pg, p_value=test.p_value,
                         alpha=round(1 - confidence, 12), critical_value=crit)

    if test.nonlinear(confidence):
        return done(Verdict.FAIL, f"The quadratic fits significantly better than the straight "
                    f"line ({figures}): the calibration is not linear over this range.")
    return done(Verdict.PASS, f"The quadratic fits no better than the straight line "
                f"({figures}): the linear calibration function is adequate.")


def _quadratic_term_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """t-test of the quadratic coefficient; value p, limit α."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("quadratic-term", sev, ctx.unfitted_reason)
    if fit.model not in (Model.LINEAR, Model.QUADRATIC):
        return not_evaluated("quadratic-term", sev, "The quadratic-term test applies to linear "
                             f"and quadratic curves; the curve is fitted as {fit.model.value}.")
    term = ctx.shared("quadratic_term", lambda: quadratic_term(fit))
    if term.reason is not None:
        return not_evaluated("quadratic-term", sev, f"Quadratic term not tested: {term.reason}.")
    alpha = p["alpha"]
    source = "a quadratic fitted for comparison" if term.refitted else "the fitted quadratic"
    weights = _weights_note(term.weighted, fit)
    figures = (f"c = {fmt(term.estimate)} (SE {fmt(term.std_error)}) in {source}{weights}, "
               f"t = {term.t_value:.3f} on {term.df} df, p = {_p(term.p_value)}")
    significant = term.significant(alpha)
    from calib.fit.distributions import t_ppf

    crit = float(t_ppf(1 - alpha / 2, term.df)) if term.df > 0 else math.nan

    def result(rule_id: str, sev: Severity, verdict: Verdict, value: float | None,
               limit: float | None, detail: str) -> CheckResult:
        # The alarm side: a refitted quadratic warns on a small p; the fitted one on a large p.
        side = "p ≥ α" if term.refitted else "p < α"
        return with_test(_result(rule_id, sev, verdict, value, limit, detail), statistic="t",
                         statistic_value=term.t_value, p_value=term.p_value, alpha=alpha,
                         critical_value=crit, passes_when=side)

    if term.refitted and significant:
        detail = (f"Curvature: the quadratic term is significant ({figures}; p < {alpha:g}), "
                  "so the straight line misses a bend in the response.")
        return result("quadratic-term", sev, Verdict.FAIL, term.p_value, alpha, detail)
    if term.refitted:
        detail = (f"No significant curvature ({figures}; p ≥ {alpha:g}): the straight line "
                  "needs no quadratic term.")
        return result("quadratic-term", sev, Verdict.PASS, term.p_value, alpha, detail)
    if significant:
        detail = f"The quadratic term is significant ({figures}; p < {alpha:g}): the curvature is real."
        return result("quadratic-term", sev, Verdict.PASS, term.p_value, alpha, detail)
    detail = (f"The quadratic term is not significant ({figures}; p ≥ {alpha:g}): a straight "
              "line may describe these standards as well; prefer the simpler curve unless the "
              "method calls for the quadratic.")
    return result("quadratic-term", sev, Verdict.WARN, term.p_value, alpha, detail)


def _runs_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Runs test on residual signs ordered by concentration; value p, limit α."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("residual-runs", sev, ctx.unfitted_reason)
    test = residual_runs(fit)
    if test.reason is not None:
        return not_evaluated("residual-runs", sev, f"Runs test not evaluated: {test.reason}.")
    alpha = p["alpha"]
    counts = f"{test.n_positive} positive and {test.n_negative} negative level means"
    if test.smallest_p >= alpha:
        return not_evaluated(
            "residual-runs", sev,
            f"Too few residuals for the runs test: with {counts} even the strongest pattern "
            f"(2 runs) has p = {_p(test.smallest_p)} ≥ {alpha:g}.")
    dropped = f"; {test.n_dropped} zero level mean(s) left out" if test.n_dropped else ""
    figures = (f"{test.runs} runs of the signs of the level-mean residuals in order of "
               f"concentration where {test.expected_runs:.1f} are expected for {counts}; "
               f"{test.method} one-sided p = P(R ≤ {test.runs}) = {_p(test.p_value)}{dropped}")

    def done(verdict: Verdict, detail: str) -> CheckResult:
        return with_test(result("residual-runs", sev, verdict, test.p_value, alpha, detail),
                         statistic="runs", statistic_value=float(test.runs),
                         p_value=test.p_value, alpha=alpha)

    if test.patterned(alpha):
        return done(Verdict.FAIL, f"The residuals follow a pattern ({figures}; p < {alpha:g}): "
                    "too few runs point at curvature or a wrong model.")
    return done(Verdict.PASS, f"No pattern in the residual signs ({figures}; p ≥ {alpha:g}).")


def _drift_rule(ctx: CurveContext, p: Mapping[str, Any], sev: Severity) -> CheckResult:
    """Trend of residuals with injection order; value p, limit α."""
    fit = ctx.fit
    if fit is None:
        return not_evaluated("drift", sev, ctx.unfitted_reason)
    order = [s.point.injection_order for s in ctx.used]
    missing = sum(o is None for o in order)
    if missing == len(order):
        return not_evaluated("drift", sev, "The run gives no injection order.")
    if missing:
        return not_evaluated("drift", sev, f"The run gives no injection order for {missing} of "
                             f"the {len(order)} standards in the fit.")
    test = ctx.shared("drift", lambda: residual_drift(fit, [float(o) for o in order
                                                            if o is not None]))
    if test.reason is not None:
        return not_evaluated("drift", sev, f"Drift not tested: {test.reason}.")
    alpha = p["alpha"]
    what = "weighted residuals √w·r" if test.weighted else "residuals"
    figures = (f"{what} change by {fmt(test.slope)} per injection, t = {test.t_value:.3f} on "
               f"{test.df} df, p = {_p(test.p_value)}")
    caution = ""
    if abs(test.order_correlation) >= 0.9:
        caution = (f" The standards were injected nearly in order of concentration "
                   f"(r = {test.order_correlation:.2f}), so a drift would look like curvature "
                   "and can hardly be seen here.")
    from calib.fit.distributions import t_ppf

    crit = float(t_ppf(1 - alpha / 2, test.df)) if test.df > 0 else math.nan

    def done(verdict: Verdict, detail: str) -> CheckResult:
        return with_test(result("drift", sev, verdict, test.p_value, alpha, detail),
                         statistic="t", statistic_value=test.t_value, p_value=test.p_value,
                         alpha=alpha, critical_value=crit)

    if test.drifting(alpha):
        return done(Verdict.FAIL, f"The residuals trend with injection order ({figures}; "
                    f"p < {alpha:g}): the response drifted during the run.{caution}")
    return done(Verdict.PASS, f"No trend of the residuals with injection order ({figures}; "
                f"p ≥ {alpha:g}).{caution}")


def _alpha_param() -> dict[str, Param]:
    return {"alpha": Param(float, low=0, high=0.5, default=0.05, low_open=True)}


LINEARITY_RULES: tuple[Rule, ...] = (
    Rule("lack-of-fit", "Lack of fit against replicate error (F-test)", _alpha_param(),
         _lack_of_fit_rule),
    Rule("mandel", "Mandel's fitting test, straight line against quadratic (ISO 8466-1)",
         {"confidence": Param(float, low=0.5, high=0.9999, default=0.99)}, _mandel_rule),
    Rule("quadratic-term", "Significance of a quadratic term (curvature)", _alpha_param(),
         _quadratic_term_rule),
    Rule("residual-runs", "Runs of level-mean residual signs along the concentration (one-sided)",
         _alpha_param(),
         _runs_rule),
    Rule("drift", "Residual trend with injection order (drift)", _alpha_param(), _drift_rule),
)
