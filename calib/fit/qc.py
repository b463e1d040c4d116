"""QC acceptance: how many quality-control samples read back within tolerance of nominal.

Shared by the checks (the profile's ``qc`` rule) and ``calib quantify``, so it
lives below both, with what both do before judging: a point's dilution factor
(:func:`dilution_of`), injections grouped into samples (:func:`sample_numbers`),
the mean of each sample's usable readings (:func:`sample_means`) and the QCs
read back from a curve (:func:`qc_found`).

The rule (ICH M10, 2022, section 4.4, from memory): at least 2/3 of all QC
samples within ±15 % of their nominal concentration (±20 % at the LLOQ), and
at least half of the QCs at each concentration level.  Each figure is a
parameter of the profile's ``qc`` rule.

A QC that cannot be read back (no reading, or a response the curve never
reaches) counts as outside tolerance.  Shares are compared after rounding to
0.1 %, so that "at least 2/3" written as 66.7 % admits 4 of 6 QCs (66.67 %).
"""

from __future__ import annotations

import math
from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from calib.fit.calcurve import CalibrationCurve
    from calib.run import Point

__all__ = ["QcLevel", "QcOutcome", "QcRule", "QcSummary", "dilution_of", "judge_qcs",
           "qc_found", "sample_means", "sample_numbers"]

_PASS, _FAIL, _NOT_EVALUATED = "pass", "fail", "not-evaluated"


@dataclass(frozen=True)
class QcRule:
    """The parameters of the QC acceptance rule.

    Attributes
    ----------
    tolerance_pct : float
        Allowed |deviation| from nominal, in % (ICH M10: 15).
    lloq_tolerance_pct : float
        Allowed |deviation| for a QC at the LLOQ (ICH M10: 20).
    min_pass_pct : float
        Share of all QCs that must be within tolerance (ICH M10: 2/3, written 66.7).
    min_level_pass_pct : float
        Share at each level that must be within tolerance (ICH M10: 50).
    min_levels, min_per_level : int
        The least QC design judged: concentration levels inside the range, and
        QCs at each (ICH M10: 3 levels, in duplicate); 0 asks for none.
    severity : str
        ``reject``, ``review`` or ``info``: what a failure does to the batch.
    source : str
        Where the figures come from, in words.
    """

    tolerance_pct: float = 15.0
    lloq_tolerance_pct: float = 20.0
    min_pass_pct: float = 66.7
    min_level_pass_pct: float = 50.0
    min_levels: int = 0
    min_per_level: int = 0
    severity: str = "review"
    source: str = "calib's defaults for the qc rule (ICH M10 figures, from memory)"

    @classmethod
    def from_params(cls, params: Mapping[str, Any], *, severity: str, source: str) -> QcRule:
        """The rule with a profile rule's parameters (missing ones take the defaults)."""
        known: dict[str, Any] = {
            k: float(v) for k, v in params.items()
            if k in ("tolerance_pct", "lloq_tolerance_pct", "min_pass_pct",
                     "min_level_pass_pct") and v is not None}
        known.update({k: int(v) for k, v in params.items()
                      if k in ("min_levels", "min_per_level") and v is not None})
        return cls(**known, severity=severity, source=source)

    def as_dict(self) -> dict[str, Any]:
        """The rule as JSON-ready data."""
        return {"tolerance_pct": self.tolerance_pct, "lloq_tolerance_pct": self.lloq_tolerance_pct,
                "min_pass_pct": self.min_pass_pct, "min_level_pass_pct": self.min_level_pass_pct,
                "min_levels": self.min_levels, "min_per_level": self.min_per_level,
                "severity": self.severity, "source": self.source}


@dataclass(frozen=True)
class QcOutcome:
    """One QC sample judged against its nominal concentration.

    Attributes
    ----------
    sample_id : str
        The QC's name.
    nominal : float
        Nominal concentration.
    found : float or None
        Concentration read back (dilution applied); None when it could not be read back.
    deviation_pct : float or None
        100·(found − nominal)/nominal.
    allowed_pct : float
        The tolerance applied (the LLOQ tolerance for a QC at the LLOQ).
    at_lloq : bool
        Whether the QC's nominal concentration is the LLOQ.
    within : bool
        |deviation| ≤ allowed (as printed, to 0.1 %) and the nominal inside the range.
    in_range : bool
        Whether the nominal concentration lies inside the curve's range (LLOQ to ULOQ).
    """

    sample_id: str
    nominal: float
    found: float | None
    deviation_pct: float | None
    allowed_pct: float
    at_lloq: bool
    within: bool
    in_range: bool = True


@dataclass(frozen=True)
class QcLevel:
    """The QCs at one nominal concentration."""

    nominal: float
    n: int
    n_within: int
    share_pct: float
    ok: bool


