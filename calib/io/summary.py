"""A plain-text account of what the importer recognised in a run file.

``calib check --show-import`` prints it, so that an analyst setting up a new
instrument export (or an import map for it) sees which sheet, layout,
header cells, units, metadata, sample types and exclusions calib took.
"""

from __future__ import annotations

from collections import Counter

from calib.options import SampleType
from calib.run import Point, Run

__all__ = ["describe_import"]

_LAYOUTS = {
    "long": "long (one row per injection)",
    "wide": "wide (one row per standard, one response column per analyte)",
    "stacked": "stacked (several tables in one sheet)",
    "sheet-per-analyte": "one sheet per analyte",
}
_TEXT = {"utf-8-sig": "UTF-8 with byte-order mark", "utf-16": "UTF-16", "utf-8": "UTF-8",
         "utf-16-le": "UTF-16LE without byte-order mark",
         "utf-16-be": "UTF-16BE without byte-order mark", "cp1252": "Windows-1252"}
_KINDS = (
    (SampleType.STANDARD, "standard", "standards"), (SampleType.BLANK, "blank", "blanks"),
    (SampleType.ZERO, "zero sample", "zero samples"), (SampleType.QC, "QC", "QCs"),
    (SampleType.UNKNOWN, "unknown", "unknowns"),
)
_DELIMITERS = {"\t": "tab", ",": "comma", ";": "semicolon", "|": "vertical bar"}


def _count(n: int, one: str, many: str) -> str:
    return f"{n} {one if n == 1 else many}"


def describe_import(run: Run) -> str:
    """Say what was read: file, sheets, layout, columns, metadata, points and warnings.

    Examples
    --------
    >>> from calib.run import Point, SourceInfo
    >>> points = tuple(Point("Nitrate", c, 0.1 * c, f"Run!C{i + 2}") for i, c in enumerate([1, 2, 5]))
    >>> run = Run(SourceInfo("n.xlsx", "ab" * 32, sheet="Run", layout="long"), points,
    ...           metadata={"instrument": "IC-2"}, units={"concentration": "mg/L"})
    >>> print(describe_import(run))
    File:      n.xlsx (SHA-256 abababababab...)
    Sheet:     Run
    Layout:    long (one row per injection)
    Metadata:  instrument: IC-2
    Units:     concentration mg/L
    Analytes:  1
      Nitrate: 3 standards at 3 concentrations (1 to 5 mg/L)
    """
    src = run.source
    lines = [f"File:      {src.file} (SHA-256 {src.sha256[:12]}...)"]
    if src.sheet is not None:
        lines.append(f"Sheet:     {src.sheet}")
    elif len(src.sheets) > 1:
        lines.append("Sheets:    " + ", ".join(src.sheets))
    lines.append(f"Layout:    {_LAYOUTS.get(src.layout, src.layout)}")
    if src.encoding is not None:
        text = [_TEXT.get(src.encoding, src.encoding)]
        if src.delimiter is not None:
            text.append(f"{_DELIMITERS.get(src.delimiter, repr(src.delimiter))}-separated")
        if src.decimal_mark is not None:
            text.append(f"decimal {'comma' if src.decimal_mark == ',' else 'point'}")
        lines.append("Text:      " + ", ".join(text))
    if src.import_map is not None:
        lines.append(f"Map:       {src.import_map}")
    if src.tables:
        lines.append("Tables:    " + ", ".join(src.tables))
    if src.columns:
        lines.append("Columns:")
        lines.extend(f"  {column}" for column in src.columns)
    if src.ignored_columns:
        lines.append("Ignored:")
        lines.extend(f"  {column}" for column in src.ignored_columns)
    if run.metadata:
        items = [f"{key}: {value}" for key, value in run.metadata.items()]
        lines.append("Metadata:  " + items[0])
        lines.extend(f"           {item}" for item in items[1:])
    if run.units:
        lines.append("Units:     " + "; ".join(f"{k} {v}" for k, v in run.units.items()))
    # One pass over the points, not one per analyte: exports hold hundreds of analytes.
    by_analyte: dict[str, list[Point]] = {}
    for point in run.points:
        by_analyte.setdefault(point.analyte, []).append(point)
    lines.append(f"Analytes:  {len(by_analyte)}")
    for analyte, own in by_analyte.items():
        kinds = Counter(p.sample_type for p in own)
        standards = [p for p in own if p.sample_type is SampleType.STANDARD]
        levels = sorted({p.concentration for p in standards})
        unit = run.units_of(analyte).get("concentration")
        parts = []
        for kind, one, many in _KINDS:
            if not kinds[kind]:
                continue
            part = _count(kinds[kind], one, many)
            if kind is SampleType.STANDARD and levels:
                span = f"{levels[0]:g} to {levels[-1]:g}" + (f" {unit}" if unit else "")
                part += f" at {_count(len(levels), 'concentration', 'concentrations')} ({span})"
            parts.append(part)
        excluded = sum(not p.included for p in own)
        if excluded:
            parts.append(f"{excluded} excluded")
        if any(p.is_response is not None for p in own):
            parts.append("response = area ratio to the internal standard")
        own_units = run.analyte_units.get(analyte)
        if own_units:
            parts.append("units " + ", ".join(f"{k} {v}" for k, v in own_units.items()))
        lines.append(f"  {analyte}: " + ", ".join(parts))
    excluded_points = [p for p in run.points if not p.included]
    if excluded_points:
        lines.append("Excluded:")
        lines.extend(f"  {p.source_cell} ({p.analyte}): {p.exclusion_reason}"
                     for p in excluded_points)
    if run.warnings:
        lines.append("Warnings:")
        lines.extend(f"  {warning}" for warning in run.warnings)
    return "\n".join(lines)
