"""calib's importer against python-calamine's own full read of the same ``.xlsx``, side by side.

The file is the invented 60,000-row export of ``bench/read_xlsx.py`` (500 analytes × 8 levels
× 15 injections, with a title and ``key: value`` lines above the table).  In one run, the two
readers are timed in turn (interleaved, so that a busy machine slows both alike), each
``--repeats`` times; the medians and their ratio are printed:

* calamine: open the workbook and turn its first sheet into Python rows (every cell read);
* calib: ``calib.io.read_run`` — the same read plus header and layout detection, every
  cell checked, and the run-wide checks (copies, levels, summary rows, analyte names,
  replicate numbers, two populations, magnitudes).  The run holds its points as columns
  (:class:`~calib.run.PointColumns`); making every :class:`~calib.run.Point` with its
  source cell, which happens when ``run.points`` is first read, is timed apart and printed
  beside the ratio (it is not part of it).

Both wall-clock and CPU time are measured; the wall-clock ratio is the one judged.  calib's
CPU time counts its child process too (the parse runs there), so the CPU ratio is what a
machine with no core to spare would see; the load average is printed beside the figures, as a
busy machine shares its cores between the two processes of calib and the one of calamine.  The importer's first step, the scan of
the archive against the size limits (``calib.io.limits.inspect_archive``), is also timed alone,
so that the share of each part is seen.  ``--memory`` reads a larger export in a fresh process
and prints the peak resident memory of the larger of that process and its workbook child.

Issue 17 sets the target ratio at 1.5 or less; the script exits 1 above it.

Run from the repository root::

    python bench/read_vs_calamine.py              # 60,000 rows, 9 interleaved repeats
    python bench/read_vs_calamine.py --rows 20000 --repeats 3
    python bench/read_vs_calamine.py --memory 200000   # also the peak memory at 200,000 rows
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

HERE = Path(__file__).resolve().parent
for _path in (str(HERE.parent), str(HERE)):
    if _path not in sys.path:
        sys.path.insert(0, _path)  # run as a script from a checkout; sibling bench modules

import python_calamine  # noqa: E402
import read_xlsx  # noqa: E402

from calib.io import read_run  # noqa: E402
from calib.io.files import load_file
from calib.io.limits import inspect_archive

T = TypeVar("T")

TARGET = 1.5
"""Importer time over calamine's time, at most (issue 17)."""


def calamine_rows(path: Path) -> list[list[object]]:
    """Every cell of the first sheet, as calamine gives it."""
    book = python_calamine.CalamineWorkbook.from_path(str(path))
    return book.get_sheet_by_index(0).to_python()


def _cpu() -> float:
    """CPU seconds of this process and of its children that have ended."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def _timed(work: Callable[[], T], into: list[tuple[float, float]]) -> T:
    """``work()``; its wall-clock and CPU seconds (children included) are appended to ``into``."""
    wall, cpu = time.perf_counter(), _cpu()
    result = work()
    into.append((time.perf_counter() - wall, _cpu() - cpu))
    return result


def peak_memory(rows: int) -> int:
    """Peak resident memory (bytes) of a fresh process reading a ``rows``-row export.

    ``ru_maxrss`` of ended children is that of the largest one, the reader's workbook child
    (its grandchild here) included (getrusage(2)).
    """
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder, "export.xlsx")
        read_xlsx.write_export(path, rows)
        code = (f"import sys; sys.path[:0] = [{str(HERE.parent)!r}]; from calib.io import "
                f"read_run; assert len(read_run({str(path)!r}).points) == {rows}")
        before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
        subprocess.run([sys.executable, "-c", code], check=True)
        after = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return max(before, after) * 1024  # Linux reports kibibytes


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=60_000, help="rows in the export")
    parser.add_argument("--repeats", type=int, default=9, help="interleaved timings of each")
    parser.add_argument("--memory", type=int, metavar="ROWS", default=0,
                        help="also print the peak memory of reading a ROWS-row export")
    args = parser.parse_args(argv)
    ours: list[tuple[float, float]] = []
    theirs: list[tuple[float, float]] = []
    scans: list[tuple[float, float]] = []
    makes: list[tuple[float, float]] = []
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder, "export.xlsx")
        read_xlsx.write_export(path, args.rows)
        raw = load_file(path, what="an .xlsx workbook")
        for _ in range(args.repeats):
            rows = _timed(lambda: calamine_rows(path), theirs)
            run = _timed(lambda: read_run(path), ours)
            _timed(lambda: run.points, makes)  # noqa: B023 - called at once
            _timed(lambda: inspect_archive(raw, what="an .xlsx workbook"), scans)
    header = read_xlsx.HEADER_ROW + 1
    assert len(run.points) == len(rows) - header == args.rows, (len(run.points), len(rows))
    assert [p.response for p in run.points] == [row[4] for row in rows[header:]]

    def median(values: list[tuple[float, float]], which: int) -> float:
        return statistics.median(v[which] for v in values)

    calib_s, calamine_s, scan_s = median(ours, 0), median(theirs, 0), median(scans, 0)
    ratio = calib_s / calamine_s
    cpu_ratio = median(ours, 1) / median(theirs, 1)
    print(f"{args.rows:,}-row .xlsx, medians of {args.repeats} interleaved runs: "
          f"calib read_run {calib_s:.3f} s, python-calamine full read {calamine_s:.3f} s")
    print(f"  of calib's time, the archive scan against the size limits: {scan_s:.3f} s "
          f"({scan_s / calamine_s:.2f} x calamine)")
    print(f"  after the read, making every point (the first read of run.points): "
          f"{median(makes, 0):.3f} s (not in the ratio)")
    print(f"  CPU time (calib with its child process): calib {median(ours, 1):.3f} s, calamine "
          f"{median(theirs, 1):.3f} s, ratio {cpu_ratio:.2f}; load average "
          f"{os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    pairs = sorted(a[0] / b[0] for a, b in zip(ours, theirs))
    print(f"  ratio of each interleaved pair: {pairs[0]:.2f} to {pairs[-1]:.2f}")
    print(f"importer/calamine ratio {ratio:.2f} (target: at most {TARGET})")
    if args.memory:
        print(f"peak memory reading {args.memory:,} rows: {peak_memory(args.memory) / 2**20:.0f} MB")
    return 0 if ratio <= TARGET else 1


if __name__ == "__main__":
    sys.exit(main())
