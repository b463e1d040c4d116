"""The archive's tables, indexes and append-only triggers, for SQLite and PostgreSQL.

Format 2 (this release)
    ``entries`` holds only the short columns a listing, a search and the hash
    chain need (ids, digests, dates, verdict, roles, the PDF's SHA-256 and the
    chain hashes); the record JSON and PDF bytes sit apart in ``entry_data``, so
    listing, searching and the hash pass of verification never read a blob.
    ``curves`` indexes each curve's figures for trends.  ``archive_meta`` holds
    the archive's random id (its head receipt names it) and
    ``schema_version`` one row per format the archive was brought to.

Append-only on both engines
    Triggers refuse ``UPDATE`` and ``DELETE`` on every archive table (and
    ``TRUNCATE`` on PostgreSQL, which skips row triggers); an insert into
    ``entries`` must extend the chain head (next seq, previous entry's hash);
    JSON, PDF and figures rows are accepted only for the newest entry.  On
    PostgreSQL the role :data:`_WRITER_ROLE` is created (when the connecting
    account may) with ``SELECT`` and ``INSERT`` only: give the lab's analyst
    accounts that role, never table ownership.

Format 3: people, sessions and the audit trail
    ``users`` (one row per person: printed name, roles, argon2id password hash,
    disabled flag, failed sign-ins, lock-out end), ``sessions`` (sign-in
    sessions, kept by the SHA-256 of their random id, so several ``calib serve``
    instances serve the same signed-in people) and ``audit_trail`` (who did
    what and when, each row hashing the one before it, append-only like the
    entries).  Users and sessions change (a password is reset, a session ends),
    so only the audit trail is protected by triggers; every change to a user is
    in the trail.  :func:`people_schema` makes them; an archive of format 2 gets
    them when it is next opened.  The record chain is not touched.

Format 1 (calib 0.1.0, SQLite only)
    JSON and PDF in ``entries``, the format in ``PRAGMA user_version``.
    :func:`migrate_sqlite_1_to_2` moves it to format 2 in one transaction; the
    entry hashes do not change (the chain covers the same fields).
"""

from __future__ import annotations

import hashlib
import sqlite3

from calib.archive.chain import GENESIS_HASH

__all__ = ["APPLICATION_ID", "POSTGRES_TRIGGERS", "SCHEMA_VERSION", "SQLITE_TRIGGERS",
           "TRAIL_TRIGGERS", "migrate_sqlite_1_to_2", "people_schema", "postgres_schema",
           "sqlite_schema"]

SCHEMA_VERSION = 3
APPLICATION_ID = 0x43414C42  # "CALB": marks an SQLite file as a calib archive
_WRITER_ROLE = "calib_archive_writer"
PROTECTED = ("entries", "entry_data", "curves", "archive_meta")

_ENTRIES = """CREATE TABLE entries (
    seq {int} PRIMARY KEY,
    record_id TEXT NOT NULL,
    version_digest TEXT NOT NULL UNIQUE,
    content_digest TEXT NOT NULL,
    kind TEXT NOT NULL,
    created_at TEXT NOT NULL,
    analytes TEXT NOT NULL,
    verdict TEXT NOT NULL,
    run_date TEXT NOT NULL,
    instrument TEXT,
    roles TEXT NOT NULL,
    pdf_sha256 TEXT NOT NULL,
    prev_hash TEXT NOT NULL,
    entry_hash TEXT NOT NULL UNIQUE
)"""

_TABLES = (
    _ENTRIES,
    """CREATE TABLE entry_data (
        seq {int} PRIMARY KEY REFERENCES entries (seq),
        json {blob} NOT NULL,
        pdf {blob} NOT NULL
    )""",
    """CREATE TABLE curves (
        seq {int} NOT NULL REFERENCES entries (seq),
        position INTEGER NOT NULL,
        analyte TEXT NOT NULL,
        model TEXT NOT NULL,
        weighting TEXT NOT NULL,
        verdict TEXT NOT NULL,
        slope {real},
        intercept {real},
        residual_sd {real},
        concentration_unit TEXT,
        response_unit TEXT,
        PRIMARY KEY (seq, position)
    ){rowid}""",
    "CREATE TABLE archive_meta (name TEXT PRIMARY KEY, value TEXT NOT NULL)",
    "CREATE TABLE schema_version (version INTEGER PRIMARY KEY, applied_at TEXT NOT NULL,"
    " note TEXT NOT NULL)",
)