@dataclass(frozen=True)
class QcSummary:
    """The QC rule applied to one analyte's QCs.

    Attributes
    ----------
    analyte : str
        Analyte name.
    rule : QcRule
        The parameters applied.
    outcomes : tuple of QcOutcome
        Every QC, in the order given.
    levels : tuple of QcLevel
        Per nominal concentration, lowest first.
    n, n_within : int
        QCs judged, and those within tolerance.
    share_pct : float
        100·n_within/n (``nan`` without QCs).
    verdict : str
        ``pass``, ``fail`` or ``not-evaluated`` (no QC samples).
    detail : str
        One sentence saying why.
    """

    analyte: str
    rule: QcRule
    outcomes: tuple[QcOutcome, ...]
    levels: tuple[QcLevel, ...]
    n: int
    n_within: int
    share_pct: float
    verdict: str
    detail: str


def _meets(count: int, total: int, limit_pct: float) -> bool:
    return total > 0 and round(100 * count / total, 1) >= limit_pct


def _figure(value: float) -> str:
    return f"{value:.4g}"


def _design_short(levels: Sequence[QcLevel], outcomes: Sequence[QcOutcome], rule: QcRule,
                  unit: str) -> str:
    """Why the QCs fall short of the rule's minimum design, or ``""``."""
    inside = [lv for lv in levels
              if all(o.in_range for o in outcomes if math.isclose(o.nominal, lv.nominal,
                                                                   rel_tol=1e-9))]
    problems = []
    if len(inside) < rule.min_levels:
        problems.append(f"QCs at {len(inside)} concentration level{'s' if len(inside) != 1 else ''}"
                        f" inside the range, at least {rule.min_levels} required")
    thin = [lv for lv in inside if lv.n < rule.min_per_level]
    if thin:
        problems.append(f"fewer than {rule.min_per_level} QCs at " + ", ".join(
            f"{_figure(lv.nominal)}{unit} ({lv.n})" for lv in thin))
    if not problems:
        return ""
    return ("the QC design is too small to judge the run: " + "; ".join(problems)
            + " (e.g. low, medium and high QCs, at least in duplicate, ICH M10 from memory)")


def judge_qcs(
    qcs: Sequence[tuple[str, float, float | None]],
    *,
    lloq: float | None,
    rule: QcRule | None = None,
    analyte: str = "",
    unit: str | None = None,
    uloq: float | None = None,
) -> QcSummary:
    """Apply the QC acceptance rule to one analyte's QCs.

    Parameters
    ----------
    qcs : sequence of (sample_id, nominal, found)
        ``found`` is the concentration read back with the dilution factor
        applied, or None when the QC could not be read back.
    lloq : float or None
        The curve's LLOQ; a QC whose nominal equals it (to 1 part in 10⁶) gets
        the LLOQ tolerance.  A QC whose nominal lies below it (or above ``uloq``)
        is outside the range and counts as failing.
    rule : QcRule, optional
        The parameters; the defaults (ICH M10 figures) when None.
    analyte, unit : str, optional
        For the explanation.
    uloq : float, optional
        The curve's ULOQ (the top of the range).

    Returns
    -------
    QcSummary

    Examples
    --------
    Four of six QCs within ±15 % (66.7 %), one of two at each level: the rule holds.

    >>> qcs = [("L1", 3, 3.2), ("L2", 3, 4.0), ("M1", 40, 41), ("M2", 40, 52),
    ...        ("H1", 80, 79), ("H2", 80, 83)]
    >>> summary = judge_qcs(qcs, lloq=1.0)
    >>> summary.verdict, summary.n_within, [lv.n_within for lv in summary.levels]
    ('pass', 4, [1, 1, 2])
    """
    rule = rule or QcRule()
    outcomes = []
    for sample_id, nominal, found in qcs:
        at_lloq = lloq is not None and math.isclose(nominal, lloq, rel_tol=1e-6)
        allowed = rule.lloq_tolerance_pct if at_lloq else rule.tolerance_pct
        dev = None
        if found is not None and math.isfinite(found) and nominal > 0:
            dev = 100 * (found - nominal) / nominal
        # Within the range, allowing for the last digit of concentrations read from a file.
        in_range = ((lloq is None or nominal >= lloq * (1 - 1e-9))
                    and (uloq is None or nominal <= uloq * (1 + 1e-9)))
        # Compared as printed ("−15.0 %"): the limit is inclusive at the reported precision.
        within = (in_range and dev is not None
                  and abs(float(f"{dev:.1f}")) <= allowed)
        outcomes.append(QcOutcome(str(sample_id), float(nominal),
                                  None if found is None else float(found), dev, allowed,
                                  at_lloq, within, in_range))
    n = len(outcomes)
    n_within = sum(o.within for o in outcomes)
    if n == 0:
        return QcSummary(analyte, rule, (), (), 0, 0, math.nan, _NOT_EVALUATED,
                         "No QC samples of this analyte in the batch.")
    levels = []
    for nominal in sorted({o.nominal for o in outcomes}):
        members = [o for o in outcomes if math.isclose(o.nominal, nominal, rel_tol=1e-9)]
        k = sum(o.within for o in members)
        levels.append(QcLevel(nominal, len(members), k, 100 * k / len(members),
                              _meets(k, len(members), rule.min_level_pass_pct)))
    share = 100 * n_within / n
    overall = _meets(n_within, n, rule.min_pass_pct)
    weak = [lv for lv in levels if not lv.ok]
    u = f" {unit}" if unit else ""
    detail = (f"{n_within} of {n} QCs ({share:.1f} %) within ±{rule.tolerance_pct:g} % of nominal "
              f"(±{rule.lloq_tolerance_pct:g} % at the LLOQ); at least {rule.min_pass_pct:g} % "
              f"must be, and at least {rule.min_level_pass_pct:g} % at each level")
    if weak:
        detail += "; too few at " + ", ".join(
            f"{_figure(lv.nominal)}{u} ({lv.n_within} of {lv.n})" for lv in weak)
    beyond = [o for o in outcomes if not o.in_range]
    if beyond:
        ends = f"{_figure(lloq) if lloq is not None else '?'} to {_figure(uloq) if uloq is not None else '?'}"
        detail += (f"; outside the curve's range {ends}{u}, so read by extrapolation and counted "
                   "as failing: " + ", ".join(f"{o.sample_id} (nominal {_figure(o.nominal)}{u})"
                                             for o in beyond))
    outside = [o for o in outcomes if not o.within and o.in_range]
    if outside:
        detail += "; outside: " + ", ".join(
            f"{o.sample_id} ({'not read back' if o.deviation_pct is None else f'{o.deviation_pct:+.1f} %'})"
            for o in outside)
    short = _design_short(levels, outcomes, rule, u)
    if short:
        detail += "; " + short
    verdict = _PASS if overall and not weak and not short else _FAIL
    return QcSummary(analyte, rule, tuple(outcomes), tuple(levels), n, n_within, share, verdict,
                     detail + ".")


