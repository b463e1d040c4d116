"""Detection and quantitation limits, and the method standard deviation, from the calibration.

Three ways to the limits, chosen by a profile's ``lod_method``
(:class:`~calib.options.LimitMethod`):

- ``ich-sd``: ICH Q2, LOD = 3.3·σ/S and LOQ = 10·σ/S with σ the residual SD;
- ``ich-intercept-se``: the same with σ the standard error of the intercept;
- ``iso-11843``: ISO 11843-2 critical value and minimum detectable value of
  the calibration line (the LOQ then follows ICH Q2 with the residual SD,
  as ISO 11843 defines no quantitation limit).

ISO 8466-1's method standard deviation s_x0 = σ̂/b and its relative value
V_x0 = 100·s_x0/x̄ are in :func:`method_sd`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from calib.fit.curve import CurveFit
from calib.fit.distributions import nct_cdf, t_ppf
from calib.options import LimitMethod, Model, Weighting, parse_option

__all__ = ["DetectionLimit", "Iso11843Limits", "MethodSd", "detection_limits", "ich_limits",
           "iso11843_limits", "method_sd"]

_SIGMA_CHOICES = ("residual-sd", "intercept-se")


@dataclass(frozen=True)
class DetectionLimit:
    """A limit in concentration units and the method that gave it."""

    value: float
    method: str


def ich_limits(fit: CurveFit, *, sigma: str = "residual-sd") -> tuple[DetectionLimit, DetectionLimit]:
    """LOD = 3.3·σ/S and LOQ = 10·σ/S, S the slope.

    Parameters
    ----------
    fit : CurveFit
        The calibration.
    sigma : {"residual-sd", "intercept-se"}
        σ is the residual SD σ̂ (default) or the standard error of the
        intercept (not available for models without one: the limits are then
        ``nan`` and the method says why).

    Notes
    -----
    For the quadratic, S is the slope at concentration 0 (the linear term).
    For a weighted fit σ is the residual SD at the lowest standard,
    σ̂/√w(x_low), which does not depend on how the weights are scaled (σ̂ alone
    belongs to weights scaled to a mean of 1 over the standards in the fit, so
    dropping a level would move it); the method text names the concentration.

    References
    ----------
    ICH Q2(R2) Validation of analytical procedures (2023), detection and
    quantitation limit based on the standard deviation of the response and the slope.

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> lod, loq = ich_limits(fit_curve([1, 2, 3, 4, 5], [2.1, 3.9, 6.1, 8.0, 9.9]))
    >>> round(loq.value / lod.value, 6)
    3.030303
    >>> ich_limits(fit_curve([1, 2, 3], [2.0, 4.1, 5.9], model="origin"), sigma="intercept-se")[0]
    DetectionLimit(value=nan, method='ICH Q2: 3.3·σ/S, σ = SE of the intercept: not available, the origin model has no intercept')
    """
    if sigma not in _SIGMA_CHOICES:
        raise ValueError(f"sigma must be one of {', '.join(_SIGMA_CHOICES)}; got {sigma!r}")
    slope = abs(fit.coefficients["slope"])
    if sigma == "residual-sd" and fit.weight_basis is not Weighting.NONE:
        # σ̂ of a weighted fit belongs to weights scaled to a mean of 1 over whichever
        # standards are in the fit; σ̂/√w(x) at a stated concentration does not depend on
        # that scaling.  Near the limits the lowest standard's σ is the relevant one.
        low = _lowest(fit)
        value = _sigma_at(fit, low)
        note = (f"ICH Q2: {{k}}·σ/S, σ = residual SD at the lowest standard (x = {low:g}; "
                f"σ̂/√w(x), weighting {fit.weight_basis.value}), S = slope")
    elif sigma == "residual-sd":
        note = "ICH Q2: {k}·σ/S, σ = residual SD, S = slope"
        value = fit.residual_sd
    else:
        note = "ICH Q2: {k}·σ/S, σ = SE of the intercept, S = slope"
        if "intercept" not in fit.coefficients:
            note = ("ICH Q2: {k}·σ/S, σ = SE of the intercept: not available, the "
                    f"{fit.model.value} model has no intercept")
            value = math.nan
        else:
            value = fit.std_error("intercept")
    if slope == 0 or not math.isfinite(value):
        return (DetectionLimit(math.nan, note.format(k="3.3")),
                DetectionLimit(math.nan, note.format(k="10")))
    return (
        DetectionLimit(3.3 * value / slope, note.format(k="3.3")),
        DetectionLimit(10 * value / slope, note.format(k="10")),
    )


@dataclass(frozen=True)
class Iso11843Limits:
    """ISO 11843-2 critical values and minimum detectable value of a calibration line.

    Attributes
    ----------
    alpha, beta : float
        Probabilities of a false positive and a false negative.
    readings : int
        L, the readings averaged for one sample.
    df : int
        ν = N − 2.
    t_critical : float
        t(1 − α; ν), one-sided.
    delta : float
        δ(ν; α; β), the non-centrality of Student's t at which a sample is
        detected with probability 1 − β.
    sd_at_zero : float
        σ̂·√(1/L + 1/N + x̄²/Sxx): SD of a blank's mean reading less the intercept.
    response_critical : float
        y_c = a + t·sd_at_zero: a reading above it is taken as detected.
    critical : float
        x_c = t·sd_at_zero/b, the critical value in concentration.
    minimum_detectable : float
        x_d = δ·sd_at_zero/b.
    """

    alpha: float
    beta: float
    readings: int
    df: int
    t_critical: float
    delta: float
    sd_at_zero: float
    response_critical: float
    critical: float
    minimum_detectable: float


def _noncentrality(df: int, alpha: float, beta: float) -> float:
    """δ with P(T'(ν, δ) ≤ t(1 − α; ν)) = β, T' non-central Student's t."""
    from scipy import optimize  # only the ISO 11843 limits need it: off the common check path

    t_alpha = t_ppf(1 - alpha, df)
    upper = t_alpha + t_ppf(1 - beta, df) + 10.0
    return float(optimize.brentq(lambda d: nct_cdf(t_alpha, df, d) - beta,
                                 t_alpha, upper, xtol=1e-14, rtol=1e-14))


def iso11843_limits(
    fit: CurveFit, *, alpha: float = 0.05, beta: float = 0.05, readings: int = 1,
    exact: bool = True,
) -> Iso11843Limits:
    """ISO 11843-2 critical value and minimum detectable value of an unweighted straight line.

    Parameters
    ----------
    fit : CurveFit
        An unweighted ``linear`` fit (the model ISO 11843-2 treats).
    alpha, beta : float
        False-positive and false-negative probabilities, default 0.05 each.
    readings : int
        L, readings averaged for one sample (default 1).
    exact : bool
        δ from the non-central t distribution (default), or the standard's
        approximation δ ≈ t(1 − α; ν) + t(1 − β; ν) (= 2·t(1 − α; ν) for α = β).

    Returns
    -------
    Iso11843Limits

    Raises
    ------
    ValueError
        For another model or a weighted fit, or α, β outside (0, 0.5).

    Notes
    -----
    With N standards, x̄ their mean concentration, Sxx = Σ(xᵢ − x̄)², ν = N − 2::

        x_c = t(1 − α; ν)·(σ̂/b)·√(1/L + 1/N + x̄²/Sxx)
        y_c = a + b·x_c
        x_d = δ(ν; α; β)·(σ̂/b)·√(1/L + 1/N + x̄²/Sxx)

    (with J replicates at each of I levels, 1/N = 1/(I·J) and Sxx = J·Σᵢ(xᵢ − x̄)²,
    the standard's form).  Assumptions: the response is linear in the
    concentration, its SD is the same at every level (including zero),
    readings are independent and normally distributed, and the standards'
    concentrations are known exactly.  Under a true concentration x the
    statistic (ȳ₀ − a)/(σ̂·√(…)) follows the non-central t with
    non-centrality b·x/(σ·√(…)); x_d is where it exceeds t(1 − α; ν) with
    probability 1 − β.

    References
    ----------
    ISO 11843-2:2000 Capability of detection — Part 2: Methodology in the
    linear calibration case (from memory).

    Examples
    --------
    Worked by hand (``x = 0..4``, ``y = 1.0, 3.1, 4.9, 7.1, 8.9``): b = 1.98, a = 1.04,
    σ̂ = √0.012, √(1 + 1/5 + 4/10) = √1.6, t(0.95; 3) = 2.3534, so
    x_c = 2.3534·0.109545·1.264911/1.98 = 0.1647 and, with δ ≈ 2t, x_d = 0.3294:

    >>> from calib.fit.curve import fit_curve
    >>> iso = iso11843_limits(fit_curve([0, 1, 2, 3, 4], [1.0, 3.1, 4.9, 7.1, 8.9]), exact=False)
    >>> round(iso.critical, 4), round(iso.response_critical, 4), round(iso.minimum_detectable, 4)
    (0.1647, 1.3661, 0.3294)
    """
    if fit.model is not Model.LINEAR or fit.weighting is not Weighting.NONE:
        raise ValueError("ISO 11843-2 limits need an unweighted straight line with an intercept; "
                         f"got model {fit.model.value}, weighting {fit.weighting.value}")
    for name, value in (("alpha", alpha), ("beta", beta)):
        if not 0 < value < 0.5:
            raise ValueError(f"{name} must be between 0 and 0.5; got {value!r}")
    if isinstance(readings, bool) or not isinstance(readings, int) or readings < 1:
        raise ValueError(f"readings must be a whole number of at least 1; got {readings!r}")
    nu = fit.residual_df
    t_alpha = t_ppf(1 - alpha, nu)
    delta = (_noncentrality(nu, alpha, beta) if exact
             else t_alpha + t_ppf(1 - beta, nu))
    # Var(ȳ₀ − a) = σ̂²/L + Var(a), and Var(a) = σ̂²(1/N + x̄²/Sxx) for the unweighted line.
    sd0 = math.sqrt(fit.residual_sd**2 / readings + fit.std_error("intercept") ** 2)
    b = fit.coefficients["slope"]
    x_c = t_alpha * sd0 / abs(b) if b else math.nan
    x_d = delta * sd0 / abs(b) if b else math.nan
    return Iso11843Limits(
        alpha=alpha, beta=beta, readings=readings, df=nu, t_critical=t_alpha, delta=delta,
        sd_at_zero=sd0, response_critical=fit.coefficients["intercept"] + math.copysign(
            t_alpha * sd0, b), critical=x_c, minimum_detectable=x_d,
    )


@dataclass(frozen=True)
class MethodSd:
    """ISO 8466-1 method standard deviation.

    Attributes
    ----------
    residual_sd : float
        s_y = σ̂, the residual SD of the fit.
    sensitivity : float
        b, the slope (for the quadratic b + 2c·x̄, its slope at x̄, ISO 8466-2).
    mean_concentration : float
        x̄ of the standards in the fit.
    value : float
        s_x0 = s_y/b, in concentration units.
    relative_pct : float
        V_x0 = 100·s_x0/x̄.
    """

    residual_sd: float
    sensitivity: float
    mean_concentration: float
    value: float
    relative_pct: float


def _lowest(fit: CurveFit) -> float:
    positive = fit.x[fit.x > 0]
    return float(positive.min()) if positive.size else float(fit.x.min())


def _sigma_at(fit: CurveFit, x: float) -> float:
    """Residual SD of one reading at concentration ``x``: σ̂/√w(x) (σ̂ when unweighted).

    Independent of the scale of the weights: σ̂² scales as the weights' mean does.

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> fit = fit_curve([1, 2, 4, 8], [1.02, 1.97, 4.1, 7.9], weighting="1/x2")
    >>> bool(abs(_sigma_at(fit, 2.0) / _sigma_at(fit, 1.0) - 2.0) < 1e-12)  # σ ∝ x under 1/x²
    True
    """
    if fit.weight_basis is Weighting.NONE:
        return float(fit.residual_sd)
    w = float(fit.weight_at(x)[0])
    return float(fit.residual_sd / math.sqrt(w)) if w > 0 else math.nan


def method_sd(fit: CurveFit) -> MethodSd:
    """s_x0 = σ̂/b and V_x0 = 100·s_x0/x̄ of the calibration.

    References
    ----------
    ISO 8466-1:1990 Water quality — Calibration and evaluation of analytical
    methods — Part 1: Linear calibration function; ISO 8466-2 for the
    second-order function's sensitivity b + 2c·x̄ (both from memory).

    Examples
    --------
    By hand, on the data of :func:`iso11843_limits`: s_x0 = 0.109545/1.98, x̄ = 2:

    >>> from calib.fit.curve import fit_curve
    >>> m = method_sd(fit_curve([0, 1, 2, 3, 4], [1.0, 3.1, 4.9, 7.1, 8.9]))
    >>> round(m.value, 6), round(m.relative_pct, 4)
    (0.055326, 2.7663)
    """
    xbar = float(fit.x.mean())
    b = fit.coefficients["slope"]
    if fit.model is Model.QUADRATIC:
        b = b + 2 * fit.coefficients["quadratic"] * xbar
    # Weighted: σ of one reading at the mean concentration x̄, independent of weight scaling.
    sd = _sigma_at(fit, xbar) if xbar > 0 else float(fit.residual_sd)
    value = sd / abs(b) if b else math.nan
    relative = 100 * value / xbar if xbar else math.nan
    return MethodSd(sd, b, xbar, value, relative)


def detection_limits(
    fit: CurveFit, *, method: LimitMethod | str = LimitMethod.ICH_SD, alpha: float = 0.05,
    beta: float = 0.05,
) -> tuple[DetectionLimit, DetectionLimit]:
    """LOD and LOQ by ``method``, each with the method in plain words.

    Parameters
    ----------
    fit : CurveFit
        The calibration.
    method : {"ich-sd", "ich-intercept-se", "iso-11843"}
        See the module notes.  ``iso-11843`` gives the minimum detectable
        value x_d as the LOD (its method text also carries x_c and y_c) and
        the ICH Q2 LOQ with the residual SD; a fit ISO 11843-2 does not cover
        gives ``nan`` with the reason.
    alpha, beta : float
        For ``iso-11843`` only.

    Examples
    --------
    >>> from calib.fit.curve import fit_curve
    >>> lod, loq = detection_limits(fit_curve([0, 1, 2, 3, 4], [1.0, 3.1, 4.9, 7.1, 8.9]),
    ...                             method="iso-11843")
    >>> lod.method
    'ISO 11843-2 minimum detectable value (α = β = 0.05, one reading); critical value x_c = 0.1647, y_c = 1.366'
    """
    method = parse_option(LimitMethod, method, name="method")
    if method is LimitMethod.ICH_SD:
        return ich_limits(fit)
    if method is LimitMethod.ICH_INTERCEPT_SE:
        return ich_limits(fit, sigma="intercept-se")
    _, loq = ich_limits(fit)
    loq = DetectionLimit(loq.value, loq.method + " (ISO 11843-2 defines no quantitation limit)")
    try:
        iso = iso11843_limits(fit, alpha=alpha, beta=beta)
    except ValueError:
        return DetectionLimit(math.nan, (
            "ISO 11843-2 minimum detectable value: not available, it needs an unweighted "
            f"straight line with an intercept (this curve: {fit.model.value}, weighting "
            f"{fit.weighting.value})")), loq
    probabilities = f"α = β = {alpha:g}" if alpha == beta else f"α = {alpha:g}, β = {beta:g}"
    return DetectionLimit(iso.minimum_detectable, (
        f"ISO 11843-2 minimum detectable value ({probabilities}, one reading); critical value "
        f"x_c = {iso.critical:.4g}, y_c = {iso.response_critical:.4g}")), loq
