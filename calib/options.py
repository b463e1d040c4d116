"""Option values used across calib, mapped from their text form in one place."""

from __future__ import annotations

from enum import StrEnum

__all__ = ["Model", "SampleType", "Weighting", "parse_option"]


class Model(StrEnum):
    """Calibration model fitted to the standards."""

    LINEAR = "linear"  # y = a + b·x
    ORIGIN = "origin"  # y = b·x
    QUADRATIC = "quadratic"  # y = a + b·x + c·x²


class Weighting(StrEnum):
    """Weights of the standards in the least-squares fit."""

    NONE = "none"
    INV_X = "1/x"
    INV_X2 = "1/x2"


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
    ValueError: model must be one of linear, origin, quadratic; got 'cubic'
    """
    try:
        return enum(value)
    except ValueError:
        choices = ", ".join(member.value for member in enum)
        raise ValueError(f"{name} must be one of {choices}; got {value!r}") from None
