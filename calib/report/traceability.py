"""The record's traceability table: reference materials and prepared levels behind a curve.

Drawn from the record's ``standards`` section (:mod:`calib.io.standards`), for
the analyte of one section of the PDF; a record without the section gets no
table (older records, or runs checked without ``--standards``).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from calib.report.formatting import MISSING, as_float


def format_number(value: Any) -> str:
    """A certificate figure as written there (up to 6 significant digits, no padding zeros).

    Examples
    --------
    >>> format_number(1000.0), format_number(0.0105), format_number(None)
    ('1000', '0.0105', '—')
    """
    v = as_float(value)
    return MISSING if v is None else f"{v:.6g}"

__all__ = ["format_number", "level_rows", "material_rows", "materials_for"]

TITLE = "Reference materials and prepared standards (ISO/IEC 17025 §6.5)"


def materials_for(section: Mapping[str, Any], analyte: str) -> list[Mapping[str, Any]]:
    """The materials of the section that are a source of ``analyte`` (case-insensitive).

    Examples
    --------
    >>> s = {"materials": [{"id": "A", "analytes": ["Pb"]}, {"id": "B", "analytes": []}]}
    >>> [m["id"] for m in materials_for(s, "cu")], [m["id"] for m in materials_for(s, "PB")]
    (['B'], ['A', 'B'])
    """
    out = []
    for m in section.get("materials") or []:
        if not isinstance(m, Mapping):
            continue
        names = [str(a).casefold() for a in m.get("analytes") or []]
        if not names or analyte.casefold() in names:
            out.append(m)
    return out


def material_rows(materials: list[Mapping[str, Any]]) -> list[list[str]]:
    """Header and one row per material: id, name, lot, certified value ± uncertainty, expiry.

    Examples
    --------
    >>> material_rows([{"id": "FWL-RM-0412", "name": "Multi-element stock", "lot": "L24-118",
    ...                 "value": 1000.0, "uncertainty": 2.0, "unit": "mg/L",
    ...                 "expires": "2027-03-31"}])[1]
    ['FWL-RM-0412', 'Multi-element stock', 'L24-118', '1000 ± 2 mg/L', '2027-03-31']
    """
    rows = [["Material id", "Name", "Lot", "Certified value", "Expires"]]
    for m in materials:
        value = format_number(m.get("value"))
        u = as_float(m.get("uncertainty"))
        certified = f"{value} ± {format_number(u)}" if u is not None else f"{value} (no uncertainty stated)"
        rows.append([str(m.get("id", "")), str(m.get("name", "")), str(m.get("lot", "")),
                     f"{certified} {m.get('unit', '')}".strip(), str(m.get("expires", ""))])
    return rows


def level_rows(section: Mapping[str, Any], materials: list[Mapping[str, Any]]) -> list[list[str]]:
    """Header and one row per prepared level coming from one of ``materials``.

    Examples
    --------
    >>> section = {"levels": [{"name": "S1", "from": "I1", "dilution": 20.0,
    ...                        "concentration": 0.5, "material": "A", "note": ""}]}
    >>> level_rows(section, [{"id": "A", "unit": "mg/L"}])[1]
    ['S1', 'I1', '20-fold', '0.5 mg/L', '']
    """
    units = {str(m.get("id")): str(m.get("unit", "")) for m in materials}
    rows = [["Standard", "Made from", "Dilution", "Concentration", "Note"]]
    for lv in section.get("levels") or []:
        if not isinstance(lv, Mapping) or str(lv.get("material")) not in units:
            continue
        rows.append([str(lv.get("name", "")), str(lv.get("from", "")),
                     f"{format_number(lv.get('dilution'))}-fold",
                     f"{format_number(lv.get('concentration'))} {units[str(lv.get('material'))]}"
                     .strip(), str(lv.get("note", ""))])
    return rows
