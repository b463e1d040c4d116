"""Bartlett's test of equal variances across the replicated levels.

Why Bartlett and not Brown–Forsythe for a calibration: with three replicates the
median-centred deviations always include a zero at every level, which leaves the
Brown–Forsythe test with almost nothing to compare (simulated size 0.000 and power 0.025
against a 2,500-fold variance range).  Replicate injections of a standard are close to
normal, and under normality Bartlett's test is the likelihood-ratio test, with Bartlett's
correction keeping χ²(k − 1) accurate down to 2 degrees of freedom per level (simulated
sizes in ``bench/power.py``); its known weakness, sensitivity to heavy tails, is the price.
Bartlett (1937), Proc. R. Soc. Lond. A 160, 268–282; NIST/SEMATECH e-Handbook §1.3.5.7
(from memory).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

from calib.fit.distributions import chi2_sf

__all__ = ["BartlettTest", "bartlett_levels"]


@dataclass(frozen=True)
class BartlettTest:
    """Bartlett's test across the levels with 2 or more replicates.

    Attributes
    ----------
    statistic : float
        T, χ²(k − 1) under equal variances.
    df : int
        k − 1.
    p_value : float
        P(χ²(k − 1) ≥ T).
    variances : tuple of float
        Each level's replicate variance (of √w·y when weighted).
    levels, left_out : tuple of float
        Levels taking part, and those left out for a single replicate.
    reason : str
        Why the test could not be made ("" when it was).
    """

    statistic: float
    df: int
    p_value: float
    variances: tuple[float, ...]
    levels: tuple[float, ...]
    left_out: tuple[float, ...]
    reason: str = ""

    def rejects(self, alpha: float = 0.05) -> bool:
        """True when the variances differ significantly (p < α)."""
        return not self.reason and self.p_value < alpha


def bartlett_levels(x: Iterable[float], y: Iterable[float], *,
                    weights: Iterable[float] | None = None) -> BartlettTest:
    """Bartlett's test of the replicate variances (of √w̄·y when weighted) across levels.

    Notes
    -----
    T = [(N − k)·ln s_p² − Σ(nᵢ − 1)·ln sᵢ²] / C,
    C = 1 + (Σ 1/(nᵢ − 1) − 1/(N − k)) / (3(k − 1)), s_p² the pooled variance.

    Examples
    --------
    Checked against ``scipy.stats.bartlett`` in the tests:

    >>> t = bartlett_levels([1, 1, 1, 5, 5, 5], [1.0, 1.1, 1.3, 5.0, 5.6, 6.2])
    >>> t.df, round(t.statistic, 4)
    (1, 2.3608)
    """
    xs = np.asarray(list(x), dtype=float)
    ys = np.asarray(list(y), dtype=float)
    ws = np.ones_like(xs) if weights is None else np.asarray(list(weights), dtype=float)
    if not xs.shape == ys.shape == ws.shape:
        raise ValueError("x, y and weights must have the same length")
    levels, index, counts = np.unique(xs, return_inverse=True, return_counts=True)
    replicated = counts >= 2
    taking = tuple(float(v) for v in levels[replicated])
    left_out = tuple(float(v) for v in levels[~replicated])
    variances = []
    sizes = []
    for j in np.flatnonzero(replicated):
        members = index == j
        scale = math.sqrt(float(np.mean(ws[members])))
        variances.append(float(np.var(ys[members] * scale, ddof=1)))
        sizes.append(int(members.sum()))

    def unavailable(reason: str) -> BartlettTest:
        return BartlettTest(math.nan, max(len(taking) - 1, 0), math.nan, tuple(variances),
                            taking, left_out, reason)

    if len(taking) < 2:
        return unavailable(f"{len(taking)} level{'s' if len(taking) != 1 else ''} with "
                           "replicates; the test needs at least 2")
    s2 = np.array(variances)
    if np.any(s2 <= 0):
        return unavailable("the replicates agree exactly at a level, so its variance is 0 "
                           "and has no logarithm")
    n = np.array(sizes)
    k, total = int(n.size), int(n.sum())
    dof = n - 1
    pooled = float(np.sum(dof * s2) / (total - k))
    t = ((total - k) * math.log(pooled) - float(np.sum(dof * np.log(s2))))
    t /= 1 + (float(np.sum(1 / dof)) - 1 / (total - k)) / (3 * (k - 1))
    t = max(t, 0.0)  # equal variances give 0 less rounding; T ≥ 0 by Jensen's inequality
    return BartlettTest(t, k - 1, float(chi2_sf(t, k - 1)), tuple(variances), taking,
                        left_out)
