"""A quantified batch as plain text for the terminal, from its ``calib.quantify/1`` document."""

from __future__ import annotations

import math
import textwrap
from collections.abc import Mapping, Sequence
from typing import Any

from calib.verdict_words import VERDICT_WORDS as _VERDICTS

__all__ = ["batch_text"]

_QC = {"pass": "pass", "fail": "FAIL", "not-evaluated": "not evaluated"}


def _num(value: Any, digits: int = 4) -> str:
    """A number in ``digits`` significant digits, an em dash where there is none.

    Examples
    --------
    >>> _num(0.0123456), _num(None), _num(float("nan"))
    ('0.01235', '—', '—')
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return "—"
    return f"{value:.{digits}g}"


def _table(rows: Sequence[Sequence[str]], right: set[int]) -> list[str]:
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    out = []
    for row in rows:
        cells = [c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in
                 enumerate(zip(row, widths))]
        out.append("  " + "  ".join(cells).rstrip())
    return out


def _curve_line(c: Mapping[str, Any]) -> str:
    if c.get("not_fitted"):
        return f"{c['analyte']}: curve not fitted ({c['not_fitted']}); its samples are not quantified"
    unit = f" {c['unit']}" if c.get("unit") else ""
    status = {"forced": f" — {_VERDICTS['rejected']} CURVE USED ON REQUEST (--force)",
              "refused": " — samples not quantified"}.get(str(c.get("status")), "")
    lod = f", LOD {_num(c.get('lod'), 3)}{unit}" if c.get("lod") is not None else ""
    return (f"{c['analyte']}: curve {_VERDICTS.get(str(c.get('verdict')), c.get('verdict'))}"
            f"{status}\n  {c['model']}, weighting {c['weighting']}; range "
            f"{_num(c['x_min'])}–{_num(c['x_max'])}{unit} (LLOQ {_num(c['lloq'])}, ULOQ "
            f"{_num(c['uloq'])}){lod}; {100 * c['confidence']:g} % intervals by the "
            f"{c['interval_method']}, t = {_num(c.get('t_critical'))} on {c['residual_df']} df"
            + _lod_remark(c, unit))


def _lod_remark(c: Mapping[str, Any], unit: str) -> str:
    """A line when the LOD lies above the LLOQ: the low end needs a look before reporting.

    Examples
    --------
    >>> _lod_remark({"lod": 0.0105, "lloq": 0.01}, " mg/L").strip()[:46]
    'Remark: the LOD (0.0105 mg/L) lies above the L'
    >>> _lod_remark({"lod": 0.004, "lloq": 0.01}, "")
    ''
    """
    lod, lloq = c.get("lod"), c.get("lloq")
    if not (isinstance(lod, (int, float)) and isinstance(lloq, (int, float)) and lod > lloq):
        return ""
    return (f"\n  Remark: the LOD ({_num(lod, 3)}{unit}) lies above the LLOQ ({_num(lloq, 3)}"
            f"{unit}), the lowest standard: the curve cannot tell it from a blank; review the "
            "low end before reporting results near the LLOQ")


def _samples(samples: Sequence[Mapping[str, Any]], level: str, unit: str | None) -> list[str]:
    conc = f"concentration ({unit})" if unit else "concentration"
    rows = [["sample", "type", "n", "mean response", conc, "SE", f"{level} interval",
             "dilution", "reported", "flags"]]
    for s in samples:
        interval = (f"{_num(s['ci_low'])} to {_num(s['ci_high'])}"
                    if s.get("ci_low") is not None else "—")
        rows.append([str(s["sample_id"]), str(s["sample_type"]), str(s["n_replicates"]),
                     _num(s.get("mean_response"), 5), _num(s.get("concentration")),
                     _num(s.get("std_error"), 3), interval, _num(s["dilution_factor"]),
                     str(s["reported"]), ", ".join(s["flags"]) or "—"])
    lines = _table(rows, {2, 3, 4, 5, 7})
    # A refused curve is explained once, on the curve's line.
    lines += [f"  {s['sample_id']}: {s['note']}" for s in samples
              if s.get("note") and "curve-rejected" not in s["flags"]]
    return lines


def _qc(qc: Mapping[str, Any]) -> list[str]:
    if not qc.get("outcomes"):
        return [f"  QC: {_QC[qc['verdict']]} — {qc['detail']}"]
    rows = [["QC", "nominal", "found", "deviation %", "allowed %", "within"]]
    for o in qc["outcomes"]:
        dev = "—" if o.get("deviation_pct") is None else f"{o['deviation_pct']:+.1f}"
        rows.append([o["sample_id"], _num(o["nominal"]), _num(o.get("found")), dev,
                     f"±{o['allowed_pct']:g}", "yes" if o["within"] else "NO"])
    wrapped = textwrap.fill(f"QC rule ({qc['severity']}): {_QC[qc['verdict']]}. {qc['detail']}",
                            width=100, initial_indent="  ", subsequent_indent="    ")
    return [*_table(rows, {1, 2, 3, 4}), wrapped]


def batch_text(document: Mapping[str, Any]) -> str:
    """The batch as the terminal shows it: curve source, each analyte's samples and QC, verdict.

    Examples
    --------
    >>> doc = {"curve": {"kind": "record", "record_id": "CR-1", "file": "r.json"},
    ...        "samples_source": {"file": "s.csv", "from_run": False}, "curves": [],
    ...        "samples": [], "qc": {"analytes": []}, "verdict": "accepted", "reasons": [],
    ...        "notes": [], "forced": False, "cautions": "Check."}
    >>> print(batch_text(doc).splitlines()[0])
    Curve: record CR-1 (r.json) · samples: s.csv
    """
    curve = document["curve"]
    origin = (f"record {curve['record_id']} ({curve['file']})" if curve.get("record_id")
              else f"run file {curve['file']}")
    samples_from = document["samples_source"]
    where = ("the run file's unknowns and QCs" if samples_from.get("from_run")
             else samples_from["file"])
    parts = [f"Curve: {origin} · samples: {where}"]
    if document.get("forced"):
        parts.append("FORCED: samples were quantified against a rejected curve on request "
                     f"(--force): {', '.join(document['forced_analytes'])}. These results "
                     "carry the flag 'forced'.")
    qcs = {q["analyte"]: q for q in document["qc"]["analytes"]}
    for c in document["curves"]:
        mine = [s for s in document["samples"] if s["analyte"] == c["analyte"]]
        if not mine:
            continue
        block = [_curve_line(c)]
        level = f"{100 * c['confidence']:g} %" if c.get("confidence") else "95 %"
        block += _samples(mine, level, c.get("unit"))
        if c["analyte"] in qcs:
            block += _qc(qcs[c["analyte"]])
        parts.append("\n".join(block))
    for note in document.get("notes", []):
        parts.append(textwrap.fill(f"Note: {note}", width=100))
    verdict = _VERDICTS.get(document["verdict"], document["verdict"])
    reasons = "; ".join(document.get("reasons") or [])
    parts.append(f"Batch verdict: {verdict}" + (f" ({reasons})" if reasons else ""))
    parts.append(textwrap.fill("Caution: " + str(document.get("cautions", "")), width=100))
    return "\n\n".join(parts)
