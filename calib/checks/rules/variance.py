"""Rules on variance (filled in by the statistical engine work)."""

from __future__ import annotations

from calib.checks.rules.base import Rule

__all__ = ["VARIANCE_RULES"]

VARIANCE_RULES: tuple[Rule, ...] = ()
