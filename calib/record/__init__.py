"""Calibration records: the check document, canonical JSON, digests and id; sign-off; verification.

Modules: ``document`` (the ``calib.check/1`` document), ``record`` (the
record, its canonical JSON and digests), ``versions`` (sign-off versions and
the digest links between them), ``keys`` (Ed25519 key files and keyrings),
``signing`` (the sign-off rules and signatures), ``verify`` (checking a
record file), ``signoff`` (signing a record file).
"""

from calib.record.document import CHECK_SCHEMA, check_document
from calib.record.record import RECORD_SCHEMA, Record, build_record, canonical_json
from calib.record.signing import SignOffError, sign_record
from calib.record.verify import VerifyReport, verify_file

__all__ = ["CHECK_SCHEMA", "RECORD_SCHEMA", "Record", "SignOffError", "VerifyReport",
           "build_record", "canonical_json", "check_document", "sign_record", "verify_file"]
