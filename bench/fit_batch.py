"""Time the batched fitter against fitting the same curves one at a time.

Three ways to get the same coefficient inference (estimates, standard errors, t values,
two-sided p-values, 95 % confidence intervals) for every curve of an invented
multi-analyte run:

* ``fit_batch`` on the whole (K, 24) stack, then the inference methods on the result;
* a loop of ``fit_curve`` and ``coefficient_table()``, one curve at a time;
* a loop of statsmodels ``WLS(...).fit(method="qr")`` reading ``params``, ``bse``,
  ``tvalues``, ``pvalues`` and ``conf_int(0.05)``.

Each is timed several times and the median kept, as wall-clock time and as the process's CPU
time (steadier on a machine shared with other work); the figures printed are microseconds
per curve and the ratios.  The results also go to ``bench/results/fit_batch.json`` (git-ignored).
The three answers are compared as well, so a fast wrong path would show.

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
from calib.fit.curve import fit_curve
from calib.fit.design import design_matrix
from calib.options import Model

SEED = 20250302
POINTS = 24
CASES = [("linear", "none"), ("linear", "1/x2"), ("quadratic", "1/x")]
LEVELS = np.array([0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0])


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


def run_batch(x, y, model, weighting) -> np.ndarray:
    fit = fit_batch(x, y, model=model, weighting=weighting)
    rows = []
    for name in fit.names:
        low, high = fit.confidence_interval(name, 0.95)
        rows.append([fit.coefficient(name), fit.std_error(name), fit.t_value(name),
                     fit.p_value(name), low, high])
    return np.array(rows).transpose(2, 0, 1)  # (K, p, 6)


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


def median_seconds(
    run: Callable[..., np.ndarray], args: tuple, repeats: int
) -> tuple[float, float, np.ndarray]:
    """Median wall-clock and CPU seconds of ``run(*args)``, and its last result."""
    wall, cpu = [], []
    for _ in range(repeats):
        start, start_cpu = time.perf_counter(), time.process_time()
        result = run(*args)
        wall.append(time.perf_counter() - start)
        cpu.append(time.process_time() - start_cpu)
    return statistics.median(wall), statistics.median(cpu), result


def max_relative_difference(a: np.ndarray, b: np.ndarray) -> float:
    both = np.isfinite(a) & np.isfinite(b) & (b != 0)
    return float(np.max(np.abs(a[both] - b[both]) / np.abs(b[both])))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--curves", type=int, default=2000)
    parser.add_argument("--repeats", type=int, default=5, help="timed runs per path (median)")
    args = parser.parse_args(argv)

    cases = []
    print(f"{args.curves} curves × {POINTS} points, median of {args.repeats} runs, µs per curve")
    print(f"{'model':<10} {'wt':<5} {'time':<4}{'batch':>7} {'fit_curve':>10} {'statsmodels':>12}"
          f" {'×fit_curve':>11} {'×statsmodels':>13}")
    for i, (model, weighting) in enumerate(CASES):
        x, y = invented_run(args.curves, model, SEED + i)
        paths = {}
        for label, run in (("batch", run_batch), ("fit_curve", run_fit_curve),
                           ("statsmodels", run_statsmodels)):
            run(x[:20], y[:20], model, weighting)  # warm-up: imports, caches
            wall, cpu, result = median_seconds(run, (x, y, model, weighting), args.repeats)
            paths[label] = (wall * 1e6 / args.curves, cpu * 1e6 / args.curves, result)
        us = {label: value[0] for label, value in paths.items()}
        cpu_us = {label: value[1] for label, value in paths.items()}
        case = {
            "model": model,
            "weighting": weighting,
            "us_per_curve": us,
            "cpu_us_per_curve": cpu_us,
            "batch_speedup_over_fit_curve": us["fit_curve"] / us["batch"],
            "batch_speedup_over_statsmodels": us["statsmodels"] / us["batch"],
            "cpu_batch_speedup_over_fit_curve": cpu_us["fit_curve"] / cpu_us["batch"],
            "cpu_batch_speedup_over_statsmodels": cpu_us["statsmodels"] / cpu_us["batch"],
            "max_relative_difference": {
                "batch_vs_fit_curve": max_relative_difference(paths["batch"][2],
                                                              paths["fit_curve"][2]),
                "batch_vs_statsmodels": max_relative_difference(paths["batch"][2],
                                                                paths["statsmodels"][2]),
            },
        }
        cases.append(case)
        for clock, figures in (("wall", us), ("cpu", cpu_us)):
            print(f"{model:<10} {weighting:<5} {clock:<4}{figures['batch']:>7.2f} "
                  f"{figures['fit_curve']:>10.1f} {figures['statsmodels']:>12.1f} "
                  f"{figures['fit_curve'] / figures['batch']:>10.0f}× "
                  f"{figures['statsmodels'] / figures['batch']:>12.0f}×")
        diffs = case["max_relative_difference"]
        print(f"{'':<20} max relative difference: vs fit_curve "
              f"{diffs['batch_vs_fit_curve']:.1e}, vs statsmodels "
              f"{diffs['batch_vs_statsmodels']:.1e}")

    report = {
        "benchmark": "fit_batch",
        "curves": args.curves,
        "points": POINTS,
        "seed": SEED,
        "repeats": args.repeats,
        "statistic": "median time over the repeats, microseconds per curve (wall and CPU)",
        "work": "fit plus estimate, SE, t, p and 95 % interval of every coefficient",
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
