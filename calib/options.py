"""Option values used across calib, mapped from their text form in one place."""

from __future__ import annotations

from enum import StrEnum
from numbers import Real

__all__ = ["LimitMethod", "Model", "SampleType", "Weighting", "check_confidence", "parse_option"]


class Model(StrEnum):
    """Calibration model fitted to the standards."""

    LINEAR = "linear"  # y = a + b·x
    ORIGIN = "origin"  # y = b·x
    QUADRATIC = "quadratic"  # y = a + b·x + c·x²
    MEAN_RF = "mean-rf"  # y = RF·x, RF the mean of the response factors yᵢ/xᵢ


class Weighting(StrEnum):
    """Weights of the standards in the least-squares fit."""

    NONE = "none"
    INV_X = "1/x"
    INV_X2 = "1/x2"
    INV_Y = "1/y"
    INV_Y2 = "1/y2"
    INV_S2 = "1/s2"  # inverse variance of the replicate responses at each level


class LimitMethod(StrEnum):
    """How the detection and quantitation limits are worked out."""

    ICH_SD = "ich-sd"  # ICH Q2: 3.3·σ/S and 10·σ/S, σ the residual SD
    ICH_INTERCEPT_SE = "ich-intercept-se"  # the same with σ the SE of the intercept
    ISO_11843 = "iso-11843"  # ISO 11843-2 minimum detectable value from the line


class SampleType(StrEnum):
    """What an injection is."""

    STANDARD = "standard"
    BLANK = "blank"
    ZERO = "zero"
    QC = "qc"
    UNKNOWN = "unknown"


def parse_option(enum: type[StrEnum], value: str | StrEnum, *, name: str) -> StrEnum:
    """Return ``value`` as a member of ``enum``, or raise ``ValueError`` naming ``name``.

    Examples
    --------
    >>> parse_option(Weighting, "1/x2", name="weighting")
    <Weighting.INV_X2: '1/x2'>
    >>> parse_option(Model, "cubic", name="model")
    Traceback (most recent call last):
    ...
    ValueError: model must be one of linear, origin, quadratic, mean-rf; got 'cubic'
    """
    try:
        return enum(value)
    except ValueError:
        choices = ", ".join(member.value for member in enum)
        raise ValueError(f"{name} must be one of {choices}; got {value!r}") from None


def check_confidence(confidence: object) -> float:
    """``confidence`` as a float from 0.5 to below 1, or ``ValueError`` naming it.

    Examples
    --------
    >>> check_confidence(0.95)
    0.95
    >>> check_confidence(95)
    Traceback (most recent call last):
    ...
    ValueError: confidence must be a number from 0.5 to below 1; got 95
    """
    if isinstance(confidence, bool) or not (isinstance(confidence, Real) and 0.5 <= confidence < 1):
        raise ValueError(f"confidence must be a number from 0.5 to below 1; got {confidence!r}")
    return float(confidence)
