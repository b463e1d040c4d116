"""The sign-off block of the PDF: key signatures and rejections as the record shows them."""

from __future__ import annotations

from calib.record.signing import sign_record
from tests.record.integrity_helpers import REVIEWED_AT, REVIEWER, issued, make_keys, render
from tests.report.conftest import pdf_pages_text


def _text(pdf: bytes) -> str:
    return " ".join(" ".join(pdf_pages_text(pdf)).split())


def test_key_signature_is_shown_with_its_key_id(tmp_path):
    keys, _ = make_keys(tmp_path, "t-overgaard")
    key = keys["t-overgaard"]
    v2 = sign_record(issued(), role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT, key=key)
    text = _text(render(v2))
    grouped = " ".join(key.key_id[i:i + 4] for i in range(0, 16, 4))
    assert f"Signed electronically (ECDSA P-256, key {grouped})" in text
    assert "2026-12-02 14:05:00 UTC" in text
    # The preparer's entry was made without a key.
    assert "Entered in the record" in text
    # The version digest is the one of this version; the id is the record's.
    assert f"Record {v2.record_id} · digest {v2.digest[:16]}" in text
    assert f"Version digest (SHA-256) {v2.digest}" in text


def test_rejected_record_has_no_blank_rows_for_approval():
    v1 = issued(levels=4)
    blank = _text(render(v1))
    assert "Approved: this calibration may be used to report results" in blank
    v2 = sign_record(v1, role="rejected", name=REVIEWER, signed_at=REVIEWED_AT)
    text = _text(render(v2))
    assert "Rejected Tomasz Øvergaard Entered in the record 2026-12-02 14:05:00 UTC" in text
    assert "Rejected: this calibration must not be used to report results" in text
    assert "Approved: this calibration may be used to report results" not in text
    assert "Reviewed: I checked the data" not in text