# Every WHERE and ORDER BY of calib.archive.store has an index here (lower() for the
# case-insensitive matches, seq last so results come out in chain order).
_INDEXES = (
    "CREATE INDEX entries_record ON entries (lower(record_id), seq)",
    "CREATE INDEX entries_content ON entries (content_digest, seq)",
    "CREATE INDEX entries_instrument ON entries (lower(instrument), seq)",
    "CREATE INDEX entries_run_date ON entries (run_date, seq)",
    "CREATE INDEX entries_verdict ON entries (verdict, seq)",
    "CREATE INDEX entries_kind ON entries (kind, seq)",
    "CREATE INDEX curves_analyte ON curves (lower(analyte), seq)",
    "CREATE INDEX curves_name ON curves (analyte)",
)

_REFUSALS = {
    "entries": ("an entry cannot be changed", "an entry cannot be deleted"),
    "entry_data": ("a stored record or PDF cannot be changed",
                   "a stored record or PDF cannot be deleted"),
    "curves": ("figures cannot be changed", "figures cannot be deleted"),
    "archive_meta": ("the archive identity cannot be changed",
                     "the archive identity cannot be deleted"),
}
_HEAD = "calib archive: a new entry must extend the chain head"
_WITH_ENTRY = "calib archive: {what} added only with their entry"

SQLITE_TRIGGERS = tuple(f"{t}_no_{op}" for t in PROTECTED for op in ("update", "delete")) + (
    "entries_extend_head", "entry_data_with_entry", "curves_with_entry")
POSTGRES_TRIGGERS = SQLITE_TRIGGERS + tuple(f"{t}_no_truncate" for t in PROTECTED)


def sqlite_schema() -> tuple[str, ...]:
    """Statements creating a format-2 archive in an empty SQLite database."""
    tables = tuple(t.format(int="INTEGER", blob="BLOB", real="REAL", rowid=" WITHOUT ROWID")
                   for t in _TABLES)
    triggers = []
    for table, (no_update, no_delete) in _REFUSALS.items():
        for op, message in (("update", no_update), ("delete", no_delete)):
            triggers.append(
                f"CREATE TRIGGER {table}_no_{op} BEFORE {op.upper()} ON {table} BEGIN "
                f"SELECT RAISE(ABORT, 'calib archive is append-only: {message}'); END")
    triggers += [
        f"""CREATE TRIGGER entries_extend_head BEFORE INSERT ON entries
           WHEN NEW.seq IS NOT (SELECT coalesce(max(seq), 0) + 1 FROM entries)
             OR NEW.prev_hash IS NOT coalesce(
                  (SELECT entry_hash FROM entries ORDER BY seq DESC LIMIT 1), '{GENESIS_HASH}')
           BEGIN SELECT RAISE(ABORT, '{_HEAD}'); END""",
        f"""CREATE TRIGGER entry_data_with_entry BEFORE INSERT ON entry_data
           WHEN NEW.seq IS NOT (SELECT max(seq) FROM entries)
           BEGIN SELECT RAISE(ABORT, '{_WITH_ENTRY.format(what="record and PDF are")}'); END""",
        f"""CREATE TRIGGER curves_with_entry BEFORE INSERT ON curves
           WHEN NEW.seq IS NOT (SELECT max(seq) FROM entries)
           BEGIN SELECT RAISE(ABORT, '{_WITH_ENTRY.format(what="figures are")}'); END""",
    ]
    return tables + _INDEXES + tuple(triggers)


