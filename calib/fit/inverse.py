"""Reading a concentration back from a quadratic curve (one rule for every caller)."""

from __future__ import annotations

import numpy as np

__all__ = ["quadratic_root"]


def quadratic_root(a: np.ndarray | float, b: np.ndarray | float, q: np.ndarray | float,
                   y: np.ndarray | float, lo: np.ndarray | float,
                   hi: np.ndarray | float) -> np.ndarray:
    """The root x of a + b·x + q·x² = y that lies in, or nearest to, the range [lo, hi].

    Elementwise over broadcast arrays.  When both roots lie in the range, the
    one nearer its middle is taken; ``nan`` where the curve never reaches y.

    Notes
    -----
    The two roots are formed as r₁ = B/q and r₂ = (a − y)/B with
    B = −(b + sign(b)·√(b² − 4q(a − y)))/2, which avoids the cancellation of
    the textbook formula when q·x is small next to b.

    Examples
    --------
    >>> float(quadratic_root(1.0, 2.0, 0.5, 11.5, 1.0, 5.0)[()])   # roots 3 and −7
    3.0
    """
    a, b, q, y, lo, hi = (np.asarray(v, dtype=float) for v in (a, b, q, y, lo, hi))
    disc = b * b - 4 * q * (a - y)
    with np.errstate(divide="ignore", invalid="ignore"):
        root = np.sqrt(disc)
        sign = np.where(b >= 0, 1.0, -1.0)
        big = -(b + sign * root) / 2
        r1 = big / q
        r2 = np.where(big != 0, (a - y) / big, np.nan)
    mid = (lo + hi) / 2
    d1 = np.where(np.isfinite(r1), np.abs(r1 - np.clip(r1, lo, hi)), np.inf)
    d2 = np.where(np.isfinite(r2), np.abs(r2 - np.clip(r2, lo, hi)), np.inf)
    first = (d1 < d2) | ((d1 == d2) & (np.abs(r1 - mid) <= np.abs(r2 - mid)))
    return np.where(disc >= 0, np.where(first, r1, r2), np.nan)
