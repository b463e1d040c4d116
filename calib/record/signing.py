"""Sign-off: the issuer's signature, and reviewed, approved or rejected signatures as new versions.

A signature shows the three elements 21 CFR 11.50 asks of a signed
electronic record: the printed name of the signer, the date and time (UTC)
and the meaning of the signature.  Made with a person's key
(:mod:`calib.record.keys`) it also carries their certificate and an ECDSA
signature over the manifest (:mod:`calib.record.signatures`); the printed name
is then the key holder's, always.  Without a key it is a printed name only,
and every output says so.

The rules of :func:`_sign_off_problem`, checked when signing and replayed by
verification:

- the roles after ``prepared`` are ``reviewed``, ``approved`` and ``rejected``;
  each at most once, and a record is reviewed before it is approved;
- approved or rejected closes the sign-off: nothing is signed after it;
- a record whose run verdict is ``rejected`` can be signed only as rejected;
- a record without a preparer cannot be reviewed or approved;
- the preparer may not review or approve, nor the reviewer approve, unless the
  profile stored in the record allows it (``[signoff]`` table,
  :class:`calib.checks.profile.SignoffPolicy`).  People are compared by key
  (the same key is the same person) and by printed name
  (:func:`calib.record.identity.same_person`: punctuation, order, case and
  accents do not make another person).  The preparer may reject their own
  record: withdrawing a curve needs no second person;
- printed names must be usable (:func:`calib.record.identity.check_printed_name`);
- signature times follow the issue time and each other;
- with ``require_key_signatures`` in the profile, review, approval and
  rejection need a key.
"""

from __future__ import annotations

import base64
from collections.abc import Mapping
from datetime import UTC, datetime
from typing import Any

from calib.checks.profile import SignoffPolicy, signoff_policy
from calib.errors import SignOffError
from calib.record.identity import check_printed_name, same_person
from calib.record.keys import KEY_ALGORITHM, SigningKey
from calib.record.record import Record
from calib.record.signatures import SignatureCheck, check_signatures, parse_time, signature_manifest
from calib.record.versions import (
    chain_problems,
    describe_signature,
    next_version,
    signatures_of,
    version_at,
)

__all__ = ["DEFAULT_MEANINGS", "SignOffError", "SignatureCheck", "check_signatures", "issue_signed",
           "rule_problems", "same_person", "sign_record", "signature_manifest"]

_SIGN_ROLES = ("reviewed", "approved", "rejected")

#: Meanings used when the signer gives none (the bundled report template words them alike).
DEFAULT_MEANINGS = {
    "reviewed": "Reviewed: I checked the data, the fit and the checks in this record",
    "approved": "Approved: this calibration may be used to report results",
    "rejected": "Rejected: this calibration must not be used to report results",
}
_VERBS = {"reviewed": "review", "approved": "approve", "rejected": "reject"}


def _record_policy(record: Record) -> SignoffPolicy:
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


def _entry(record: Record, role: str) -> Mapping[str, Any] | None:
    for entry in signatures_of(record):
        if isinstance(entry, Mapping) and entry.get("role") == role:
            return entry
    return None


def _preparer(record: Record) -> tuple[str | None, str | None]:
    """Printed name and key id of the preparer (None, None when the record names none)."""
    entry = _entry(record, "prepared")
    if entry is not None:
        return str(entry.get("name") or "") or None, entry.get("key_id")
    prepared_by = record.body.get("prepared_by")
    return (prepared_by if isinstance(prepared_by, str) and prepared_by else None), None


def _same(name: str, key_id: str | None, other: tuple[str | None, str | None]) -> bool:
    other_name, other_key = other
    return bool(key_id and other_key and key_id == other_key) or same_person(name, other_name)


def _when(entry: Mapping[str, Any]) -> str:
    return str(entry.get("signed_at") or "?").replace("T", " ").replace("Z", " UTC")