def postgres_schema() -> tuple[str, ...]:
    """Statements creating a format-2 archive in the current PostgreSQL schema."""
    tables = tuple(t.format(int="BIGINT", blob="BYTEA", real="DOUBLE PRECISION", rowid="")
                   for t in _TABLES)
    functions = (
        """CREATE FUNCTION calib_refuse() RETURNS trigger LANGUAGE plpgsql AS $$
           BEGIN RAISE EXCEPTION '%', TG_ARGV[0] USING ERRCODE = 'insufficient_privilege';
           END $$""",
        f"""CREATE FUNCTION calib_extend_head() RETURNS trigger LANGUAGE plpgsql AS $$
           BEGIN
             IF NEW.seq IS DISTINCT FROM (SELECT coalesce(max(seq), 0) + 1 FROM entries)
                OR NEW.prev_hash IS DISTINCT FROM coalesce(
                  (SELECT entry_hash FROM entries ORDER BY seq DESC LIMIT 1), '{GENESIS_HASH}')
             THEN RAISE EXCEPTION '{_HEAD}'; END IF;
             RETURN NEW;
           END $$""",
        """CREATE FUNCTION calib_with_entry() RETURNS trigger LANGUAGE plpgsql AS $$
           BEGIN
             IF NEW.seq IS DISTINCT FROM (SELECT max(seq) FROM entries)
             THEN RAISE EXCEPTION '%', TG_ARGV[0]; END IF;
             RETURN NEW;
           END $$""",
    )
    triggers = []
    for table, (no_update, no_delete) in _REFUSALS.items():
        for op, message in (("update", no_update), ("delete", no_delete)):
            triggers.append(
                f"CREATE TRIGGER {table}_no_{op} BEFORE {op.upper()} ON {table} FOR EACH ROW "
                f"EXECUTE FUNCTION calib_refuse('calib archive is append-only: {message}')")
        triggers.append(
            f"CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table} FOR EACH STATEMENT "
            f"EXECUTE FUNCTION calib_refuse('calib archive is append-only: {table} cannot be "
            "emptied')")
    triggers += [
        "CREATE TRIGGER entries_extend_head BEFORE INSERT ON entries FOR EACH ROW "
        "EXECUTE FUNCTION calib_extend_head()",
        "CREATE TRIGGER entry_data_with_entry BEFORE INSERT ON entry_data FOR EACH ROW "
        f"EXECUTE FUNCTION calib_with_entry('{_WITH_ENTRY.format(what='record and PDF are')}')",
        "CREATE TRIGGER curves_with_entry BEFORE INSERT ON curves FOR EACH ROW "
        f"EXECUTE FUNCTION calib_with_entry('{_WITH_ENTRY.format(what='figures are')}')",
    ]
    # The writer role: SELECT and INSERT only.  Creating a role needs CREATEROLE; an account
    # without it still gets a working archive, and README says how the lab's DBA adds the role.
    role = f"""DO $$ BEGIN
        IF NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = '{_WRITER_ROLE}') THEN
            CREATE ROLE {_WRITER_ROLE} NOLOGIN;
        END IF;
        EXECUTE format('GRANT USAGE ON SCHEMA %I TO {_WRITER_ROLE}', current_schema());
        GRANT SELECT, INSERT ON entries, entry_data, curves TO {_WRITER_ROLE};
        GRANT SELECT ON archive_meta, schema_version TO {_WRITER_ROLE};
    EXCEPTION WHEN insufficient_privilege OR duplicate_object OR unique_violation THEN
        RAISE NOTICE 'calib: role {_WRITER_ROLE} not created (no CREATEROLE privilege)';
    END $$"""
    return tables + _INDEXES + functions + tuple(triggers) + (role,)


_PEOPLE = (
    """CREATE TABLE users (
        name_key TEXT PRIMARY KEY,
        name TEXT NOT NULL,
        roles TEXT NOT NULL,
        password_hash TEXT NOT NULL,
        disabled INTEGER NOT NULL,
        failed INTEGER NOT NULL,
        locked_until {real},
        created_at TEXT NOT NULL,
        changed_at TEXT NOT NULL
    )""",
    """CREATE TABLE sessions (
        token_hash TEXT PRIMARY KEY,
        name_key TEXT NOT NULL REFERENCES users (name_key),
        created_at {real} NOT NULL,
        last_seen {real} NOT NULL,
        ended_at {real}
    )""",
    "CREATE INDEX sessions_user ON sessions (name_key)",
    """CREATE TABLE audit_trail (
        seq {int} PRIMARY KEY,
        at TEXT NOT NULL,
        event TEXT NOT NULL,
        actor TEXT NOT NULL,
        subject TEXT NOT NULL,
        detail TEXT NOT NULL,
        prev_hash TEXT NOT NULL,
        row_hash TEXT NOT NULL UNIQUE
    )""",
)
_TRAIL_HEAD = "calib audit trail: a new row must extend the trail head"
_TRAIL_REFUSED = "calib audit trail is append-only: a row cannot be {what}"
TRAIL_TRIGGERS = ("audit_trail_no_update", "audit_trail_no_delete", "audit_trail_extend_head")


