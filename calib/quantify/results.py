"""A batch's results as columns: every sample's figures, flags and reported value at once.

:func:`quantify_rows` applies the rules of :func:`calib.quantify.batch.quantify_sample`
to all samples together (one pass of :func:`calib.fit.inverse.inverse_predict_many`
per curve, flags and reported values per column); :class:`ResultColumns`
builds :class:`~calib.quantify.batch.SampleResult` objects only when a caller
asks for them, and gives the ``samples`` of the ``calib.quantify/1`` document.
"""

from __future__ import annotations

import itertools
import json
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from functools import cached_property
from json.encoder import encode_basestring as _encode
from typing import TYPE_CHECKING, Any

import numpy as np

from calib.fit.calcurve import CalibrationCurve
from calib.fit.inverse import InversePrediction, inverse_predict_many
from calib.fit.qc import sample_means, sample_numbers
from calib.options import SampleType
from calib.quantify.sampletable import Reading, SampleRows

if TYPE_CHECKING:
    from calib.quantify.batch import ReportingConvention

__all__ = ["ResultColumns", "SampleResult", "quantify_rows"]

@dataclass(frozen=True)
class SampleResult:
    """One sample's result.

    Attributes
    ----------
    sample_id : str
        Sample name (the source cell of its first reading when the file names none).
    analyte : str
        Analyte.
    sample_type : SampleType
        Unknown or QC.
    readings : tuple of Reading
        Every injection of the sample, set-aside ones included.
    n_replicates : int
        m, the readings averaged.
    mean_response : float or None
        ȳ₀.
    dilution_factor : float
        The factor applied.
    prediction : InversePrediction or None
        The read-back on the measured scale (before dilution); None without a
        usable reading or curve.
    concentration, std_error, ci_low, ci_high : float or None
        D·x₀, D·s(x₀) and D·(x₀ ∓ t·s(x₀)); None outside the calibrated range.
    flags : tuple of str
        :class:`Flag` values.
    reported : str
        The value as reported: a number, or the convention's words.
    note : str
        What to do or why, in plain words ("" when nothing).
    nominal : float or None
        A QC's nominal concentration.
    found : float or None
        A QC's read-back concentration D·x₀, also just outside the range (for
        its deviation only).
    deviation_pct : float or None
        A QC's 100·(found − nominal)/nominal.
    content : float or None
        The sample's content D·x₀·V/m when the file gives its weight m and
        final volume V (:mod:`calib.quantify.amounts`); None otherwise or
        outside the calibrated range.  ``reported`` then gives it with its unit.
    content_unit : str or None
        The content's unit (``mg/kg``) when weight and volume were given.
    """

    sample_id: str
    analyte: str
    sample_type: SampleType
    readings: tuple[Reading, ...]
    n_replicates: int
    mean_response: float | None
    dilution_factor: float
    prediction: InversePrediction | None
    concentration: float | None
    std_error: float | None
    ci_low: float | None
    ci_high: float | None
    flags: tuple[str, ...]
    reported: str
    note: str = ""
    nominal: float | None = None
    found: float | None = None
    deviation_pct: float | None = None
    content: float | None = None
    content_unit: str | None = None


