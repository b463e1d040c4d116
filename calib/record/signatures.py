"""Key signatures inside the record JSON: the manifest they sign, and checking them.

A signature entry made with a key carries, besides the printed name, UTC time
and meaning (21 CFR 11.50)::

    key_id       fingerprint of the signer's public key
    algorithm    "ecdsa-p256-sha256" (calib 0.1.0: "ed25519")
    certificate  the signer's X.509 certificate, DER in base64, issued by the lab authority
    signature    base64 signature over the manifest

The *manifest* is the RFC 8785 canonical JSON of ::

    {"schema": "calib.signature/2", "content_digest": ..., "previous_digest": ...,
     "role": ..., "name": ..., "signed_at": ..., "meaning": ..., "key_id": ...,
     "algorithm": "ecdsa-p256-sha256", "certificate_sha256": ...}

The content digest ties the signature to what was calibrated and judged; the
previous digest (absent for the issuer's ``prepared`` signature, which is part
of the first version) to the versions before it.  calib 0.1.0 signed the
manifest ``calib.signature/1`` with Ed25519 keys; those still verify with the
old public keys in the keyring (:func:`_legacy_manifest`).

A key signature is *valid* only when all of these hold: the certificate was
issued by a lab authority in the keyring, it was valid at the signing time,
its holder is the printed name of the entry, and the signature verifies.
"""

from __future__ import annotations

import base64
import binascii
import hashlib
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from calib.record.identity import clean_name
from calib.record.keys import (
    KEY_ALGORITHM,
    LEGACY_ALGORITHM,
    Keyring,
    certificate_holder,
    key_id_of,
    load_certificate,
)
from calib.record.record import Record, canonical_bytes, canonical_json
from calib.record.versions import describe_signature, signatures_of

__all__ = ["SignatureCheck", "check_signatures", "parse_time", "signature_manifest"]

_MANIFEST_SCHEMA = "calib.signature/2"
_LEGACY_SCHEMA = "calib.signature/1"


