"""Every speed target of SPEC §8 in one run, calib side by side with a plain pipeline.

Invented inputs are built with a fixed seed (the fictional multi-residue screen of
``bench/read_xlsx.py``); each measurement is repeated and the median kept (the
minutes-long plain end-to-end pipeline runs once):

* fit: 2,000 curves × 24 points, two rows per case (from ``bench/fit_batch.py``):
  ``fit_batch`` plus the inference of every coefficient (estimate, SE, t, p, 95 %
  interval), and that plus the diagnostics (leverage, internally and externally
  studentized residuals and Cook's distance of every point, the lack-of-fit F test
  of every curve), each against a per-curve statsmodels loop computing the same;
* read: a 60,000-row ``.xlsx`` — ``calib.io.read_run`` against
  ``pandas.read_excel(engine="openpyxl")`` (from ``bench/read_xlsx.py``);
* PDF: the record of a 40-analyte run — ms per page with calib's vector plots,
  and the same pages with the two plots of each analyte drawn by matplotlib;
* end to end: a 500-analyte × 8-level × 3-replicate ``.xlsx`` through
  ``calib check --json --pdf`` in a child process (wall time and peak memory,
  the child's ``ru_maxrss``), against a plain pipeline in a child process
  (pandas + openpyxl, a statsmodels fit per curve, matplotlib plots in reportlab);
* ``calib --help`` start-up, against a bare ``python -c pass``.

BLAS runs single-threaded (OPENBLAS_NUM_THREADS=1, also in the children) for fair
and steady timing.  A table of medians and ratios is printed and the figures go to
``bench/results/run.json`` (git-ignored).  Needs matplotlib and statsmodels
(``pip install -e .[bench]``).

Run from the repository root::

    python bench/run.py                  # everything, about 12 minutes on two cores
    python bench/run.py --repeats 1      # one of each, for a quick look
"""

from __future__ import annotations

import argparse
import io
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from functools import partial
from pathlib import Path

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")  # before numpy loads; see bench/fit_batch.py

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
for _path in (str(ROOT), str(HERE)):
    if _path not in sys.path:
        sys.path.insert(0, _path)  # run as a script from a checkout; sibling bench modules

import fit_batch as fit_bench
import numpy as np
import read_xlsx as read_bench

E2E_ROWS = 12_000  # 500 analytes × 8 levels × 3 replicates in read_xlsx.write_export's layout
PDF_ANALYTES = 40


def _median(func: Callable[[], object], repeats: int) -> tuple[float, object]:
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = func()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


# --- fit -------------------------------------------------------------------------------------

def bench_fit(repeats: int, curves: int = 2000) -> dict:
    """Both rows of bench/fit_batch.py per case: fit + inference, and with the diagnostics."""
    # The statsmodels loops take seconds per run: at most three runs of them.
    measure = partial(fit_bench.measure, repeats=repeats,
                      baseline_repeats=max(1, min(repeats, 3)), with_fit_curve=False)
    cases = []
    for i, (model, weighting) in enumerate(fit_bench.CASES):
        x, y = fit_bench.invented_run(curves, model, fit_bench.SEED + i)
        cases.append({"model": model, "weighting": weighting,
                      "rows": measure(x, y, model, weighting)})
    return {"curves": curves, "points": fit_bench.POINTS, "cases": cases,
            "rows": fit_bench.ROWS, "baseline": "a per-curve statsmodels loop computing the same"}


# --- read ------------------------------------------------------------------------------------

def bench_read(folder: Path, repeats: int, rows: int = 60_000) -> dict:
    import pandas as pd

    from calib.io import read_run

    path = folder / "read60k.xlsx"
    read_bench.write_export(path, rows)
    ours, run = _median(lambda: read_run(path), repeats)
    theirs, frame = _median(
        lambda: pd.read_excel(path, engine="openpyxl", header=read_bench.HEADER_ROW),
        max(1, min(repeats, 3)))
    assert len(run.points) == len(frame) == rows
    return {"rows": rows, "calib_s": ours, "pandas_openpyxl_s": theirs, "ratio": theirs / ours}


# --- PDF -------------------------------------------------------------------------------------

