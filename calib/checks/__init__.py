"""Acceptance checks: profiles, rules, verdicts, exclusions and working ranges."""

from calib.checks.context import CurveContext, StandardResult
from calib.checks.evaluate import CurveAssessment, RunAssessment, assess_curve, evaluate_run
from calib.checks.exclusions import AppliedExclusion, Exclusion, parse_exclusion
from calib.checks.history import SlopeHistory, slope_history
from calib.checks.narrowing import (
    AppliedRange,
    RangeError,
    RangeProposal,
    WorkingRange,
    parse_range,
)
from calib.checks.profile import (
    NarrowingPolicy,
    Profile,
    RuleSpec,
    load_profile,
    parse_profile,
    shipped_profiles,
)
from calib.checks.result import CheckResult, CurveVerdict, Severity, Verdict
from calib.checks.rules import RULES

__all__ = [
    "RULES", "AppliedExclusion", "AppliedRange", "CheckResult", "CurveAssessment", "CurveContext",
    "CurveVerdict", "Exclusion", "NarrowingPolicy", "Profile", "RangeError", "RangeProposal",
    "RuleSpec", "RunAssessment", "Severity", "SlopeHistory", "StandardResult", "Verdict",
    "WorkingRange", "assess_curve", "evaluate_run", "load_profile", "parse_exclusion",
    "parse_profile", "parse_range", "shipped_profiles", "slope_history",
]
