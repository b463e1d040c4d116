"""Time calib's workbook importer against ``pandas.read_excel(engine="openpyxl")``.

An invented long-layout export of 60,000 injections (500 analytes × 8 levels ×
15 injections, title and ``key: value`` lines above the header, a sample-type
column, replicate, injection order, include and comment columns) is written
once with openpyxl.  Then, several times each, the median kept:

* ``calib.io.read_run`` — the whole import: archive limits scan, calamine
  parse, header and layout detection, every row checked into a Point;
* ``pandas.read_excel(engine="openpyxl", header=...)`` — a plain DataFrame,
  told where the header is, with no checking at all.

The target (SPEC §8) is calib at least 5× faster; the ratio is printed and the
figures go to ``bench/results/read_xlsx.json`` (git-ignored).  Both answers are
compared (number of points, the responses) so a fast wrong path would show.

Run from the repository root::

    python bench/read_xlsx.py                 # 60,000 rows
    python bench/read_xlsx.py --rows 20000 --repeats 3
"""

from __future__ import annotations

import argparse
import json
import platform
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))  # run as a script from a checkout, calib not installed

import numpy as np
import openpyxl
import pandas as pd

from calib.io import read_run

HEADER_ROW = 6  # 0-based row of the headings in the written file


def write_export(path: Path, rows: int, *, seed: int = 20261201) -> None:
    """An invented 60,000-row-style long export (write-only openpyxl, fast to write)."""
    rng = np.random.default_rng(seed)
    book = openpyxl.Workbook(write_only=True)
    sheet = book.create_sheet("Batch")
    sheet.append(["Multi-residue screen (fictional), full export"])
    sheet.append(["Instrument:", "LCMS-2"])
    sheet.append(["Method:", "MRS-500 screen"])
    sheet.append(["Run date:", "2026-12-10"])
    sheet.append(["Operator:", "K. Ilves"])
    sheet.append([])
    sheet.append(["Analyte", "Sample", "Sample type", "Conc (µg/L)", "Area", "Rep",
                  "Injection order", "Include", "Comment"])
    levels = (0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0)
    slopes = rng.uniform(800, 5000, size=500)
    noise = rng.normal(0, 0.02, size=rows)
    for index in range(rows):
        analyte = index % 500
        level = (index // 500) % 8
        conc = levels[level]
        sheet.append([f"MRS-{analyte + 1:03d}", f"Cal {level + 1}", "Standard", conc,
                      round(float(slopes[analyte] * conc * (1 + noise[index])), 3),
                      index // 4000 + 1, index + 1, "yes", None])
    book.save(path)


def _median_seconds(func, repeats: int) -> tuple[float, object]:
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = func()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=60_000, help="rows in the export")
    parser.add_argument("--repeats", type=int, default=5, help="timings per reader (median)")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder, "export.xlsx")
        write_export(path, args.rows)
        ours, run = _median_seconds(lambda: read_run(path), args.repeats)
        theirs, frame = _median_seconds(
            lambda: pd.read_excel(path, engine="openpyxl", header=HEADER_ROW),
            max(1, min(args.repeats, 3)),
        )
        size = path.stat().st_size
    assert len(run.points) == len(frame) == args.rows, (len(run.points), len(frame))
    assert np.array_equal([p.response for p in run.points], frame["Area"].to_numpy())
    ratio = theirs / ours
    print(f"{args.rows:,}-row .xlsx ({size / 1e6:.1f} MB): calib read_run {ours:.3f} s, "
          f"pandas.read_excel(engine='openpyxl') {theirs:.3f} s")
    print(f"calib is {ratio:.1f}x faster (target: at least 5x)")
    results = ROOT / "bench" / "results"
    results.mkdir(exist_ok=True)
    (results / "read_xlsx.json").write_text(json.dumps({
        "rows": args.rows, "bytes": size, "calib_seconds": ours, "pandas_openpyxl_seconds": theirs,
        "ratio": ratio, "python": platform.python_version(), "pandas": pd.__version__,
        "openpyxl": openpyxl.__version__,
    }, indent=2) + "\n")
    return 0 if ratio >= 5 else 1


if __name__ == "__main__":
    sys.exit(main())
