"""Archive entries and the hash chain that links them.

Entry hash (the exact bytes, so anyone can recompute it)
    ``entry_hash = SHA-256( prev_hash + "\\n" + canonical_json(fields) )`` in
    lower-case hex, where ``prev_hash`` is the previous entry's ``entry_hash``
    (:data:`GENESIS_HASH`, 64 ``"0"``, for the first entry), ``"\\n"`` is one
    line-feed byte, ``canonical_json`` is JSON with sorted keys, UTF-8, no
    whitespace and integers without a decimal point (the fields are strings,
    integers, lists of strings and null, so RFC 8785 gives the same bytes) and
    ``fields`` is the object::

        {"analytes": [...], "content_digest": ..., "created_at": ...,
         "instrument": ... or null, "kind": ..., "pdf_sha256": ...,
         "record_id": ..., "roles": [...], "run_date": ..., "seq": <integer>,
         "verdict": ..., "version_digest": ...}

    The record JSON enters through ``version_digest`` (its SHA-256), the PDF
    through ``pdf_sha256`` (stored beside the entry since archive format 2);
    :func:`check_content` recomputes both from the stored bytes, while
    :func:`check_link` (the hash pass) needs neither blob.

What a check finds
    A gap in ``seq`` (an entry deleted), a ``prev_hash`` that is not the hash
    of the entry before (deleted, inserted or altered entries), an entry hash
    that does not match the fields (an edited column or an edited stored
    hash), JSON bytes that do not match the version digest or are not
    canonical (edited record data), a PDF that does not match its digest or
    does not carry this entry's JSON as its attached record data (a swapped
    PDF), and indexed columns or trend figures that disagree with the JSON they
    were derived from.

Limits
    A hash chain shows that nothing *inside* it changed; it cannot show that
    entries were cut off its end, nor that the whole chain was recomputed.  The
    head receipt (:mod:`calib.archive.anchor`) anchors the head outside the
    archive; :class:`ChainReport` also gives the head (last seq and its hash)
    to note elsewhere (a logbook) and pass back as ``expected_head``.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from typing import Any

from calib.archive.figures import CurveFigures, RecordFacts, record_facts

__all__ = [
    "GENESIS_HASH",
    "KINDS",
    "ArchiveEntry",
    "ChainProblem",
    "ChainReport",
    "DerivedRecord",
    "check_content",
    "check_link",
    "compute_entry_hash",
    "derive_record",
    "entry_fields",
    "figures_row",
    "pdf_problem",
]

GENESIS_HASH = "0" * 64
KINDS = ("issued", "signed")


@dataclass(frozen=True)
class ArchiveEntry:
    """One appended version of a record.

    Attributes
    ----------
    seq : int
        Position in the chain, from 1.
    record_id : str
        The record's id (the same across its versions).
    version_digest : str
        SHA-256 of this version's canonical JSON.
    content_digest : str
        SHA-256 of the record content without signatures.
    kind : str
        ``issued`` or ``signed``.
    created_at : str
        UTC time the entry was appended (``YYYY-MM-DDTHH:MM:SSZ``).
    analytes : tuple of str
        Analytes of the record.
    verdict : str
        Run verdict.
    json, pdf : bytes
        The record JSON and PDF (empty when read with ``data=False``).
    prev_hash, entry_hash : str
        Chain hashes (see the module docstring for the exact layout).
    run_date : str
        ``YYYY-MM-DD`` run date (see :mod:`calib.archive.figures`).
    instrument : str or None
        Instrument named in the run metadata.
    roles : tuple of str
        Roles of the signatures in this version, in order.
    """

    seq: int
    record_id: str
    version_digest: str
    content_digest: str
    kind: str
    created_at: str
    analytes: tuple[str, ...]
    verdict: str
    json: bytes = field(repr=False)
    pdf: bytes = field(repr=False)
    prev_hash: str
    entry_hash: str
    run_date: str = ""
    instrument: str | None = None
    roles: tuple[str, ...] = ()
    pdf_sha256: str = ""

    @property
    def digest_matches(self) -> bool:
        """Whether :attr:`json` still hashes to :attr:`version_digest` (False when not read)."""
        return hashlib.sha256(self.json).hexdigest() == self.version_digest

    def summary(self) -> dict[str, Any]:
        """The entry without its JSON and PDF bytes, ready for ``json.dumps``."""
        return {
            "seq": self.seq, "record_id": self.record_id, "kind": self.kind,
            "created_at": self.created_at, "run_date": self.run_date,
            "instrument": self.instrument, "analytes": list(self.analytes),
            "verdict": self.verdict, "roles": list(self.roles),
            "version_digest": self.version_digest, "content_digest": self.content_digest,
            "pdf_sha256": self.pdf_sha256, "prev_hash": self.prev_hash,
            "entry_hash": self.entry_hash,
        }


@dataclass(frozen=True)
class ChainProblem:
    """Something :meth:`Archive.verify_chain` found wrong, and where."""

    seq: int | None
    message: str

    def __str__(self) -> str:
        return f"entry seq {self.seq}: {self.message}" if self.seq is not None else self.message


@dataclass(frozen=True)
class ChainReport:
    """Result of verifying the whole archive.

    Attributes
    ----------
    entries : int
        Entries read.
    head_seq : int or None
        Last seq in the archive (None when empty).
    head_hash : str
        Its entry hash (:data:`GENESIS_HASH` when empty): note it to detect truncation later.
    problems : tuple of ChainProblem
        Empty when the archive is intact.
    receipt : HeadReceipt or None
        The head receipt that was checked (:mod:`calib.archive.anchor`); None when there is none.
    receipt_path : Path or None
        Where the archive's head receipt is kept (None when it keeps none).
    """

    entries: int
    head_seq: int | None
    head_hash: str
    problems: tuple[ChainProblem, ...] = ()
    receipt: Any = None
    receipt_path: Any = None

    @property
    def ok(self) -> bool:
        """True when no problem was found."""
        return not self.problems


def compute_entry_hash(prev_hash: str, fields: dict[str, Any]) -> str:
    """The entry hash of ``fields`` chained to ``prev_hash`` (layout in the module docstring).

    Examples
    --------
    >>> fields = {"seq": 1, "record_id": "CR-1", "analytes": ["A"], "roles": []}
    >>> compute_entry_hash(GENESIS_HASH, fields)[:16]
    'f32bc21214df9c88'
    """
    # The same bytes as calib.record.canonical_json for these fields (strings, integers,
    # lists, null), written here so that the hash pass needs neither calib.record nor rfc8785.
    text = json.dumps(fields, sort_keys=True, ensure_ascii=False, separators=(",", ":"),
                      allow_nan=False)
    payload = prev_hash.encode("ascii") + b"\n" + text.encode("utf-8")
    return hashlib.sha256(payload).hexdigest()


def entry_fields(seq: int, meta: dict[str, Any], pdf: bytes | None = None) -> dict[str, Any]:
    """The ``fields`` object of the entry hash: ``meta`` columns, ``seq`` and the PDF's SHA-256.

    The PDF's SHA-256 is computed from ``pdf`` when given, else taken from ``meta["pdf_sha256"]``.
    """
    return {
        "seq": seq,
        "record_id": meta["record_id"],
        "version_digest": meta["version_digest"],
        "content_digest": meta["content_digest"],
        "kind": meta["kind"],
        "created_at": meta["created_at"],
        "analytes": list(meta["analytes"]),
        "verdict": meta["verdict"],
        "run_date": meta["run_date"],
        "instrument": meta["instrument"],
        "roles": list(meta["roles"]),
        "pdf_sha256": (hashlib.sha256(pdf).hexdigest() if pdf is not None
                       else meta["pdf_sha256"]),
    }


@dataclass(frozen=True)
class DerivedRecord:
    """What the archive reads from a record's JSON bytes itself (never from the caller)."""

    record_id: str
    version_digest: str
    content_digest: str
    facts: RecordFacts


