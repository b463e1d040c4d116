"""What the archive indexes about a record, read from its JSON body alone.

The archive keeps the record JSON as the original; the facts it indexes
(analytes, verdict, run date, instrument, signature roles, and for trends each
curve's slope, intercept and residual SD) are derived from that JSON by the
pure functions here, both when an entry is appended and again when the chain
is verified, so an index that disagrees with its JSON is reported.

Run date
    The run metadata line the instrument export carried (``Run date``,
    ``Date``, ``Analysis date``, ``Acquisition date`` or ``Injection date``,
    matched ignoring case, spaces and punctuation) when it starts with an ISO
    8601 date ``YYYY-MM-DD``; otherwise the date part of the record's
    ``created_at``.  Other date spellings (``30/11/2026``) are ambiguous between
    day-first and month-first, so they are not guessed at.
Instrument
    The metadata line ``Instrument``, ``Instrument ID``, ``Instrument name``
    or ``System``, as written; None when the export has none.
Weighting
    The weighting the curve's fit used.  A ``mean-rf`` curve is fitted with
    1/x² weights, which ``calib.record/2`` states as ``1/x2``; records of
    ``calib.record/1`` said ``none`` for the same fit.  :class:`CurveFigures`
    reads that ``none`` as ``1/x2``, whether it comes from a record's JSON or
    from an index row written before, so the index, the trend and the baseline
    see one weighting for one fit whatever the record format.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from calib.options import recorded_weighting

__all__ = ["CurveFigures", "RecordFacts", "record_facts"]

# Normalised metadata keys, most specific first.
_RUN_DATE_KEYS = ("rundate", "analysisdate", "acquisitiondate", "injectiondate", "date")
_INSTRUMENT_KEYS = ("instrument", "instrumentid", "instrumentname", "system")
_ISO_DATE = re.compile(r"^\s*(\d{4}-\d{2}-\d{2})(?![\d])")


@dataclass(frozen=True)
class CurveFigures:
    """One curve of a record, as the trend needs it.

    Attributes
    ----------
    position : int
        Index of the curve in the record's ``check.curves`` list.
    analyte : str
        Analyte name as the run file wrote it.
    model, weighting : str
        Calibration model and the weighting its fit used (a ``mean-rf`` curve's
        ``none`` of ``calib.record/1`` reads as ``1/x2``, see the module notes).
    verdict : str
        The curve's verdict: ``accepted``, ``rejected`` or ``needs-review``.
    slope, intercept, residual_sd : float or None
        Fitted slope, intercept and residual SD σ̂; None when the curve was not
        fitted or the model has no such coefficient.
    concentration_unit, response_unit : str or None
        Units from the run's column headers.
    """

    position: int
    analyte: str
    model: str
    weighting: str
    verdict: str
    slope: float | None
    intercept: float | None
    residual_sd: float | None
    concentration_unit: str | None = None
    response_unit: str | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "weighting", recorded_weighting(self.model, self.weighting))


@dataclass(frozen=True)
class RecordFacts:
    """The facts an archive entry indexes, all derived from the record JSON.

    Attributes
    ----------
    analytes : tuple of str
        Analytes in record order.
    verdict : str
        Run verdict.
    run_date : str
        ``YYYY-MM-DD``: the run date of the export, else the issue date.
    run_date_from_metadata : bool
        Whether :attr:`run_date` came from the run metadata.
    instrument : str or None
        Instrument named in the run metadata.
    roles : tuple of str
        Roles of the signatures so far, in order (``prepared``, ``reviewed``...).
    curves : tuple of CurveFigures
        Per-curve figures.
    """

    analytes: tuple[str, ...]
    verdict: str
    run_date: str
    run_date_from_metadata: bool
    instrument: str | None
    roles: tuple[str, ...]
    curves: tuple[CurveFigures, ...]


def _dict(value: Any) -> Mapping[str, Any]:
    return value if isinstance(value, Mapping) else {}


def _list(value: Any) -> Sequence[Any]:
    return value if isinstance(value, list) else []


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _text(value: Any) -> str | None:
    if value is None:
        return None
    text = str(value).strip()
    return text or None


def _normal_key(key: Any) -> str:
    return re.sub(r"[^0-9a-z]", "", str(key).casefold())


def _metadata_value(metadata: Mapping[str, Any], keys: Sequence[str]) -> str | None:
    by_key = {_normal_key(k): v for k, v in metadata.items()}
    for key in keys:
        value = _text(by_key.get(key))
        if value is not None:
            return value
    return None


def _coefficient(curve: Mapping[str, Any], name: str) -> float | None:
    return _number(_dict(_dict(curve.get("coefficients")).get(name)).get("estimate"))


def record_facts(body: Mapping[str, Any]) -> RecordFacts:
    """Derive the indexed facts of a ``calib.record/1`` body.

    Parameters
    ----------
    body : mapping
        The parsed record JSON.

    Returns
    -------
    RecordFacts

    Raises
    ------
    ValueError
        If the body has no ``check`` document with a verdict, or no ``created_at``
        to date it by.

    Examples
    --------
    >>> body = {"created_at": "2026-12-01T09:30:00Z",
    ...         "run": {"metadata": {"Run date": "2026-11-30", "Instrument": "IC-2"},
    ...                 "units": {"concentration": "mg/L"}},
    ...         "signatures": [{"role": "prepared"}],
    ...         "check": {"verdict": "accepted", "curves": [
    ...             {"analyte": "Nitrate-N", "model": "linear", "weighting": "none",
    ...              "verdict": "accepted", "residual_sd": 0.004,
    ...              "coefficients": {"slope": {"estimate": 0.25},
    ...                               "intercept": {"estimate": 0.001}}}]}}
    >>> facts = record_facts(body)
    >>> facts.run_date, facts.instrument, facts.roles, facts.curves[0].slope
    ('2026-11-30', 'IC-2', ('prepared',), 0.25)
    """
    check = _dict(body.get("check"))
    verdict = _text(check.get("verdict"))
    created = _text(body.get("created_at"))
    if verdict is None:
        raise ValueError("the record has no check verdict")
    issued = _ISO_DATE.match(created or "")
    if issued is None:
        raise ValueError(f"the record's created_at is not an ISO 8601 time: {created!r}")
    run = _dict(body.get("run"))
    metadata = _dict(run.get("metadata"))
    units = _dict(run.get("units"))
    stated = _metadata_value(metadata, _RUN_DATE_KEYS)
    match = _ISO_DATE.match(stated) if stated else None
    run_date = (match or issued).group(1)
    curves = []
    for position, raw in enumerate(_list(check.get("curves"))):
        curve = _dict(raw)
        curves.append(CurveFigures(
            position=position,
            analyte=str(curve.get("analyte", "")),
            model=str(curve.get("model", "")),
            weighting=str(curve.get("weighting", "")),
            verdict=str(curve.get("verdict", "")),
            slope=_coefficient(curve, "slope"),
            intercept=_coefficient(curve, "intercept"),
            residual_sd=_number(curve.get("residual_sd")),
            concentration_unit=_text(units.get("concentration")),
            response_unit=_text(units.get("response")),
        ))
    roles = tuple(str(_dict(s).get("role", "")) for s in _list(body.get("signatures")))
    return RecordFacts(
        analytes=tuple(c.analyte for c in curves),
        verdict=verdict,
        run_date=run_date,
        run_date_from_metadata=match is not None,
        instrument=_metadata_value(metadata, _INSTRUMENT_KEYS),
        roles=roles,
        curves=tuple(curves),
    )
