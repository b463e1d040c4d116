"""Several writers at once, and writers killed mid-write: nothing lost, nothing half-written.

The workers run in separate processes, each with its own connection, as
separate ``calib check --archive`` runs would.  On Linux they are forked (no
connection is open in the parent at that moment), elsewhere spawned.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import sys
import time

import pytest

from calib.archive import Archive
from calib.record import Record
from tests.archive.helpers import make_record, pdf_for, variant

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX only")

WORKERS, EACH = 4, 25
CTX = multiprocessing.get_context("fork" if sys.platform.startswith("linux") else "spawn")


def _write_many(path: str, records: list[bytes]) -> None:
    with Archive(path) as archive:
        for data in records:
            record = Record.from_json(data)
            archive.append(record, pdf_for(record), kind="issued")


def _stall_mid_transaction(path: str, ready) -> None:
    """Append, but stop for good after the entry row is written and before the commit."""
    insert = Archive._insert

    def insert_then_stall(self, entry, curves):
        insert(self, entry, curves)
        ready.set()
        time.sleep(60)

    Archive._insert = insert_then_stall
    record = make_record(seed=999)
    with Archive(path) as archive:
        archive.append(record, pdf_for(record), kind="issued")


def _append_forever(path: str, started) -> None:
    base = make_record(seed=5000)
    with Archive(path) as archive:
        for i in range(100_000):
            record = variant(base, i)
            archive.append(record, pdf_for(record), kind="issued")
            started.set()


def _run(target, *args):
    process = CTX.Process(target=target, args=args)
    process.start()
    return process


def test_four_writers_lose_nothing(location):
    # All four also race to create the archive itself.
    path = location
    base = make_record()
    batches = [[variant(base, w * EACH + i).canonical for i in range(EACH)]
               for w in range(WORKERS)]
    processes = [_run(_write_many, path, batch) for batch in batches]
    for p in processes:
        p.join(timeout=120)
        assert p.exitcode == 0
    with Archive(path, create=False) as archive:
        entries = archive.entries(data=False)
        report = archive.verify_chain()
    assert len(entries) == WORKERS * EACH
    assert [e.seq for e in entries] == list(range(1, WORKERS * EACH + 1))
    expected = {Record.from_json(data).digest for batch in batches for data in batch}
    assert {e.version_digest for e in entries} == expected
    assert report.ok, report.problems


def test_writer_killed_before_commit_leaves_no_partial_entry(location):
    path = location
    first, second = make_record(seed=1), make_record(seed=2)
    with Archive(path) as archive:
        archive.append(first, pdf_for(first), kind="issued")
    ready = CTX.Event()
    process = _run(_stall_mid_transaction, path, ready)
    assert ready.wait(60), "the writer never reached the middle of its transaction"
    # The half-written entry exists only inside the writer's open transaction.
    os.kill(process.pid, signal.SIGKILL)
    process.join(timeout=30)
    assert process.exitcode == -signal.SIGKILL
    with Archive(path, timeout=5) as archive:
        assert len(archive) == 1
        assert archive.verify_chain().ok
        # The lock died with the writer: the next append goes straight on from seq 1.
        assert archive.append(second, pdf_for(second), kind="issued").seq == 2
        assert archive.verify_chain().ok
        assert archive.storage.query("SELECT count(*) FROM curves")[0][0] == 2
        assert archive.storage.query("SELECT count(*) FROM entry_data")[0][0] == 2


def test_writer_killed_in_a_tight_loop_leaves_a_verifiable_archive(location):
    path = location
    started = CTX.Event()
    process = _run(_append_forever, path, started)
    assert started.wait(60)
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        with Archive(path, create=False) as archive:
            if len(archive) >= 15:
                break
        time.sleep(0.01)
    os.kill(process.pid, signal.SIGKILL)
    process.join(timeout=30)
    with Archive(path, create=False) as archive:
        report = archive.verify_chain()
        count = len(archive)
        record = make_record(seed=1)
        archive.append(record, pdf_for(record), kind="issued")
        after = archive.verify_chain()
    assert count >= 15 and report.ok and report.entries == count, report.problems
    assert after.ok and after.entries == count + 1