def people_schema(engine: str) -> tuple[str, ...]:
    """Statements adding format 3's users, sessions and audit trail (``sqlite``/``postgresql``).

    Examples
    --------
    >>> [s.split("(")[0].strip() for s in people_schema("sqlite")][:3]
    ['CREATE TABLE users', 'CREATE TABLE sessions', 'CREATE INDEX sessions_user ON sessions']
    """
    if engine == "sqlite":
        tables = tuple(t.format(int="INTEGER", real="REAL") for t in _PEOPLE)
        return tables + (
            "CREATE TRIGGER audit_trail_no_update BEFORE UPDATE ON audit_trail BEGIN SELECT "
            f"RAISE(ABORT, '{_TRAIL_REFUSED.format(what='changed')}'); END",
            "CREATE TRIGGER audit_trail_no_delete BEFORE DELETE ON audit_trail BEGIN SELECT "
            f"RAISE(ABORT, '{_TRAIL_REFUSED.format(what='deleted')}'); END",
            f"""CREATE TRIGGER audit_trail_extend_head BEFORE INSERT ON audit_trail
               WHEN NEW.seq IS NOT (SELECT coalesce(max(seq), 0) + 1 FROM audit_trail)
                 OR NEW.prev_hash IS NOT coalesce((SELECT row_hash FROM audit_trail
                    ORDER BY seq DESC LIMIT 1), '{GENESIS_HASH}')
               BEGIN SELECT RAISE(ABORT, '{_TRAIL_HEAD}'); END""",
        )
    if engine != "postgresql":
        raise ValueError(f"engine must be sqlite or postgresql; got {engine!r}")
    tables = tuple(t.format(int="BIGINT", real="DOUBLE PRECISION") for t in _PEOPLE)
    return tables + (
        f"""CREATE FUNCTION calib_trail_head() RETURNS trigger LANGUAGE plpgsql AS $$
           BEGIN
             IF NEW.seq IS DISTINCT FROM (SELECT coalesce(max(seq), 0) + 1 FROM audit_trail)
                OR NEW.prev_hash IS DISTINCT FROM coalesce((SELECT row_hash FROM audit_trail
                   ORDER BY seq DESC LIMIT 1), '{GENESIS_HASH}')
             THEN RAISE EXCEPTION '{_TRAIL_HEAD}'; END IF;
             RETURN NEW;
           END $$""",
        "CREATE TRIGGER audit_trail_no_update BEFORE UPDATE ON audit_trail FOR EACH ROW "
        f"EXECUTE FUNCTION calib_refuse('{_TRAIL_REFUSED.format(what='changed')}')",
        "CREATE TRIGGER audit_trail_no_delete BEFORE DELETE ON audit_trail FOR EACH ROW "
        f"EXECUTE FUNCTION calib_refuse('{_TRAIL_REFUSED.format(what='deleted')}')",
        "CREATE TRIGGER audit_trail_no_truncate BEFORE TRUNCATE ON audit_trail FOR EACH "
        f"STATEMENT EXECUTE FUNCTION calib_refuse('{_TRAIL_REFUSED.format(what='emptied')}')",
        "CREATE TRIGGER audit_trail_extend_head BEFORE INSERT ON audit_trail FOR EACH ROW "
        "EXECUTE FUNCTION calib_trail_head()",
        # Users and sessions change; the trail only grows (as for the entries).
        f"""DO $$ BEGIN
            GRANT SELECT, INSERT, UPDATE ON users TO {_WRITER_ROLE};
            GRANT SELECT, INSERT, UPDATE, DELETE ON sessions TO {_WRITER_ROLE};
            GRANT SELECT, INSERT ON audit_trail TO {_WRITER_ROLE};
        EXCEPTION WHEN undefined_object OR insufficient_privilege THEN
            RAISE NOTICE 'calib: role {_WRITER_ROLE} not granted the people tables';
        END $$""",
    )


def _sha256(data: bytes | None) -> str:
    return hashlib.sha256(bytes(data or b"")).hexdigest()


def migrate_sqlite_1_to_2(conn: sqlite3.Connection) -> None:
    """Bring a format-1 archive to format 2, inside the caller's write transaction.

    The blobs move to ``entry_data``, the PDF's SHA-256 becomes a column, and
    the old triggers are replaced; seq, hashes and every other column are
    copied unchanged.  The caller turns foreign-key enforcement off first
    (SQLite cannot change it inside a transaction) and checks the result.
    """
    conn.create_function("calib_sha256", 1, _sha256, deterministic=True)
    for (name,) in conn.execute(
            "SELECT name FROM sqlite_master WHERE type = 'trigger'").fetchall():
        conn.execute(f'DROP TRIGGER "{name}"')
    for (name,) in conn.execute("SELECT name FROM sqlite_master WHERE type = 'index'"
                                " AND sql IS NOT NULL").fetchall():
        conn.execute(f'DROP INDEX "{name}"')
    conn.execute("ALTER TABLE entries RENAME TO entries_format1")
    conn.execute("ALTER TABLE curves RENAME TO curves_format1")
    statements = sqlite_schema()
    for statement in statements:
        if statement.startswith("CREATE TABLE"):
            conn.execute(statement)
    conn.execute(
        "INSERT INTO entries SELECT seq, record_id, version_digest, content_digest, kind,"
        " created_at, analytes, verdict, run_date, instrument, roles, calib_sha256(pdf),"
        " prev_hash, entry_hash FROM entries_format1 ORDER BY seq")
    conn.execute("INSERT INTO entry_data SELECT seq, json, pdf FROM entries_format1 ORDER BY seq")
    conn.execute("INSERT INTO curves SELECT * FROM curves_format1 ORDER BY seq, position")
    conn.execute("DROP TABLE curves_format1")
    conn.execute("DROP TABLE entries_format1")
    for statement in statements:
        if not statement.startswith("CREATE TABLE"):
            conn.execute(statement)