def _sign_off_problem(record: Record, *, role: str, name: str, policy: SignoffPolicy,
                     key_id: str | None = None, signed_at: str | None = None) -> str | None:
    """Why ``name`` (with key ``key_id``) may not add a ``role`` signature; None when allowed.

    Examples
    --------
    >>> r = Record({"schema": "calib.record/1", "check": {"verdict": "rejected"},
    ...             "signatures": [{"role": "prepared", "name": "A"}]})
    >>> _sign_off_problem(r, role="approved", name="B", policy=SignoffPolicy())
    "the run's verdict is rejected, so the record can be signed only as rejected"
    >>> _sign_off_problem(r, role="rejected", name="B", policy=SignoffPolicy()) is None
    True
    """
    if role not in _SIGN_ROLES:
        raise ValueError(f"role must be one of {', '.join(_SIGN_ROLES)}; got {role!r}")
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
    try:
        shown = check_printed_name(name)
    except ValueError as exc:
        return str(exc)
    preparer = _preparer(record)
    if role != "rejected" and preparer[0] is None:
        return (f"the record names no preparer, so it cannot be {role}: a second person's "
                "check needs the first person's name (issue it with the preparer's name)")
    if role == "approved" and "reviewed" not in done:
        return "the record must be reviewed before it is approved"
    if policy.require_key_signatures and key_id is None:
        return (f"the record's profile requires key signatures ([signoff] "
                f"require_key_signatures = true): sign with your key to {_VERBS[role]} it")
    allowed = {"reviewed": policy.allow_preparer_to_review,
               "approved": policy.allow_preparer_to_approve, "rejected": True}[role]
    if not allowed and _same(shown, key_id, preparer):
        verb = _VERBS[role]
        return (f"{shown} prepared this record (as {preparer[0]}) and may not also {verb} it: "
                f"the profile does not allow it (its [signoff] table would need "
                f"allow_preparer_to_{verb} = true)")
    reviewer = done.get("reviewed")
    if (role == "approved" and reviewer is not None and not policy.allow_reviewer_to_approve
            and _same(shown, key_id, (str(reviewer.get("name") or ""), reviewer.get("key_id")))):
        return (f"{shown} reviewed this record (as {reviewer.get('name')}) and may not also "
                "approve it: the profile does not allow it (its [signoff] table would need "
                "allow_reviewer_to_approve = true)")
    if signed_at is not None:
        return _time_problem(record, signed_at)
    return None


def _time_problem(record: Record, signed_at: str) -> str | None:
    """Why a signature dated ``signed_at`` cannot follow the record's issue and signatures."""
    when = parse_time(signed_at)
    if when is None:
        return f"the signature time {signed_at!r} is not a UTC time like 2026-12-02T14:05:00Z"
    issued = parse_time(record.body.get("created_at"))
    if issued is not None and when < issued:
        return (f"the signature is dated {_when({'signed_at': signed_at})}, before the record "
                f"was issued ({_when({'signed_at': record.body.get('created_at')})})")
    for entry in signatures_of(record):
        if not isinstance(entry, Mapping):
            continue
        earlier = parse_time(entry.get("signed_at"))
        if earlier is not None and when < earlier:
            return (f"the signature is dated {_when({'signed_at': signed_at})}, before the "
                    f"{entry.get('role')} signature of {entry.get('name')} "
                    f"({_when(entry)}) that it follows")
    return None


def _key_fields(key: SigningKey, name: str | None, *, role: str) -> str:
    """The printed name a signature with ``key`` carries: its holder's (refuse any other)."""
    if key.is_authority:
        raise SignOffError(f"{key.path} is the lab authority key: it certifies people's keys "
                           f"and does not sign records; {role} with your own key")
    if name is not None and check_printed_name(name) != key.holder:
        raise SignOffError(f"the key {key.path.name} belongs to {key.holder}; a signature made "
                           f"with it carries that name, not {' '.join(name.split())!r}")
    return key.holder


def _attach_key(entry: dict[str, Any], key: SigningKey, content_digest: str) -> None:
    entry["key_id"] = key.key_id
    entry["algorithm"] = KEY_ALGORITHM
    entry["certificate"] = base64.b64encode(key.certificate_der).decode("ascii")
    entry["signature"] = base64.b64encode(
        key.sign(signature_manifest(content_digest, entry))).decode("ascii")


def issue_signed(record: Record, key: SigningKey) -> Record:
    """The issued record signed by its issuer: the ``prepared`` entry gets the key signature.

    Parameters
    ----------
    record : Record
        A record just built (:func:`calib.record.build_record`), version 1, its
        only signature the unsigned ``prepared`` entry (or none: the key
        holder then becomes the preparer).
    key : SigningKey
        The issuing analyst's key; its holder must be the preparer.

    Raises
    ------
    SignOffError
        If the record is not a fresh, unsigned issue or the preparer is not the key holder.
    """
    entries = signatures_of(record)
    if len(entries) > 1 or (entries and (not isinstance(entries[0], Mapping)
                                         or entries[0].get("role") != "prepared"
                                         or "key_id" in entries[0])):
        raise SignOffError("only a freshly issued record, not yet signed by anyone, can be "
                           "signed by its issuer")
    if not record.jcs:
        raise SignOffError("records of calib 0.1.0 cannot be signed by an issuer afterwards")
    created_at = record.body.get("created_at")
    if entries:
        holder = _key_fields(key, str(entries[0].get("name") or ""), role="issue")
        entry = dict(entries[0])
    else:
        holder = _key_fields(key, None, role="issue")
        from calib.record.record import PREPARED_MEANING

        entry = {"role": "prepared", "name": holder, "signed_at": created_at,
                 "meaning": PREPARED_MEANING}
    entry["name"] = holder
    body = {**record.body, "prepared_by": holder, "signatures": []}
    _attach_key(entry, key, Record(body).content_digest)
    return Record({**body, "signatures": [entry]})


