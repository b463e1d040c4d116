"""Sign-off: adding a reviewed, approved or rejected signature as a new version of a record.

A signature shows the three elements 21 CFR 11.50 asks of a signed
electronic record: the printed name of the signer, the date and time (UTC)
and the meaning of the signature.  It may also carry an Ed25519 signature
(RFC 8032) made with the signer's key over the *manifest*: the canonical
JSON of ::

    {"schema": "calib.signature/1", "content_digest": ..., "previous_digest": ...,
     "role": ..., "name": ..., "signed_at": ..., "meaning": ..., "key_id": ...,
     "algorithm": "ed25519"}

The content digest ties the signature to what was calibrated and judged; the
previous digest ties it to the version the signer saw (its earlier
signatures included), so a key signature cannot be lifted onto another
record or another signing history.

The rules of :func:`sign_off_problem`, checked when signing and replayed by
verification:

- the roles after ``prepared`` are ``reviewed``, ``approved`` and ``rejected``;
  each at most once, and a record is reviewed before it is approved;
- approved or rejected closes the sign-off: nothing is signed after it;
- a record whose run verdict is ``rejected`` can be signed only as rejected;
- the analyst who prepared the record may not review or approve it unless the
  profile stored in the record allows it (``[signoff]`` table,
  :class:`calib.checks.profile.SignoffPolicy`).  Names are compared after
  Unicode normalisation (NFKC), case folding and collapsing white space;
  this catches the same printed name, it is no identity check.  The preparer
  may reject their own record: withdrawing a curve needs no second person.
"""

from __future__ import annotations

import base64
import binascii
import unicodedata
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from calib.checks.profile import SignoffPolicy, signoff_policy
from calib.errors import CalibError
from calib.record.keys import KEY_ALGORITHM, Keyring, SigningKey
from calib.record.record import Record, canonical_json
from calib.record.versions import (
    chain_problems,
    describe_signature,
    next_version,
    signatures_of,
    version_at,
)

__all__ = [
    "DEFAULT_MEANINGS",
    "MANIFEST_SCHEMA",
    "SIGN_ROLES",
    "SignOffError",
    "SignatureCheck",
    "check_signatures",
    "record_policy",
    "rule_problems",
    "same_person",
    "sign_off_problem",
    "sign_record",
    "signature_manifest",
]

SIGN_ROLES = ("reviewed", "approved", "rejected")
MANIFEST_SCHEMA = "calib.signature/1"

#: Meanings used when the signer gives none (the bundled report template words them alike).
DEFAULT_MEANINGS = {
    "reviewed": "Reviewed: I checked the data, the fit and the checks in this record",
    "approved": "Approved: this calibration may be used to report results",
    "rejected": "Rejected: this calibration must not be used to report results",
}
_VERBS = {"reviewed": "review", "approved": "approve", "rejected": "reject"}


class SignOffError(CalibError):
    """The sign-off rules refuse a signature (the message says which rule)."""


def same_person(a: str | None, b: str | None) -> bool:
    """Whether two printed names are the same once normalised.

    Examples
    --------
    >>> same_person("Zoë  Łukasiewicz-Ng", "zoë łukasiewicz-ng")
    True
    >>> same_person("R. Okafor", "T. Øvergaard"), same_person(None, "R. Okafor")
    (False, False)
    """
    if not a or not b:
        return False

    def norm(text: str) -> str:
        return " ".join(unicodedata.normalize("NFKC", text).casefold().split())

    return norm(a) == norm(b)


def record_policy(record: Record) -> SignoffPolicy:
    """The sign-off policy of the profile stored in the record (defaults when it has none).

    Raises
    ------
    ProfileError
        If the stored profile text is not TOML or its ``[signoff]`` table is malformed.
    """
    profile = record.body.get("profile")
    text = profile.get("text") if isinstance(profile, Mapping) else None
    if not isinstance(text, str):
        return SignoffPolicy()
    return signoff_policy(text, origin="the record's profile")


def _preparer(record: Record) -> str | None:
    for entry in signatures_of(record):
        if isinstance(entry, Mapping) and entry.get("role") == "prepared":
            return str(entry.get("name") or "") or None
    prepared_by = record.body.get("prepared_by")
    return prepared_by if isinstance(prepared_by, str) and prepared_by else None


def _when(entry: Mapping[str, Any]) -> str:
    return str(entry.get("signed_at") or "?").replace("T", " ").replace("Z", " UTC")


