"""Versions of a calibration record and the chain of digests that links them.

Signing never edits a record; it makes the next version: the same content
with one more entry in ``signatures``.  So a record with *n* signatures
contains all its earlier versions, and each can be rebuilt by cutting the
list short.  Terms:

content
    The body without ``signatures``.  Its SHA-256 is the *content digest*,
    the same in every version; the record id derives from it.
version
    Content plus the first *k* signatures.  Its SHA-256 (of the canonical
    JSON) is the *version digest*, :attr:`Record.digest`.

Every signature made after the record was issued carries
``previous_digest``: the version digest of the record its signer saw.
Checking that each link matches the version rebuilt from the list finds a
signature taken out of the middle, signatures put in another order, and
content edited after someone signed it, even when no key was used.  The one
signature without a link is the ``prepared`` entry written when the record
is issued (it is part of the first version itself).

A signature entry is a JSON object::

    role             "prepared", "reviewed", "approved" or "rejected"
    name             printed name of the signer
    signed_at        UTC date and time, "2026-12-02T14:05:00Z"
    meaning          what the signature means (21 CFR 11.50)
    previous_digest  version digest before this signature (all but the issue-time entry)
    key_id           when a key was used: fingerprint of its public key
    algorithm        "ed25519"
    signature        base64 Ed25519 signature over the manifest (see calib.record.signing)
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from calib.record.record import Record

__all__ = ["chain_problems", "content_of", "describe_signature", "next_version", "signatures_of",
           "version_at", "version_digests"]

_SIGNATURE_ROLES = ("prepared", "reviewed", "approved", "rejected")
_TEXT_FIELDS = ("role", "name", "signed_at", "meaning")


def content_of(body: Mapping[str, Any]) -> dict[str, Any]:
    """The content of a record body: everything but ``signatures``.

    Examples
    --------
    >>> content_of({"schema": "calib.record/1", "signatures": [{"role": "prepared"}]})
    {'schema': 'calib.record/1'}
    """
    return {key: value for key, value in body.items() if key != "signatures"}


def signatures_of(record: Record) -> list[Any]:
    """The record's signature entries as stored (an empty list when there are none)."""
    signatures = record.body.get("signatures")
    return list(signatures) if isinstance(signatures, list) else []


def version_at(record: Record, count: int) -> Record:
    """The version of ``record`` that had its first ``count`` signatures.

    Examples
    --------
    >>> r = Record({"schema": "calib.record/1", "signatures": [{"role": "prepared"},
    ...                                                         {"role": "reviewed"}]})
    >>> version_at(r, 1).body["signatures"]
    [{'role': 'prepared'}]
    >>> version_at(r, 1).record_id == r.record_id
    True
    """
    signatures = signatures_of(record)
    if not 0 <= count <= len(signatures):
        raise ValueError(f"count must be from 0 to {len(signatures)}; got {count}")
    return Record({**record.body, "signatures": signatures[:count]})


def version_digests(record: Record) -> list[str]:
    """Version digests of the record with 0, 1, ... n signatures (the last is ``record.digest``).

    Examples
    --------
    >>> r = Record({"schema": "calib.record/1", "signatures": [{"role": "prepared"}]})
    >>> digests = version_digests(r)
    >>> len(digests), digests[-1] == r.digest
    (2, True)
    """
    return [version_at(record, k).digest for k in range(len(signatures_of(record)) + 1)]


def next_version(record: Record, entry: Mapping[str, Any]) -> Record:
    """The version after ``record`` with the signature ``entry`` appended.

    ``entry`` must already carry ``previous_digest`` equal to ``record.digest``
    (:func:`calib.record.signing.sign_record` builds such entries).

    Raises
    ------
    ValueError
        If the entry does not link to ``record``.
    """
    if entry.get("previous_digest") != record.digest:
        raise ValueError("entry must have previous_digest equal to the record's version digest")
    return Record({**record.body, "signatures": [*signatures_of(record), dict(entry)]})


def describe_signature(index: int, entry: Any) -> str:
    """How messages name a signature: its position (1-based), role and signer.

    Examples
    --------
    >>> describe_signature(1, {"role": "reviewed", "name": "Tomasz Øvergaard"})
    'signature 2 (reviewed by Tomasz Øvergaard)'
    """
    if not isinstance(entry, Mapping):
        return f"signature {index + 1}"
    return f"signature {index + 1} ({entry.get('role') or '?'} by {entry.get('name') or '?'})"


def chain_problems(record: Record) -> list[str]:
    """What is wrong with the signature list and its digest links, in plain words.

    Returns an empty list when every entry is well formed and every
    ``previous_digest`` matches the version rebuilt from the list.

    Examples
    --------
    >>> r = Record({"schema": "calib.record/1", "signatures": [
    ...     {"role": "prepared", "name": "A", "signed_at": "2026-12-01T09:30:00Z", "meaning": "m"},
    ...     {"role": "reviewed", "name": "B", "signed_at": "2026-12-02T10:00:00Z", "meaning": "m",
    ...      "previous_digest": "0" * 64}]})
    >>> [p[:64] for p in chain_problems(r)]
    ['signature 2 (reviewed by B) was made on another version of the r']
    """
    raw = record.body.get("signatures", [])
    if not isinstance(raw, list):
        return ["the record's signatures are not a list"]
    problems = []
    for index, entry in enumerate(raw):
        name = describe_signature(index, entry)
        if not isinstance(entry, Mapping):
            problems.append(f"{name} is not a signature entry")
            continue
        missing = [f for f in _TEXT_FIELDS if not isinstance(entry.get(f), str) or not entry[f]]
        if missing:
            problems.append(f"{name} lacks {', '.join(missing)}")
        if entry.get("role") not in _SIGNATURE_ROLES:
            problems.append(f"{name} has an unknown role {entry.get('role')!r}")
        link = entry.get("previous_digest")
        if link is None:
            if index != 0 or entry.get("role") != "prepared":
                problems.append(f"{name} does not name the version it signed (no previous_digest)")
            continue
        expected = version_at(record, index).digest
        if link != expected:
            problems.append(
                f"{name} was made on another version of the record: it links to version digest "
                f"{str(link)[:16]}…, but the signatures before it give {expected[:16]}…"
            )
    return problems