def sign_record(
    record: Record,
    *,
    role: str,
    name: str | None = None,
    meaning: str | None = None,
    signed_at: datetime | None = None,
    key: SigningKey | None = None,
    policy: SignoffPolicy | None = None,
) -> Record:
    """The next version of ``record``, signed in ``role``.

    ``record`` itself is not changed: signing makes a new version and the
    earlier one stays as it was.

    Parameters
    ----------
    record : Record
        The version to sign (its signature links must be intact).
    role : {"reviewed", "approved", "rejected"}
        What the signer does.
    name : str, optional
        Printed name of the signer; with ``key`` it must be the key holder's
        (it defaults to it), without a key it is required.
    meaning : str, optional
        What the signature means; :data:`DEFAULT_MEANINGS` when omitted.
    signed_at : datetime, optional
        When (UTC, to the second); now when omitted.  Never before the issue
        or an earlier signature.
    key : SigningKey, optional
        The signer's certified key; adds the key signature.
    policy : SignoffPolicy, optional
        Who may sign; by default the policy of the profile stored in the record.

    Returns
    -------
    Record
        The new version: same record id, new version digest.

    Raises
    ------
    SignOffError
        If the sign-off rules refuse the signature, the name is not the key
        holder's, or the record's signature links are broken.
    ValueError
        If ``role`` or ``meaning`` is unusable, or a name is missing.

    Examples
    --------
    >>> issued = Record({"schema": "calib.record/1", "canonicalization": "RFC 8785",
    ...                  "created_at": "2026-12-01T09:30:00Z", "check": {"verdict": "accepted"},
    ...                  "signatures": [{"role": "prepared", "name": "R. Okafor",
    ...                                  "signed_at": "2026-12-01T09:30:00Z", "meaning": "m"}]})
    >>> reviewed = sign_record(issued, role="reviewed", name="T. Øvergaard",
    ...                        signed_at=datetime(2026, 12, 2, 14, 5, tzinfo=UTC))
    >>> reviewed.record_id == issued.record_id, reviewed.digest == issued.digest
    (True, False)
    >>> sign_record(reviewed, role="approved", name="Okafor, R.")
    Traceback (most recent call last):
    ...
    calib.errors.SignOffError: Okafor, R. prepared this record (as R. Okafor) and may not \
also approve it: the profile does not allow it (its [signoff] table would need \
allow_preparer_to_approve = true)
    """
    if role not in _SIGN_ROLES:
        raise ValueError(f"role must be one of {', '.join(_SIGN_ROLES)}; got {role!r}")
    if key is not None:
        name = _key_fields(key, name, role=_VERBS[role])
    elif not isinstance(name, str) or not name.strip():
        raise ValueError(f"name must be the signer's printed name; got {name!r}")
    meaning = DEFAULT_MEANINGS[role] if meaning is None else meaning
    if not isinstance(meaning, str) or not meaning.strip():
        raise ValueError(f"meaning must be a non-empty text; got {meaning!r}")
    broken = chain_problems(record)
    if broken:
        raise SignOffError("the record's earlier signatures do not verify: " + "; ".join(broken))
    policy = _record_policy(record) if policy is None else policy
    when = (signed_at or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    problem = _sign_off_problem(record, role=role, name=name, policy=policy,
                               key_id=key.key_id if key else None, signed_at=when)
    if problem:
        raise SignOffError(problem)
    entry: dict[str, Any] = {
        "role": role,
        "name": check_printed_name(name),
        "signed_at": when,
        "meaning": " ".join(meaning.split()),
        "previous_digest": record.digest,
    }
    if key is not None:
        _attach_key(entry, key, record.content_digest)
    return next_version(record, entry)


def rule_problems(record: Record, policy: SignoffPolicy | None = None) -> list[str]:
    """The sign-off rules replayed over every signature of ``record``.

    Each signature after the first is judged against the version it was
    added to, as :func:`sign_record` would have judged it; the issuer's
    ``prepared`` signature must be dated at the issue time and carry a
    usable name.

    Raises
    ------
    ProfileError
        If ``policy`` is None and the stored profile's ``[signoff]`` table is malformed.
    """
    policy = _record_policy(record) if policy is None else policy
    problems = []
    for index, entry in enumerate(signatures_of(record)):
        if not isinstance(entry, Mapping):
            continue  # reported by versions.chain_problems
        role = entry.get("role")
        label = describe_signature(index, entry)
        if role == "prepared":
            if index:
                problems.append(f"{label}: only the first signature can be the preparer's")
                continue
            try:
                check_printed_name(entry.get("name"))
            except ValueError as exc:
                problems.append(f"{label}: {exc}")
            if entry.get("signed_at") != record.body.get("created_at"):
                problems.append(f"{label} is dated {_when(entry)}, not at the issue of the "
                                f"record ({_when({'signed_at': record.body.get('created_at')})})")
            continue
        if role not in _SIGN_ROLES:
            continue
        problem = _sign_off_problem(version_at(record, index), role=str(role),
                                   name=str(entry.get("name") or ""), policy=policy,
                                   key_id=entry.get("key_id"),
                                   signed_at=str(entry.get("signed_at") or ""))
        if problem:
            problems.append(f"{label} breaks the sign-off rules: {problem}")
    return problems
