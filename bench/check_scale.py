"""``calib check --json`` of 500 analytes × 8 levels × 3 replicates, beside a lean script.

An invented screen (analytes ``SCR-001`` … ``SCR-500``, eight levels in triplicate,
one injection order per standard, a seeded random slope and proportional noise per analyte) is
written once as a CSV file.  Both sides start from that file in a child process each
(so both pay their start-up and file reading):

* calib: ``python -m calib check run.csv --json`` with the ``default`` profile (every
  rule, the review family, the detection limits);
* lean: pandas reads the file, numpy fits all 500 straight lines at once by ordinary
  least squares, with the t inference of both coefficients (SE, t, p, 95 % interval)
  and the lack-of-fit F test of every curve, written with ``json.dumps``.

Repeats are interleaved (calib, lean, calib, lean...) and the medians compared; the
slopes, intercepts and lack-of-fit p-values of the two sides are then checked to
agree within 1e-9 (relative).  Run from the repository root::

    python bench/check_scale.py                 # 3 repeats of each
    python bench/check_scale.py --repeats 5
    python bench/check_scale.py --write run.csv # only write the input file
    python bench/check_scale.py --compare before.json after.json   # two check JSONs alike?

``--compare`` walks two ``calib check --json`` outputs (of the same file, e.g. before and
after a change): every text and flag must be equal and every number agree within 1e-10
relative; the largest difference and where it is are printed.
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

LEVELS = (0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0)
ANALYTES = 500
REPLICATES = 3

LEAN = r'''
import sys, json
import numpy as np, pandas as pd
from scipy import stats
frame = pd.read_csv(sys.argv[1], skiprows=2)
frame = frame[frame["Sample type"] == "standard"]
names = frame["Analyte"].to_numpy()
order = np.argsort(names, kind="stable")
names = names[order]
x = frame["Conc (ug/L)"].to_numpy(float)[order]
y = frame["Area"].to_numpy(float)[order]
labels, start = np.unique(names, return_index=True)
k = labels.size; n = x.size // k
x = x.reshape(k, n); y = y.reshape(k, n)
xm = x.mean(1, keepdims=True); ym = y.mean(1, keepdims=True)
sxx = ((x - xm) ** 2).sum(1)
b = ((x - xm) * (y - ym)).sum(1) / sxx
a = ym[:, 0] - b * xm[:, 0]
res = y - a[:, None] - b[:, None] * x
dof = n - 2
s2 = (res ** 2).sum(1) / dof
se_b = np.sqrt(s2 / sxx)
se_a = np.sqrt(s2 * (1 / n + xm[:, 0] ** 2 / sxx))
t = stats.t.ppf(0.975, dof)
p_a = 2 * stats.t.sf(np.abs(a / se_a), dof)
p_b = 2 * stats.t.sf(np.abs(b / se_b), dof)
# lack of fit: pure error from the replicates of each level
lv = np.sort(x, axis=1)
idx = np.argsort(x, axis=1, kind="stable")
ys = np.take_along_axis(y, idx, 1)
m = len(np.unique(lv[0])); r = n // m
ys = ys.reshape(k, m, r)
pe = ((ys - ys.mean(2, keepdims=True)) ** 2).sum((1, 2))
lof = (res ** 2).sum(1) - pe
df_lof, df_pe = m - 2, n - m
f = (lof / df_lof) / (pe / df_pe)
p_lof = stats.f.sf(f, df_lof, df_pe)
out = [{"analyte": str(labels[i]), "slope": b[i], "intercept": a[i],
        "slope_se": se_b[i], "intercept_se": se_a[i], "slope_p": p_b[i], "intercept_p": p_a[i],
        "slope_ci": [b[i] - t * se_b[i], b[i] + t * se_b[i]],
        "intercept_ci": [a[i] - t * se_a[i], a[i] + t * se_a[i]],
        "lack_of_fit_f": f[i], "lack_of_fit_p": p_lof[i]} for i in range(k)]
sys.stdout.write(json.dumps(out))
'''


def write_run(path: Path, *, analytes: int = ANALYTES, seed: int = 18) -> Path:
    """The invented screen as a CSV file (standards only; one injection order per standard)."""
    rng = np.random.default_rng(seed)
    slopes = rng.uniform(800, 5000, size=analytes)
    intercepts = rng.normal(0, 2, size=analytes)
    rows: list[list[object]] = [["Screening calibration (invented), all analytes"], [],
                                ["Analyte", "Sample", "Sample type", "Conc (ug/L)", "Area",
                                 "Replicate", "Injection order"]]
    order = 0
    for rep in range(1, REPLICATES + 1):
        for level, conc in enumerate(LEVELS, 1):
            order += 1  # one injection measures every analyte
            for a in range(analytes):
                area = (intercepts[a] + slopes[a] * conc) * (1 + rng.normal(0, 0.02))
                rows.append([f"SCR-{a + 1:03d}", f"Cal {level}", "standard", conc,
                             round(float(area), 4), rep, order])
    with path.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)
    return path


def _cpu() -> float:
    used = resource.getrusage(resource.RUSAGE_CHILDREN)
    return used.ru_utime + used.ru_stime


def _timed(cmd: list[str], env: dict[str, str], ok: tuple[int, ...]) -> tuple[float, float, bytes]:
    """Wall time, CPU time (user + system) of the child, and its output."""
    start, cpu = time.perf_counter(), _cpu()
    done = subprocess.run(cmd, capture_output=True, env=env, check=False)
    elapsed, cpu = time.perf_counter() - start, _cpu() - cpu
    if done.returncode not in ok:
        raise SystemExit(f"{cmd[:4]} failed ({done.returncode}): {done.stderr.decode()[-2000:]}")
    return elapsed, cpu, done.stdout


def _check(doc: dict, name: str) -> dict:
    return {c["id"]: c for c in doc["checks"]}.get(name, {})


def compare(calib_out: bytes, lean_out: bytes) -> float:
    """Largest relative difference of slope, intercept and lack-of-fit p between the sides."""
    ours = {c["analyte"]: c for c in json.loads(calib_out)["curves"]}
    lean_rows = json.loads(lean_out)
    if len(ours) != len(lean_rows):
        raise SystemExit(f"calib judged {len(ours)} curves, the lean script {len(lean_rows)}")
    worst = 0.0
    for row in lean_rows:
        curve = ours[row["analyte"]]
        coef = curve["coefficients"]
        lof = _check(curve, "lack-of-fit").get("test", {})
        pairs = [(coef["slope"]["estimate"], row["slope"]),
                 (coef["intercept"]["estimate"], row["intercept"]),
                 (lof.get("p_value"), row["lack_of_fit_p"])]
        for a, b in pairs:
            if a is None:
                raise SystemExit(f"{row['analyte']}: calib gives no figure to compare")
            worst = max(worst, abs(float(a) - b) / max(abs(b), 1e-300))
    return worst


def compare_documents(before: object, after: object, *, rel: float = 1e-10
                      ) -> tuple[float, str, list[str]]:
    """Largest relative difference of the numbers (and where), and every place that differs
    beyond ``rel`` or in text, between two check documents."""
    worst, at, differ = 0.0, "", []

    def walk(a: object, b: object, path: str) -> None:
        nonlocal worst, at
        if isinstance(a, dict) and isinstance(b, dict):
            if a.keys() != b.keys():
                differ.append(f"{path}: keys {sorted(set(a) ^ set(b))}")
                return
            for key in a:
                walk(a[key], b[key], f"{path}/{key}")
        elif isinstance(a, list) and isinstance(b, list):
            if len(a) != len(b):
                differ.append(f"{path}: {len(a)} items against {len(b)}")
                return
            for i, (u, v) in enumerate(zip(a, b)):
                walk(u, v, f"{path}[{i}]")
        elif (isinstance(a, float) and isinstance(b, int | float) and not isinstance(b, bool)
              and a != b):
            gap = abs(a - b) / max(abs(b), 1e-300)
            if gap > worst:
                worst, at = gap, path
            if gap > rel:
                differ.append(f"{path}: {a!r} against {b!r}")
        elif a != b:
            differ.append(f"{path}: {str(a)[:120]!r} against {str(b)[:120]!r}")

    walk(before, after, "")
    return worst, at, differ


def _compare_files(before: Path, after: Path) -> int:
    docs = [json.loads(p.read_text(encoding="utf-8")) for p in (before, after)]
    worst, at, differ = compare_documents(*docs)
    print(f"largest relative difference {worst:.3g}" + (f" at {at}" if at else ""))
    print(f"{len(differ)} places differ beyond 1e-10 relative or in text")
    for line in differ[:20]:
        print(f"  {line}")
    return 0 if not differ else 1


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--analytes", type=int, default=ANALYTES)
    parser.add_argument("--write", type=Path, help="only write the input file here")
    parser.add_argument("--compare", type=Path, nargs=2, metavar=("BEFORE", "AFTER"),
                        help="compare two calib check --json outputs")
    args = parser.parse_args(argv)
    if args.compare is not None:
        return _compare_files(*args.compare)
    if args.write is not None:
        write_run(args.write, analytes=args.analytes)
        return 0
    root = Path(__file__).resolve().parent.parent
    env = dict(os.environ, PYTHONPATH=str(root))
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        run = write_run(folder / "run.csv", analytes=args.analytes)
        lean_py = folder / "lean.py"
        lean_py.write_text(LEAN, encoding="utf-8")
        ours_cmd = [sys.executable, "-m", "calib", "check", str(run), "--json"]
        lean_cmd = [sys.executable, str(lean_py), str(run)]
        times: dict[str, list[float]] = {"calib": [], "lean": []}
        cpus: dict[str, list[float]] = {"calib": [], "lean": []}
        outs: dict[str, bytes] = {}
        for _ in range(args.repeats):
            # calib exits 1 when a curve needs review: still a full output.
            for name, cmd, ok in (("calib", ours_cmd, (0, 1, 3)), ("lean", lean_cmd, (0,))):
                elapsed, cpu, out = _timed(cmd, env, ok)
                times[name].append(elapsed)
                cpus[name].append(cpu)
                outs[name] = out
        worst = compare(outs["calib"], outs["lean"])
    med = {k: statistics.median(v) for k, v in times.items()}
    cpu = {k: statistics.median(v) for k, v in cpus.items()}
    print(f"check --json, {args.analytes} analytes × {len(LEVELS)} levels × {REPLICATES} "
          f"replicates, {args.repeats} interleaved repeats (medians; CPU = user + system "
          "of the child, steadier on a loaded machine)")
    for name, label in (("calib", "calib check --json "), ("lean", "lean read-fit-infer")):
        print(f"  {label}  wall {med[name]:6.2f} s  CPU {cpu[name]:6.2f} s  "
              f"(wall runs {[round(t, 2) for t in times[name]]})")
    print(f"  ratio calib/lean        wall {med['calib'] / med['lean']:5.2f}  "
          f"CPU {cpu['calib'] / cpu['lean']:5.2f}  (target ≤ 2)")
    print(f"  largest relative difference of slope, intercept, lack-of-fit p: {worst:.2e}"
          " (target ≤ 1e-9)")
    return 0 if worst <= 1e-9 else 1


if __name__ == "__main__":
    raise SystemExit(main())