def derive_record(data: bytes) -> DerivedRecord:
    """Re-read a record from its JSON bytes; ValueError when they are not a canonical record."""
    from calib.record import Record

    try:
        record = Record.from_json(data)
    except (ValueError, UnicodeDecodeError) as exc:
        raise ValueError(f"not a calib record JSON ({exc})") from None
    if record.canonical != data:  # RFC 8785 for new records, calib 0.1.0 form for old
        raise ValueError("the JSON is not in canonical form")
    return DerivedRecord(record.record_id, hashlib.sha256(data).hexdigest(),
                         record.content_digest, record_facts(record.body))


def figures_row(c: CurveFigures) -> tuple[Any, ...]:
    """A curve's figures as stored in the ``curves`` table, ``seq`` left out."""
    return (c.position, c.analyte, c.model, c.weighting, c.verdict, c.slope, c.intercept,
            c.residual_sd, c.concentration_unit, c.response_unit)


def check_link(entry: ArchiveEntry, prev_seq: int, prev_hash: str) -> list[ChainProblem]:
    """The hash pass over one entry: its place in the chain and its entry hash.

    Reads only the short columns (the PDF enters through the stored
    ``pdf_sha256``), so a whole chain is checked without reading any blob.

    Parameters
    ----------
    entry : ArchiveEntry
        The entry as stored (its JSON and PDF need not be read).
    prev_seq, prev_hash : int, str
        Seq and entry hash of the entry before it (0 and :data:`GENESIS_HASH` for the first).
    """
    seq = entry.seq
    problems = []
    if seq != prev_seq + 1:
        gap = f"seq {prev_seq + 1}" if seq == prev_seq + 2 else f"seq {prev_seq + 1}–{seq - 1}"
        where = f"follows seq {prev_seq}" if prev_seq else "is the first entry"
        problems.append(ChainProblem(seq, f"{where}: {gap} missing (entries were removed)"))
    if entry.prev_hash != prev_hash:
        before = f"seq {prev_seq}" if prev_seq else "the start of the chain"
        problems.append(ChainProblem(
            seq, f"its prev_hash does not match the entry hash of {before}: the chain is broken "
                 "(an entry before it was removed or altered)"))
    expected = compute_entry_hash(entry.prev_hash, entry_fields(seq, {
        "record_id": entry.record_id, "version_digest": entry.version_digest,
        "content_digest": entry.content_digest, "kind": entry.kind,
        "created_at": entry.created_at, "analytes": entry.analytes, "verdict": entry.verdict,
        "run_date": entry.run_date, "instrument": entry.instrument, "roles": entry.roles,
        "pdf_sha256": entry.pdf_sha256,
    }))
    if expected != entry.entry_hash:
        problems.append(ChainProblem(seq, "its entry hash does not match its fields: the entry "
                                          "or its stored hash was altered"))
    if entry.kind not in KINDS:
        problems.append(ChainProblem(seq, f"unknown kind {entry.kind!r}"))
    return problems


