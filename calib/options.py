"""Option values used across calib, mapped from their text form in one place.

The fit options (model, weighting, confidence) are read once, where they come in:
command line, web form, profile TOML (and its ``[[analyte]]`` entries), library
call.  :class:`FitOptions` holds the three, checked together; inside calib only
these typed values travel.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum
from numbers import Real

from calib.errors import OptionError

__all__ = ["FitOptions", "LimitMethod", "Model", "SampleType", "Weighting", "check_confidence",
           "combination_problem", "own_weighting", "parse_confidence", "parse_option"]


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
    """``confidence`` as a float from 0.5 to below 1, or :class:`OptionError` naming it.

    The one rule everywhere (command line, web form, profile, library): a fraction,
    never a percentage; 95 is refused with a hint rather than guessed at.

    Examples
    --------
    >>> check_confidence(0.95)
    0.95
    >>> check_confidence(95)
    Traceback (most recent call last):
    ...
    calib.errors.OptionError: confidence must be a number from 0.5 to below 1; got 95 (a fraction: write 0.95, not a percentage)
    """
    if isinstance(confidence, bool) or not (isinstance(confidence, Real) and 0.5 <= confidence < 1):
        hint = ""
        if (not isinstance(confidence, bool) and isinstance(confidence, Real)
                and 50 <= confidence < 100):
            hint = f" (a fraction: write {float(confidence) / 100:g}, not a percentage)"
        raise OptionError(
            f"confidence must be a number from 0.5 to below 1; got {confidence!r}{hint}")
    return float(confidence)


def parse_confidence(text: str | float) -> float:
    """A confidence level given as text (command line, web form), by :func:`check_confidence`.

    Examples
    --------
    >>> parse_confidence("0.99")
    0.99
    >>> parse_confidence("95")
    Traceback (most recent call last):
    ...
    calib.errors.OptionError: confidence must be a number from 0.5 to below 1; got 95 (a fraction: write 0.95, not a percentage)
    """
    if isinstance(text, str):
        try:
            value = float(text.strip())
        except ValueError:
            raise OptionError(f"confidence must be a number from 0.5 to below 1, such as 0.95; "
                              f"got {text!r}") from None
        return check_confidence(int(value) if value.is_integer() else value)
    return check_confidence(text)


def own_weighting(model: Model) -> Weighting | None:
    """The one weighting ``model`` is fitted with, or None when it takes any.

    The mean of the response factors yᵢ/xᵢ is the least-squares slope of y = RF·x
    with weights 1/xᵢ², so ``mean-rf`` is fitted (and recorded) with ``1/x2``.

    Examples
    --------
    >>> own_weighting(Model.MEAN_RF).value, own_weighting(Model.LINEAR)
    ('1/x2', None)
    """
    return Weighting.INV_X2 if model is Model.MEAN_RF else None


def recorded_weighting(model: str, weighting: str) -> str:
    """The weighting a curve's fit used, as ``calib.record/2`` states it, from what a record
    (or an archive row) of either format says.

    Only the ``none`` that ``calib.record/1`` wrote for a model fitted with its
    own weights (``mean-rf``: 1/x²) changes; anything else is kept as written,
    so an index row altered to another weighting is still found by verification.

    Examples
    --------
    >>> recorded_weighting("mean-rf", "none"), recorded_weighting("mean-rf", "1/x2")
    ('1/x2', '1/x2')
    >>> recorded_weighting("linear", "none"), recorded_weighting("mean-rf", "1/y")
    ('none', '1/y')
    """
    try:
        own = own_weighting(Model(model))
    except ValueError:
        return weighting
    return own.value if own is not None and weighting == Weighting.NONE.value else weighting


def combination_problem(model: Model, weighting: Weighting) -> str | None:
    """Why ``weighting`` cannot go with ``model``, or None.

    Examples
    --------
    >>> print(combination_problem(Model.MEAN_RF, Weighting.INV_X))
    model mean-rf is fitted with weighting 1/x2 (each response factor yᵢ/xᵢ counts alike) and takes no other; got weighting 1/x: leave the weighting out, or choose another model
    >>> combination_problem(Model.ORIGIN, Weighting.INV_Y) is None
    True
    """
    own = own_weighting(model)
    if own is not None and weighting is not own:
        return (f"model {model.value} is fitted with weighting {own.value} (each response "
                f"factor yᵢ/xᵢ counts alike) and takes no other; got weighting {weighting.value}: "
                "leave the weighting out, or choose another model")
    return None


@dataclass(frozen=True)
class FitOptions:
    """Model, weighting and confidence of a fit, checked together.

    ``weighting`` is the weighting the fit uses (for ``mean-rf``, ``1/x2``).
    Building one with a pair that cannot go together, or a confidence outside
    0.5 to below 1, raises :class:`~calib.errors.OptionError`.

    Examples
    --------
    >>> FitOptions(Model.LINEAR, Weighting.INV_X2, 0.95).weighting.value
    '1/x2'
    >>> FitOptions(Model.MEAN_RF, Weighting.NONE, 0.95)
    Traceback (most recent call last):
    ...
    calib.errors.OptionError: model mean-rf is fitted with weighting 1/x2 (each response factor yᵢ/xᵢ counts alike) and takes no other; got weighting none: leave the weighting out, or choose another model
    """

    model: Model
    weighting: Weighting
    confidence: float

    def __post_init__(self) -> None:
        if not isinstance(self.model, Model) or not isinstance(self.weighting, Weighting):
            raise OptionError(f"FitOptions takes a Model and a Weighting; got "
                              f"{self.model!r}, {self.weighting!r}")
        problem = combination_problem(self.model, self.weighting)
        if problem is not None:
            raise OptionError(problem)
        object.__setattr__(self, "confidence", check_confidence(self.confidence))

    def given(self, model: Model | str | None = None, weighting: Weighting | str | None = None,
              confidence: float | str | None = None) -> FitOptions:
        """These options with the ones a caller gives (None: not given) put over them.

        A weighting not given stays, except that a model with its own weighting
        (``mean-rf``) takes it, and a model chosen in place of such a model
        starts from ``none``.  Text is read with :func:`parse_option` and
        :func:`parse_confidence`; an unusable value or pair raises
        :class:`~calib.errors.OptionError`.

        Examples
        --------
        >>> linear = FitOptions(Model.LINEAR, Weighting.INV_X, 0.95)
        >>> linear.given(model="mean-rf")
        FitOptions(model=<Model.MEAN_RF: 'mean-rf'>, weighting=<Weighting.INV_X2: '1/x2'>, confidence=0.95)
        >>> linear.given(model="mean-rf").given(model=Model.QUADRATIC).weighting.value
        'none'
        >>> linear.given(confidence="0.99").confidence
        0.99
        """
        chosen = self.model if model is None else _typed(Model, model, "model")
        if weighting is not None:
            basis = _typed(Weighting, weighting, "weighting")
        elif own_weighting(chosen) is not None:
            basis = own_weighting(chosen)
        elif own_weighting(self.model) is not None and chosen is not self.model:
            basis = Weighting.NONE
        else:
            basis = self.weighting
        level = self.confidence if confidence is None else parse_confidence(confidence)
        return FitOptions(chosen, basis, level)


def _typed(enum: type[StrEnum], value: object, name: str) -> StrEnum:
    if isinstance(value, enum):
        return value
    try:
        return parse_option(enum, value, name=name)  # type: ignore[arg-type]
    except ValueError as exc:
        raise OptionError(str(exc)) from None
