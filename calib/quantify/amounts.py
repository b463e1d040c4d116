"""Sample weight and final volume: from a solution's concentration to the sample's content.

A soil, food or tissue sample is weighed (m), extracted or digested and made
up to a final volume (V); the curve gives the concentration C of that
solution.  The content of the sample is

    content = C × V / m

with the units worked out: C in mg/L, V in mL and m in g give
``C × (V / 1000 L) / (m / 1000 kg)`` in mg/kg.  calib always states the
content per kilogram of sample (mg/kg, µg/kg, ng/kg), the mass-fraction units
laboratories report.  Only concentrations written as a mass per volume
(``mg/L``, ``ng/mL``...) can be turned into contents; anything else (``ppm``,
``mol/L``, ``%``) is refused rather than guessed.
"""

from __future__ import annotations

import re

__all__ = ["content_factor", "mass_in_kg", "volume_in_litres"]

_MASS_UNITS: dict[str, float] = {
    "pg": 1e-15, "ng": 1e-12, "µg": 1e-9, "μg": 1e-9, "ug": 1e-9, "mcg": 1e-9, "mg": 1e-6,
    "g": 1e-3, "kg": 1.0,
}
"""Mass units calib reads, in kilograms."""

_VOLUME_UNITS: dict[str, float] = {
    "pl": 1e-15, "nl": 1e-9, "µl": 1e-6, "μl": 1e-6, "ul": 1e-6, "ml": 1e-3, "cl": 1e-2,
    "dl": 0.1, "l": 1.0, "cm3": 1e-3, "cm³": 1e-3, "dm3": 1.0, "dm³": 1.0,
}
"""Volume units calib reads, in litres (case does not matter)."""

_PER = re.compile(r"\s*(?P<mass>[^/\s]+)\s*/\s*(?P<volume>[^/\s]+)\s*")


def mass_in_kg(unit: str | None) -> float | None:
    """Kilograms in one ``unit`` of mass, or None when it is not a mass unit.

    Examples
    --------
    >>> mass_in_kg("g"), mass_in_kg("mg"), mass_in_kg("mL")
    (0.001, 1e-06, None)
    """
    if unit is None:
        return None
    text = unit.strip()
    return _MASS_UNITS.get(text) or _MASS_UNITS.get(text.lower())


def volume_in_litres(unit: str | None) -> float | None:
    """Litres in one ``unit`` of volume, or None when it is not a volume unit.

    Examples
    --------
    >>> volume_in_litres("mL"), volume_in_litres("L"), volume_in_litres("g")
    (0.001, 1.0, None)
    """
    if unit is None:
        return None
    return _VOLUME_UNITS.get(unit.strip().lower())


def content_factor(concentration_unit: str | None, volume_l: float, mass_kg: float
                   ) -> tuple[float, str]:
    """The factor V/m that turns a concentration into a content, and the content's unit.

    Parameters
    ----------
    concentration_unit : str
        The curve's unit, a mass per volume (``mg/L``).
    volume_l : float
        Final volume in litres.
    mass_kg : float
        Sample weight in kilograms.

    Returns
    -------
    factor : float
        content = concentration × factor.
    unit : str
        The content's unit (``mg/kg``).

    Raises
    ------
    ValueError
        When the concentration unit is not a mass per volume.

    Examples
    --------
    5.00 mg/L in 50 mL from 2.0 g of soil is 5 × 0.050 / 0.0020 = 125 mg/kg:

    >>> factor, unit = content_factor("mg/L", 0.050, 0.0020)
    >>> round(5.0 * factor, 9), unit
    (125.0, 'mg/kg')
    >>> factor, unit = content_factor("ng/mL", 0.010, 0.0005)
    >>> round(2.0 * factor, 9), unit
    (40000.0, 'ng/kg')
    >>> content_factor("ppm", 0.05, 0.002)
    Traceback (most recent call last):
    ...
    ValueError: the concentration unit 'ppm' is not a mass per volume (such as mg/L)
    """
    found = _PER.fullmatch(concentration_unit or "")
    mass = found["mass"] if found else None
    per_litre = volume_in_litres(found["volume"]) if found else None
    if found is None or mass_in_kg(mass) is None or per_litre is None:
        shown = repr(concentration_unit) if concentration_unit else "(none given)"
        raise ValueError(f"the concentration unit {shown} is not a mass per volume (such as "
                         f"mg/L)")
    return (volume_l / per_litre) / mass_kg, f"{mass}/kg"