def pdf_problem(pdf: bytes, version_digest: str) -> str | None:
    """Why ``pdf`` is not the PDF of the record version ``version_digest``; None when it is.

    A calib record PDF carries its record JSON as an attached file; the
    attachment's SHA-256 must be the entry's version digest, so a PDF swapped
    for another record's (or any other PDF) is found.  A digitally signed
    record PDF carries its issued JSON and one signature entry per incremental
    update; its version is the issued record plus those entries.
    """
    from calib.record.pdfread import read_back

    if not pdf.startswith(b"%PDF-"):
        return "the stored PDF is not a PDF document"
    try:
        contents = read_back(pdf)
    except ValueError as exc:
        return f"the stored PDF cannot be read ({exc})"
    carried = [hashlib.sha256(data).hexdigest() for name, values in contents.attachments.items()
               if name.endswith(".json") for data in values]
    if version_digest in carried:
        return None
    signed_version = _signed_version_digest(pdf)
    if signed_version == version_digest:
        return None
    if carried:
        return (f"the stored PDF carries other record data (digest {carried[0][:16]}…) than "
                "this entry: the PDF was swapped or altered")
    return "the stored PDF carries no record data: it is not this entry's record PDF"


def _signed_version_digest(pdf: bytes) -> str | None:
    """The version digest of a digitally signed record PDF (issued JSON plus the entries its
    PDF signatures carry, one incremental update each); None when it has none or is unreadable.
    """
    from calib.errors import CalibError
    from calib.record.recordfile import record_from_pdf

    try:
        return record_from_pdf(pdf).digest
    except (CalibError, ValueError):
        return None


def check_content(entry: ArchiveEntry, stored_figures: list[tuple[Any, ...]], *,
                  attachment: bool = True) -> list[ChainProblem]:
    """The content pass over one entry: its JSON, its PDF and the indexes derived from them.

    Parameters
    ----------
    entry : ArchiveEntry
        The entry as stored, with its JSON and PDF bytes.
    stored_figures : list of tuple
        The entry's rows of the ``curves`` table as :func:`figures_row` gives them.
    attachment : bool
        Also parse the PDF and check that its attached record data is this entry's JSON
        (:func:`pdf_problem`; a few milliseconds per record PDF).
    """
    seq = entry.seq
    problems = []

    def problem(message: str) -> None:
        problems.append(ChainProblem(seq, message))

    if hashlib.sha256(entry.pdf).hexdigest() != entry.pdf_sha256:
        problem("its PDF does not match the PDF digest in the chain: the stored PDF was "
                "replaced")
    if hashlib.sha256(entry.json).hexdigest() != entry.version_digest:
        problem("its JSON does not match its version digest: the record data was altered")
    elif attachment:
        found = pdf_problem(entry.pdf, entry.version_digest)
        if found:
            problem(found)
    elif not entry.pdf.startswith(b"%PDF-"):
        problem("the stored PDF is not a PDF document")
    try:
        derived = derive_record(entry.json)
    except ValueError as exc:
        problem(f"its JSON cannot be read: {exc}")
        return problems
    facts = derived.facts
    stored = {"record_id": entry.record_id, "content_digest": entry.content_digest,
              "analytes": entry.analytes, "verdict": entry.verdict,
              "run_date": entry.run_date, "instrument": entry.instrument, "roles": entry.roles}
    fresh = {"record_id": derived.record_id, "content_digest": derived.content_digest,
             "analytes": facts.analytes, "verdict": facts.verdict, "run_date": facts.run_date,
             "instrument": facts.instrument, "roles": facts.roles}
    for name, value in stored.items():
        if value != fresh[name]:
            problem(f"stored {name} {value!r} does not match its JSON ({fresh[name]!r})")
    if stored_figures != [figures_row(c) for c in facts.curves]:
        problem("the per-analyte figures stored for trends do not match its JSON")
    return problems

