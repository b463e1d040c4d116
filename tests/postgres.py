"""A throw-away PostgreSQL server for the archive tests (Debian's package, when installed).

``CALIB_TEST_POSTGRES_URL`` (a database the tests may create schemas in) wins;
otherwise, when ``initdb`` and ``pg_ctl`` are found under
``/usr/lib/postgresql/<version>/bin`` or on PATH, a cluster is made in a
temporary folder (as the ``postgres`` user when running as root, since
PostgreSQL refuses to run as root), started on a free local port with its
socket in that folder (no TCP listener beyond 127.0.0.1), and stopped and
removed at the end of the session.  Without either, PostgreSQL tests are
skipped with the reason.
"""

from __future__ import annotations

import contextlib
import glob
import os
import shutil
import socket
import subprocess
import tempfile
import uuid
from collections.abc import Iterator
from pathlib import Path

URL_ENV = "CALIB_TEST_POSTGRES_URL"
_CREATED: list[str] = []  # schemas made by fresh_schema, dropped from a lab's own server after


def _drop_schemas(base: str) -> None:
    """Leave a server the tests did not start as it was: drop the schemas they made."""
    import psycopg

    with psycopg.connect(base, autocommit=True) as conn:
        while _CREATED:
            conn.execute(f"DROP SCHEMA IF EXISTS {_CREATED.pop()} CASCADE")


def _binaries() -> Path | None:
    found = sorted(glob.glob("/usr/lib/postgresql/*/bin/initdb"),
                   key=lambda p: int(Path(p).parent.parent.name)
                   if Path(p).parent.parent.name.isdigit() else 0)
    if found:
        return Path(found[-1]).parent
    on_path = shutil.which("initdb")
    return Path(on_path).parent if on_path else None


def unavailable_reason() -> str | None:
    """Why no PostgreSQL server can be had; None when one can."""
    if os.environ.get(URL_ENV):
        return None
    if _binaries() is None:
        return (f"PostgreSQL not installed (no initdb under /usr/lib/postgresql/*/bin or on "
                f"PATH) and {URL_ENV} not set: the PostgreSQL half of the archive tests is "
                "skipped")
    return None


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@contextlib.contextmanager
def server() -> Iterator[str]:
    """A base URL of a database the tests may use; the server is stopped afterwards."""
    if os.environ.get(URL_ENV):
        try:
            yield os.environ[URL_ENV]
        finally:
            _drop_schemas(os.environ[URL_ENV])
        return
    bindir = _binaries()
    assert bindir is not None, unavailable_reason()
    folder = Path(tempfile.mkdtemp(prefix="calib-pg-"))
    as_postgres: list[str] = []
    if os.geteuid() == 0:
        shutil.chown(folder, "postgres", "postgres")
        as_postgres = ["runuser", "-u", "postgres", "--"]
    data = folder / "data"
    port = _free_port()

    def run(*args: str) -> None:
        subprocess.run([*as_postgres, *args], check=True, capture_output=True, timeout=120)

    try:
        run(str(bindir / "initdb"), "-D", str(data), "--auth=trust", "-U", "postgres",
            "--no-sync", "-E", "UTF8", "--locale=C")
        run(str(bindir / "pg_ctl"), "-D", str(data), "-l", str(folder / "server.log"), "-o",
            f"-p {port} -k {folder} -c listen_addresses='' -c fsync=off", "-w", "start")
        try:
            run(str(bindir / "createdb"), "-h", str(folder), "-p", str(port), "-U", "postgres",
                "calibtest")
            yield f"postgresql://postgres@/calibtest?host={folder}&port={port}"
        finally:
            run(str(bindir / "pg_ctl"), "-D", str(data), "-m", "fast", "-w", "stop")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def fresh_schema(base: str) -> str:
    """A URL of ``base`` whose tables go into a new, empty schema (one archive per test)."""
    import psycopg

    name = "t_" + uuid.uuid4().hex[:12]
    with psycopg.connect(base, autocommit=True) as conn:
        conn.execute(f"CREATE SCHEMA {name}")
    _CREATED.append(name)
    joiner = "&" if "?" in base else "?"
    return f"{base}{joiner}options=-csearch_path%3D{name}"
