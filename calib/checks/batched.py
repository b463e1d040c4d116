"""Diagnostics of the curves of a run that share a design, worked out together.

The analytes of a run are usually measured in the same injections: their standards
share the concentrations, the weights (when those follow x) and the injection order.
For every such group this module works out at once, over a (curves × points) array,
what the rules would otherwise compute one curve at a time: the lack-of-fit split, the
shape of the detectable bend, the comparison quadratic behind Mandel's test and the
quadratic-term test (one QR for the group, :func:`calib.fit.wls_many.solve_wls_many`),
the residual trend with injection order, and Bartlett's test across the levels.

The results are the per-curve result classes of :mod:`calib.fit.linearity` and
:mod:`calib.fit.homogeneity` with the same definitions, so a rule reads them exactly as
it reads its own (``CurveContext.shared``); the figures agree with the per-curve
functions to rounding (``tests/checks/test_batched_diagnostics.py`` compares them).  A
curve for which the per-curve function would give a reason instead of a test (no
replicates, no scatter, too few levels) — or that comes near such a boundary — gets no
precomputed figure: its rule works it out alone and says why in its own words.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from calib.fit.curve import CurveFit, response_sums, weighted_ss
from calib.fit.design import design_matrix
from calib.fit.distributions import chi2_sf
from calib.fit.homogeneity import BartlettTest
from calib.fit.linearity import DriftTest, LackOfFit, MandelTest, QuadraticTerm
from calib.fit.outliers import Influence
from calib.fit.power import detectable_bend_pct
from calib.fit.wls_many import solve_wls_many
from calib.options import Model
from calib.run import Point

__all__ = ["Precomputed", "precompute"]

#: A sum of squares at most this share of the response spread is left to the per-curve
#: functions, which judge whether it is rounding (their thresholds are 1e-20 and below).
_CLEAR = 1e-6


@dataclass(frozen=True, eq=False)
class Precomputed:
    """One curve's diagnostics, worked out with the other curves of its design group.

    Each field is None where the curve's rule must work the figure out itself.

    Attributes
    ----------
    fit : CurveFit
        The fit the figures belong to (a rule uses them only for this fit).
    lack_of_fit : LackOfFit or None
    bend_unit : float
        100·|q⊥ at the highest standard| / √(Σ w·q⊥²) of the design (see
        :func:`calib.fit.power.detectable_bend_pct`), or NaN.
    quadratic_term, mandel : QuadraticTerm or MandelTest or None
    drift : DriftTest or None
    bartlett : BartlettTest or None
    influence : Influence or None
        Leverage (from one QR of the group's design), studentized residuals, Cook's
        distance, as :func:`calib.fit.outliers.influence`.
    """

    fit: CurveFit
    lack_of_fit: LackOfFit | None = None
    bend_unit: float = math.nan
    quadratic_term: QuadraticTerm | None = None
    mandel: MandelTest | None = None
    drift: DriftTest | None = None
    bartlett: BartlettTest | None = None
    influence: Influence | None = None

    def detectable_bend_pct(self, sigma2: float, lam: float) -> float | None:
        """The bend of :func:`calib.fit.power.detectable_bend_pct` for this curve, or None
        when it was not worked out with the group."""
        if not math.isfinite(self.bend_unit):
            return None
        x = self.fit.x
        top = float(np.asarray(self.fit.predict(x[int(np.argmax(x))])).reshape(-1)[0])
        if sigma2 <= 0 or top == 0:
            return math.nan
        return self.bend_unit * math.sqrt(lam * sigma2) / abs(top)


def precompute(fits: Mapping[str, CurveFit],
               used: Mapping[str, Sequence[Point]]) -> dict[str, Precomputed]:
    """The shared diagnostics of every curve in ``fits`` that has a design partner.

    ``used`` holds each analyte's standards in its fit, in the order of ``fit.x`` (their
    injection orders group the curves for the drift test).
    """
    groups: dict[tuple, list[str]] = {}
    for analyte, fit in fits.items():
        key = (fit.model, fit.n_points - fit.residual_df, fit.x.tobytes(), fit.weights.tobytes())
        groups.setdefault(key, []).append(analyte)
    out: dict[str, Precomputed] = {}
    for names in groups.values():
        if len(names) < 2:
            continue
        members = [fits[a] for a in names]
        found: dict[str, list] = {name: [None] * len(names) for name in
                                  ("lack_of_fit", "quadratic_term", "mandel", "drift",
                                   "bartlett", "influence")}
        found["lack_of_fit"] = _lack_of_fit(members)
        if members[0].model is Model.LINEAR:
            found["quadratic_term"], found["mandel"] = _quadratic(members)
        found["bartlett"] = _bartlett(members)
        found["influence"] = _influence(members)
        found["drift"] = _drift_by_order(members, [used[a] for a in names])
        bend = (_bend_unit(members[0]) if members[0].model is Model.LINEAR else math.nan)
        for k, analyte in enumerate(names):
            out[analyte] = Precomputed(members[k], bend_unit=bend,
                                       **{name: values[k] for name, values in found.items()})
    return out


def _clear(ss: np.ndarray, fits: Sequence[CurveFit]) -> np.ndarray:
    """Where a sum of squares is clearly scatter, far from any rounding threshold."""
    sums = np.array([response_sums(f) for f in fits])
    return (ss > _CLEAR * sums[:, 0]) & (ss > _CLEAR**2 * sums[:, 1])


def _lack_of_fit(fits: Sequence[CurveFit]) -> list[LackOfFit | None]:
    first = fits[0]
    x, w = first.x, first.weights
    levels, index = np.unique(x, return_inverse=True)
    m, n = int(levels.size), first.n_points
    p = n - first.residual_df
    if n == m or m <= p:
        return [None] * len(fits)
    Y = np.array([f.y for f in fits])
    sums = np.bincount(index, weights=w, minlength=m)
    totals = np.zeros((len(fits), m))
    wy = w * Y
    for i, j in enumerate(index):  # point by point, as np.bincount adds them up
        totals[:, j] += wy[:, i]
    means = totals / sums
    ss_pure = np.sum(w * (Y - means[:, index]) ** 2, axis=1)
    weighted = bool(np.ptp(w) > 0)
    clear = _clear(ss_pure, fits)
    return [LackOfFit(weighted_ss(f) - float(ss), m - p, float(ss), n - m, m, weighted)
            if ok else None for f, ss, ok in zip(fits, ss_pure, clear)]


def _bend_unit(fit: CurveFit) -> float:
    """:func:`detectable_bend_pct` at σ² = λ = 1 and a fitted response of 1 at the top."""
    unit = np.zeros_like(fit.x)
    unit[int(np.argmax(fit.x))] = 1.0
    return detectable_bend_pct(fit.x, fit.weights, unit, 1.0, 1.0)


def _quadratic(fits: Sequence[CurveFit]) -> tuple[list[QuadraticTerm | None],
                                                   list[MandelTest | None]]:
    first = fits[0]
    n, none = first.n_points, [None] * len(fits)
    if n < 4 or np.unique(first.x).size < 3:
        return none, list(none)
    try:
        sol = solve_wls_many(design_matrix(first.x, Model.QUADRATIC),
                             np.array([f.y for f in fits]), first.weights)
    except ValueError:
        return none, list(none)
    weighted = bool(np.ptp(first.weights) > 0)
    clear = _clear(sol.weighted_ss, fits)
    terms: list[QuadraticTerm | None] = []
    tests: list[MandelTest | None] = []
    for f, beta, ss, ok in zip(fits, sol.beta, sol.weighted_ss, clear):
        if not ok:
            terms.append(None)
            tests.append(None)
            continue
        se = math.sqrt(float(ss) / (n - 3) * sol.unscaled_covariance[2, 2])
        terms.append(QuadraticTerm(float(beta[2]), se, n - 3, True, weighted))
        tests.append(MandelTest(n, weighted_ss(f) / (n - 2), float(ss) / (n - 3), weighted))
    return terms, tests


def _drift_by_order(fits: Sequence[CurveFit],
                    used: Sequence[Sequence[Point]]) -> list[DriftTest | None]:
    """The drift tests of the curves, those sharing an injection order together."""
    out: list[DriftTest | None] = [None] * len(fits)
    by_order: dict[tuple[float, ...], list[int]] = {}
    for k, points in enumerate(used):
        order = [p.injection_order for p in points]
        if len(order) == fits[k].n_points and all(o is not None for o in order):
            by_order.setdefault(tuple(float(o) for o in order), []).append(k)  # type: ignore[arg-type]
    for order, ks in by_order.items():
        if len(ks) < 2:
            continue
        for k, test in zip(ks, _drift(np.array(order), [fits[k] for k in ks])):
            out[k] = test
    return out


def _drift(t: np.ndarray, fits: Sequence[CurveFit]) -> list[DriftTest | None]:
    first = fits[0]
    none: list[DriftTest | None] = [None] * len(fits)
    if t.size < 3 or np.ptp(t) == 0:
        return none
    weighted = bool(np.ptp(first.weights) > 0)
    correlation = (float(np.corrcoef(t, first.x)[0, 1]) if np.ptp(first.x) > 0 else math.nan)
    E = np.array([np.sqrt(f.weights) * f.residuals for f in fits])
    clear = _clear(np.array([weighted_ss(f) for f in fits]), fits)
    try:
        sol = solve_wls_many(np.column_stack([np.ones_like(t), t]), E)
    except ValueError:
        return none
    df = t.size - 2
    out = []
    energy = np.sum(E * E, axis=1)
    for beta, ss, total, ok in zip(sol.beta, sol.weighted_ss, energy, clear):
        if not ok or not ss > _CLEAR * total:  # no trend-free scatter: left to residual_drift
            out.append(None)
            continue
        se = math.sqrt(float(ss) / df * sol.unscaled_covariance[1, 1])
        out.append(DriftTest(float(beta[1]), se, df, weighted, correlation))
    return out


def _bartlett(fits: Sequence[CurveFit]) -> list[BartlettTest | None]:
    first = fits[0]
    x, w = first.x, first.weights
    levels, index, counts = np.unique(x, return_inverse=True, return_counts=True)
    replicated = counts >= 2
    taking = tuple(float(v) for v in levels[replicated])
    left_out = tuple(float(v) for v in levels[~replicated])
    if len(taking) < 2:
        return [None] * len(fits)
    Y = np.array([f.y for f in fits])
    columns = []
    for j in np.flatnonzero(replicated):
        members = index == j
        scale = math.sqrt(float(np.mean(w[members])))
        columns.append(np.var(Y[:, members] * scale, ddof=1, axis=1))
    s2 = np.column_stack(columns)  # (K, k)
    n = counts[replicated]
    k, total = int(n.size), int(n.sum())
    dof = n - 1
    out: list[BartlettTest | None] = []
    for row in s2:
        if not np.all(row > 0):
            out.append(None)
            continue
        pooled = float(np.sum(dof * row) / (total - k))
        t = (total - k) * math.log(pooled) - float(np.sum(dof * np.log(row)))
        t /= 1 + (float(np.sum(1 / dof)) - 1 / (total - k)) / (3 * (k - 1))
        t = max(t, 0.0)
        out.append(BartlettTest(t, k - 1, float(chi2_sf(t, k - 1)),
                                tuple(float(v) for v in row), taking, left_out))
    return out


def _influence(fits: Sequence[CurveFit]) -> list[Influence | None]:
    """The case diagnostics of :func:`calib.fit.outliers.influence`, the leverage shared."""
    first = fits[0]
    n, nu = first.n_points, first.residual_df
    p = n - nu
    if nu < 2:
        return [None] * len(fits)
    w = first.weights
    A = design_matrix(first.x, first.model) * np.sqrt(w)[:, None]
    A = A / np.linalg.norm(A, axis=0)
    q, _ = np.linalg.qr(A)
    h = np.minimum(np.sum(q * q, axis=1), 1.0)
    one_minus_h = 1.0 - h
    free = one_minus_h > 1e-10
    E = np.array([np.sqrt(w) * f.residuals for f in fits])
    ss = np.array([float(np.sum(e * e)) for e in E])
    clear = _clear(ss, fits)
    sigma2 = ss / nu
    with np.errstate(divide="ignore", invalid="ignore"):
        standardized = np.where(free, E / np.sqrt(sigma2[:, None] * one_minus_h), np.nan)
        deleted = np.maximum(ss[:, None] - E * E / one_minus_h, 0.0) / (nu - 1)
        studentized = np.where(free, E / np.sqrt(deleted * one_minus_h), np.nan)
        cooks = np.where(free, E * E * h / (p * sigma2[:, None] * one_minus_h**2), np.nan)
    return [Influence(h.copy(), E[k], standardized[k], studentized[k], cooks[k], p, nu)
            if clear[k] and not fits[k].exact else None for k in range(len(fits))]
