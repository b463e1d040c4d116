"""Time the batched fitter against fitting the same curves one at a time.

Two measurements per case, each on the same invented multi-analyte run:

(a) fit + coefficient inference — estimates, standard errors, t values, two-sided
    p-values and 95 % confidence intervals of every coefficient of every curve:

    * ``fit_batch`` on the whole (K, 24) stack, then the inference methods on the result;
    * a loop of ``fit_curve`` and ``coefficient_table()``, one curve at a time;
    * a loop of statsmodels ``WLS(...).fit(method="qr")`` reading ``params``, ``bse``,
      ``tvalues``, ``pvalues`` and ``conf_int(0.05)``.

(b) fit + coefficient inference + case diagnostics + lack of fit — (a) and, for every
    point, the leverage (hat diagonal), the internally and externally studentized
    residuals and Cook's distance, and for every curve the lack-of-fit F test
    (pure error from the replicate levels) with its p-value:

    * the batch of (a), then ``batch_influence`` and ``batch_lack_of_fit``;
    * a loop of statsmodels: the WLS fit and inference of (a); ``OLS`` of √w·y on √w·X
      (the weighted fit as an ordinary one: statsmodels has no influence measures on
      WLS results) and its ``get_influence()`` → ``hat_matrix_diag``,
      ``resid_studentized_internal``, ``resid_studentized_external``,
      ``cooks_distance``; and a second WLS fit on the level indicators (the level
      means) whose ``compare_f_test`` against the curve gives the lack-of-fit F and p.
      statsmodels computes the externally studentized residuals by refitting without
      each point in turn, which is most of its time here.

Each is timed several times and the median kept, as wall-clock time and as the process's CPU
time (steadier on a machine shared with other work); the figures printed are microseconds
per curve and the ratios.  The answers are compared as well, so a fast wrong path would show:
coefficient figures and lack-of-fit F and p as relative differences, per-point diagnostics
relative to the largest value of the same measure on the same curve (a residual near 0 is
known only to a fraction of the curve's scatter, by any program).  The results also go to
``bench/results/fit_batch.json`` (git-ignored).

Run from the repository root::

    python bench/fit_batch.py            # 2 000 curves × 24 points
    python bench/fit_batch.py --curves 500 --repeats 3
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

# One BLAS thread, set before numpy loads it: every path works on tiny matrices, and on a
# busy machine OpenBLAS's waiting threads made a single 2×2 triangular solve take
# milliseconds, which measured the machine's load rather than the code.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))  # run as a script from a checkout, calib not installed

from calib.fit.batch import fit_batch
from calib.fit.batch_diagnostics import batch_influence, batch_lack_of_fit
from calib.fit.curve import fit_curve
from calib.fit.design import design_matrix
from calib.options import Model

SEED = 20250302
POINTS = 24
CASES = [("linear", "none"), ("linear", "1/x2"), ("quadratic", "1/x")]
LEVELS = np.array([0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0])

#: What each measured row includes, for the printed table and the JSON.
ROWS = {
    "fit_inference": "fit and estimate, SE, t, p, 95 % interval of every coefficient",
    "fit_inference_diagnostics": (
        "fit_inference plus leverage, internally and externally studentized residuals and "
        "Cook's distance of every point, and the lack-of-fit F test (F and p) of every curve"
    ),
}


def invented_run(curves: int, model: str, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Curves of 8 levels × 3 replicates, each analyte with its own range, slope and noise."""
    rng = np.random.default_rng(seed)
    scale = 10 ** rng.uniform(-1, 2, size=(curves, 1))
    x = np.tile(np.repeat(LEVELS, 3), (curves, 1)) * scale
    top = LEVELS[-1] * scale
    b = rng.uniform(0.5, 5, size=(curves, 1))
    a = rng.uniform(0.005, 0.02, size=(curves, 1)) * b * top
    c = -rng.uniform(0.1, 0.3, size=(curves, 1)) * b / top * (model == "quadratic")
    mean = a + b * x + c * x**2
    y = mean + rng.normal(size=(curves, POINTS)) * (0.004 * mean + 2e-5 * b * top)
    return x, y


def raw_weights(x: np.ndarray, weighting: str) -> np.ndarray:
    return {"none": np.ones_like(x), "1/x": 1 / x, "1/x2": 1 / x**2}[weighting]


# --- (a) fit + coefficient inference -----------------------------------------------------

def _coefficient_figures(fit) -> np.ndarray:
    rows = []
    for name in fit.names:
        low, high = fit.confidence_interval(name, 0.95)
        rows.append([fit.coefficient(name), fit.std_error(name), fit.t_value(name),
                     fit.p_value(name), low, high])
    return np.array(rows).transpose(2, 0, 1)  # (K, p, 6)