def _mpl_image(draw: Callable, width: float, height: float):
    """A matplotlib figure of the drawing's size, as a reportlab Image flowable (PNG, 150 dpi)."""
    import matplotlib.pyplot as plt
    from reportlab.platypus import Image

    fig, ax = plt.subplots(figsize=(width / 72, height / 72))
    draw(ax)
    ax.tick_params(labelsize=6)
    fig.tight_layout(pad=0.3)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=150)
    plt.close(fig)
    buffer.seek(0)
    return Image(buffer, width=width, height=height)


def mpl_calibration_chart(points, band, *, width, height, x_title, y_title, log_x=False):
    def draw(ax):
        ax.scatter([p.x for p in points], [p.y for p in points], s=6,
                   c=["C0" if p.included else "C1" for p in points])
        if band is not None:
            yhat, half = np.array(band.yhat), np.array(band.half_width)
            ax.plot(band.x, yhat, lw=0.8)
            ax.fill_between(band.x, yhat - half, yhat + half, alpha=0.3, lw=0)
        ax.set_xlabel(x_title, fontsize=6)
        ax.set_ylabel(y_title, fontsize=6)
        if log_x:
            ax.set_xscale("log")
    return _mpl_image(draw, width, height)


def mpl_residual_chart(points, *, width, height, x_title, y_title, log_x=False):
    def draw(ax):
        ax.scatter([p.x for p in points], [p.y for p in points], s=6)
        ax.axhline(0, lw=0.6, color="grey")
        ax.set_xlabel(x_title, fontsize=6)
        ax.set_ylabel(y_title, fontsize=6)
        if log_x:
            ax.set_xscale("log")
    return _mpl_image(draw, width, height)


def bench_pdf(folder: Path, repeats: int) -> dict:
    import matplotlib

    matplotlib.use("Agg")
    from dataclasses import replace

    from pypdf import PdfReader

    from calib.checks.evaluate import evaluate_run
    from calib.io import read_run
    from calib.record.record import build_record
    from calib.report import story
    from calib.workflow import record_pdf

    path = folder / "pdf_run.xlsx"
    read_bench.write_export(path, E2E_ROWS)
    run = read_run(path)
    keep = set(run.analytes[:PDF_ANALYTES])
    run = replace(run, points=tuple(p for p in run.points if p.analyte in keep))
    record = build_record(evaluate_run(run), prepared_by="bench")
    record_pdf(record)  # warm-up: fonts, imports
    ours, pdf = _median(lambda: record_pdf(record), repeats)
    pages = len(PdfReader(io.BytesIO(pdf)).pages)
    vector = (story.calibration_chart, story.residual_chart)
    story.calibration_chart, story.residual_chart = mpl_calibration_chart, mpl_residual_chart
    try:
        record_pdf(record)
        theirs, plain = _median(lambda: record_pdf(record), max(1, min(repeats, 3)))
    finally:
        story.calibration_chart, story.residual_chart = vector
    same_pages = len(PdfReader(io.BytesIO(plain)).pages)
    reproducible = record_pdf(record) == pdf
    return {"analytes": PDF_ANALYTES, "pages": pages, "matplotlib_pages": same_pages,
            "calib_ms_per_page": ours * 1e3 / pages,
            "calib_ms_per_analyte": ours * 1e3 / PDF_ANALYTES,
            "matplotlib_ms_per_page": theirs * 1e3 / same_pages,
            "ratio": theirs / ours, "byte_reproducible": reproducible}


# --- end to end ------------------------------------------------------------------------------

