"""Calibration levels: concentrations equal but for rounding are one level; labels must agree.

A formula's rounding writes 999.9999999999999 where the analyst meant 1000:
counted as two levels, the curve would gain a level it does not have.
Concentrations within :data:`_LEVEL_TOLERANCE` (relative) of each other are
read as one level, the shortest written value, with a note naming the cells.

A level label (``L4``, ``Cal 4``) given at two concentrations means one of
the two cells is wrong; calib cannot tell which, so it stops.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import MutableSequence, Sequence
from itertools import pairwise

from calib.errors import InputError
from calib.options import SampleType
from calib.run import Point, point_values

__all__ = ["check_level_labels", "merge_close_levels"]

_LEVEL_TOLERANCE = 1e-9
"""Relative difference under which two standard concentrations are one level."""


def _close(a: float, b: float) -> bool:
    return abs(a - b) <= _LEVEL_TOLERANCE * max(abs(a), abs(b))


def _standard_levels(points: Sequence[Point]) -> dict[str, set[float]]:
    """The distinct concentrations (NaN left out) of each analyte's standards."""
    standard = SampleType.STANDARD
    distinct: dict[str, set[float]] = {}
    # Each distinct (analyte, concentration) of the standards once (runs reach 10^5 points).
    keys = zip(point_values(points, "sample_type"), point_values(points, "analyte"),
               point_values(points, "concentration"))
    for analyte, concentration in {(a, c) for t, a, c in keys if t is standard}:
        if not math.isnan(concentration):
            distinct.setdefault(analyte, set()).add(concentration)
    return distinct


def merge_close_levels(points: MutableSequence[Point], warnings: list[str]) -> dict[str, int]:
    """Read standard concentrations within :data:`_LEVEL_TOLERANCE` of each other as one.

    ``points`` is changed in place; a note per merged level is appended to ``warnings``.
    Returns the number of distinct concentrations (NaN left out) of each analyte's
    standards, once merged.

    Examples
    --------
    >>> pts = [Point("Cu", c, 1.0, f"r.csv!C{i + 2}") for i, c in
    ...        enumerate([10.0, 999.9999999999999, 1000.0])]
    >>> notes = []
    >>> merge_close_levels(pts, notes)
    {'Cu': 2}
    >>> [p.concentration for p in pts]
    [10.0, 1000.0, 1000.0]
    >>> print(notes[0])
    Cu: the concentrations 999.9999999999999 (r.csv!C3) and 1000 (r.csv!C4) differ by less than \
1e-09 relative and were read as one level, 1000
    """
    standard = SampleType.STANDARD
    distinct = _standard_levels(points)
    near = set()
    for analyte, values in distinct.items():
        ordered = sorted(values)
        if any(_close(a, b) for a, b in pairwise(ordered)):
            near.add(analyte)
    if not near:  # the usual run: no two levels of an analyte are that close
        return {analyte: len(values) for analyte, values in distinct.items()}
    by_analyte: dict[str, list[int]] = {}
    concentrations = point_values(points, "concentration")
    for index, (kind, analyte, concentration) in enumerate(zip(
            point_values(points, "sample_type"), point_values(points, "analyte"),
            concentrations)):
        if kind is standard and not math.isnan(concentration) and analyte in near:
            by_analyte.setdefault(analyte, []).append(index)
    for analyte, indices in by_analyte.items():
        values = sorted({concentrations[i] for i in indices})
        clusters: list[list[float]] = []
        for value in values:
            if clusters and _close(clusters[-1][-1], value):
                clusters[-1].append(value)
            else:
                clusters.append([value])
        for cluster in clusters:
            if len(cluster) < 2:
                continue
            chosen = min(cluster, key=lambda v: (len(repr(v)), v))
            shown = []
            for value in cluster:
                first = next(points[i].source_cell for i in indices
                             if concentrations[i] == value)
                shown.append(f"{value!r} ({first})" if value != chosen else
                             f"{value:g} ({first})")
            for i in indices:  # (clusters do not overlap: a value is changed once)
                if concentrations[i] in cluster and concentrations[i] != chosen:
                    points[i] = dataclasses.replace(points[i], concentration=chosen)
            warnings.append(
                f"{analyte}: the concentrations {' and '.join(shown)} differ by less than "
                f"{_LEVEL_TOLERANCE:g} relative and were read as one level, {chosen:g}")
    return {analyte: len(values) for analyte, values in _standard_levels(points).items()}


def check_level_labels(points: Sequence[Point], *, file: str, sheet: str | None) -> None:
    """Refuse a level label given at more than one concentration of one analyte.

    Raises
    ------
    InputError
        Naming the analyte, the label, the concentrations and a cell of each.

    Examples
    --------
    >>> pts = [Point("Cu", c, 1.0, f"r.csv!C{i + 2}", level=lab) for i, (c, lab) in
    ...        enumerate([(1, "1"), (2, "2"), (5, "4"), (8, "4")])]
    >>> check_level_labels(pts, file="r.csv", sheet=None)
    Traceback (most recent call last):
    ...
    calib.errors.InputError: r.csv: Cu: the level label '4' is given at 2 concentrations (5 in \
the row of r.csv!C4, 8 in the row of r.csv!C5); expected one concentration per level: correct \
the level label or the concentration in the file
    """
    labels = point_values(points, "level")
    if all(level is None for level in set(labels)):
        return  # no level labels (each distinct value tested once)
    seen: dict[tuple[str, str], dict[float, int]] = {}
    standard = SampleType.STANDARD
    for at, (kind, analyte, label, concentration) in enumerate(zip(
            point_values(points, "sample_type"), point_values(points, "analyte"), labels,
            point_values(points, "concentration"))):
        if kind is standard and label is not None:
            seen.setdefault((analyte, label), {}).setdefault(concentration, at)
    for (analyte, label), found in seen.items():
        if len(found) < 2:
            continue
        where = ", ".join(f"{c:g} in the row of {points[at].source_cell}"
                          for c, at in found.items())
        raise InputError(
            f"{analyte}: the level label {label!r} is given at {len(found)} concentrations "
            f"({where}); expected one concentration per level: correct the level label or the "
            f"concentration in the file",
            file=file, sheet=sheet,
        )
