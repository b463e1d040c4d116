"""The acceptance checks a profile can name, each a function of one curve.

Every rule declares its parameters (:class:`Param`) so that profiles are
validated before anything is computed, and returns a
:class:`~calib.checks.result.CheckResult`; it never raises on bad data.
Rules live in modules by theme; :data:`RULES` collects them by id.
"""

from __future__ import annotations

from calib.checks.rules.acceptance import ACCEPTANCE_RULES
from calib.checks.rules.base import Param, Rule
from calib.checks.rules.basic import BASIC_RULES
from calib.checks.rules.intercept import INTERCEPT_RULES
from calib.checks.rules.linearity import LINEARITY_RULES
from calib.checks.rules.models import MODELS_RULES
from calib.checks.rules.outliers import OUTLIERS_RULES
from calib.checks.rules.qc import QC_RULES
from calib.checks.rules.standards import STANDARDS_RULES
from calib.checks.rules.variance import VARIANCE_RULES

__all__ = ["RULES", "Param", "Rule"]

RULES: dict[str, Rule] = {
    rule.id: rule
    for group in (BASIC_RULES, INTERCEPT_RULES, STANDARDS_RULES, ACCEPTANCE_RULES, MODELS_RULES, LINEARITY_RULES,
                  VARIANCE_RULES, OUTLIERS_RULES, QC_RULES)
    for rule in group
}
