"""Rules on outliers (filled in by the statistical engine work)."""

from __future__ import annotations

from calib.checks.rules.base import Rule

__all__ = ["OUTLIERS_RULES"]

OUTLIERS_RULES: tuple[Rule, ...] = ()
