"""What a rule sees of one curve: its standards, how each back-calculates, and the fit."""

from __future__ import annotations

import functools
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, TypeVar

from calib.checks.history import SlopeHistory
from calib.fit.curve import CurveFit
from calib.run import Point

if TYPE_CHECKING:
    from calib.checks.batched import Precomputed

_T = TypeVar("_T")

__all__ = ["VARIANCE_ONLY", "CurveContext", "StandardResult"]

#: Why a replicate is out of the regression under ``fit_replicates = "first"``.
VARIANCE_ONLY = ("replicate kept for the variance test only: one value per standard enters "
                 "the regression (ISO 8466-1, from memory)")


@dataclass(frozen=True)
class StandardResult:
    """One calibration standard after fitting.

    Attributes
    ----------
    point : Point
        The standard as read.
    level : int
        Concentration level, 1 for the lowest nominal concentration.
    used : bool
        Whether the point is in the fit.
    exclusion_reason : str or None
        The analyst's reason, or calib's (e.g. a weighting that cannot use it).
    fitted : float or None
        ŷ at the nominal concentration.
    back_calculated : float or None
        Concentration read back from the curve at the response.
    deviation_pct : float or None
        100·(x̂ − x)/x; None at nominal 0, where only the absolute deviation means anything.
    """

    point: Point
    level: int
    used: bool
    exclusion_reason: str | None
    fitted: float | None
    back_calculated: float | None
    deviation_pct: float | None

    @property
    def deviation(self) -> float | None:
        """Absolute deviation x̂ − x."""
        if self.back_calculated is None:
            return None
        return self.back_calculated - self.point.concentration


@dataclass(frozen=True)
class CurveContext:
    """One analyte's curve as the rules see it.

    ``fit`` is None when the standards cannot be fitted; ``unfitted_reason``
    then says why, and rules report ``not-evaluated`` with it.  ``blanks``
    holds the analyte's blank and zero samples and its zero-concentration
    standards (the ``blank`` rule judges them); ``slope_history`` the earlier
    accepted slopes when a front end read them from an archive; ``qcs`` the
    analyte's QC samples (the ``qc`` rule reads them back from the curve).

    Figures several rules need are worked out once and kept (the context never
    changes once made).  ``precomputed`` carries diagnostics worked out with the
    run's other curves of the same design (:mod:`calib.checks.batched`); rules read
    them through :meth:`shared`.
    """

    analyte: str
    standards: tuple[StandardResult, ...]
    fit: CurveFit | None
    unfitted_reason: str = ""
    blanks: tuple[Point, ...] = ()
    slope_history: SlopeHistory | None = None
    qcs: tuple[Point, ...] = ()
    precomputed: Precomputed | None = None

    def shared(self, name: str, compute: Callable[[], _T]) -> _T:
        """The diagnostic ``name`` worked out with the run's other curves, else ``compute()``.

        Precomputed figures are used only for the fit they were worked out on.
        """
        pre = self.precomputed
        value: Any = getattr(pre, name) if pre is not None and pre.fit is self.fit else None
        return compute() if value is None else value

    @functools.cached_property
    def used(self) -> tuple[StandardResult, ...]:
        """Standards in the fit."""
        return tuple(s for s in self.standards if s.used)

    @functools.cached_property
    def variance_only(self) -> tuple[StandardResult, ...]:
        """Replicates kept out of the regression for the variance test alone (ISO 8466-1)."""
        return tuple(s for s in self.standards if not s.used
                     and s.exclusion_reason == VARIANCE_ONLY)

    @functools.cached_property
    def n_levels(self) -> int:
        """Distinct concentration levels in the fit (a zero standard counts)."""
        return len({s.point.concentration for s in self.used})

    @functools.cached_property
    def n_nonzero_levels(self) -> int:
        """Distinct non-zero concentration levels in the fit."""
        return len({s.point.concentration for s in self.used if s.point.concentration != 0})