def parse_time(text: Any) -> datetime | None:
    """A record time ``2026-12-02T14:05:00Z`` as a UTC datetime; None when it is not one.

    Examples
    --------
    >>> parse_time("2026-12-02T14:05:00Z").isoformat(), parse_time("yesterday")
    ('2026-12-02T14:05:00+00:00', None)
    """
    if not isinstance(text, str) or len(text) != 20 or not text.endswith("Z"):
        return None
    try:
        return datetime.strptime(text, "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=UTC)
    except ValueError:
        return None


def signature_manifest(content_digest: str, entry: Mapping[str, Any]) -> bytes:
    """The bytes a (new) key signature of ``entry`` is made over.

    Examples
    --------
    >>> signature_manifest("ab" * 32, {"role": "reviewed", "name": "B",
    ...                     "signed_at": "2026-12-02T10:00:00Z", "meaning": "m",
    ...                     "previous_digest": "cd" * 32, "key_id": "0" * 32,
    ...                     "certificate": "AAAA"})[:48]
    b'{"algorithm":"ecdsa-p256-sha256","certificate_sh'
    """
    cert = entry.get("certificate")
    manifest = {
        "schema": _MANIFEST_SCHEMA,
        "content_digest": content_digest,
        "previous_digest": entry.get("previous_digest"),
        "role": entry.get("role"),
        "name": entry.get("name"),
        "signed_at": entry.get("signed_at"),
        "meaning": entry.get("meaning"),
        "key_id": entry.get("key_id"),
        "algorithm": KEY_ALGORITHM,
        "certificate_sha256": hashlib.sha256(str(cert).encode("ascii", "replace")).hexdigest(),
    }
    return canonical_bytes(manifest, jcs=True)


def _legacy_manifest(content_digest: str, entry: Mapping[str, Any]) -> bytes:
    """The bytes calib 0.1.0 signed with Ed25519 (kept so its signatures still verify)."""
    manifest = {
        "schema": _LEGACY_SCHEMA,
        "content_digest": content_digest,
        "previous_digest": entry.get("previous_digest"),
        "role": entry.get("role"),
        "name": entry.get("name"),
        "signed_at": entry.get("signed_at"),
        "meaning": entry.get("meaning"),
        "key_id": entry.get("key_id"),
        "algorithm": LEGACY_ALGORITHM,
    }
    return canonical_json(manifest)


def _entry_certificate(entry: Mapping[str, Any]) -> Any:
    """The certificate of a signature entry, or None when it has none or it cannot be read."""
    try:
        return load_certificate(base64.b64decode(str(entry.get("certificate")), validate=True))
    except (binascii.Error, ValueError):
        return None


@dataclass(frozen=True)
class SignatureCheck:
    """One signature of a record checked.

    Attributes
    ----------
    index : int
        Position in the record's signature list (0-based).
    role, name, signed_at : str
        As entered.
    key_id : str or None
        Key the signature claims; None for a printed-name-only signature.
    key_name : str or None
        Holder of the key that verified it (certificate name, or legacy key file name).
    status : str
        ``"valid"`` (certified key, trusted authority, name = holder),
        ``"legacy-valid"`` (calib 0.1.0 key from the keyring; not bound to a name),
        ``"unkeyed"`` (printed name only), ``"no-keyring"``, ``"unknown-key"``
        (authority or key not in the keyring), ``"wrong-name"``, ``"expired"``,
        ``"bad-signature"`` or ``"damaged"``.
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
        """True when nothing is wrong with this signature (printed-name-only included)."""
        return self.status in ("valid", "legacy-valid", "unkeyed")

    @property
    def keyed(self) -> bool:
        """True when a key signature was confirmed."""
        return self.status in ("valid", "legacy-valid")


def check_signatures(record: Record, keyring: Keyring | None) -> tuple[SignatureCheck, ...]:
    """Check every signature of ``record`` against ``keyring`` (None: none given).

    Returns
    -------
    tuple of SignatureCheck
        One per signature entry, in order.
    """
    content_digest = record.content_digest
    return tuple(_check_one(index, entry if isinstance(entry, Mapping) else {}, content_digest,
                            keyring)
                 for index, entry in enumerate(signatures_of(record)))


def _decode(value: Any) -> bytes:
    try:
        return base64.b64decode(str(value), validate=True)
    except (binascii.Error, ValueError):
        return b""


def _check_one(index: int, entry: Mapping[str, Any], content_digest: str,
               keyring: Keyring | None) -> SignatureCheck:
    label = describe_signature(index, entry)
    key_id = entry.get("key_id")

    def result(status: str, message: str, key_name: str | None = None) -> SignatureCheck:
        return SignatureCheck(index, str(entry.get("role") or ""), str(entry.get("name") or ""),
                              str(entry.get("signed_at") or ""),
                              str(key_id) if key_id is not None else None, key_name, status,
                              message)

    if key_id is None and not any(k in entry for k in ("signature", "certificate", "algorithm")):
        return result("unkeyed", f"{label}: printed name only, made without a key (not "
                                 "key-verified)")
    algorithm = entry.get("algorithm")
    if algorithm == LEGACY_ALGORITHM:
        return _check_legacy(entry, content_digest, keyring, label, result)
    if not isinstance(key_id, str) or algorithm != KEY_ALGORITHM:
        return result("damaged", f"{label}: the key signature is damaged (key id {key_id!r}, "
                                 f"algorithm {algorithm!r})")
    cert = _entry_certificate(entry)
    signature = _decode(entry.get("signature"))
    if cert is None or not signature:
        return result("damaged", f"{label}: the key signature is damaged (its certificate or "
                                 "signature value cannot be read)")
    holder = certificate_holder(cert) or "?"
    if key_id_of(cert.public_key()) != key_id:
        return result("damaged", f"{label}: names key {key_id}, but its certificate holds key "
                                 f"{key_id_of(cert.public_key())}")
    if not _ecdsa_verifies(cert, signature, signature_manifest(content_digest, entry)):
        return result("bad-signature", f"{label} does not verify with the key of {holder} "
                                       f"({key_id}): the signed data was changed, or the "
                                       "signature is not from this key", holder)
    if clean_name(entry.get("name")) != holder:
        return result("wrong-name", f"{label} was made with the key of {holder} ({key_id}), "
                                    f"but carries the printed name {entry.get('name')!r}: a key "
                                    "signs only as its holder", holder)
    if keyring is None:
        return result("no-keyring", f"{label} was made with the certified key of {holder} "
                                    f"({key_id}), but no keyring was given to check who issued "
                                    "its certificate", holder)
    authority = keyring.issuer_of(cert)
    if authority is None:
        return result("unknown-key", f"{label} was made with a key certified by "
                                     f"{_issuer(cert)}, which is not a lab authority of the "
                                     f"keyring {keyring.folder}", holder)
    when = _entry_time(entry)
    if when is None or not cert.not_valid_before_utc <= when <= cert.not_valid_after_utc:
        return result("expired", f"{label} is dated {entry.get('signed_at')}, outside the "
                                 f"validity of {holder}'s certificate "
                                 f"({cert.not_valid_before_utc:%Y-%m-%d} to "
                                 f"{cert.not_valid_after_utc:%Y-%m-%d})", holder)
    return result("valid", f"{label}: valid signature by the key of {holder} ({key_id}), "
                           f"certified by {authority.name}", holder)


def _check_legacy(entry: Mapping[str, Any], content_digest: str, keyring: Keyring | None,
                  label: str, result: Any) -> SignatureCheck:
    key_id = entry.get("key_id")
    signature = _decode(entry.get("signature"))
    if not isinstance(key_id, str) or len(signature) != 64:
        return result("damaged", f"{label}: the signature value is damaged (not a 64-byte "
                                 "Ed25519 signature in base64)")
    if keyring is None:
        return result("no-keyring", f"{label} was made with calib 0.1.0 key {key_id}, but no "
                                    "keyring was given to check it")
    key = keyring.find(key_id)
    if key is None:
        return result("unknown-key", f"{label} was made with calib 0.1.0 key {key_id}, which is "
                                     f"not in the keyring {keyring.folder}")
    if key.verifies(signature, _legacy_manifest(content_digest, entry)):
        return result("legacy-valid", f"{label}: valid signature by calib 0.1.0 key {key_id} "
                                      f"({key.name}); such keys were not bound to a person's "
                                      "name", key.name)
    return result("bad-signature", f"{label} does not verify with key {key_id} ({key.name}): the "
                                   "signed data was changed, or the signature is not from this "
                                   "key", key.name)


def _ecdsa_verifies(cert: Any, signature: bytes, data: bytes) -> bool:
    from cryptography.exceptions import InvalidSignature
    from cryptography.hazmat.primitives import hashes
    from cryptography.hazmat.primitives.asymmetric import ec

    key = cert.public_key()
    if not isinstance(key, ec.EllipticCurvePublicKey):
        return False
    try:
        key.verify(signature, data, ec.ECDSA(hashes.SHA256()))
    except (InvalidSignature, ValueError):
        return False
    return True


def _issuer(cert: Any) -> str:
    from cryptography.x509.oid import NameOID

    names = cert.issuer.get_attributes_for_oid(NameOID.COMMON_NAME)
    return repr(str(names[0].value)) if names else "an unnamed issuer"


def _entry_time(entry: Mapping[str, Any]) -> datetime | None:
    return parse_time(entry.get("signed_at"))
