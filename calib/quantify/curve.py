"""The calibration curve samples are quantified against: from a fit, or from an issued record.

A :class:`CalibrationCurve` holds only what inverse prediction needs: the
coefficients and their covariance, σ̂ and ν, how the fit was weighted, and the
standards in the fit (their range, and N, ȳ, Sxx for the closed form).  A
curve read back from a record is built from the record's stored figures (the
``fit_details`` entry and the points of ``check.curves``), never refitted, so
samples are quantified against exactly the curve that was reviewed.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from calib.errors import InputError
from calib.fit.calcurve import (
    CalibrationCurve,
    _finite,  # one reading of a stored number
)
from calib.fit.design import COEFFICIENTS
from calib.options import Model, Weighting, parse_option
from calib.run import response_basis

if TYPE_CHECKING:
    from calib.checks.evaluate import CurveAssessment

__all__ = ["CalibrationCurve", "curve_from_assessment", "curves_from_record"]


def curve_from_assessment(curve: CurveAssessment, *, unit: str | None = None
                          ) -> CalibrationCurve | None:
    """The curve of a checked analyte; None when its standards could not be fitted."""
    if curve.fit is None:
        return None
    return CalibrationCurve.from_fit(
        curve.fit, analyte=curve.analyte, verdict=curve.verdict.value,
        lod=curve.lod.value if curve.lod is not None else None,
        loq=curve.loq.value if curve.loq is not None else None,
        lod_method=curve.lod.method if curve.lod is not None else None, unit=unit,
        response_basis=response_basis(s.point for s in curve.standards),
    )

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
    """The curves of a ``calib.record`` body (/1 or /2), from its stored figures.

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
