"""Going around calib: raw SQL on an archive, as someone with the file or a superuser would.

Each helper first removes the append-only triggers (so that what the tests then find is what
the chain and the head receipt find, not what the triggers refuse); on PostgreSQL the
session also skips foreign-key checks (``session_replication_role = replica``).
"""

from __future__ import annotations

import sqlite3
from typing import Any

from calib.archive import Archive, compute_entry_hash
from calib.archive.backends import is_database_url
from calib.archive.chain import entry_fields


def _pg(location: str):
    import psycopg

    return psycopg.connect(location, autocommit=True)


def sql_error(location: str, sql: str, params: tuple[Any, ...] = ()) -> str:
    """Run ``sql`` with the triggers in place; the error message, or "" when it went through."""
    if is_database_url(location):
        import psycopg

        with _pg(location) as con:
            try:
                con.execute(sql.replace("?", "%s"), params or None)
            except psycopg.Error as exc:
                return str(exc)
        return ""
    con = sqlite3.connect(location)
    try:
        con.execute(sql, params)
        con.commit()
    except sqlite3.DatabaseError as exc:
        return str(exc)
    finally:
        con.close()
    return ""


def tamper(location: str, *statements: tuple[Any, ...]) -> None:
    """Drop the triggers, then run each ``(sql, params?)``."""
    if is_database_url(location):
        with _pg(location) as con:
            for name, table in con.execute(
                    "SELECT t.tgname, c.relname FROM pg_trigger t"
                    " JOIN pg_class c ON c.oid = t.tgrelid"
                    " JOIN pg_namespace n ON n.oid = c.relnamespace"
                    " WHERE NOT t.tgisinternal AND n.nspname = current_schema()").fetchall():
                con.execute(f'DROP TRIGGER "{name}" ON "{table}"')
            con.execute("SET session_replication_role = replica")
            for sql, *params in statements:
                con.execute(sql.replace("?", "%s"), *params)
        return
    con = sqlite3.connect(location)
    for name, in con.execute("SELECT name FROM sqlite_master WHERE type = 'trigger'").fetchall():
        con.execute(f"DROP TRIGGER {name}")
    for sql, *params in statements:
        con.execute(sql, *params)
    con.commit()
    con.close()


def rechain(location: str, edit: dict[int, dict[str, Any]] | None = None) -> None:
    """Apply column edits and recompute every entry hash from the first edited one on —
    the careful forger who knows the documented hash layout."""
    edit = edit or {}
    with Archive(location, create=False, head_receipt=None) as archive:
        entries = archive.entries(data=False)
    statements, prev = [], "0" * 64
    for e in entries:
        fields = entry_fields(e.seq, {**e.summary(), **edit.get(e.seq, {})})
        new_hash = compute_entry_hash(prev, fields)
        if new_hash != e.entry_hash or prev != e.prev_hash:
            statements.append(("UPDATE entries SET created_at = ?, prev_hash = ?, entry_hash = ?"
                               " WHERE seq = ?", (fields["created_at"], prev, new_hash, e.seq)))
        prev = new_hash
    tamper(location, *statements)


def delete_and_renumber(location: str, seq: int) -> None:
    """Remove entry ``seq`` and move every later entry down by one, then re-chain."""
    with Archive(location, create=False, head_receipt=None) as archive:
        last = archive.head()[0]
    statements: list[tuple[Any, ...]] = [(f"DELETE FROM {t} WHERE seq = ?", (seq,))
                                         for t in ("curves", "entry_data", "entries")]
    for s in range(seq + 1, last + 1):
        statements += [(f"UPDATE {t} SET seq = ? WHERE seq = ?", (s - 1, s))
                       for t in ("entries", "entry_data", "curves")]
    tamper(location, *statements)
    rechain(location)
