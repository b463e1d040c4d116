"""The calibration curve samples are quantified against: from a fit, or from an issued record.

A :class:`CalibrationCurve` holds only what inverse prediction needs: the
coefficients and their covariance, σ̂ and ν, how the fit was weighted, and the
standards in the fit (their range, and N, ȳ, Sxx for the closed form).  A
curve read back from a record is built from the record's stored figures (the
``fit_details`` entry and the points of ``check.curves``), never refitted, so
samples are quantified against exactly the curve that was reviewed.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from calib.errors import InputError
from calib.fit.bands import mean_band, weight_at
from calib.fit.curve import CurveFit
from calib.fit.design import COEFFICIENTS
from calib.fit.distributions import t_ppf
from calib.fit.inverse import quadratic_root
from calib.options import Model, Weighting, parse_option

if TYPE_CHECKING:
    from calib.checks.evaluate import CurveAssessment

__all__ = ["CalibrationCurve", "curves_from_record"]


@dataclass(frozen=True, eq=False)
class CalibrationCurve:
    """One analyte's calibration, ready to read concentrations back.

    Attributes
    ----------
    analyte : str
        Analyte name.
    model, weighting : Model, Weighting
        What was fitted.
    weight_function : Weighting
        The weighting the fit's weights follow (``1/x2`` for ``mean-rf``).
    confidence : float
        The curve's interval level (the profile's).
    coefficients : dict of str to float
        Estimates in design order (intercept, slope, quadratic as present).
    covariance : ndarray, shape (p, p)
        σ̂²·(XᵀWX)⁻¹.
    residual_sd : float
        σ̂ (weights scaled to a mean of 1 over the standards).
    residual_df : int
        ν = N − p.
    weight_scale : float
        Mean raw weight of the standards (w(x) = w_raw(x)/weight_scale).
    level_variances : tuple of (concentration, s²) pairs
        For ``1/s2`` weighting only.
    x, y : ndarray
        Concentrations and responses of the standards in the fit.
    verdict : str
        The curve's verdict: ``accepted``, ``needs-review`` or ``rejected``.
    lod, loq : float or None
        Detection and quantitation limits of the curve, when known.
    lod_method : str or None
        How the LOD was worked out.
    unit : str or None
        Concentration unit.
    response_basis : str or None
        ``raw`` (the standards' own responses) or ``ratio`` (ratios to an
        internal standard); None for a record issued before calib stated it.
    """

    analyte: str
    model: Model
    weighting: Weighting
    weight_function: Weighting
    confidence: float
    coefficients: dict[str, float]
    covariance: np.ndarray
    residual_sd: float
    residual_df: int
    weight_scale: float
    level_variances: tuple[tuple[float, float], ...]
    x: np.ndarray
    y: np.ndarray
    verdict: str = "accepted"
    lod: float | None = None
    loq: float | None = None
    lod_method: str | None = None
    unit: str | None = field(default=None)
    response_basis: str | None = None

    # -- construction --------------------------------------------------------------------------
    @classmethod
    def from_fit(cls, fit: CurveFit, *, analyte: str, verdict: str = "accepted",
                 lod: float | None = None, loq: float | None = None,
                 lod_method: str | None = None, unit: str | None = None,
                 response_basis: str | None = None) -> CalibrationCurve:
        """The curve of a live fit.

        Examples
        --------
        >>> from calib.fit import fit_curve
        >>> curve = CalibrationCurve.from_fit(fit_curve([1, 2, 4, 8], [2.0, 4.1, 7.9, 16.2]),
        ...                                   analyte="Nitrate-N", unit="mg/L")
        >>> curve.lloq, curve.uloq, curve.n_points
        (1.0, 8.0, 4)
        """
        levels: tuple[tuple[float, float], ...] = ()
        if fit.weight_basis is Weighting.INV_S2:
            c, s2, _ = fit.level_variances
            levels = tuple((float(a), float(b)) for a, b in zip(c, s2))
        return cls(
            analyte=analyte, model=fit.model, weighting=fit.weighting,
            weight_function=fit.weight_basis, confidence=fit.confidence,
            coefficients=dict(fit.coefficients), covariance=np.array(fit.covariance, dtype=float),
            residual_sd=float(fit.residual_sd), residual_df=int(fit.residual_df),
            weight_scale=float(fit.weight_scale), level_variances=levels,
            x=np.array(fit.x, dtype=float), y=np.array(fit.y, dtype=float), verdict=verdict,
            lod=_finite(lod), loq=_finite(loq), lod_method=lod_method, unit=unit,
            response_basis=response_basis,
        )

    @classmethod
    def from_assessment(cls, curve: CurveAssessment, *, unit: str | None = None
                        ) -> CalibrationCurve | None:
        """The curve of a checked analyte; None when its standards could not be fitted."""
        from calib.record.document import response_basis

        if curve.fit is None:
            return None
        return cls.from_fit(
            curve.fit, analyte=curve.analyte, verdict=curve.verdict.value,
            lod=curve.lod.value if curve.lod is not None else None,
            loq=curve.loq.value if curve.loq is not None else None,
            lod_method=curve.lod.method if curve.lod is not None else None, unit=unit,
            response_basis=response_basis(curve),
        )

    # -- figures -------------------------------------------------------------------------------
    @property
    def beta(self) -> np.ndarray:
        """Coefficients as an array, in design order."""
        return np.array(list(self.coefficients.values()), dtype=float)

    @property
    def unweighted(self) -> bool:
        """True when every standard had the same weight."""
        return self.weight_function is Weighting.NONE

    @property
    def n_points(self) -> int:
        """N, the standards in the fit."""
        return int(self.x.size)

    @property
    def x_min(self) -> float:
        """Lowest concentration in the fit (the bottom of the calibrated range)."""
        return float(self.x.min())

    @property
    def x_max(self) -> float:
        """Highest concentration in the fit (the top of the calibrated range)."""
        return float(self.x.max())

    @property
    def lloq(self) -> float:
        """Lower limit of quantitation: the lowest non-zero standard in the fit (ICH M10)."""
        positive = self.x[self.x > 0]
        return float(positive.min()) if positive.size else self.x_min

    @property
    def uloq(self) -> float:
        """Upper limit of quantitation: the highest standard in the fit."""
        return self.x_max

    @property
    def x_mean(self) -> float:
        """x̄ of the standards (unweighted)."""
        return float(self.x.mean())

    @property
    def y_mean(self) -> float:
        """ȳ of the standards (unweighted)."""
        return float(self.y.mean())

    @property
    def sxx(self) -> float:
        """Sxx = Σ(xᵢ − x̄)²."""
        return float(np.sum((self.x - self.x.mean()) ** 2))

    def t_critical(self, confidence: float | None = None) -> float:
        """t(1 − α/2, ν) at ``confidence`` (the curve's own by default)."""
        level = self.confidence if confidence is None else confidence
        if isinstance(level, bool) or not 0.5 <= level < 1:
            raise ValueError(f"confidence must be a number from 0.5 to below 1; got {level!r}")
        return float(t_ppf(0.5 + level / 2, self.residual_df))

    def predict(self, x: np.ndarray | float) -> np.ndarray:
        """Fitted response at concentrations ``x``."""
        return mean_band(self.model, self.beta, self.covariance, 0.0, x)[0]

    def weight_at(self, x: np.ndarray | float) -> np.ndarray:
        """w(x) of a new reading at ``x``, on the scale of the fit's weights."""
        return weight_at(x, self.weight_function, weight_scale=self.weight_scale,
                         fitted=self.predict(x),
                         level_variances=[list(pair) for pair in self.level_variances])

    def concentration_at(self, response: np.ndarray | float) -> np.ndarray:
        """x with ŷ(x) = response: the straight lines inverted, the quadratic's root in range.

        Examples
        --------
        >>> from calib.fit import fit_curve
        >>> fit = fit_curve([1, 2, 3, 4, 5], [1.0, 4.0, 9.0, 16.0, 25.0], model="quadratic")
        >>> CalibrationCurve.from_fit(fit, analyte="A").concentration_at([6.25]).round(9)
        array([2.5])
        """
        y = np.atleast_1d(np.asarray(response, dtype=float))
        c = self.coefficients
        a = c.get("intercept", 0.0)
        b = c["slope"]
        q = c.get("quadratic", 0.0)
        if q == 0:
            with np.errstate(divide="ignore", invalid="ignore"):
                return (y - a) / b if b != 0 else np.full_like(y, np.nan)
        return np.atleast_1d(quadratic_root(a, b, q, y, self.x_min, self.x_max))


def _finite(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return float(value) if math.isfinite(value) else None


def _need(mapping: Mapping[str, Any], key: str, where: str) -> Any:
    value = mapping.get(key)
    if value is None:
        raise InputError(f"{where} has no {key!r}; the record cannot be used to quantify")
    return value


def _record_curve(curve: Mapping[str, Any], details: Mapping[str, Any], *, where: str,
                  unit: str | None) -> CalibrationCurve:
    try:
        model = parse_option(Model, str(curve.get("model")), name="model")
        weighting = parse_option(Weighting, str(curve.get("weighting")), name="weighting")
        basis = parse_option(Weighting, str(details.get("weight_function", weighting.value)),
                             name="weight_function")
    except ValueError as exc:
        raise InputError(f"{where}: {exc}") from None
    names = list(details.get("coefficient_names") or COEFFICIENTS[model])
    stored = _need(curve, "coefficients", where)
    try:
        beta = {n: float(stored[n]["estimate"]) for n in names}
        cov = np.array(_need(details, "covariance", where), dtype=float)
        sd = float(_need(details, "residual_sd", where))
        df = int(_need(details, "residual_df", where))
        scale = float(details.get("weight_scale") or 1.0)
        levels = tuple((float(c), float(s2)) for c, s2 in details.get("level_variances") or ())
        points = [p for p in curve.get("points") or () if p.get("included")]
        x = np.array([float(p["concentration"]) for p in points])
        y = np.array([float(p["response"]) for p in points])
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{where}: the stored fit cannot be read ({exc!s})") from None
    if cov.shape != (len(names), len(names)) or not np.all(np.isfinite(cov)):
        raise InputError(f"{where}: the stored covariance is not a finite "
                         f"{len(names)} × {len(names)} matrix")
    if x.size != df + len(names):
        raise InputError(f"{where}: {x.size} standards are marked as fitted, but the stored "
                         f"fit has {df} residual degrees of freedom and {len(names)} "
                         "coefficients")
    stored_range = (details.get("x_min"), details.get("x_max"))
    if None not in stored_range and (x.min(), x.max()) != tuple(map(float, stored_range)):
        raise InputError(f"{where}: the fitted standards span {x.min():g} to {x.max():g}, but the "
                         f"stored fit spans {stored_range[0]:g} to {stored_range[1]:g}")
    lod = curve.get("lod") if isinstance(curve.get("lod"), Mapping) else {}
    loq = curve.get("loq") if isinstance(curve.get("loq"), Mapping) else {}
    return CalibrationCurve(
        analyte=str(curve.get("analyte")), model=model, weighting=weighting, weight_function=basis,
        confidence=float(curve.get("confidence") or 0.95), coefficients=beta, covariance=cov,
        residual_sd=sd, residual_df=df, weight_scale=scale, level_variances=levels, x=x, y=y,
        verdict=str(curve.get("verdict")), lod=_finite(lod.get("value")),
        loq=_finite(loq.get("value")), lod_method=lod.get("method"), unit=unit,
        response_basis=_basis(curve.get("response_basis"), where),
    )


def _basis(value: Any, where: str) -> str | None:
    if value is None:
        return None  # issued before records stated it
    if value not in ("raw", "ratio"):
        raise InputError(f"{where}: the stored response basis {value!r} is neither 'raw' nor "
                         f"'ratio'")
    return str(value)


def curves_from_record(body: Mapping[str, Any], *, label: str = "record"
                       ) -> tuple[dict[str, CalibrationCurve], dict[str, str]]:
    """The curves of a ``calib.record/1`` body, from its stored figures.

    Parameters
    ----------
    body : mapping
        The record data.
    label : str
        How messages name the record (``record CR-3F9A1C2B77DE``).

    Returns
    -------
    curves : dict of analyte to CalibrationCurve
        Every fitted curve, in record order.
    unfitted : dict of analyte to str
        Analytes whose standards were not fitted, with the reason.

    Raises
    ------
    InputError
        When a stored figure is missing or malformed.
    """
    check = body.get("check") if isinstance(body.get("check"), Mapping) else {}
    details: dict[str, Mapping[str, Any]] = {
        str(d.get("analyte")): d for d in body.get("fit_details") or () if isinstance(d, Mapping)
    }
    run = body.get("run") if isinstance(body.get("run"), Mapping) else {}
    units = run.get("units") if isinstance(run.get("units"), Mapping) else {}
    curves: dict[str, CalibrationCurve] = {}
    unfitted: dict[str, str] = {}
    entries: Sequence[Any] = check.get("curves") or ()
    for entry in entries:
        if not isinstance(entry, Mapping):
            continue
        analyte = str(entry.get("analyte"))
        if analyte not in details:
            unfitted[analyte] = "the record holds no fit for this analyte (its standards were " \
                                "not fitted)"
            continue
        curves[analyte] = _record_curve(entry, details[analyte], where=f"{label}, {analyte}",
                                        unit=units.get("concentration"))
    return curves, unfitted
