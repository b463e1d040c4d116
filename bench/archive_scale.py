"""The archive at scale, on SQLite and PostgreSQL: records → seconds, and 16 writers at once.

Synthetic small records (one invented curve each, an analyte out of 20, run dates over
three years) with a minimal PDF that carries the record JSON as its attachment, exactly
as the archive checks it, are bulk-loaded in one transaction per step through
``Archive.append_prepared`` (the same chaining and triggers as every append; only the
per-record PDF parsing of ``Archive.prepare`` is skipped, since these PDFs are built
right here).  At 1,000, 10,000 and 100,000 entries it times, median of 5:

* list: the newest page of 50 (``entries(limit=50, newest_first=True, data=False)``)
  and a page deep inside (``offset`` = half the archive);
* search: a page of one analyte's records, one record id, and one analyte's trend
  history (``curve_history``);
* verify-one: ``verify_entry`` of a record in the middle (entry, links, JSON, PDF,
  triggers, head receipt);
* full chain: ``verify_chain(deep=False)``, the hash pass (entries per second).

Then 16 processes append 100 records each through ``Archive.append`` (full checks,
PDF parsed) into a fresh archive; the bench reports lost entries (must be 0), whether
the chain verifies in full, and the median and 95th percentile time of one append.

PostgreSQL: ``--postgres-url URL`` (a database the bench may create schemas in), or a
throw-away server started like the test suite's (``tests/postgres.py``) when Debian's
package is installed.  Run from the repository root::

    python bench/archive_scale.py                          # both engines, ~10 min on 2 cores
    python bench/archive_scale.py --sizes 1000,10000 --engines sqlite
"""

from __future__ import annotations

import argparse
import contextlib
import multiprocessing
import os
import statistics
import sys
import tempfile
import time
from collections.abc import Callable, Iterator
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from calib.archive import Archive  # noqa: E402
from calib.archive.chain import derive_record  # noqa: E402
from calib.archive.store import PreparedEntry  # noqa: E402
from calib.record import Record  # noqa: E402

ANALYTES = [f"Analyte-{i:02d}" for i in range(20)]
REPEATS = 5


def tiny_pdf(attachment: bytes) -> bytes:
    """A one-page PDF whose only attached file is ``attachment`` (ISO 32000-1 §7.11.4)."""
    objects = [
        b"<< /Type /Catalog /Pages 2 0 R /Names << /EmbeddedFiles << /Names "
        b"[(calib-record.json) 4 0 R] >> >> >>",
        b"<< /Type /Pages /Kids [3 0 R] /Count 1 >>",
        b"<< /Type /Page /Parent 2 0 R /MediaBox [0 0 72 72] >>",
        b"<< /Type /Filespec /F (calib-record.json) /EF << /F 5 0 R >> >>",
        b"<< /Type /EmbeddedFile /Length " + str(len(attachment)).encode() + b" >>\nstream\n"
        + attachment + b"\nendstream",
    ]
    out = bytearray(b"%PDF-1.7\n")
    offsets = []
    for number, body in enumerate(objects, 1):
        offsets.append(len(out))
        out += f"{number} 0 obj\n".encode() + body + b"\nendobj\n"
    xref = len(out)
    out += f"xref\n0 {len(objects) + 1}\n0000000000 65535 f \n".encode()
    out += b"".join(f"{o:010d} 00000 n \n".encode() for o in offsets)
    out += (f"trailer\n<< /Size {len(objects) + 1} /Root 1 0 R >>\nstartxref\n{xref}\n"
            "%%EOF\n").encode()
    return bytes(out)


def synthetic(i: int, tag: str = "") -> Record:
    """Record number ``i``: one curve of one of 20 invented analytes (Fernbrook, fictional)."""
    day = f"2026-{(i // 28) % 12 + 1:02d}-{i % 28 + 1:02d}"
    analyte = ANALYTES[i % len(ANALYTES)]
    slope = 0.25 * (1 + ((i * 7919) % 101 - 50) / 5000)
    verdict = "accepted" if i % 17 else "needs-review"
    body = {
        "schema": "calib.record/1", "created_at": f"{day}T10:00:00Z",
        "run": {"file": f"run-{tag}{i}.csv", "metadata": {"Run date": day,
                                                         "Instrument": f"IC-{i % 3 + 1}"},
                "units": {"concentration": "mg/L", "response": "µS·min"}},
        "signatures": [{"role": "prepared", "name": "R. Okafor", "signed_at": f"{day}T10:00:00Z",
                        "meaning": "Prepared"}],
        "check": {"verdict": verdict, "curves": [{
            "analyte": analyte, "model": "linear", "weighting": "1/x", "verdict": verdict,
            "residual_sd": 0.004, "coefficients": {"slope": {"estimate": slope},
                                                   "intercept": {"estimate": 0.001}}}]},
    }
    return Record(body)


def prepared(i: int) -> PreparedEntry:
    record = synthetic(i)
    data = record.canonical
    derived = derive_record(data)
    facts = derived.facts
    return PreparedEntry(derived.record_id, derived.version_digest, derived.content_digest,
                         "issued", facts.analytes, facts.verdict, facts.run_date,
                         facts.instrument, facts.roles, data, tiny_pdf(data), facts.curves)


