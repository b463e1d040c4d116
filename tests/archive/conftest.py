"""Archive tests run on both engines: an SQLite file and a PostgreSQL database."""

from __future__ import annotations

import pytest

from tests import postgres


@pytest.fixture(scope="session")
def postgres_base():
    """Base URL of a throw-away PostgreSQL server (see tests/postgres.py), or a skip."""
    reason = postgres.unavailable_reason()
    if reason:
        pytest.skip(reason)
    with postgres.server() as url:
        yield url


@pytest.fixture(params=["sqlite", "postgresql"])
def location(request, tmp_path, monkeypatch):
    """An archive location on each engine; a PostgreSQL archive keeps its head receipt in
    tmp_path (through CALIB_ARCHIVE_HEAD), an SQLite one beside its file."""
    if request.param == "sqlite":
        monkeypatch.delenv("CALIB_ARCHIVE_HEAD", raising=False)
        return str(tmp_path / "records.sqlite")
    base = request.getfixturevalue("postgres_base")
    monkeypatch.setenv("CALIB_ARCHIVE_HEAD", str(tmp_path / "records.head.json"))
    return postgres.fresh_schema(base)
