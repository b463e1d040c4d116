"""The 1/s2 variance function worked out here, independently of calib.fit.design.

s²(x) = exp(c)·x^θ from the level variances: numpy's polyfit of ln s²ⱼ − [ψ(νⱼ/2) − ln(νⱼ/2)]
on ln xⱼ with weights 1/√ψ′(νⱼ/2) (polyfit's weights multiply the residuals), νⱼ = nⱼ − 1; the bias
of a log sample variance, E ln(s²/σ²) = ψ(ν/2) − ln(ν/2), is the standard result for a
χ²_ν/ν variable (from memory), with scipy's digamma.
"""

from __future__ import annotations

import numpy as np
from scipy.special import digamma, polygamma


def smoothed_s2(x: np.ndarray, y: np.ndarray) -> dict[float, float]:
    """Level → fitted variance s²(level)."""
    levels = np.unique(x)
    s2 = np.array([np.var(y[x == c], ddof=1) for c in levels])
    nu = np.array([np.sum(x == c) - 1 for c in levels], dtype=float)
    target = np.log(s2) - (digamma(nu / 2) - np.log(nu / 2))
    # Weighted by 1/Var ln s² = 1/ψ′(ν/2) (trigamma, scipy's polygamma(1, ·)).
    theta, c = np.polyfit(np.log(levels), target, 1, w=np.sqrt(1 / polygamma(1, nu / 2)))
    return {float(v): float(np.exp(c + theta * np.log(v))) for v in levels}
