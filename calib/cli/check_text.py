"""How much of a checked run ``calib check`` prints: brief, default or full.

- brief: one line per analyte (verdict and the short names of the checks that
  failed or warned) and the run's verdict line;
- default: the verdicts with their reasons (printed before, by
  :func:`calib.export.verdict_text`), one line per curve, and only of the curves
  not accepted the fit table and the checks that failed or warned;
- full: every check of every curve (:func:`calib.cli.render.assessment_text`).

Several run files end with one summary table (:func:`summary_text`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from calib.cli.render import curve_text, num
from calib.verdict_words import VERDICT_WORDS as _WORDS

if TYPE_CHECKING:
    from calib.checks.evaluate import CurveAssessment, RunAssessment

# Worst first: the order a summary ranks runs by, and how one exit code is chosen.
RANK = {"accepted": 0, "needs-review": 1, "rejected": 2, "unusable": 3}


@dataclass(frozen=True)
class RunLine:
    """One run file of several: its name, verdict, curve counts, or why it could not be used."""

    file: str
    verdict: str
    curves: int = 0
    not_accepted: int = 0
    error: str = ""


def findings(curve: CurveAssessment) -> list[str]:
    """Short names of the checks that failed or warned (information-only checks left out).

    Examples
    --------
    >>> from types import SimpleNamespace as S
    >>> c = S(checks=[S(id="outliers", verdict=S(value="warn"), severity=S(value="review")),
    ...               S(id="weighting-advice", verdict=S(value="warn"), severity=S(value="info")),
    ...               S(id="min-levels", verdict=S(value="pass"), severity=S(value="reject"))])
    >>> findings(c)
    ['outliers']
    """
    return [c.id for c in curve.checks
            if c.verdict.value in ("fail", "warn") and c.severity.value != "info"]


def brief_text(assessment: RunAssessment) -> str:
    """One line per analyte and the run verdict.

    The analyte names are padded to one column so the verdicts line up.
    """
    width = max((len(c.analyte) for c in assessment.curves), default=0)
    lines = [_header(assessment)]
    for curve in assessment.curves:
        found = findings(curve)
        if curve.fit is None:
            found = [f"not fitted: {curve.unfitted_reason}"]
        lines.append(f"  {curve.analyte:<{width}}  {_WORDS[curve.verdict.value]:<12}"
                     f"  {', '.join(found)}".rstrip())
    lines.append(_run_line(assessment))
    return "\n".join(lines)


def default_text(assessment: RunAssessment) -> str:
    """One line per curve (verdict, slope, R², LOD, findings); details of the curves not accepted."""
    unit = assessment.run.units.get("concentration")
    width = max((len(c.analyte) for c in assessment.curves), default=0)
    lines = [_header(assessment)]
    for w in assessment.run.warnings:
        lines.append(f"  Import note: {w}")
    if assessment.standards is not None:
        lines.append("  Reference materials: " + "; ".join(
            f"{m.id} lot {m.lot} ({m.value:g} ± {m.uncertainty:g} {m.unit}, expires "
            f"{m.expires.isoformat()})" if m.uncertainty is not None else
            f"{m.id} lot {m.lot} ({m.value:g} {m.unit}, expires {m.expires.isoformat()})"
            for m in assessment.standards.materials))
    for curve in assessment.curves:
        fit = curve.fit
        numbers = ("not fitted" if fit is None else
                   f"slope {num(fit.coefficients.get('slope'))}"
                   f"  R² {num(fit.r_squared, 6)}"
                   + (f"  LOD {num(curve.lod.value, 3)}" if curve.lod else ""))
        found = findings(curve)
        lines.append(f"  {curve.analyte:<{width}}  {_WORDS[curve.verdict.value]:<12}  {numbers}"
                     + (f"  [{', '.join(found)}]" if found else ""))
    parts = ["\n".join(lines)]
    for curve in assessment.curves:
        if curve.verdict.value != "accepted":
            parts.append(_findings_text(curve, unit))
    parts.append(_run_line(assessment)
                 + "\n(every check of every curve: add --full; one line per analyte: --brief)")
    return "\n\n".join(parts)


def summary_text(runs: Sequence[RunLine]) -> str:
    """The closing table of several run files, and the worst verdict among them.

    Examples
    --------
    >>> print(summary_text([RunLine("a.xlsx", "accepted", 6),
    ...                     RunLine("b.csv", "needs-review", 4, 1),
    ...                     RunLine("c.txt", "unusable", error="c.txt: no standards found")]))
    Summary of 3 run files:
      a.xlsx  ACCEPTED      6 curves
      b.csv   NEEDS REVIEW  4 curves, 1 not accepted
      c.txt   UNUSABLE      c.txt: no standards found
    Worst verdict: UNUSABLE
    """
    width = max(len(r.file) for r in runs)
    lines = [f"Summary of {len(runs)} run file{'s' if len(runs) != 1 else ''}:"]
    for r in runs:
        what = (r.error if r.verdict == "unusable" else
                f"{r.curves} curve{'s' if r.curves != 1 else ''}"
                + (f", {r.not_accepted} not accepted" if r.not_accepted else ""))
        lines.append(f"  {r.file:<{width}}  {_WORDS[r.verdict]:<12}  {what}")
    lines.append(f"Worst verdict: {_WORDS[worst(runs)]}")
    return "\n".join(lines)


def worst(runs: Sequence[RunLine]) -> str:
    """The worst verdict of several runs (unusable > rejected > needs-review > accepted).

    Examples
    --------
    >>> worst([RunLine("a", "accepted"), RunLine("b", "rejected"), RunLine("c", "needs-review")])
    'rejected'
    """
    return max((r.verdict for r in runs), key=RANK.__getitem__, default="accepted")


def _header(assessment: RunAssessment) -> str:
    src = assessment.run.source
    return (f"{src.file}{f' [{src.sheet}]' if src.sheet else ''} · profile "
            f"{assessment.profile.name} v{assessment.profile.version} · model "
            f"{assessment.model.value}, weighting {assessment.weighting.value}")


def _run_line(assessment: RunAssessment) -> str:
    n = len(assessment.curves)
    counts = {v: sum(c.verdict.value == v for c in assessment.curves)
              for v in ("accepted", "needs-review", "rejected")}
    summary = ", ".join(f"{k} {v}" for k, v in counts.items() if v)
    return (f"Run verdict: {_WORDS[assessment.verdict.value]} "
            f"({n} curve{'s' if n != 1 else ''}: {summary})")


def _findings_text(curve: CurveAssessment, unit: str | None) -> str:
    """A not-accepted curve: its fit table, the checks that failed or warned, excluded points."""
    keep: list[str] = []
    in_checks = showing = False
    for line in curve_text(curve, unit=unit).splitlines():
        if line == "  checks:":
            in_checks = True
            keep.append("  findings:")
            continue
        if in_checks and line.startswith("    "):
            if not line.startswith("      "):  # a check's first line: a finding or not
                words = line.split()
                showing = words[0] in ("FAIL", "warn") and words[1] != "info"
            if showing:
                keep.append(line)
            continue
        in_checks = False
        keep.append(line)
    return "\n".join(keep)
