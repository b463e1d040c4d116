"""Size and power of calib's verdicts, measured by simulation through the real rule code.

Every simulated curve is judged exactly as a user's curve is: the curves of one cell of the
table are put into one invented run (one analyte per curve) and passed to
:func:`calib.checks.evaluate.evaluate_run`, which fits them all with the batched engine
(:func:`calib.fit.batch.fit_batch`) and applies the profile's rules and verdict logic.  So
the rates below are what a laboratory gets, not what the formulas promise.

Scenarios (invented, seeded):

* **constant noise**, fitted unweighted: levels equally spaced from 1 to 10, true line
  y = 100·x, σ = 0.25 % of the top response (σ = 2.5);
* **proportional noise**, fitted with the correct weighting 1/x²: levels spaced evenly on a
  log scale from 1 to 100, true line y = 100·x, CV = 1 %.

Designs: 5–10 levels × 1, 2, 3, 5, 10 replicates, and the ISO 8466-1 design (10 levels,
10 replicates at the lowest and highest, 1 elsewhere).

Defects (each on its own):

* ``intercept``: true intercept offset by 3 standard errors of the intercept of that design
  and weighting (from (XᵀWX)⁻¹, i.e. the test's own noncentrality is 3);
* ``curvature``: y = 100·x·(1 + 0.03·x/x_max) — the response at the top level is 3 % above
  the straight line through the origin;
* ``outlier``: one standard, chosen at random, moved by 8 σ (σ at its level);
* ``prop-unweighted``: proportional noise fitted unweighted (what a wrong weighting costs).

Each curve also has QC samples in duplicate at 3× the lowest level, mid-range and 80 % of the
top, read with the same true curve and noise (the bioanalytical profile judges them).

Printed per cell: the share of curves not accepted under the profile (false review on sound
curves, with its 95 % binomial half-width; power on defects) and, for sound curves, the share
of curves on which each check fails or warns (its false-alarm rate) beside its nominal size
where it has one, then the checks that kept sound curves from acceptance and the share kept
by checks other than the intercept test while that test passed (what the rest adds to its
5 %).  Binomial slack: a rate is flagged ``!`` when above nominal + 2.58·√(α(1−α)/n)
(one-sided 99.5 %); a cell's sound rate likewise against 6 %.  Each profile ends with the
sound curves of all its cells pooled.  ``--theory`` prints instead the theoretical power of
the tests against these defects per design (noncentral t; see README).

Run from the repository root::

    python bench/power.py --quick          # 9–10 designs, 200 curves per cell
    python bench/power.py                  # every design, 400 curves per cell
    python bench/power.py --profile default --quick --curves 2000 --no-defects
    python bench/power.py --profile default --theory

The fits are batched; the rules run curve by curve (about 7 ms a curve), so ``--quick`` takes
a few minutes per profile on an idle core and the full table about half an hour per profile.
    python bench/power.py --profile bioanalytical --curves 1000
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import math
import sys
import time
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from calib.checks.evaluate import evaluate_run
from calib.checks.profile import Profile, load_profile
from calib.options import SampleType
from calib.run import Point, Run, SourceInfo

SLOPE = 100.0
CONST_SD_PCT = 0.25  # σ as % of the top response, constant-noise scenario
PROP_CV_PCT = 1.0  # CV, proportional-noise scenario
CURVATURE = 0.03
OUTLIER_SD = 8.0
LIMIT = 0.06  # the default profile's largest false-review rate (issue 15)
DEFECTS = ("intercept", "curvature", "outlier", "prop-unweighted")


@dataclass(frozen=True)
class Design:
    """Levels and replicates per level of one calibration design."""

    name: str
    n_levels: int
    replicates: tuple[int, ...]

    @staticmethod
    def grid(n_levels: int, reps: int) -> Design:
        return Design(f"{n_levels}x{reps}", n_levels, (reps,) * n_levels)

    @staticmethod
    def iso_8466() -> Design:
        return Design("iso8466", 10, (10, *([1] * 8), 10))


def levels(design: Design, noise: str) -> np.ndarray:
    """Nominal concentrations: 1…10 evenly (constant noise), 1…100 on a log scale (proportional)."""
    if noise == "constant":
        return np.linspace(1.0, 10.0, design.n_levels)
    return np.geomspace(1.0, 100.0, design.n_levels)


def sigma(x: np.ndarray, noise: str, top: float) -> np.ndarray:
    if noise == "constant":
        return np.full_like(x, CONST_SD_PCT / 100 * SLOPE * top)
    return PROP_CV_PCT / 100 * SLOPE * x


def intercept_se(x: np.ndarray, sd: np.ndarray, weighted: bool) -> float:
    """SE of the intercept of the (correctly) weighted straight line on this design."""
    X = np.column_stack([np.ones_like(x), x])
    w = 1 / sd**2 if weighted else np.full_like(x, 1 / sd[0] ** 2)
    cov = np.linalg.inv(X.T @ (w[:, None] * X))
    return float(math.sqrt(cov[0, 0]))


def simulate(design: Design, noise: str, defect: str | None, n_curves: int,
             rng: np.random.Generator) -> tuple[list[Point], str]:
    """Points of ``n_curves`` curves (analytes c0, c1, ...) and the weighting to fit them with."""
    true_noise = "proportional" if defect == "prop-unweighted" else noise
    lv = levels(design, noise)
    x = np.repeat(lv, design.replicates)
    top = float(lv[-1])
    sd = sigma(x, true_noise, top)
    weighting = "1/x2" if noise == "proportional" and defect != "prop-unweighted" else "none"
    offset = 3 * intercept_se(x, sd, weighting != "none") if defect == "intercept" else 0.0

    def truth(c: np.ndarray) -> np.ndarray:
        bend = 1 + CURVATURE * c / top if defect == "curvature" else 1.0
        return SLOPE * c * bend + offset

    mean = truth(x)
    # QC samples in duplicate at low, mid and high (3× the lowest level, mid-range, 80 % of
    # the top), read with the same noise: the profiles that judge QCs (ICH M10) need them.
    qc_x = np.repeat([3 * float(lv[0]), (float(lv[0]) + top) / 2, 0.8 * top], 2)
    qc_mean = truth(qc_x)
    qc_sd = sigma(qc_x, true_noise, top)
    points = []
    order = np.arange(1, x.size + 1)
    for k in range(n_curves):
        y = mean + sd * rng.standard_normal(x.size)
        if defect == "outlier":
            i = rng.integers(x.size)
            y[i] += OUTLIER_SD * sd[i] * rng.choice((-1.0, 1.0))
        # Injection order: the levels in random order, as a run would interleave them.
        inj = rng.permutation(order)
        name = f"c{k}"
        points += [Point(name, float(xi), float(yi), f"Sim!D{j + 2}", injection_order=int(o))
                   for j, (xi, yi, o) in enumerate(zip(x, y, inj))]
        qc_y = qc_mean + qc_sd * rng.standard_normal(qc_x.size)
        points += [Point(name, float(xi), float(yi), f"Sim!D{x.size + j + 2}",
                         sample_type=SampleType.QC) for j, (xi, yi) in enumerate(zip(qc_x, qc_y))]
    return points, weighting


@dataclass
class Cell:
    """Outcome of one cell: curves not accepted, and per-check alarms on the raw and final scale."""

    n: int = 0
    not_accepted: int = 0
    alarms: Counter = field(default_factory=Counter)
    raw: Counter = field(default_factory=Counter)
    evaluated: Counter = field(default_factory=Counter)
    nominal: dict = field(default_factory=dict)
    #: Per check: curves it kept from being accepted (a failing or warning review/reject check).
    causes: Counter = field(default_factory=Counter)
    #: Curves kept from acceptance by something other than the intercept t-test.
    not_intercept: int = 0
    #: ... and among them, curves whose intercept test passed (what the rest adds to it).
    other_only: int = 0

    @property
    def rate(self) -> float:
        return self.not_accepted / self.n if self.n else float("nan")


def _is_reason(check) -> bool:
    """Whether a check keeps its curve from being accepted (as combine_verdicts decides)."""
    severity, verdict = check.severity.value, check.verdict.value
    if severity == "reject":
        return verdict in ("fail", "warn", "not-evaluated")
    return severity == "review" and verdict in ("fail", "warn")


def run_cell(profile: Profile, design: Design, noise: str, defect: str | None, n_curves: int,
             seed: int) -> Cell:
    rng = np.random.default_rng(seed)
    points, weighting = simulate(design, noise, defect, n_curves, rng)
    run = Run(SourceInfo(file="simulated.csv", sha256="0" * 64, sheet="Sim"), tuple(points))
    result = evaluate_run(run, profile=profile, weighting=weighting)
    cell = Cell()
    for curve in result.curves:
        cell.n += 1
        cell.not_accepted += curve.verdict.value != "accepted"
        reasons = {c.id for c in curve.checks if _is_reason(c)}
        cell.causes.update(reasons)
        cell.not_intercept += bool(reasons - {"intercept-zero"})
        cell.other_only += bool(reasons) and "intercept-zero" not in reasons
        for check in curve.checks:
            if check.verdict.value == "not-evaluated":
                continue
            cell.evaluated[check.id] += 1
            if check.verdict.value in ("fail", "warn"):
                cell.alarms[check.id] += 1
            p = getattr(check, "p_value", None)
            alpha = getattr(check, "alpha", None)
            if p is not None and alpha is not None:
                cell.nominal[check.id] = alpha
                cell.raw[check.id] += p < alpha
    return cell


def slack(alpha: float, n: int) -> float:
    """One-sided 99.5 % binomial upper slack above a nominal rate α for n curves."""
    return alpha + 2.58 * math.sqrt(alpha * (1 - alpha) / max(n, 1))


def designs_for(quick: bool, profile: str) -> list[Design]:
    if profile == "iso-8466":
        return [Design.iso_8466()]
    lo = 6 if profile == "bioanalytical" else 5
    if quick:
        grid = [Design.grid(n, r) for n in (lo, 7, 10) for r in (1, 3, 10)]
        return [*grid, Design.iso_8466()] if profile == "default" else grid
    grid = [Design.grid(n, r) for n in range(lo, 11) for r in (1, 2, 3, 5, 10)]
    return [*grid, Design.iso_8466()] if profile == "default" else grid


def t_power(delta: float, df: int, alpha: float, *, sided: int = 2) -> float:
    """Power of a t-test at level α against noncentrality δ (integrated over σ̂, exact)."""
    from scipy import integrate, stats

    crit = float(stats.t.ppf(1 - alpha / sided, df))

    def given(v: float) -> float:
        scale = crit * math.sqrt(v / df)
        far = stats.norm.cdf(-delta - scale) if sided == 2 else 0.0
        return float((stats.norm.cdf(delta - scale) + far) * stats.chi2.pdf(v, df))

    return float(integrate.quad(given, 0, np.inf, limit=200)[0])


def theoretical_power(design: Design, noise: str, family_alpha: float, members: int,
                      budget: float) -> dict[str, float]:
    """Power of the best tests against this harness's defects, from the noncentral t.

    ``intercept``: calib's two-sided intercept t-test at 5 % against the 3-SE offset.
    ``curvature``: the x² coefficient's t-test (δ from the design) two-sided at the Holm
    first step α/k and, alone, at the family's α.  ``outlier``: the externally studentized
    residual of the moved point (δ = 8·√(1 − h), averaged over the points) against
    Bonferroni at α/k and α.  ``bound``: the same test for that defect alone at the whole
    verdict's false-review ``budget`` (5 % + the family's α): what a verdict that sends no
    more sound curves to review could reach with the standard test for the defect.
    """
    lv = levels(design, noise)
    x = np.repeat(lv, design.replicates)
    top = float(lv[-1])
    w = 1 / sigma(x, noise, top) ** 2
    n = x.size
    k = members if max(design.replicates) > 1 else members - 1  # no lack of fit without
    X = np.column_stack([np.ones_like(x), x, x**2])
    cov = np.linalg.inv(X.T @ (w[:, None] * X))
    d_quad = SLOPE * CURVATURE / top / math.sqrt(cov[2, 2])
    xw = X[:, :2] * np.sqrt(w)[:, None]
    h = np.einsum("ij,jk,ik->i", xw, np.linalg.inv(xw.T @ xw), xw)
    d_out = OUTLIER_SD * np.sqrt(1 - h)

    def outlier(alpha: float) -> float:
        return float(np.mean([t_power(d, n - 3, alpha) for d in d_out]))

    return {
        "intercept": t_power(3.0, n - 2, 0.05),
        "intercept_bound": t_power(3.0, n - 2, budget),
        "curvature_holm": t_power(d_quad, n - 3, family_alpha / k),
        "curvature_alone": t_power(d_quad, n - 3, family_alpha),
        "curvature_bound": t_power(d_quad, n - 3, budget),
        "outlier_holm": outlier(family_alpha / (k * n)),
        "outlier_alone": outlier(family_alpha / n),
        "outlier_bound": outlier(budget / n),
    }


def print_theory(profile: Profile, noises: Sequence[str], quick: bool) -> None:
    family = profile.review_family
    alpha = family.alpha if family else 0.05
    budget = 0.05 + alpha
    print(f"\n## theoretical power, profile {profile.name} (family α = {alpha:g}, Holm over 4 "
          f"members, 3 without replicates; bound: that test alone at {budget:g})")
    print(f"{'noise':<13}{'design':<9}{'intercept':>10}{'bound':>7}{'curv. Holm':>12}{'alone':>7}"
          f"{'bound':>7}{'outl. Holm':>12}{'alone':>7}{'bound':>7}")
    for noise in noises:
        for design in designs_for(quick, "default"):
            t = theoretical_power(design, noise, alpha, 4, budget)
            print(f"{noise:<13}{design.name:<9}{t['intercept']:>10.3f}{t['intercept_bound']:>7.3f}"
                  f"{t['curvature_holm']:>12.3f}{t['curvature_alone']:>7.3f}"
                  f"{t['curvature_bound']:>7.3f}{t['outlier_holm']:>12.3f}"
                  f"{t['outlier_alone']:>7.3f}{t['outlier_bound']:>7.3f}")


def main(argv: Sequence[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--profile", action="append",
                    help="shipped profile name (repeatable); default: every shipped profile")
    ap.add_argument("--curves", type=int, default=None, help="curves per cell")
    ap.add_argument("--quick", action="store_true", help="fewer designs and curves")
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--noise", choices=("constant", "proportional"), action="append")
    ap.add_argument("--no-defects", action="store_true", help="sound curves only")
    ap.add_argument("--theory", action="store_true",
                    help="print the theoretical power of the best tests per design and stop")
    args = ap.parse_args(argv)
    names = args.profile or ["default", "bioanalytical", "environmental", "iso-8466",
                             "assay-linearity", "plasma-spectrometry"]
    n_curves = args.curves or (200 if args.quick else 400)
    noises = args.noise or ["constant", "proportional"]
    if args.theory:
        for name in names:
            print_theory(load_profile(name), noises, args.quick)
        return 0
    started = time.perf_counter()
    seed = args.seed
    for name in names:
        profile = load_profile(name)
        print(f"\n## profile {name}: share of curves not accepted ({n_curves} curves per cell)")
        header = f"{'noise':<13}{'design':<9}{'sound':>7}{'±95 %':>7}"
        defects = () if args.no_defects else DEFECTS
        header += "".join(f"{d:>17}" for d in defects)
        print(header)
        pooled = Cell()
        for noise in noises:
            for design in designs_for(args.quick, name):
                seed += 1
                sound = run_cell(profile, design, noise, None, n_curves, seed)
                pooled.n += sound.n
                pooled.not_accepted += sound.not_accepted
                pooled.causes.update(sound.causes)
                pooled.not_intercept += sound.not_intercept
                pooled.other_only += sound.other_only
                half = 1.96 * math.sqrt(sound.rate * (1 - sound.rate) / sound.n)
                above = "!" if sound.rate > slack(LIMIT, sound.n) else " "
                line = f"{noise:<13}{design.name:<9}{sound.rate:>7.3f}{half:>6.3f}{above}"
                for defect in defects:
                    if defect == "prop-unweighted" and noise == "proportional":
                        line += f"{'=':>17}"
                        continue
                    seed += 1
                    cell = run_cell(profile, design, noise, defect, n_curves, seed)
                    line += f"{cell.rate:>17.3f}"
                print(line)
                alarms = []
                for check in sorted(sound.evaluated):
                    rate = sound.alarms[check] / sound.evaluated[check]
                    nominal = sound.nominal.get(check)
                    if nominal is not None:
                        raw = sound.raw[check] / sound.evaluated[check]
                        flag = "!" if raw > slack(nominal, sound.evaluated[check]) else ""
                        alarms.append(f"{check} {rate:.3f} (raw {raw:.3f}/{nominal:g}{flag})")
                    elif rate:
                        alarms.append(f"{check} {rate:.3f}")
                print(f"{'':<22}sound-curve alarms: " + "; ".join(alarms))
                print(f"{'':<22}{_causes(sound)}")
                sys.stdout.flush()
        se = math.sqrt(pooled.rate * (1 - pooled.rate) / pooled.n)
        print(f"pooled sound curves ({pooled.n}): not accepted {pooled.rate:.4f} ± "
              f"{1.96 * se:.4f} (95 %); {_causes(pooled)}")
    print(f"\n{time.perf_counter() - started:.0f} s")
    return 0


def _causes(cell: Cell) -> str:
    causes = "; ".join(f"{c} {k / cell.n:.3f}" for c, k in cell.causes.most_common())
    return (f"not accepted by: {causes or 'nothing'}; by other than the intercept test "
            f"{cell.not_intercept / cell.n:.4f}, with the intercept test passing "
            f"{cell.other_only / cell.n:.4f}")


if __name__ == "__main__":
    raise SystemExit(main())
