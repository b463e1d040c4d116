"""The injections of a samples file as columns, and the column-wise pass that reads them.

:class:`SampleRows` holds one entry per injection in file order: names and
types as lists, responses, nominal concentrations and dilution factors as
numpy arrays.  :func:`read_plain_rows` reads the rows whose cells are plain
(a number written with digits and a decimal point, an empty cell, a type
word seen before) a column at a time; every other row, and every rule that
could refuse a cell or set an injection aside, is left to the row reader
(:class:`calib.quantify.samples._TableReader`), so the two give the same
readings and the same refusals.  :class:`~calib.quantify.samples.Reading`
objects are only built when a caller asks for them.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from calib.io.cells import Cell, CellError, to_flag, to_text
from calib.io.fastrows import column_of
from calib.io.sampletypes import type_from_name
from calib.options import SampleType
from calib.run import Point

__all__ = ["Reading", "SampleRows", "merge_rows", "read_plain_rows"]

_QUANTIFIED = (SampleType.UNKNOWN, SampleType.QC)
_WHOLE = re.compile(r"-?[0-9]{1,15}")
_EXTRA = ("replicate", "injection_order", "is_response", "analyte_response", "level")


@dataclass(frozen=True)
class Reading:
    """One injection of a sample to quantify.

    Attributes
    ----------
    point : Point
        The injection as read (``sample_type`` unknown or QC; a QC's
        ``concentration`` is its nominal, an unknown's is ``nan``).
    dilution_factor : float
        Factor the measured concentration is multiplied by (1 = undiluted).
    mass_kg, volume_l : float or None
        Sample weight (kg) and final volume (L) when the file gives them: the
        result is then the content C × V / m (:mod:`calib.quantify.amounts`).
    """

    point: Point
    dilution_factor: float = 1.0
    mass_kg: float | None = None
    volume_l: float | None = None


@dataclass(frozen=True, eq=False)
class SampleRows:
    """Injections to quantify, one entry per injection in file order.

    Attributes
    ----------
    analyte, sample_id, sample_type, source_cell : list
        As on :class:`~calib.run.Point` (``sample_id`` None when the file names none).
    response : ndarray
        The response (a ratio to the internal standard where formed); ``nan``
        where the injection was set aside.
    included : ndarray of bool
        False where the injection was set aside (``reason`` says why).
    reason : list of str or None
        The exclusion reason.
    nominal : ndarray
        A QC's nominal concentration; ``nan`` for an unknown.
    dilution : ndarray
        Dilution factor (1 when the cell is empty).
    mass_kg, volume_l : list of float or None
        Sample weight and final volume when the file gives them.
    extra : dict of str to list
        ``replicate``, ``injection_order``, ``is_response``, ``analyte_response``
        and ``level`` (each None where the file gives none).
    """

    analyte: list[str]
    sample_id: list[str | None]
    sample_type: list[SampleType]
    source_cell: list[str]
    response: np.ndarray
    included: np.ndarray
    reason: list[str | None]
    nominal: np.ndarray
    dilution: np.ndarray
    mass_kg: list[float | None]
    volume_l: list[float | None]
    extra: dict[str, list[Any]]

    def __len__(self) -> int:
        return len(self.analyte)

    @classmethod
    def from_readings(cls, readings: Sequence[Reading]) -> SampleRows:
        """Columns of readings already built (a run file's, or a caller's)."""
        points = [r.point for r in readings]
        rows = cls(
            analyte=[p.analyte for p in points], sample_id=[p.sample_id for p in points],
            sample_type=[p.sample_type for p in points],
            source_cell=[p.source_cell for p in points],
            response=np.array([p.response for p in points], dtype=float),
            included=np.array([p.included for p in points], dtype=bool),
            reason=[p.exclusion_reason for p in points],
            nominal=np.array([p.concentration if p.sample_type is SampleType.QC else math.nan
                              for p in points], dtype=float),
            dilution=np.array([r.dilution_factor for r in readings], dtype=float),
            mass_kg=[r.mass_kg for r in readings], volume_l=[r.volume_l for r in readings],
            extra={key: [getattr(p, key) for p in points] for key in _EXTRA})
        rows.__dict__["readings"] = tuple(readings)
        return rows

    @cached_property
    def readings(self) -> tuple[Reading, ...]:
        """Every injection as a :class:`~calib.quantify.samples.Reading` (built once)."""
        n = len(self)
        none = [None] * n
        extra = {k: self.extra.get(k) or none for k in _EXTRA}
        conc = [v if k is SampleType.QC else math.nan
                for v, k in zip(self.nominal.tolist(), self.sample_type, strict=True)]
        return tuple(
            Reading(Point(a, c, y, cell, kind, rep, inc, why, sid, order, isr, ar, lev), d,
                    mass_kg=m, volume_l=v)
            for a, c, y, cell, kind, rep, inc, why, sid, order, isr, ar, lev, d, m, v in zip(
                self.analyte, conc, self.response.tolist(), self.source_cell, self.sample_type,
                extra["replicate"], self.included.tolist(), self.reason, self.sample_id,
                extra["injection_order"], extra["is_response"], extra["analyte_response"],
                extra["level"], self.dilution.tolist(), self.mass_kg, self.volume_l,
                strict=True))

    def points(self) -> list[Point]:
        """The points of the readings."""
        return [r.point for r in self.readings]


_PLAIN_COLUMN = re.compile(r"(?:-?[0-9]{1,30}(?:\.[0-9]{1,30})?)?(?:\n(?:-?[0-9]{1,30}"
                           r"(?:\.[0-9]{1,30})?)?)*")


def _numbers(values: list[Cell], plain: re.Pattern[str] | None) -> list[Any]:
    """Each cell as a float, None for an empty cell, or ``...`` where the row reader must decide."""
    if plain is not None and values:
        # A column of plain numbers and empty cells (a text file's, as a rule) in one match.
        try:
            joined = "\n".join(values)  # type: ignore[arg-type]
        except TypeError:
            joined = None
        if joined is not None and joined.count("\n") == len(values) - 1 \
                and _PLAIN_COLUMN.fullmatch(joined):
            if "" not in values:
                return list(map(float, values))  # type: ignore[arg-type]
            return [float(v) if v else None for v in values]  # type: ignore[arg-type]
    out: list[Any] = []
    append = out.append
    for v in values:
        kind = type(v)
        if kind is str:
            if plain is not None and plain.fullmatch(v):
                append(float(v))
            elif not v.strip():
                append(None)
            else:
                append(...)
        elif v is None:
            append(None)
        elif (kind is float or kind is int) and math.isfinite(v):
            append(float(v))
        else:
            append(...)
    return out


def _texts(values: list[Cell], *, few: bool = False) -> list[str | None]:
    """:func:`calib.io.cells.to_text` of each cell (``few``: of each distinct cell once)."""
    if few:
        seen: dict[Any, str | None] = {}
        try:
            if set(map(type, values)) == {str}:
                return [seen[v] if v in seen else seen.setdefault(v, to_text(v))
                        for v in values]
            # Keyed with the type: True, 1 and 1.0 are equal keys but different cells.
            return [seen[k] if k in seen else seen.setdefault(k, to_text(v))
                    for v, k in zip(values, zip(map(type, values), values), strict=True)]
        except TypeError:  # a cell that cannot be a key (none does today)
            pass
    try:
        out: list[Any] = list(map(str.strip, values))  # type: ignore[arg-type]
    except TypeError:  # not all text (a workbook's numbers, empty cells)
        return [(v.strip() or None) if type(v) is str else to_text(v) for v in values]
    if "" in out:
        out = [v or None for v in out]
    return out


def _each(values: list[Cell], parse: Callable[[Cell], Any]) -> list[Any]:
    """``parse`` of every cell, each distinct cell once; ``...`` where it raises CellError."""
    seen: dict[Any, Any] = {}
    out = []
    for v in values:
        key = (type(v), v)  # True, 1 and 1.0 are equal keys but different cells
        try:
            found = seen[key]
        except KeyError:
            try:
                found = parse(v)
            except CellError:
                found = ...
            seen[key] = found
        except TypeError:  # a cell that cannot be a key (none does today)
            found = ...
        out.append(found)
    return out


def _whole(value: Cell) -> int | None:
    if value is None:
        return None
    if type(value) is str:
        return int(value) if _WHOLE.fullmatch(value) else (None if not value.strip() else ...)
    if type(value) is float and value.is_integer():
        return int(value)
    return ...  # type: ignore[return-value]


def read_plain_rows(reader: Any, start: int, stop: int) -> tuple[SampleRows, list[int], list[int]]:
    """Rows ``start`` to ``stop`` of the reader's grid read a column at a time.

    Parameters
    ----------
    reader : calib.quantify.samples._TableReader
        The row reader (its columns, decimal mark, type cache and options).
    start, stop : int
        0-based grid rows; none of them is blank.

    Returns
    -------
    rows : SampleRows
        The rows read here.
    at : list of int
        The grid row of each.
    left : list of int
        Rows left to the row reader, in order: any cell that is not plain, any
        rule that refuses or sets aside, standards and blanks.
    """
    block = reader.grid.rows[start:stop]
    width = min(map(len, block), default=0)
    cols = {name: column_of(block, spec[0], width) for name, spec in reader.columns.items()}
    n = len(block)
    bad = [False] * n

    def numbers(name: str) -> list[Any]:
        if name not in cols:
            return [None] * n
        found = _numbers(cols[name], reader.plain)
        for i, v in enumerate(found):
            if v is ...:
                bad[i] = True
        return found

    names = _texts(cols["sample_id"]) if "sample_id" in cols else [None] * n
    nominal = numbers("concentration")
    dilution = numbers("dilution_factor")
    response = numbers("response")
    mass = numbers("sample_weight")
    volume = numbers("final_volume")
    is_value = numbers("is_response") if reader.ratios else None
    replicate = order = None
    if "replicate" in cols:
        replicate = [_whole(v) for v in cols["replicate"]]
    if "injection_order" in cols:
        order = [_whole(v) for v in cols["injection_order"]]
    for whole in (replicate, order):
        for i, v in enumerate(whole or ()):
            if v is ...:
                bad[i] = True
    if "include" in cols:
        for i, flag in enumerate(_each(cols["include"], to_flag)):
            if flag is not True:
                bad[i] = True  # excluded, or a cell the row reader refuses
    kinds: list[Any]
    if "sample_type" in cols:
        kinds = _each(_texts(cols["sample_type"], few=True),
                      lambda t: None if t is None else reader.typer.from_cell(t))
    else:
        kinds = [None] * n
    analytes = _texts(cols["analyte"], few=True) if "analyte" in cols else [None] * n
    fallback = reader.analyte or ""
    below_one = reader.dilution_below_one
    amounts = "sample_weight" in reader.columns
    for i in range(n):
        kind = kinds[i]
        if kind is ...:
            bad[i] = True
            continue
        if kind is None:
            kind = type_from_name(names[i]) or (
                SampleType.QC if nominal[i] is not None else SampleType.UNKNOWN)
            kinds[i] = kind
        if kind not in _QUANTIFIED or bad[i]:
            bad[i] = True
            continue
        nom, dil = nominal[i], dilution[i]
        if kind is SampleType.QC and (nom is None or nom <= 0) or dil is not None and (not dil > 0 or (dil < 1 and not below_one)) or amounts and not (mass[i] is not None and mass[i] > 0 and volume[i] is not None
                              and volume[i] > 0) and not (
                kind is SampleType.QC and mass[i] is None and volume[i] is None) or response[i] is None or not (analytes[i] or fallback) or is_value is not None and (is_value[i] is None or not is_value[i] > 0):
            bad[i] = True
    keep = [i for i in range(n) if not bad[i]]
    left = [start + i for i in range(n) if bad[i]]
    at = [start + i for i in keep]
    y = np.array(response if len(keep) == n else [response[i] for i in keep], dtype=float)
    extra: dict[str, list[Any]] = {}
    if is_value is not None:
        raw = y
        iv = np.array([is_value[i] for i in keep], dtype=float)
        y = raw / iv
        extra["is_response"] = iv.tolist()
        extra["analyte_response"] = raw.tolist()
    if replicate is not None:
        extra["replicate"] = [replicate[i] for i in keep]
    if order is not None:
        extra["injection_order"] = [order[i] for i in keep]
    if "level" in cols:
        levels = _texts(cols["level"])
        extra["level"] = [levels[i] for i in keep]
    mass_unit, volume_unit = reader.mass_unit, reader.volume_unit
    prefix = reader.response_at
    if len(keep) == n and not (fallback and None in analytes) and SampleType.QC not in kinds \
            and "sample_weight" not in reader.columns:
        # Every row an unknown read here, as in a large batch: the columns as they are.
        rows = SampleRows(
            analyte=analytes, sample_id=names, sample_type=kinds,  # type: ignore[arg-type]
            source_cell=[f"{prefix}{r}" for r in range(start + 1, stop + 1)],
            response=y, included=np.ones(n, dtype=bool), reason=[None] * n,
            nominal=np.full(n, math.nan),
            dilution=np.array([1.0 if d is None else d for d in dilution], dtype=float),
            mass_kg=[None] * n, volume_l=[None] * n, extra=extra)
        return rows, at, left
    rows = SampleRows(
        analyte=[analytes[i] or fallback for i in keep],
        sample_id=[names[i] for i in keep],
        sample_type=[kinds[i] for i in keep],
        source_cell=[f"{prefix}{r + 1}" for r in at],
        response=y, included=np.ones(len(keep), dtype=bool), reason=[None] * len(keep),
        nominal=np.array([nominal[i] if kinds[i] is SampleType.QC else math.nan
                          for i in keep], dtype=float),
        dilution=np.array([1.0 if dilution[i] is None else dilution[i] for i in keep],
                          dtype=float),
        mass_kg=[None if mass[i] is None else mass[i] * mass_unit for i in keep],
        volume_l=[None if volume[i] is None else volume[i] * volume_unit for i in keep],
        extra=extra)
    return rows, at, left


def merge_rows(parts: Sequence[tuple[SampleRows, list[int]]]) -> SampleRows:
    """Rows read in several passes, put back in grid order."""
    parts = [p for p in parts if len(p[0])]
    if len(parts) == 1:
        return parts[0][0]
    at = np.concatenate([np.asarray(a, dtype=np.int64) for _, a in parts]) if parts \
        else np.empty(0, dtype=np.int64)
    order = np.argsort(at, kind="stable").tolist()

    def lists(name: str) -> list[Any]:
        joined = [v for rows, _ in parts for v in getattr(rows, name)]
        return [joined[i] for i in order]

    def arrays(name: str, dtype: Any) -> np.ndarray:
        if not parts:
            return np.empty(0, dtype=dtype)
        return np.concatenate([getattr(rows, name) for rows, _ in parts])[order]

    extra: dict[str, list[Any]] = {}
    keys = {k for rows, _ in parts for k in rows.extra}
    for key in sorted(keys):
        joined = [v for rows, _ in parts for v in (rows.extra.get(key) or [None] * len(rows))]
        extra[key] = [joined[i] for i in order]
    return SampleRows(
        analyte=lists("analyte"), sample_id=lists("sample_id"), sample_type=lists("sample_type"),
        source_cell=lists("source_cell"), response=arrays("response", float),
        included=arrays("included", bool), reason=lists("reason"),
        nominal=arrays("nominal", float), dilution=arrays("dilution", float),
        mass_kg=lists("mass_kg"), volume_l=lists("volume_l"), extra=extra)