def run_batch(x, y, model, weighting) -> np.ndarray:
    return _coefficient_figures(fit_batch(x, y, model=model, weighting=weighting))


def run_fit_curve(x, y, model, weighting) -> np.ndarray:
    out = []
    for xs, ys in zip(x, y):
        table = fit_curve(xs, ys, model=model, weighting=weighting).coefficient_table(0.95)
        out.append([[r.estimate, r.std_error, r.t_value, r.p_value, r.ci_low, r.ci_high]
                    for r in table])
    return np.array(out)


def run_statsmodels(x, y, model, weighting) -> np.ndarray:
    out = []
    kind = Model(model)
    for xs, ys in zip(x, y):
        res = sm.WLS(ys, design_matrix(xs, kind), weights=raw_weights(xs, weighting)).fit(
            method="qr"
        )
        ci = res.conf_int(0.05)
        out.append(np.column_stack([res.params, res.bse, res.tvalues, res.pvalues,
                                    ci[:, 0], ci[:, 1]]))
    return np.array(out)


# --- (b) fit + coefficient inference + diagnostics ----------------------------------------

def run_batch_diagnostics(x, y, model, weighting) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Coefficients (K, p, 6); per point (K, n, 4): h, internal, external, Cook; LOF (K, 2)."""
    fit = fit_batch(x, y, model=model, weighting=weighting)
    coefficients = _coefficient_figures(fit)
    infl = batch_influence(fit)
    lof = batch_lack_of_fit(fit)
    points = np.stack([infl.leverage, infl.standardized, infl.studentized,
                       infl.cooks_distance], axis=2)
    return coefficients, points, np.column_stack([lof.f_value, lof.p_value])


def run_statsmodels_diagnostics(x, y, model, weighting):
    """The figures of run_batch_diagnostics from statsmodels, one curve at a time."""
    coefficients, points, lof = [], [], []
    kind = Model(model)
    for xs, ys in zip(x, y):
        X = design_matrix(xs, kind)
        w = raw_weights(xs, weighting)
        res = sm.WLS(ys, X, weights=w).fit(method="qr")
        ci = res.conf_int(0.05)
        coefficients.append(np.column_stack([res.params, res.bse, res.tvalues, res.pvalues,
                                             ci[:, 0], ci[:, 1]]))
        sw = np.sqrt(w)
        infl = sm.OLS(ys * sw, X * sw[:, None]).fit().get_influence()
        points.append(np.column_stack([infl.hat_matrix_diag, infl.resid_studentized_internal,
                                       infl.resid_studentized_external,
                                       infl.cooks_distance[0]]))
        levels, index = np.unique(xs, return_inverse=True)
        means = sm.WLS(ys, np.eye(levels.size)[index], weights=w).fit()
        f_value, p_value, _ = means.compare_f_test(res)
        lof.append([f_value, p_value])
    return np.array(coefficients), np.array(points), np.array(lof)


# --- timing and comparison ----------------------------------------------------------------

def median_seconds(run: Callable[..., object], args: tuple, repeats: int) -> tuple[float, float,
                                                                                    object]:
    """Median wall-clock and CPU seconds of ``run(*args)``, and its last result."""
    wall, cpu = [], []
    result = None
    for _ in range(repeats):
        start, start_cpu = time.perf_counter(), time.process_time()
        result = run(*args)
        wall.append(time.perf_counter() - start)
        cpu.append(time.process_time() - start_cpu)
    return statistics.median(wall), statistics.median(cpu), result


def max_relative_difference(a: np.ndarray, b: np.ndarray) -> float:
    both = np.isfinite(a) & np.isfinite(b) & (b != 0)
    return float(np.max(np.abs(a[both] - b[both]) / np.abs(b[both]), initial=0.0))


def max_scaled_difference(a: np.ndarray, b: np.ndarray) -> float:
    """max |a − b| over each curve's largest |b| of the same measure; arrays (K, n, m)."""
    both = np.isfinite(a) & np.isfinite(b)
    scale = np.max(np.where(both, np.abs(b), 0.0), axis=1, keepdims=True)
    diff = np.where(both & (scale > 0), np.abs(a - b) / np.where(scale > 0, scale, 1.0), 0.0)
    return float(diff.max(initial=0.0))


def compare_diagnostics(ours, theirs) -> dict[str, float]:
    return {
        "coefficients": max_relative_difference(ours[0], theirs[0]),
        "point_diagnostics": max_scaled_difference(ours[1], theirs[1]),
        "lack_of_fit": max_relative_difference(ours[2], theirs[2]),
    }