def sign_off_problem(record: Record, *, role: str, name: str,
                     policy: SignoffPolicy) -> str | None:
    """Why ``name`` may not add a ``role`` signature to ``record``; None when the rules allow it.

    Examples
    --------
    >>> r = Record({"schema": "calib.record/1", "check": {"verdict": "rejected"},
    ...             "signatures": [{"role": "prepared", "name": "A"}]})
    >>> sign_off_problem(r, role="approved", name="B", policy=SignoffPolicy())
    "the run's verdict is rejected, so the record can be signed only as rejected"
    >>> sign_off_problem(r, role="rejected", name="B", policy=SignoffPolicy()) is None
    True
    """
    if role not in SIGN_ROLES:
        raise ValueError(f"role must be one of {', '.join(SIGN_ROLES)}; got {role!r}")
    done = {str(e.get("role")): e for e in signatures_of(record) if isinstance(e, Mapping)}
    for final in ("rejected", "approved"):
        if final in done:
            entry = done[final]
            return (f"sign-off is closed: the record was {final} by {entry.get('name')} "
                    f"on {_when(entry)}")
    check = record.body.get("check")
    verdict = check.get("verdict") if isinstance(check, Mapping) else None
    if verdict == "rejected" and role != "rejected":
        return "the run's verdict is rejected, so the record can be signed only as rejected"
    if role in done:
        entry = done[role]
        return f"the record is already {role} (by {entry.get('name')} on {_when(entry)})"
    if role == "approved" and "reviewed" not in done:
        return "the record must be reviewed before it is approved"
    allowed = {"reviewed": policy.allow_preparer_to_review,
               "approved": policy.allow_preparer_to_approve, "rejected": True}[role]
    if not allowed and same_person(name, _preparer(record)):
        verb = _VERBS[role]
        return (f"{' '.join(name.split())} prepared this record and may not also {verb} it: the profile does not "
                f"allow it (its [signoff] table would need allow_preparer_to_{verb} = true)")
    return None


def signature_manifest(content_digest: str, entry: Mapping[str, Any]) -> bytes:
    """The bytes an Ed25519 signature of ``entry`` is made over.

    Examples
    --------
    >>> signature_manifest("ab" * 32, {"role": "reviewed", "name": "B",
    ...                     "signed_at": "2026-12-02T10:00:00Z", "meaning": "m",
    ...                     "previous_digest": "cd" * 32, "key_id": "0" * 32})[:40]
    b'{"algorithm":"ed25519","content_digest":'
    """
    manifest = {
        "schema": MANIFEST_SCHEMA,
        "content_digest": content_digest,
        "previous_digest": entry.get("previous_digest"),
        "role": entry.get("role"),
        "name": entry.get("name"),
        "signed_at": entry.get("signed_at"),
        "meaning": entry.get("meaning"),
        "key_id": entry.get("key_id"),
        "algorithm": KEY_ALGORITHM,
    }
    return canonical_json(manifest)