def dilution_of(point: Any) -> float:
    """The dilution factor of a point: its own when its reader gives a usable one, else 1.

    Examples
    --------
    >>> from calib.run import Point
    >>> dilution_of(Point("A", float("nan"), 1.0, "S!C2"))
    1.0
    """
    value = getattr(point, "dilution_factor", None)
    if isinstance(value, (int, float)) and not isinstance(value, bool) and value > 0 \
            and math.isfinite(value):
        return float(value)
    return 1.0


def sample_numbers(keys: Iterable[Hashable]) -> np.ndarray:
    """The sample of each injection: equal keys are one sample, numbered by first appearance.

    Examples
    --------
    >>> sample_numbers([("QC-L", 1.0), ("QC-M", 1.0), ("QC-L", 1.0), ("QC-L", 10.0)]).tolist()
    [0, 1, 0, 2]
    """
    index: dict[Hashable, int] = {}
    return np.array([index.setdefault(key, len(index)) for key in keys], dtype=np.int64)


def sample_means(sample: np.ndarray, response: np.ndarray, usable: np.ndarray,
                 count: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """m and ȳ₀ of each sample: the number and mean of its usable readings.

    Below 8 readings the readings are added one after the other in file order
    (the figure of Python's ``sum``, and of numpy's for so few terms); from 8
    on, ``np.mean`` of them.  A sample without a usable reading has m = 0 and
    ȳ₀ ``nan``.

    Examples
    --------
    >>> m, mean = sample_means(np.array([0, 0, 1]), np.array([1.0, 2.0, 5.0]),
    ...                        np.array([True, True, False]))
    >>> m.tolist(), mean.tolist()
    ([2, 0], [1.5, nan])
    """
    count = int(sample.max()) + 1 if count is None and sample.size else (count or 0)
    m = np.bincount(sample[usable], minlength=count)
    # bincount adds each sample's readings in file order, one after the other, as sum() does.
    total = np.bincount(sample[usable], weights=response[usable], minlength=count)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = total / m
    big = np.flatnonzero(m >= 8)
    if big.size:
        order = np.argsort(sample, kind="stable")
        bounds = np.searchsorted(sample[order], np.arange(count + 1))
        for g in big.tolist():
            members = order[bounds[g]:bounds[g + 1]]
            mean[g] = float(np.mean(response[members[usable[members]]]))
    return m, mean


def qc_found(curve: CalibrationCurve, qcs: Sequence[Point]
             ) -> list[tuple[str, float, float | None]]:
    """(sample id, nominal, D·x₀) of each QC sample read back from ``curve``; None when it is not.

    Injections of one sample id at one dilution are one sample (a QC without
    an id is one injection); its usable readings are averaged
    (:func:`sample_means`) and read back from the curve, in order of first
    appearance, as ``calib quantify`` reads them.
    """
    dilution = [dilution_of(p) for p in qcs]
    sample = sample_numbers(zip((p.sample_id or p.source_cell for p in qcs), dilution))
    response = np.array([p.response for p in qcs], dtype=float)
    usable = np.array([p.included for p in qcs], dtype=bool) & np.isfinite(response)
    m, mean = sample_means(sample, response, usable)
    first = np.unique(sample, return_index=True)[1].tolist()
    out: list[tuple[str, float, float | None]] = []
    for g, i in enumerate(first):
        point, found = qcs[i], None
        if m[g]:
            x0 = float(curve.concentration_at(float(mean[g]))[0])
            found = dilution[i] * x0 if math.isfinite(dilution[i] * x0) else None
        out.append((point.sample_id or point.source_cell, float(point.concentration or 0.0),
                    found))
    return out
