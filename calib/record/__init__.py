"""Calibration records: the check document, canonical JSON, digests and id; sign-off; verification.

Modules: ``document`` (the ``calib.check/1`` document), ``record`` (the
record, its RFC 8785 canonical JSON and digests), ``versions`` (sign-off
versions and the digest links between them), ``identity`` (printed names and
who is the same person), ``keyfile`` and ``keys`` (the lab authority,
certified keys, key files, keyrings), ``signatures`` (key signatures in the
record JSON), ``signing`` (the sign-off rules, issuer and sign-off
signatures), ``pades`` (PDF signatures), ``recordfile`` (reading record
files), ``verify`` (checking a record), ``signoff`` (issuing and signing
record files).

Library entry points for every front end (plain functions over bytes and
typed options, returning result objects; nothing printed):
:func:`verify_bytes`, :func:`sign_bytes`, :func:`issue_signed`,
:func:`issue_pdf`, :func:`record_from_pdf`.
"""

from calib.record.document import CHECK_SCHEMA, check_document
from calib.record.record import RECORD_SCHEMA, Record, build_record, canonical_json
from calib.record.recordfile import record_from_pdf
from calib.record.signing import SignOffError, issue_signed, sign_record
from calib.record.signoff import SignedVersion, issue_pdf, sign_bytes, sign_file
from calib.record.verify import VerifyReport, verify_bytes, verify_file

__all__ = ["CHECK_SCHEMA", "RECORD_SCHEMA", "Record", "SignOffError", "SignedVersion",
           "VerifyReport", "build_record", "canonical_json", "check_document", "issue_pdf",
           "issue_signed", "record_from_pdf", "sign_bytes", "sign_file", "sign_record",
           "verify_bytes", "verify_file"]