def _child(argv: list[str]) -> tuple[float, float, int]:
    """Wall seconds, peak resident MB (the child's ru_maxrss) and exit code of one child."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    start = time.perf_counter()
    child = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env,
                             cwd=ROOT)
    _, status, usage = os.wait4(child.pid, 0)
    elapsed = time.perf_counter() - start
    child.returncode = os.waitstatus_to_exitcode(status)
    child.stderr.close()
    return elapsed, usage.ru_maxrss / 1024, child.returncode  # Linux: ru_maxrss in KiB


def plain_pipeline(source: Path, pdf_out: Path) -> None:
    """What a practitioner might write: pandas to read, statsmodels per curve, matplotlib plots."""
    import matplotlib

    matplotlib.use("Agg")
    import pandas as pd
    import statsmodels.api as sm
    from reportlab.lib.pagesizes import A4
    from reportlab.lib.styles import getSampleStyleSheet
    from reportlab.platypus import PageBreak, Paragraph, SimpleDocTemplate, Table

    from calib.report.charts import PlotPoint

    frame = pd.read_excel(source, engine="openpyxl", header=read_bench.HEADER_ROW)
    styles = getSampleStyleSheet()
    results, flow = [], []
    for analyte, rows in frame.groupby("Analyte", sort=False):
        x = rows["Conc (µg/L)"].to_numpy(float)
        y = rows["Area"].to_numpy(float)
        fit = sm.WLS(y, sm.add_constant(x), weights=np.ones_like(x)).fit()
        ci = fit.conf_int(0.05)
        back = (y - fit.params[0]) / fit.params[1]
        results.append({"analyte": analyte, "params": fit.params.tolist(),
                        "bse": fit.bse.tolist(), "pvalues": fit.pvalues.tolist(),
                        "ci": ci.tolist(), "r2": fit.rsquared, "back": back.tolist()})
        flow.append(Paragraph(f"Analyte {analyte}", styles["Heading2"]))
        flow.append(Table([["coefficient", "estimate", "SE", "p"]]
                          + [[n, f"{b:.6g}", f"{s:.3g}", f"{p:.3g}"] for n, b, s, p in
                             zip(("intercept", "slope"), fit.params, fit.bse, fit.pvalues)]))
        flow.append(Table([["conc", "response", "back-calculated", "dev %"]]
                          + [[f"{a:g}", f"{b:.6g}", f"{c:.6g}", f"{100 * (c - a) / a:.2f}"]
                             for a, b, c in zip(x, y, back)]))
        grid = np.linspace(x.min(), x.max(), 50)
        pred = fit.get_prediction(sm.add_constant(grid)).summary_frame(alpha=0.05)
        from calib.report.charts import CurveBand

        band = CurveBand(tuple(grid), tuple(pred["mean"]),
                         tuple(pred["mean"] - pred["mean_ci_lower"]), 0.95)
        pts = [PlotPoint(a, b, True) for a, b in zip(x, y)]
        res = [PlotPoint(a, r, True) for a, r in zip(x, fit.resid)]
        flow.append(Table([[mpl_calibration_chart(pts, band, width=240, height=170,
                                                  x_title="Concentration", y_title="Response"),
                            mpl_residual_chart(res, width=240, height=170,
                                               x_title="Concentration", y_title="Residual")]]))
        flow.append(PageBreak())
    json.dumps(results)
    SimpleDocTemplate(str(pdf_out), pagesize=A4).build(flow)


def bench_end_to_end(folder: Path, repeats: int) -> dict:
    path = folder / "run500.xlsx"
    read_bench.write_export(path, E2E_ROWS)
    # A fresh PDF name each run: calib never overwrites a record without --force.
    ours = [_child([sys.executable, "-m", "calib", "check", str(path), "--json",
                    "--pdf", str(folder / f"calib-{i}.pdf")]) for i in range(repeats)]
    # The plain pipeline takes minutes; one run of it is enough for a ratio of several ×.
    theirs = [_child([sys.executable, str(Path(__file__)), "--plain-pipeline",
                      str(path), str(folder / "plain.pdf")])]
    codes = [code for _, _, code in ours], [code for _, _, code in theirs]
    if any(c not in (0, 1) for c in codes[0]) or any(codes[1]):
        raise RuntimeError(f"a child failed: calib exits {codes[0]}, plain exits {codes[1]}")
    calib_s = statistics.median(t for t, _, _ in ours)
    plain_s = statistics.median(t for t, _, _ in theirs)
    return {"analytes": 500, "rows": E2E_ROWS, "calib_s": calib_s, "plain_s": plain_s,
            "calib_runs": len(ours), "plain_runs": len(theirs),
            "ratio": plain_s / calib_s, "calib_peak_mb": max(m for _, m, _ in ours),
            "plain_peak_mb": max(m for _, m, _ in theirs),
            "calib_pdf_bytes": (folder / "calib-0.pdf").stat().st_size}


def bench_help(repeats: int) -> dict:
    python = [sys.executable, "-c", "pass"]
    ours = statistics.median(_child([sys.executable, "-m", "calib", "--help"])[0]
                             for _ in range(max(repeats, 5)))
    bare = statistics.median(_child(python)[0] for _ in range(max(repeats, 5)))
    return {"calib_help_s": ours, "python_startup_s": bare}


# --- report ----------------------------------------------------------------------------------

def table(results: dict) -> list[str]:
    fit, read, pdf, e2e, helped = (results[k] for k in ("fit", "read", "pdf", "end_to_end",
                                                        "help"))
    rows = [f"{'measurement':<44}{'calib':>12}{'baseline':>12}{'ratio':>8}  target  met"]

    def row(name, ours, theirs, ratio, target, met):
        rows.append(f"{name:<44}{ours:>12}{theirs:>12}{ratio:>8}  {target:<7} "
                    f"{'yes' if met else 'NO'}")

    for case in fit["cases"]:
        for key, label in (("fit_inference", "fit+inference"),
                           ("fit_inference_diagnostics", "fit+inf+diagnostics")):
            entry = case["rows"][key]
            us, r = entry["us_per_curve"], entry["ratio"]["statsmodels"]["wall"]
            row(f"{label} {case['model']} {case['weighting']} (µs/curve)",
                f"{us['calib']['wall_us_per_curve']:.1f}",
                f"{us['statsmodels']['wall_us_per_curve']:.0f}", f"{r:.0f}×", "≥100×", r >= 100)
    rows.append("  fit+inference = the fit and estimate, SE, t, p, 95 % CI of every coefficient;"
                " baseline statsmodels WLS")
    rows.append("  fit+inf+diagnostics = that and leverage, studentized residuals (internal,"
                " external), Cook's D")
    rows.append("    of every point, lack-of-fit F and p of every curve; baseline WLS +"
                " OLSInfluence + level-means fit")
    row("read 60,000-row .xlsx (s)", f"{read['calib_s']:.2f}", f"{read['pandas_openpyxl_s']:.2f}",
        f"{read['ratio']:.1f}×", "≥5×", read["ratio"] >= 5)
    row(f"PDF, {pdf['pages']} pages (ms/page)", f"{pdf['calib_ms_per_page']:.1f}",
        f"{pdf['matplotlib_ms_per_page']:.1f}", f"{pdf['ratio']:.1f}×", "≤20ms",
        pdf["calib_ms_per_page"] <= 20)
    row("PDF against matplotlib plots", "", "", f"{pdf['ratio']:.1f}×", "≥5×", pdf["ratio"] >= 5)
    row("end to end, 500 analytes (s)", f"{e2e['calib_s']:.1f}", f"{e2e['plain_s']:.1f}",
        f"{e2e['ratio']:.1f}×", "≤15s", e2e["calib_s"] <= 15)
    row("end to end against the plain pipeline", "", "", f"{e2e['ratio']:.1f}×", "≥4×",
        e2e["ratio"] >= 4)
    row("end to end peak memory (MB)", f"{e2e['calib_peak_mb']:.0f}",
        f"{e2e['plain_peak_mb']:.0f}", "", "≤400MB", e2e["calib_peak_mb"] <= 400)
    row("calib --help (s)", f"{helped['calib_help_s']:.2f}",
        f"{helped['python_startup_s']:.2f}", "", "≤0.5s", helped["calib_help_s"] <= 0.5)
    return rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3, help="timed runs per measurement")
    parser.add_argument("--plain-pipeline", nargs=2, metavar=("XLSX", "PDF"),
                        help=argparse.SUPPRESS)  # the baseline's child process
    args = parser.parse_args(argv)
    if args.plain_pipeline:
        plain_pipeline(Path(args.plain_pipeline[0]), Path(args.plain_pipeline[1]))
        return 0
    load = os.getloadavg()
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        results = {"fit": bench_fit(args.repeats), "read": bench_read(folder, args.repeats),
                   "pdf": bench_pdf(folder, args.repeats),
                   "end_to_end": bench_end_to_end(folder, args.repeats),
                   "help": bench_help(args.repeats)}
    results["environment"] = {
        "python": platform.python_version(), "machine": platform.machine(),
        "cpus": os.cpu_count(), "blas_threads": os.environ["OPENBLAS_NUM_THREADS"],
        "load_average_before": load, "load_average_after": os.getloadavg(),
        "repeats": args.repeats, "statistic": "median of the repeats",
    }
    print(f"median of {args.repeats} runs; {os.cpu_count()} CPUs; OPENBLAS_NUM_THREADS="
          f"{os.environ['OPENBLAS_NUM_THREADS']}; load average {load[0]:.1f} at start")
    print("\n".join(table(results)))
    out = HERE / "results" / "run.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(results, indent=2, default=float) + "\n", encoding="utf-8")
    print(f"written {out.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
