"""Every hostile file uploaded, one by one, to a running ``calib serve``: it keeps answering.

The other corpus tests drive the web page in-process; here the command a lab runs is started
as its own process (uvicorn, its threads, the workbook reader's child processes), the corpus is
posted to it over HTTP as a browser would, and after each file the home page must still answer
(issue's "done when": no upload may hang, abort or kill the server).  At the end the server is
asked to stop (SIGTERM) and must end promptly.
"""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest

from calib.web.security import CSRF_FIELD
from tests.robustness.test_corpus import BAD

ROOT = Path(__file__).parents[2]


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@pytest.fixture
def server(tmp_path):
    port = _free_port()
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("CALIB_ARCHIVE", None)
    process = subprocess.Popen(
        [sys.executable, "-m", "calib", "serve", "--port", str(port),
         "--archive", str(tmp_path / "records.sqlite")],
        cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while True:
        try:
            if httpx.get(url + "/", timeout=2).status_code == 200:
                break
        except httpx.TransportError:
            pass
        if process.poll() is not None or time.monotonic() > deadline:
            process.kill()
            pytest.fail(f"calib serve did not start: {process.stdout.read().decode()[-2000:]}")
        time.sleep(0.2)
    yield process, url
    if process.poll() is None:
        process.kill()
        process.wait()
    process.stdout.close()


def test_a_running_server_answers_after_every_corpus_file_and_stops_when_asked(server):
    process, url = server
    files = sorted(p for p in BAD.iterdir() if p.name != "make_corpus.py")
    assert len(files) >= 60
    statuses: dict[int, int] = {}
    with httpx.Client(base_url=url, timeout=120, follow_redirects=True) as client:
        found = re.search(rf'name="{CSRF_FIELD}" value="([^"]+)"', client.get("/").text)
        assert found, "the page has no form token"
        for path in files:
            started = time.monotonic()
            answer = client.post("/check", data={CSRF_FIELD: found.group(1),
                                                 "profile": "default"},
                                 files={"run": (path.name, path.read_bytes())})
            assert answer.status_code < 500, (path.name, answer.status_code)
            assert "Traceback" not in answer.text and "panicked" not in answer.text, path.name
            statuses[answer.status_code] = statuses.get(answer.status_code, 0) + 1
            assert time.monotonic() - started < 60, path.name
            assert process.poll() is None, f"the server ended after {path.name}"
            assert client.get("/").status_code == 200, path.name
    # A refusal in words (400: "Not done" and the one-line reason) or a check's page.
    assert set(statuses) <= {200, 400, 413} and statuses.get(400, 0) >= 40, statuses
    process.send_signal(signal.SIGTERM)
    try:
        process.wait(timeout=20)
    except subprocess.TimeoutExpired:
        pytest.fail("calib serve did not stop within 20 s of SIGTERM")