def _finite(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def _side(curve: CalibrationCurve, x0: float, response: float) -> str:
    """``above``, ``below`` or ``inside`` the calibrated range."""
    eps = 1e-9 * max(curve.x_max - curve.x_min, abs(curve.x_max), 1e-300)
    if math.isfinite(x0):
        if x0 > curve.x_max + eps:
            return "above"
        if x0 < curve.x_min - eps:
            return "below"
        return "inside"
    # The curve never reaches the response (a quadratic beyond its turning point):
    # the side is the one the response lies beyond.
    low, high = (float(v) for v in curve.predict(np.array([curve.x_min, curve.x_max])))
    rising = high >= low
    return "above" if (response > high) == rising else "below"


# Flag bits, in the order the flags are listed.
_FORCED, _REVIEW, _NO_READING, _ABOVE, _OUTSIDE, _LLOQ, _LOD, _REJECTED = (
    1, 2, 4, 8, 16, 32, 64, 128)
_WORDS = ((_FORCED, "forced"), (_REVIEW, "curve-needs-review"), (_NO_READING, "no-reading"),
          (_ABOVE, "above-uloq"), (_ABOVE, "outside-range"), (_OUTSIDE, "outside-range"),
          (_LLOQ, "below-lloq"), (_LOD, "below-lod"))


def _flags(code: int) -> tuple[str, ...]:
    if code & _REJECTED:
        return ("curve-rejected",)
    return tuple(word for bit, word in _WORDS if code & bit)


def _optional(values: np.ndarray, present: np.ndarray) -> list[float | None]:
    """``values`` as floats, None where absent or not finite."""
    keep = present & np.isfinite(values)
    out = values.tolist()
    if not keep.all():
        for i in np.flatnonzero(~keep).tolist():
            out[i] = None
    return out


@dataclass(frozen=True, eq=False)
class ResultColumns:
    """Every sample of a batch, one entry per sample in order of first appearance.

    ``first`` is the first injection of each sample in ``rows``; ``members``
    gives the injections of a sample.  Figures absent for a sample are None.
    """

    rows: SampleRows
    first: np.ndarray
    order: np.ndarray
    bounds: np.ndarray
    n_usable: list[int]
    mean: list[float | None]
    concentration: list[float | None]
    std_error: list[float | None]
    ci_low: list[float | None]
    ci_high: list[float | None]
    flags: list[tuple[str, ...]]
    reported: list[str]
    note: list[str]
    found: list[float | None]
    deviation: list[float | None]
    content: list[float | None]
    content_unit: list[str | None]
    read: np.ndarray
    """Whether each sample was read back from its curve (then ``x0`` and ``se`` hold x₀, s(x₀))."""
    x0: np.ndarray
    se: np.ndarray
    how: dict[str, tuple[int, float, float, str]]
    """Analyte → (ν, t, confidence, method) of the read-back from its curve."""

    def __len__(self) -> int:
        return int(self.first.size)

    def members(self, i: int) -> list[int]:
        """The injections of sample ``i``, in file order."""
        return self.order[self.bounds[i]:self.bounds[i + 1]].tolist()

    def sample_ids(self) -> list[str]:
        rows, first = self.rows, self.first.tolist()
        return [rows.sample_id[r] or rows.source_cell[r] for r in first]

    def prediction(self, i: int) -> InversePrediction | None:
        """Sample ``i``'s read-back on the measured scale; None where it was not read back."""
        if not self.read[i]:
            return None
        df, t, level, method = self.how[self.rows.analyte[int(self.first[i])]]
        y0 = float(self.mean[i])  # type: ignore[arg-type]
        return InversePrediction(y0, self.n_usable[i], float(self.x0[i]), float(self.se[i]), df,
                                 t, level, method)

    def confidence(self) -> list[float | None]:
        """The interval level of each sample read back; None for the others."""
        rows, how = self.rows, self.how
        return [how[rows.analyte[r]][2] if ok else None
                for r, ok in zip(self.first.tolist(), self.read.tolist(), strict=True)]

    def results(self) -> tuple[SampleResult, ...]:
        """Every sample as a :class:`~calib.quantify.batch.SampleResult`."""
        rows = self.rows
        readings = rows.readings
        ids = self.sample_ids()
        out = []
        for i, r in enumerate(self.first.tolist()):
            kind = rows.sample_type[r]
            out.append(SampleResult(
                sample_id=ids[i], analyte=rows.analyte[r], sample_type=kind,
                readings=tuple(readings[j] for j in self.members(i)),
                n_replicates=self.n_usable[i], mean_response=self.mean[i],
                dilution_factor=float(rows.dilution[r]), prediction=self.prediction(i),
                concentration=self.concentration[i], std_error=self.std_error[i],
                ci_low=self.ci_low[i], ci_high=self.ci_high[i], flags=self.flags[i],
                reported=self.reported[i], note=self.note[i],
                nominal=float(rows.nominal[r]) if kind is SampleType.QC else None,
                found=self.found[i], deviation_pct=self.deviation[i], content=self.content[i],
                content_unit=self.content_unit[i]))
        return tuple(out)

    @cached_property
    def _scalars(self) -> dict[str, list[Any]]:
        """The document's values that are not lists, by key."""
        rows, first = self.rows, self.first.tolist()
        kinds = [rows.sample_type[r] for r in first]
        nominal = _optional(rows.nominal[self.first], np.array(
            [k is SampleType.QC for k in kinds], dtype=bool))
        return {
            "sample_id": self.sample_ids(), "analyte": [rows.analyte[r] for r in first],
            "sample_type": [k.value for k in kinds], "n_replicates": self.n_usable,
            "mean_response": self.mean, "concentration": self.concentration,
            "std_error": self.std_error, "ci_low": self.ci_low, "ci_high": self.ci_high,
            "confidence": self.confidence(),
            "dilution_factor": rows.dilution[self.first].tolist(), "reported": self.reported,
            "note": self.note, "nominal": nominal, "found": self.found,
            "deviation_pct": [None if d is None or not math.isfinite(d) else d
                              for d in self.deviation],
            "content": self.content, "content_unit": self.content_unit,
            "sample_weight_kg": [rows.mass_kg[r] for r in first],
            "final_volume_l": [rows.volume_l[r] for r in first]}

    def _cells(self, convert: Callable[[str], str] | None = None) -> list[Any]:
        """Each sample's source cells (``convert`` of each, joined as a JSON list, if given)."""
        ends = self.bounds.tolist()
        source = self.rows.source_cell
        ordered = [source[j] for j in self.order.tolist()]
        if convert is None:
            return [ordered[a:b] for a, b in itertools.pairwise(ends)]
        ordered = list(map(convert, ordered))
        return ["[" + ordered[a] + "]" if b - a == 1 else "[" + ", ".join(ordered[a:b]) + "]"
                for a, b in itertools.pairwise(ends)]

    def _aside(self) -> list[list[dict[str, str]]]:
        """Each sample's readings set aside, with the reason."""
        rows = self.rows
        n = len(self)
        aside: list[list[dict[str, str]]] = [[] for _ in range(n)]
        usable = rows.included & np.isfinite(rows.response)
        if not usable.all():
            gid = np.empty(len(rows), dtype=np.int64)
            gid[self.order] = np.repeat(np.arange(n), np.diff(self.bounds))
            for j in np.flatnonzero(~usable).tolist():
                aside[int(gid[j])].append(_aside(rows, j))
        return aside

    @property
    def document_columns(self) -> tuple[list[Any], ...]:
        """The values of each of :data:`_SAMPLE_KEYS`, a list per key, one entry per sample."""
        found = dict(self._scalars, flags=[list(f) for f in self.flags],
                     source_cells=self._cells(), set_aside=self._aside())
        return tuple(found[key] for key in _SAMPLE_KEYS)

    def document_samples(self) -> list[dict[str, Any]]:
        """The ``samples`` of the ``calib.quantify/1`` document (keys :data:`_SAMPLE_KEYS`)."""
        return [{"sample_id": a, "analyte": b, "sample_type": c, "n_replicates": d,
                 "mean_response": e, "concentration": f, "std_error": g, "ci_low": h,
                 "ci_high": i, "confidence": j, "dilution_factor": k, "flags": l,
                 "reported": m, "note": n, "nominal": o, "found": p, "deviation_pct": q,
                 "content": r, "content_unit": s, "sample_weight_kg": t, "final_volume_l": u,
                 "source_cells": v, "set_aside": w}
                for a, b, c, d, e, f, g, h, i, j, k, l, m, n, o, p, q, r, s, t, u, v, w
                in zip(*self.document_columns, strict=True)]

    def samples_json(self) -> str:
        """``json.dumps(self.document_samples(), ensure_ascii=False)``, written a column at a time.

        A key whose value is the same for every sample is written once into
        the text between the others.
        """
        n = len(self)
        if n == 0:
            return "[]"
        texts: list[str | list[str]] = []
        scalars = self._scalars
        for key in _SAMPLE_KEYS:
            if key == "source_cells":
                texts.append(self._cells(_encode))
                continue
            if key == "set_aside" and (self.rows.included & np.isfinite(self.rows.response)).all():
                texts.append("[]")
                continue
            if key in ("flags", "set_aside"):
                values: list[Any] = list(self.flags) if key == "flags" else self._aside()
                same = values.count(values[0]) == n
                texts.append(_json_value(list(values[0])) if same else _json_column(key, values))
                continue
            values = scalars[key]
            same = values.count(values[0]) == n and type(values[0]) in (str, int, float,
                                                                        type(None))
            texts.append(_json_value(values[0]) if same else _json_column(key, values))
        # Runs of constant text between the columns that vary.
        joints, columns, joint = [], [], ""
        for j, (key, text) in enumerate(zip(_SAMPLE_KEYS, texts, strict=True)):
            joint += f"{', ' if j else ''}{_encode(key)}: "
            if isinstance(text, str):
                joint += text
            else:
                joints.append(joint)
                columns.append(text)
                joint = ""
        width = 2 * len(columns) + 1
        parts: list[str] = [""] * (width * n)
        for j, (head, column) in enumerate(zip(joints, columns, strict=True)):
            parts[2 * j::width] = [("}, {" if j == 0 else "") + head] * n
            parts[2 * j + 1::width] = column
        parts[width - 1::width] = [joint] * n
        if not columns:
            parts[0::width] = ["}, {" + joint] * n
        parts[0] = parts[0][3:]
        return "[" + "".join(parts) + "}]"


_SAMPLE_KEYS = ("sample_id", "analyte", "sample_type", "n_replicates", "mean_response",
               "concentration", "std_error", "ci_low", "ci_high", "confidence",
               "dilution_factor", "flags", "reported", "note", "nominal", "found",
               "deviation_pct", "content", "content_unit", "sample_weight_kg", "final_volume_l",
               "source_cells", "set_aside")
"""Keys of a sample in the ``calib.quantify/1`` document, in order."""


_STRINGS = frozenset(("sample_id", "analyte", "sample_type", "reported", "note", "content_unit"))


def _json_value(value: Any) -> str:
    return json.dumps(value, ensure_ascii=False, allow_nan=False)


def _json_column(key: str, values: list[Any]) -> list[str]:
    """Each value as json.dumps (ensure_ascii=False) writes it."""
    if key in ("flags", "set_aside"):
        seen: dict[str, str] = {}
        out = []
        for v in values:
            if not v:
                out.append("[]")
                continue
            mark = repr(v)
            if mark not in seen:
                seen[mark] = _json_value(list(v))
            out.append(seen[mark])
        return out
    if key in _STRINGS:
        out = list(map(_encode, [v or "" for v in values]))
    elif key in ("n_replicates", "dilution_factor", "confidence"):
        # Few distinct values: each written once.
        shown = {v: repr(v) for v in set(values)}
        out = [shown[v] for v in values]
    else:
        out = list(map(repr, values))
        if "nan" in out or "inf" in out or "-inf" in out:
            raise ValueError(f"{key}: a value that is not finite has no JSON form")
    if None in values:
        out = ["null" if v is None else text for v, text in zip(values, out, strict=True)]
    return out


def _aside(rows: SampleRows, j: int) -> dict[str, str]:
    return {"source_cell": rows.source_cell[j],
            "reason": rows.reason[j] or "no usable response"}


def _group(rows: SampleRows) -> np.ndarray:
    """Sample number of each injection: same analyte, type, id, dilution, weight and volume."""
    ids = [s if s else c for s, c in zip(rows.sample_id, rows.source_cell, strict=True)]
    kinds = [k.value for k in rows.sample_type]
    return sample_numbers(zip(rows.analyte, kinds, ids, rows.dilution.tolist(), rows.mass_kg,
                              rows.volume_l, strict=True))


def quantify_rows(
    curves: Mapping[str, CalibrationCurve],
    rows: SampleRows,
    *,
    refused: Mapping[str, str],
    forced: Sequence[str],
    confidence: float | None,
    convention_of: Callable[[str], ReportingConvention],
    content_factor: Callable[[CalibrationCurve, int], tuple[float, str] | None],
) -> ResultColumns:
    """Every sample's result, worked out a column at a time.

    ``convention_of(analyte)`` gives the analyte's reporting convention and
    ``content_factor(curve, row)`` the V/m factor and content unit of an
    injection (None without a weight and volume; it raises for a unit that
    cannot take one).
    """
    gid = _group(rows)
    groups = int(gid.max()) + 1 if gid.size else 0
    order = np.argsort(gid, kind="stable")
    bounds = np.searchsorted(gid[order], np.arange(groups + 1))
    first = order[bounds[:-1]] if groups else np.empty(0, dtype=np.int64)
    m, mean = sample_means(gid, rows.response, rows.included & np.isfinite(rows.response),
                           groups)
    first_l = first.tolist()
    analytes = [rows.analyte[r] for r in first_l]
    dilution = rows.dilution[first]
    code = np.zeros(groups, dtype=np.int64)
    reported = np.empty(groups, dtype=object)
    note = np.full(groups, "", dtype=object)
    x0 = np.full(groups, np.nan)
    se = np.full(groups, np.nan)
    half = np.full(groups, np.nan)
    shown = np.zeros(groups, dtype=bool)
    read = np.zeros(groups, dtype=bool)
    how: dict[str, tuple[int, float, float, str]] = {}
    by_analyte: dict[str, list[int]] = {}
    for g, a in enumerate(analytes):
        by_analyte.setdefault(a, []).append(g)
    content = np.full(groups, np.nan)
    units: list[str | None] = [None] * groups
    factors: dict[int, tuple[float, str]] = {}
    if any(v is not None for v in rows.mass_kg):
        for g, a in enumerate(analytes):
            curve = curves.get(a)
            if curve is not None and a not in refused:
                factor = content_factor(curve, first_l[g])
                if factor is not None:
                    factors[g] = factor
    for analyte, members in by_analyte.items():
        at = np.array(members, dtype=np.int64)
        curve = curves.get(analyte)
        why = refused.get(analyte)
        conv = convention_of(analyte)
        if curve is None or why is not None:
            code[at] = _REJECTED
            reported[at], note[at] = conv.refused, why or "no curve"
            continue
        base = (_FORCED if analyte in forced else 0) | (
            _REVIEW if curve.verdict == "needs-review" else 0)
        code[at] = base
        has = m[at] > 0
        for g in at[~has].tolist():
            code[g] |= _NO_READING
            reported[g] = conv.no_reading
            note[g] = "; ".join(dict.fromkeys(rows.reason[j] or "no reading"
                                              for j in order[bounds[g]:bounds[g + 1]].tolist()))
        at = at[has]
        if not at.size:
            continue
        many = inverse_predict_many(curve, mean[at], m[at], confidence=confidence)
        x, s = many.concentration, many.std_error
        x0[at], se[at], read[at] = x, s, True
        half[at] = many.t_critical * s
        how[analyte] = (many.df, many.t_critical, many.confidence, many.method)
        eps = 1e-9 * max(curve.x_max - curve.x_min, abs(curve.x_max), 1e-300)
        finite = np.isfinite(x)
        above = finite & (x > curve.x_max + eps)
        below = finite & (x < curve.x_min - eps)
        if not finite.all():
            for k in np.flatnonzero(~finite).tolist():
                side = _side(curve, x[k], float(mean[at[k]]))
                above[k], below[k] = side == "above", side == "below"
        with np.errstate(invalid="ignore"):
            below_lod = (~finite | (x < curve.lod)) if curve.lod is not None \
                else np.zeros(x.shape, dtype=bool)
            below_lloq = below | (x < curve.lloq * (1 - 1e-9))
        below_lod &= ~above
        below_lloq &= ~above
        code[at] |= np.where(above, _ABOVE, 0) | np.where(below, _OUTSIDE, 0) \
            | np.where(below_lloq, _LLOQ, 0) | np.where(below_lod, _LOD, 0)
        shown[at] = ~above & ~below
        words = np.empty(at.size, dtype=object)
        words[:] = conv.numbers(dilution[at] * x)
        words[below_lloq & ~below_lod] = conv.below_lloq
        words[below_lod] = conv.below_lod
        words[above] = conv.above_uloq
        reported[at] = words
        note[at[above]] = "dilute and re-run"
        note[at[below]] = "below the calibrated range"
    values = dilution * x0
    concentration = _optional(values, shown)
    std_error = _optional(dilution * se, shown)
    ci_low = _optional(dilution * (x0 - half), shown)
    ci_high = _optional(dilution * (x0 + half), shown)
    for g, (factor, unit) in factors.items():
        units[g] = unit
        if concentration[g] is not None:
            content[g] = concentration[g] * factor
            value = content[g] if math.isfinite(content[g]) else None
            conv = convention_of(analytes[g])
            if not code[g] & (_LLOQ | _LOD) and value is not None:
                reported[g] = f"{conv.number(value)} {unit}"
            r = first_l[g]
            note[g] = "; ".join(filter(None, [note[g], (
                f"content = C × V / m with V = {rows.volume_l[r]:g} L, "
                f"m = {rows.mass_kg[r]:g} kg")]))
    qc = np.array([rows.sample_type[r] is SampleType.QC for r in first_l], dtype=bool)
    found = _optional(values, qc & read)
    deviation: list[float | None] = [None] * groups
    for g in np.flatnonzero(qc & read).tolist():
        nominal = float(rows.nominal[first_l[g]])
        if found[g] is not None and nominal:
            deviation[g] = 100 * (found[g] - nominal) / nominal  # type: ignore[operator]
    codes = code.tolist()
    table = {c: _flags(c) for c in set(codes)}
    return ResultColumns(
        rows=rows, first=first, order=order, bounds=bounds, n_usable=m.tolist(),
        mean=[None if k == 0 else v for k, v in zip(m.tolist(), mean.tolist(), strict=True)],
        concentration=concentration, std_error=std_error, ci_low=ci_low, ci_high=ci_high,
        flags=[table[c] for c in codes], reported=reported.tolist(), note=note.tolist(),
        found=found,
        deviation=deviation,
        content=_optional(content, np.isfinite(content)), content_unit=units,
        read=read, x0=x0, se=se, how=how)