def median_time(action: Callable[[], object]) -> float:
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        action()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def scale(location: str, sizes: list[int], receipt: Path) -> list[dict[str, float]]:
    rows = []
    loaded = 0
    with Archive(location, head_receipt=receipt) as archive:
        for size in sizes:
            start = time.perf_counter()
            for batch in range(loaded, size, 10_000):
                archive.append_prepared([prepared(i) for i in range(batch,
                                                                     min(size, batch + 10_000))])
            load = time.perf_counter() - start
            loaded = size
            middle = synthetic(size // 2)
            analyte = ANALYTES[7]
            row = {"records": size, "load_s": load}
            row["list_s"] = median_time(lambda: archive.entries(limit=50, newest_first=True,
                                                                data=False))
            row["list_deep_page_s"] = median_time(lambda: archive.entries(
                limit=50, offset=size // 2, data=False))
            row["search_analyte_s"] = median_time(lambda: archive.entries(
                analyte=analyte, limit=50, data=False))
            row["search_id_s"] = median_time(lambda: archive.entries(record_id=middle.record_id))
            row["trend_s"] = median_time(lambda: archive.curve_history(analyte))
            report = archive.verify_entry(middle.digest)
            assert report.ok, report.problems
            row["verify_one_s"] = median_time(lambda: archive.verify_entry(middle.digest))
            start = time.perf_counter()
            chain = archive.verify_chain(deep=False)
            row["full_chain_s"] = time.perf_counter() - start
            assert chain.ok and chain.entries == size, chain.problems[:3]
            row["entries_per_s"] = size / row["full_chain_s"]
            rows.append(row)
            print(f"  {size:>7} records: " + ", ".join(
                f"{k} {v:.4f}" for k, v in row.items() if k != "records"), flush=True)
    return rows


def _writer(location: str, receipt: str, worker: int, each: int, out) -> None:
    times = []
    with Archive(location, head_receipt=receipt) as archive:
        for n in range(each):
            record = synthetic(worker * 1000 + n, tag=f"w{worker}-")
            pdf = tiny_pdf(record.canonical)
            start = time.perf_counter()
            archive.append(record, pdf, kind="issued")
            times.append(time.perf_counter() - start)
    out.put(times)


def writers(location: str, receipt: Path, count: int, each: int) -> dict[str, float]:
    ctx = multiprocessing.get_context("fork")
    Archive(location, head_receipt=receipt).close()
    out = ctx.Queue()
    start = time.perf_counter()
    procs = [ctx.Process(target=_writer, args=(location, str(receipt), w, each, out))
             for w in range(count)]
    for p in procs:
        p.start()
    times = [t for _ in procs for t in out.get(timeout=600)]
    for p in procs:
        p.join(timeout=60)
    wall = time.perf_counter() - start
    with Archive(location, create=False, head_receipt=receipt) as archive:
        held = len(archive)
        report = archive.verify_chain()
        expected = {synthetic(w * 1000 + n, tag=f"w{w}-").digest
                    for w in range(count) for n in range(each)}
        found = {e.version_digest for e in archive.entries(data=False)}
    times.sort()
    return {"appends": count * each, "held": held, "lost": len(expected - found),
            "chain_ok": float(report.ok), "median_ms": statistics.median(times) * 1000,
            "p95_ms": times[int(0.95 * (len(times) - 1))] * 1000, "wall_s": wall,
            "exit_codes_ok": float(all(p.exitcode == 0 for p in procs))}


@contextlib.contextmanager
def engine_location(engine: str, folder: Path, url: str | None) -> Iterator[Callable[[], str]]:
    if engine == "sqlite":
        counter = iter(range(1000))
        yield lambda: str(folder / f"scale-{next(counter)}.sqlite")
        return
    from tests import postgres

    if url:
        yield lambda: postgres.fresh_schema(url)
        return
    reason = postgres.unavailable_reason()
    if reason:
        raise SystemExit(f"bench: {reason}")
    with postgres.server() as base:
        yield lambda: postgres.fresh_schema(base)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sizes", default="1000,10000,100000")
    parser.add_argument("--engines", default="sqlite,postgresql")
    parser.add_argument("--postgres-url", default=os.environ.get("CALIB_TEST_POSTGRES_URL"))
    parser.add_argument("--writers", type=int, default=16)
    parser.add_argument("--each", type=int, default=100)
    args = parser.parse_args(argv)
    sizes = sorted(int(s) for s in args.sizes.split(","))
    results = {}
    with tempfile.TemporaryDirectory(prefix="calib-bench-") as tmp:
        folder = Path(tmp)
        for engine in args.engines.split(","):
            print(f"{engine}:", flush=True)
            with engine_location(engine, folder, args.postgres_url) as new:
                rows = scale(new(), sizes, folder / f"{engine}-scale.head.json")
                load = writers(new(), folder / f"{engine}-writers.head.json", args.writers,
                               args.each)
            print(f"  writers: {load}", flush=True)
            results[engine] = (rows, load)
    print()
    print("| engine | records | list (newest 50) | list (page at n/2) | search analyte | "
          "search id | trend history | verify one | full chain (hash pass) |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|")
    for engine, (rows, _) in results.items():
        for r in rows:
            cells = " | ".join(f"{r[k] * 1000:.2f} ms" for k in (
                "list_s", "list_deep_page_s", "search_analyte_s", "search_id_s", "trend_s",
                "verify_one_s"))
            print(f"| {engine} | {r['records']:,} | {cells} | "
                  f"{r['full_chain_s']:.2f} s ({r['entries_per_s']:,.0f}/s) |")
    print()
    print("| engine | writers × records | lost | chain verifies | median append | "
          "p95 append | wall |")
    print("|---|---|---:|---|---:|---:|---:|")
    for engine, (_, w) in results.items():
        print(f"| {engine} | {args.writers} × {args.each} | {w['lost']} | "
              f"{'yes' if w['chain_ok'] else 'NO'} | {w['median_ms']:.1f} ms | "
              f"{w['p95_ms']:.1f} ms | {w['wall_s']:.1f} s |")
    bad = [e for e, (_, w) in results.items() if w["lost"] or not w["chain_ok"]
           or w["held"] != w["appends"] or not w["exit_codes_ok"]]
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
