"""The archive under load on both engines: 8 writers × 50 records while readers verify."""

from __future__ import annotations

import multiprocessing
import sys
import time

import pytest

from calib.archive import Archive
from calib.record import Record
from tests.archive.conftest import location, postgres_base  # noqa: F401 - both engines
from tests.archive.helpers import make_record, pdf_for, variant

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="fork is POSIX only")

WRITERS, EACH, READERS = 8, 50, 2
CTX = multiprocessing.get_context("fork" if sys.platform.startswith("linux") else "spawn")


def _write(path: str, records: list[bytes], errors) -> None:
    try:
        with Archive(path) as archive:
            for data in records:
                record = Record.from_json(data)
                archive.append(record, pdf_for(record), kind="issued")
    except Exception as exc:
        errors.put(f"writer: {type(exc).__name__}: {exc}")
        raise


def _verify_until(path: str, stop, errors, rounds) -> None:
    """Verify the chain over and over, as `calib archive verify` would, until told to stop."""
    while not stop.is_set():
        try:
            with Archive(path, create=False) as archive:
                report = archive.verify_chain()
            if not report.ok:
                errors.put(f"reader: {report.problems}")
            rounds.put(1)
        except Exception as exc:  # noqa: BLE001 - reported to the parent, which asserts none
            errors.put(f"reader: {type(exc).__name__}: {exc}")
        time.sleep(0.01)


def test_eight_writers_and_verifying_readers_lose_nothing(location):
    path = location
    base = make_record()
    with Archive(path) as archive:  # the readers open with create=False
        first = variant(base, 100_000)
        archive.append(first, pdf_for(first), kind="issued")
    batches = [[variant(base, w * EACH + i).canonical for i in range(EACH)]
               for w in range(WRITERS)]
    errors, rounds, stop = CTX.Queue(), CTX.Queue(), CTX.Event()
    readers = [CTX.Process(target=_verify_until, args=(path, stop, errors, rounds))
               for _ in range(READERS)]
    writers = [CTX.Process(target=_write, args=(path, batch, errors)) for batch in batches]
    start = time.monotonic()
    for p in readers + writers:
        p.start()
    for p in writers:
        p.join(timeout=60)
    stop.set()
    for p in readers:
        p.join(timeout=30)
    elapsed = time.monotonic() - start
    problems = []
    while not errors.empty():
        problems.append(errors.get())
    assert problems == []
    assert [p.exitcode for p in writers + readers] == [0] * (WRITERS + READERS)
    assert not rounds.empty()  # the readers did verify while the writers wrote
    with Archive(path, create=False) as archive:
        entries = archive.entries(data=False)
        report = archive.verify_chain()
    assert len(entries) == WRITERS * EACH + 1
    assert [e.seq for e in entries] == list(range(1, WRITERS * EACH + 2))
    expected = {Record.from_json(d).digest for batch in batches for d in batch}
    assert expected <= {e.version_digest for e in entries}
    assert report.ok, report.problems
    assert elapsed < 60
