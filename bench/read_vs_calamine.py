"""calib's importer against python-calamine's own full read of the same ``.xlsx``, side by side.

The file is the invented 60,000-row export of ``bench/read_xlsx.py`` (500 analytes × 8 levels
× 15 injections, with a title and ``key: value`` lines above the table).  In one run, the two
readers are timed in turn (interleaved, so that a busy machine slows both alike), each
``--repeats`` times; the medians and their ratio are printed:

* calamine: open the workbook and turn its first sheet into Python rows (every cell read);
* calib: ``calib.io.read_run`` — the same read plus header and layout detection, every
  cell checked, a :class:`~calib.run.Point` with its source cell per injection, and the
  run-wide checks (copies, levels, summary rows, analyte names, replicate numbers).

Issue 17 sets the target ratio at 1.5 or less; the script exits 1 above it.

Run from the repository root::

    python bench/read_vs_calamine.py              # 60,000 rows, 5 interleaved repeats
    python bench/read_vs_calamine.py --rows 20000 --repeats 3
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
for _path in (str(HERE.parent), str(HERE)):
    if _path not in sys.path:
        sys.path.insert(0, _path)  # run as a script from a checkout; sibling bench modules

import python_calamine  # noqa: E402
import read_xlsx  # noqa: E402

from calib.io import read_run  # noqa: E402

TARGET = 1.5
"""Importer time over calamine's time, at most (issue 17)."""


def calamine_rows(path: Path) -> list[list[object]]:
    """Every cell of the first sheet, as calamine gives it."""
    book = python_calamine.CalamineWorkbook.from_path(str(path))
    return book.get_sheet_by_index(0).to_python()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=60_000, help="rows in the export")
    parser.add_argument("--repeats", type=int, default=5, help="interleaved timings of each")
    args = parser.parse_args(argv)
    ours: list[float] = []
    theirs: list[float] = []
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder, "export.xlsx")
        read_xlsx.write_export(path, args.rows)
        for _ in range(args.repeats):
            start = time.perf_counter()
            rows = calamine_rows(path)
            theirs.append(time.perf_counter() - start)
            start = time.perf_counter()
            run = read_run(path)
            ours.append(time.perf_counter() - start)
    header = read_xlsx.HEADER_ROW + 1
    assert len(run.points) == len(rows) - header == args.rows, (len(run.points), len(rows))
    assert [p.response for p in run.points] == [row[4] for row in rows[header:]]
    calib_s, calamine_s = statistics.median(ours), statistics.median(theirs)
    ratio = calib_s / calamine_s
    print(f"{args.rows:,}-row .xlsx, medians of {args.repeats} interleaved runs: "
          f"calib read_run {calib_s:.3f} s, python-calamine full read {calamine_s:.3f} s")
    print(f"importer/calamine ratio {ratio:.2f} (target: at most {TARGET})")
    return 0 if ratio <= TARGET else 1


if __name__ == "__main__":
    sys.exit(main())