def sign_record(
    record: Record,
    *,
    role: str,
    name: str,
    meaning: str | None = None,
    signed_at: datetime | None = None,
    key: SigningKey | None = None,
    policy: SignoffPolicy | None = None,
) -> Record:
    """The next version of ``record``, signed by ``name`` in ``role``.

    ``record`` itself is not changed: signing makes a new version and the
    earlier one stays as it was.

    Parameters
    ----------
    record : Record
        The version to sign (its signature links must be intact).
    role : {"reviewed", "approved", "rejected"}
        What the signer does.
    name : str
        Printed name of the signer.
    meaning : str, optional
        What the signature means; :data:`DEFAULT_MEANINGS` when omitted.
    signed_at : datetime, optional
        When (UTC, to the second); now when omitted.
    key : SigningKey, optional
        Adds an Ed25519 signature over the manifest.
    policy : SignoffPolicy, optional
        Who may sign; by default the policy of the profile stored in the record.

    Returns
    -------
    Record
        The new version: same record id, new version digest.

    Raises
    ------
    SignOffError
        If the sign-off rules refuse the signature or the record's signature
        links are broken.
    ValueError
        If ``role``, ``name`` or ``meaning`` is unusable.

    Examples
    --------
    >>> issued = Record({"schema": "calib.record/1", "check": {"verdict": "accepted"},
    ...                  "signatures": [{"role": "prepared", "name": "R. Okafor",
    ...                                  "signed_at": "2026-12-01T09:30:00Z", "meaning": "m"}]})
    >>> reviewed = sign_record(issued, role="reviewed", name="T. Øvergaard",
    ...                        signed_at=datetime(2026, 12, 2, 14, 5, tzinfo=UTC))
    >>> reviewed.record_id == issued.record_id, reviewed.digest == issued.digest
    (True, False)
    >>> reviewed.body["signatures"][-1]["signed_at"]
    '2026-12-02T14:05:00Z'
    >>> sign_record(reviewed, role="approved", name="r. okafor")
    Traceback (most recent call last):
    ...
    calib.record.signing.SignOffError: r. okafor prepared this record and may not also approve \
it: the profile does not allow it (its [signoff] table would need allow_preparer_to_approve = true)
    """
    if role not in SIGN_ROLES:
        raise ValueError(f"role must be one of {', '.join(SIGN_ROLES)}; got {role!r}")
    if not isinstance(name, str) or not name.strip():
        raise ValueError(f"name must be the signer's printed name; got {name!r}")
    meaning = DEFAULT_MEANINGS[role] if meaning is None else meaning
    if not isinstance(meaning, str) or not meaning.strip():
        raise ValueError(f"meaning must be a non-empty text; got {meaning!r}")
    broken = chain_problems(record)
    if broken:
        raise SignOffError("the record's earlier signatures do not verify: " + "; ".join(broken))
    policy = record_policy(record) if policy is None else policy
    problem = sign_off_problem(record, role=role, name=name, policy=policy)
    if problem:
        raise SignOffError(problem)
    when = (signed_at or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    entry: dict[str, Any] = {
        "role": role,
        "name": " ".join(name.split()),
        "signed_at": when,
        "meaning": " ".join(meaning.split()),
        "previous_digest": record.digest,
    }
    if key is not None:
        entry["key_id"] = key.key_id
        entry["algorithm"] = KEY_ALGORITHM
        signed = key.sign(signature_manifest(record.content_digest, entry))
        entry["signature"] = base64.b64encode(signed).decode("ascii")
    return next_version(record, entry)


def rule_problems(record: Record, policy: SignoffPolicy | None = None) -> list[str]:
    """The sign-off rules replayed over every signature of ``record``.

    Each signature after the first is judged against the version it was
    added to, as :func:`sign_record` would have judged it.

    Raises
    ------
    ProfileError
        If ``policy`` is None and the stored profile's ``[signoff]`` table is malformed.
    """
    policy = record_policy(record) if policy is None else policy
    problems = []
    for index, entry in enumerate(signatures_of(record)):
        if not isinstance(entry, Mapping):
            continue  # reported by versions.chain_problems
        role = entry.get("role")
        if role == "prepared":
            if index:
                problems.append(f"{describe_signature(index, entry)}: only the first signature "
                                "can be the preparer's")
            continue
        if role not in SIGN_ROLES:
            continue
        problem = sign_off_problem(version_at(record, index), role=str(role),
                                   name=str(entry.get("name") or ""), policy=policy)
        if problem:
            problems.append(f"{describe_signature(index, entry)} breaks the sign-off rules: "
                            f"{problem}")
    return problems


@dataclass(frozen=True)
class SignatureCheck:
    """One signature checked against the keyring.

    Attributes
    ----------
    index : int
        Position in the record's signature list (0-based).
    role, name, signed_at : str
        As entered.
    key_id : str or None
        Key the signature claims; None for a printed-name-only signature.
    key_name : str or None
        Name of the keyring key that verified it.
    status : str
        ``"valid"``, ``"unkeyed"`` (no key used), ``"no-keyring"``,
        ``"unknown-key"``, ``"bad-signature"`` or ``"damaged"``.
    message : str
        The finding in plain words.
    """

    index: int
    role: str
    name: str
    signed_at: str
    key_id: str | None
    key_name: str | None
    status: str
    message: str

    @property
    def ok(self) -> bool:
        """True when nothing is wrong with this signature."""
        return self.status in ("valid", "unkeyed")


def check_signatures(record: Record, keyring: Keyring | None) -> tuple[SignatureCheck, ...]:
    """Check every signature of ``record`` that was made with a key against ``keyring``.

    Parameters
    ----------
    record : Record
        The record (any version).
    keyring : Keyring or None
        The lab's public keys; None when none was given (a key signature
        then cannot be checked, and says so).

    Returns
    -------
    tuple of SignatureCheck
        One per signature entry, in order.
    """
    content_digest = record.content_digest
    return tuple(_check_one(index, entry if isinstance(entry, Mapping) else {}, content_digest,
                            keyring)
                 for index, entry in enumerate(signatures_of(record)))


def _check_one(index: int, entry: Mapping[str, Any], content_digest: str,
               keyring: Keyring | None) -> SignatureCheck:
    label = describe_signature(index, entry)
    key_id = entry.get("key_id")

    def result(status: str, message: str, key_name: str | None = None) -> SignatureCheck:
        return SignatureCheck(index, str(entry.get("role") or ""), str(entry.get("name") or ""),
                              str(entry.get("signed_at") or ""),
                              str(key_id) if key_id is not None else None, key_name, status,
                              message)

    if key_id is None and "signature" not in entry:
        return result("unkeyed", f"{label}: printed name only, made without a key")
    if not isinstance(key_id, str) or entry.get("algorithm") != KEY_ALGORITHM:
        return result("damaged", f"{label}: the key signature is damaged (key id {key_id!r}, "
                                 f"algorithm {entry.get('algorithm')!r})")
    try:
        signature = base64.b64decode(str(entry.get("signature")), validate=True)
    except (binascii.Error, ValueError):
        signature = b""
    if len(signature) != 64:
        return result("damaged", f"{label}: the signature value is damaged (not a 64-byte "
                                 "Ed25519 signature in base64)")
    if keyring is None:
        return result("no-keyring", f"{label} was made with key {key_id}, but no keyring was "
                                    "given to check it")
    key = keyring.find(key_id)
    if key is None:
        return result("unknown-key", f"{label} was made with key {key_id}, which is not in the "
                                     f"keyring {keyring.folder}")
    if key.verifies(signature, signature_manifest(content_digest, entry)):
        return result("valid", f"{label}: valid signature by key {key_id} ({key.name})", key.name)
    return result("bad-signature", f"{label} does not verify with key {key_id} ({key.name}): the "
                                   "signed data was changed, or the signature is not from this key",
                  key.name)
