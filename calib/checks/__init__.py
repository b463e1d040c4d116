"""Acceptance checks: profiles, rules, verdicts."""

from calib.checks.context import CurveContext, StandardResult
from calib.checks.evaluate import CurveAssessment, RunAssessment, assess_curve, evaluate_run
from calib.checks.profile import Profile, RuleSpec, load_profile, parse_profile, shipped_profiles
from calib.checks.result import CheckResult, CurveVerdict, Severity, Verdict
from calib.checks.rules import RULES

__all__ = [
    "RULES", "CheckResult", "CurveAssessment", "CurveContext", "CurveVerdict", "Profile",
    "RuleSpec", "RunAssessment", "Severity", "StandardResult", "Verdict", "assess_curve",
    "evaluate_run", "load_profile", "parse_profile", "shipped_profiles",
]
