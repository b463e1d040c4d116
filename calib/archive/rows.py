"""How an archive entry is read back from its table rows (for the store, the audit and migration).

:data:`SELECT_META` reads an entry's short columns, :data:`SELECT_DATA` adds its
JSON and PDF; :func:`entry_from_row` turns either row into an
:class:`~calib.archive.chain.ArchiveEntry`, never crashing on a tampered column
(verification names it instead).
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from typing import Any

from calib.archive.chain import ArchiveEntry

__all__ = ["FIGURE_COLUMNS", "META_COLUMNS", "SELECT_DATA", "SELECT_META", "entry_from_row",
           "loads_list"]

META_COLUMNS = ("seq", "record_id", "version_digest", "content_digest", "kind", "created_at",
                "analytes", "verdict", "run_date", "instrument", "roles", "pdf_sha256",
                "prev_hash", "entry_hash")
SELECT_META = "SELECT " + ", ".join(f"e.{c}" for c in META_COLUMNS) + " FROM entries e"
SELECT_DATA = ("SELECT " + ", ".join(f"e.{c}" for c in META_COLUMNS)
               + ", d.json, d.pdf FROM entries e LEFT JOIN entry_data d ON d.seq = e.seq")
FIGURE_COLUMNS = ("position, analyte, model, weighting, verdict, slope, intercept, residual_sd,"
                  " concentration_unit, response_unit")


def entry_from_row(row: Sequence[Any]) -> ArchiveEntry:
    """An :class:`ArchiveEntry` from a row of ``SELECT_META`` (or ``SELECT_DATA``)."""
    meta = dict(zip(META_COLUMNS, row))
    data = len(row) > len(META_COLUMNS)
    return ArchiveEntry(
        seq=int(meta["seq"]), record_id=meta["record_id"],
        version_digest=meta["version_digest"], content_digest=meta["content_digest"],
        kind=meta["kind"], created_at=meta["created_at"],
        analytes=tuple(loads_list(meta["analytes"])), verdict=meta["verdict"],
        json=_blob(row[-2]) if data else b"", pdf=_blob(row[-1]) if data else b"",
        prev_hash=meta["prev_hash"], entry_hash=meta["entry_hash"], run_date=meta["run_date"],
        instrument=meta["instrument"], roles=tuple(loads_list(meta["roles"])),
        pdf_sha256=meta["pdf_sha256"],
    )


def _blob(value: Any) -> bytes:
    # Whatever was written into a BLOB column from outside calib must not crash the reader.
    if isinstance(value, (bytes, bytearray, memoryview)):
        return bytes(value)
    return b"" if value is None else str(value).encode("utf-8", "surrogateescape")


def loads_list(text: Any) -> list[str]:
    # A tampered column must be reported by verify_chain, not crash the reader.
    try:
        value = json.loads(text)
    except (TypeError, ValueError):
        return [str(text)]
    return [str(v) for v in value] if isinstance(value, list) else [str(value)]
