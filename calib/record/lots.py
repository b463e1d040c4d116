"""Finding the records that used a given lot of reference material (the recall of a bad lot).

When a supplier withdraws a lot, or the lab finds one out of specification,
every calibration made with it must be found.  The record body's
``standards`` section (:func:`calib.io.standards.standards_section`) names the
lot of each material, so a search over record bodies, e.g. every record in an
archive, finds them.  The archive command only has to hand its records' JSON
bodies to :func:`records_with_lot`.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any, TypeVar

__all__ = ["LotUse", "records_with_lot"]

K = TypeVar("K")


@dataclass(frozen=True)
class LotUse:
    """One record that used the lot: its key (as given, e.g. the record id), material, analytes."""

    key: Any
    material: str
    lot: str
    run_file: str
    analytes: tuple[str, ...]


def _lots_of(body: Mapping[str, Any]) -> list[tuple[str, str]]:
    """``(material id, lot)`` of each material a record body names; empty for older records.

    Examples
    --------
    >>> _lots_of({"standards": {"materials": [{"id": "FWL-RM-0412", "lot": "L24-118"}]}})
    [('FWL-RM-0412', 'L24-118')]
    >>> _lots_of({"schema": "calib.record/1"})
    []
    """
    section = body.get("standards")
    if not isinstance(section, Mapping):
        return []
    return [(str(m.get("id", "")), str(m.get("lot", "")))
            for m in section.get("materials") or [] if isinstance(m, Mapping)]


def records_with_lot(records: Iterable[tuple[K, Mapping[str, Any]]], lot: str, *,
                     material: str | None = None) -> list[LotUse]:
    """The records whose standards came from ``lot`` (optionally of one ``material`` id).

    Lots are compared whole, ignoring case and surrounding spaces: a recall
    names one lot, and ``L24-1`` must not find ``L24-118``.

    Parameters
    ----------
    records : iterable of (key, body)
        Record bodies (parsed ``calib.record`` JSON) with a key of the
        caller's (archive sequence number, file name...), returned as given.
    lot : str
        The lot to find.
    material : str, optional
        Only this material id (case-insensitive).

    Raises
    ------
    ValueError
        When ``lot`` is empty.

    Examples
    --------
    >>> body = {"run": {"file": "icp.xlsx"},
    ...         "check": {"curves": [{"analyte": "Pb"}, {"analyte": "Cu"}]},
    ...         "standards": {"materials": [{"id": "FWL-RM-0412", "lot": "L24-118",
    ...                                      "analytes": ["Pb"]}]}}
    >>> [(u.key, u.analytes) for u in records_with_lot([(7, body)], " l24-118 ")]
    [(7, ('Pb',))]
    >>> records_with_lot([(7, body)], "L24-1")
    []
    """
    wanted = lot.strip().casefold()
    if not wanted:
        raise ValueError("name the lot to find")
    only = material.strip().casefold() if material else None
    found = []
    for key, body in records:
        section = body.get("standards")
        if not isinstance(section, Mapping):
            continue
        curves = [str(c.get("analyte")) for c in
                  (body.get("check") or {}).get("curves") or [] if isinstance(c, Mapping)]
        for m in section.get("materials") or []:
            if not isinstance(m, Mapping) or str(m.get("lot", "")).strip().casefold() != wanted:
                continue
            if only is not None and str(m.get("id", "")).strip().casefold() != only:
                continue
            covers = [str(a).casefold() for a in m.get("analytes") or []]
            analytes = tuple(a for a in curves if not covers or a.casefold() in covers)
            found.append(LotUse(key, str(m.get("id", "")),
                                str(m.get("lot", "")), str((body.get("run") or {}).get("file", "")),
                                analytes))
    return found
