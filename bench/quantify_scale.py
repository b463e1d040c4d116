"""``calib quantify --json`` of 100,000 unknowns, side by side with a lean pandas + numpy pipeline.

The fictional Fernbrook Water Laboratory: one nitrate run (six levels in
triplicate, an unweighted straight line, read by the EURACHEM/CITAC CG 4
closed form) and 100,000 well samples, one or two injections each, some with a
dilution factor.  Both sides start from the same two CSV files in a child
process each (so both pay their start-up and file reading):

* calib: ``python -m calib quantify run.csv samples.csv --json``;
* lean: pandas reads the two files, numpy fits the line and reads every sample
  back with its CG 4 standard error and t interval (scipy's t quantile), and
  the rows are written with ``DataFrame.to_json`` (15 significant digits, its most).

Each command runs once untimed first, so that both run from compiled bytecode
(in a temporary folder: the source tree is left alone); then the repeats are
interleaved (calib, lean, calib, lean...) and the medians compared;
the concentrations, standard errors and interval ends of the two sides are then
checked to agree within 1e-12 (relative).  Run from the repository root::

    python bench/quantify_scale.py              # 3 repeats of each
    python bench/quantify_scale.py --samples 20000 --repeats 1
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

LEVELS = (0.5, 1.0, 2.0, 5.0, 8.0, 10.0)
A, B = 0.001, 0.2015

LEAN = r'''
import sys, json
import numpy as np, pandas as pd
from scipy import stats
run = pd.read_csv(sys.argv[1], skiprows=3)
std = run[run["Sample type"] == "standard"]
x = std["Concentration (mg/L)"].to_numpy(float); y = std["Peak area"].to_numpy(float)
n = x.size; xm = x.mean(); ym = y.mean(); sxx = ((x - xm) ** 2).sum()
b = ((x - xm) * (y - ym)).sum() / sxx; a = ym - b * xm
s = np.sqrt(((y - a - b * x) ** 2).sum() / (n - 2))
t = stats.t.ppf(0.975, n - 2)
smp = pd.read_csv(sys.argv[2], skiprows=2)
smp["Dilution factor"] = smp["Dilution factor"].fillna(1.0)
g = smp.groupby(["Sample ID", "Dilution factor"], sort=False)["Peak area"].agg(["mean", "size"])
g = g.reset_index()
y0 = g["mean"].to_numpy(); m = g["size"].to_numpy(); d = g["Dilution factor"].to_numpy()
x0 = (y0 - a) / b
se = s / abs(b) * np.sqrt(1 / m + 1 / n + (y0 - ym) ** 2 / (b * b * sxx))
out = pd.DataFrame({"sample_id": g["Sample ID"], "concentration": d * x0,
                    "std_error": d * se, "ci_low": d * (x0 - t * se),
                    "ci_high": d * (x0 + t * se)})
sys.stdout.write(out.to_json(orient="records", double_precision=15))
'''


def write_inputs(folder: Path, n_samples: int, seed: int = 18) -> tuple[Path, Path]:
    """The run file and the samples file (invented figures)."""
    rng = np.random.default_rng(seed)
    run = folder / "run.csv"
    rows: list[list[object]] = [["Nitrate-N calibration (Fernbrook Water Laboratory, fictional)"],
                                [], [],
                                ["Analyte", "Sample", "Sample type", "Concentration (mg/L)",
                                 "Peak area", "Replicate"]]
    for level, x in enumerate(LEVELS, 1):
        for rep in (1, 2, 3):
            rows.append(["Nitrate-N", f"Cal-{level}", "standard", x,
                         round(A + B * x + float(rng.normal(0, 0.004)), 5), rep])
    with run.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)
    samples = folder / "samples.csv"
    # Inside the calibrated range (0.6 to 9.5 mg/L measured), so every sample gets a number.
    xs = rng.uniform(0.6, 9.5, n_samples)
    with samples.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["Fernbrook Water Laboratory (fictional), well survey"])
        w.writerow([])
        w.writerow(["Sample ID", "Analyte", "Sample type", "Peak area", "Dilution factor"])
        for i, x in enumerate(xs):
            dil = 10.0 if i % 7 == 0 else ""
            reps = 2 if i % 3 == 0 else 1
            for _ in range(reps):
                w.writerow([f"FB-{i:06d}", "Nitrate-N", "unknown",
                            round(A + B * x + float(rng.normal(0, 0.004)), 5), dil])
    return run, samples


def _cpu() -> float:
    used = resource.getrusage(resource.RUSAGE_CHILDREN)
    return used.ru_utime + used.ru_stime


def _timed(cmd: list[str], env: dict[str, str], ok: tuple[int, ...]
           ) -> tuple[float, float, bytes]:
    """Wall-clock and CPU seconds (user + system) of the child, and its output."""
    start, cpu = time.perf_counter(), _cpu()
    done = subprocess.run(cmd, capture_output=True, env=env, check=False)
    elapsed = time.perf_counter() - start
    if done.returncode not in ok:
        raise SystemExit(f"{cmd[:4]} failed ({done.returncode}): {done.stderr.decode()[-2000:]}")
    return elapsed, _cpu() - cpu, done.stdout


def compare(calib_out: bytes, lean_out: bytes) -> float:
    """Largest relative difference of concentration, std error and interval ends."""
    doc = json.loads(calib_out)
    lean_rows = json.loads(lean_out)
    ours = doc["samples"]
    if len(ours) != len(lean_rows):
        raise SystemExit(f"calib gave {len(ours)} samples, the lean pipeline {len(lean_rows)}")
    worst = 0.0
    for mine, theirs in zip(ours, lean_rows, strict=True):
        if mine["sample_id"] != theirs["sample_id"]:
            raise SystemExit(f"sample order differs: {mine['sample_id']} / {theirs['sample_id']}")
        for key in ("concentration", "std_error", "ci_low", "ci_high"):
            a, b = float(mine[key]), float(theirs[key])
            worst = max(worst, abs(a - b) / max(abs(b), 1e-300))
    return worst


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    root = Path(__file__).resolve().parent.parent
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        # Both sides run from compiled bytecode, as installed packages do: the children keep
        # theirs in a folder of their own, filled by an untimed first run of each command.
        env = dict(os.environ, PYTHONPATH=str(root), PYTHONPYCACHEPREFIX=str(folder / "pyc"))
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        run, samples = write_inputs(folder, args.samples)
        lean_py = folder / "lean.py"
        lean_py.write_text(LEAN, encoding="utf-8")
        ours_cmd = [sys.executable, "-m", "calib", "quantify", str(run), str(samples), "--json"]
        lean_cmd = [sys.executable, str(lean_py), str(run), str(samples)]
        _timed(ours_cmd, env, (0, 1))
        _timed(lean_cmd, env, (0,))
        times: dict[str, list[float]] = {"calib": [], "lean": []}
        cpus: dict[str, list[float]] = {"calib": [], "lean": []}
        outs: dict[str, bytes] = {}
        for _ in range(args.repeats):
            # calib exits 1 when the batch needs review (it has no QCs): still a full output.
            for name, cmd, ok in (("calib", ours_cmd, (0, 1)), ("lean", lean_cmd, (0,))):
                elapsed, cpu, out = _timed(cmd, env, ok)
                times[name].append(round(elapsed, 2))
                cpus[name].append(round(cpu, 2))
                outs[name] = out
        worst = compare(outs["calib"], outs["lean"])
    med = {k: statistics.median(v) for k, v in times.items()}
    cpu = {k: statistics.median(v) for k, v in cpus.items()}
    print(f"quantify --json, {args.samples:,} unknowns, {args.repeats} interleaved repeats")
    print(f"  calib quantify --json   {med['calib']:7.2f} s  (runs {times['calib']})")
    print(f"  pandas + numpy          {med['lean']:7.2f} s  (runs {times['lean']})")
    print(f"  ratio calib/lean        {med['calib'] / med['lean']:7.2f}  (target ≤ 2)")
    # CPU time (user + system) shows the same comparison with less noise from a loaded machine.
    print(f"  CPU s, calib / lean     {cpu['calib']:.2f} / {cpu['lean']:.2f} = "
          f"{cpu['calib'] / cpu['lean']:.2f}")
    print(f"  largest relative difference of concentration, SE, CI ends: {worst:.2e}"
          " (target ≤ 1e-12)")
    return 0 if worst <= 1e-12 else 1


if __name__ == "__main__":
    raise SystemExit(main())
