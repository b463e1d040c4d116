"""Killing calib while it writes: the old file stays whole, never a half-written record.

The archive side (a writer killed mid-transaction, or in a tight loop) is covered in
``tests/archive/test_concurrency.py``; here the PDF record and the other output files.
"""

from __future__ import annotations

import io
import multiprocessing
import os
import signal
import sys
import time

import pytest
from pypdf import PdfReader

from calib.cli.main import main
from calib.output import write_atomic
from calib.resources import bundled_folder

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX only")

NITRATE = bundled_folder("sample_runs") / "fernbrook_nitrate_2026-11-30.xlsx"
CTX = multiprocessing.get_context("fork" if sys.platform.startswith("linux") else "spawn")


def _issue_forever(target: str, started) -> None:
    sys.stdout = sys.stderr = open(os.devnull, "w")  # noqa: SIM115 - the child is killed
    while True:
        main(["check", str(NITRATE), "--pdf", target, "--force"])
        started.set()


def _write_forever(target: str, size: int, started) -> None:
    for i in range(1_000_000):
        write_atomic(target, bytes([i % 256]) * size)
        started.set()


def _kill_after(target, args, delay: float) -> None:
    started = CTX.Event()
    child = CTX.Process(target=target, args=(*args, started))
    child.start()
    assert started.wait(60)
    time.sleep(delay)
    os.kill(child.pid, signal.SIGKILL)
    child.join()


def test_killed_during_pdf_write_leaves_a_whole_record(tmp_path):
    target = tmp_path / "record.pdf"
    assert main(["check", str(NITRATE), "--pdf", str(target)]) == 0
    for delay in (0.0, 0.05, 0.13, 0.31):
        _kill_after(_issue_forever, (str(target),), delay)
        data = target.read_bytes()
        assert data.startswith(b"%PDF-") and data.rstrip().endswith(b"%%EOF")
        assert len(PdfReader(io.BytesIO(data)).pages) >= 1
        assert [p.name for p in tmp_path.iterdir() if not p.name.endswith(".part")] == [
            "record.pdf"]


@pytest.mark.parametrize("name", ["results.xlsx", "results.csv", "record.record.json"])
def test_killed_during_any_output_write_leaves_old_or_new_whole(tmp_path, name):
    target = tmp_path / name
    size = 4_000_000
    write_atomic(target, b"\0" * size)
    for delay in (0.0, 0.02, 0.07):
        _kill_after(_write_forever, (str(target), size), delay)
        data = target.read_bytes()
        assert len(data) == size and len(set(data)) == 1  # one whole write, never a mix