def measure(x, y, model, weighting, *, repeats: int, baseline_repeats: int,
            with_fit_curve: bool = True) -> dict:
    """Both rows for one case: µs per curve (wall, CPU), ratios and differences."""
    curves = x.shape[0]
    paths = {"fit_inference": [("calib", run_batch), ("statsmodels", run_statsmodels)],
             "fit_inference_diagnostics": [("calib", run_batch_diagnostics),
                                           ("statsmodels", run_statsmodels_diagnostics)]}
    if with_fit_curve:
        paths["fit_inference"].insert(1, ("fit_curve", run_fit_curve))
    rows = {}
    for row, runs in paths.items():
        figures, answers = {}, {}
        for label, run in runs:
            run(x[:20], y[:20], model, weighting)  # warm-up: imports, caches
            n = repeats if label == "calib" else baseline_repeats
            wall, cpu, answers[label] = median_seconds(run, (x, y, model, weighting), n)
            figures[label] = {"wall_us_per_curve": wall * 1e6 / curves,
                              "cpu_us_per_curve": cpu * 1e6 / curves, "runs": n}
        ours = figures["calib"]
        entry = {"includes": ROWS[row], "us_per_curve": figures,
                 "ratio": {label: {clock: f[f"{clock}_us_per_curve"]
                                   / ours[f"{clock}_us_per_curve"] for clock in ("wall", "cpu")}
                           for label, f in figures.items() if label != "calib"}}
        if row == "fit_inference":
            entry["max_relative_difference"] = {
                label: max_relative_difference(answers["calib"], answers[label])
                for label in figures if label != "calib"}
        else:
            entry["max_difference"] = compare_diagnostics(answers["calib"],
                                                          answers["statsmodels"])
        rows[row] = entry
    return rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--curves", type=int, default=2000)
    parser.add_argument("--repeats", type=int, default=5, help="timed runs per path (median)")
    args = parser.parse_args(argv)

    load = os.getloadavg()
    baseline_repeats = max(1, min(args.repeats, 3))
    print(f"{args.curves} curves × {POINTS} points; calib median of {args.repeats} runs, "
          f"the loops of {baseline_repeats}; µs per curve; load average {load[0]:.2f}")
    print(f"{'row':<12} {'model':<10} {'wt':<5} {'time':<4}{'calib':>7} {'fit_curve':>10} "
          f"{'statsmodels':>12} {'×fit_curve':>11} {'×statsmodels':>13}")
    cases = []
    for i, (model, weighting) in enumerate(CASES):
        x, y = invented_run(args.curves, model, SEED + i)
        rows = measure(x, y, model, weighting, repeats=args.repeats,
                       baseline_repeats=baseline_repeats)
        cases.append({"model": model, "weighting": weighting, "rows": rows})
        for row, label in (("fit_inference", "fit+inf"), ("fit_inference_diagnostics",
                                                         "fit+inf+diag")):
            entry = rows[row]
            us = entry["us_per_curve"]
            for clock in ("wall", "cpu"):
                key = f"{clock}_us_per_curve"
                fc = us.get("fit_curve", {}).get(key)
                fc_ratio = entry["ratio"].get("fit_curve", {}).get(clock)
                print(f"{label:<12} {model:<10} {weighting:<5} {clock:<4}{us['calib'][key]:>7.2f} "
                      f"{'' if fc is None else f'{fc:.1f}':>10} {us['statsmodels'][key]:>12.1f} "
                      f"{'' if fc_ratio is None else f'{fc_ratio:.0f}×':>11} "
                      f"{entry['ratio']['statsmodels'][clock]:>12.0f}×")
            diffs = entry.get("max_relative_difference") or entry["max_difference"]
            print(f"{'':<33} max difference: "
                  + ", ".join(f"{k} {v:.1e}" for k, v in diffs.items()))

    report = {
        "benchmark": "fit_batch",
        "curves": args.curves,
        "points": POINTS,
        "seed": SEED,
        "repeats": {"calib": args.repeats, "loops": baseline_repeats},
        "statistic": "median time over the repeats, microseconds per curve (wall and CPU)",
        "rows": ROWS,
        "load_average_before": load,
        "load_average_after": os.getloadavg(),
        "environment": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
            "machine": platform.machine(),
            "cpus": os.cpu_count(),
            "blas_threads": os.environ["OPENBLAS_NUM_THREADS"],
        },
        "cases": cases,
    }
    out = Path(__file__).resolve().parent / "results" / "fit_batch.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_suffix(".json.tmp")
    tmp.write_text(json.dumps(report, indent=2) + "\n", encoding="utf-8")
    tmp.replace(out)
    print(f"written {out.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
