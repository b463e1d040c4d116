"""Rules on linearity (filled in by the statistical engine work)."""

from __future__ import annotations

from calib.checks.rules.base import Rule

__all__ = ["LINEARITY_RULES"]

LINEARITY_RULES: tuple[Rule, ...] = ()
