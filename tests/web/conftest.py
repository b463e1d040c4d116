"""Fixtures of the browser tests: the real server on a free loopback port."""

from __future__ import annotations

import socket
import threading
import time
from pathlib import Path

import pytest


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def server(tmp_path: Path):
    import uvicorn

    from calib.web import create_app

    archive = tmp_path / "records.sqlite"
    port = free_port()
    config = uvicorn.Config(create_app(archive=archive), host="127.0.0.1", port=port,
                            log_level="warning", lifespan="off")
    srv = uvicorn.Server(config)
    thread = threading.Thread(target=srv.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not srv.started:
        assert time.monotonic() < deadline, "the server did not start"
        time.sleep(0.05)
    yield f"http://127.0.0.1:{port}", archive
    srv.should_exit = True
    thread.join(timeout=10)
