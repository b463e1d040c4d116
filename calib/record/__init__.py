"""Calibration records: the check document, canonical JSON, digest and id."""

from calib.record.document import CHECK_SCHEMA, check_document
from calib.record.record import RECORD_SCHEMA, Record, build_record, canonical_json

__all__ = ["CHECK_SCHEMA", "RECORD_SCHEMA", "Record", "build_record", "canonical_json", "check_document"]
