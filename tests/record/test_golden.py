"""Records kept from earlier releases verify, and can be signed, with this release.

tests/data/golden/<release or date>/ holds records exactly as those releases wrote them (see
each SOURCE.md); they are evidence and never regenerated.  The version digests below are the
ones SOURCE.md recorded when the files were made, recomputed here with independent tools
(hashlib on the bytes; the rfc8785 library for the newer records).  A deliberate change of the
page layout (a wider left margin) must not change any verdict: pages drawn again are a note.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pytest
import rfc8785

from calib.record.keys import load_keyring
from calib.record.signoff import sign_bytes, sign_file
from calib.record.verify import verify_bytes, verify_file
from calib.report import record_pages
from tests.record.integrity_helpers import (
    APPROVER,
    REVIEWER,
    authority,
    keyring,
    make_keys,
    person_key,
)

GOLDEN = Path(__file__).parents[1] / "data" / "golden"
LEGACY = GOLDEN / "0.1.0"
CURRENT = GOLDEN / "2026-12-02"
RELEASE_020 = GOLDEN / "0.2.0"
RELEASE_030 = GOLDEN / "0.3.0"  # calib.record/2
# From each SOURCE.md.
LEGACY_DIGESTS = {
    "issued": "2b093d9b796b0710e34d2760458a4721b47b896bfc6f0c15886e609065c97572",
    "reviewed": "57ee51a6a38abb141333b4acb18a6007d62edd0b21e2c61f7a925b78b0cbcacb",
    "approved": "4cfb750a5698f7fc5490c3816c2670bc5165589bddd5d805cb44021055055431",
}
CURRENT_DIGESTS = {
    "issued": "ca0d99c6fefdfa919ec11169ac334c6c8e9a4a7e8fbec6d4eb0bea0c0860ae0c",
    "reviewed": "81bc4d2135c2604e04af92a3b3c76eab83f649beaf45cd3e24e5ab4dbb48286b",
    "approved": "ac70af380ab11657d685625d3ca79acd2f3412bae9404439181837748a6fea58",
}
RELEASE_020_DIGESTS = {
    "issued": "36149bd366edd021972abfca48816b11dfbe11440a8e2707f3a165dc086583dd",
    "reviewed": "90a0a181e5f8628998422401319ddd4860e44654bee32d10f08c01bcf1c66cb9",
    "approved": "eeafa1fd4844b746e2073503f6d5c435bde68922ac7bf7acc993e6d5a3f09a4c",
}
RELEASE_030_DIGESTS = {
    "issued": "9735db18280decaed6a9a32fc02e6b939022f908e5b460123ee12a9bc3c87eac",
    "reviewed": "29841312894e322d437210dfef5fedbc00f54f9f5a4416ca8ad99f6650975b5d",
    "approved": "1ece96124230f99dd290660e07a12f5e129046c8284ddec016cd15d0ba1bb5d8",
}
SIGNED_SETS = [(CURRENT, CURRENT_DIGESTS), (RELEASE_020, RELEASE_020_DIGESTS),
               (RELEASE_030, RELEASE_030_DIGESTS)]


@pytest.fixture
def moved_margin(monkeypatch):
    """A release that lays pages out differently: the left margin 10 mm wider."""
    from calib.report import pdf as pdf_module

    original = pdf_module.page_margins

    def wider() -> dict[str, float]:
        margins = original()
        return {**margins, "leftMargin": margins["leftMargin"] + 28.35}

    monkeypatch.setattr(pdf_module, "page_margins", wider)


@pytest.mark.parametrize("stage", ["issued", "reviewed", "approved"])
def test_legacy_records_verify(stage):
    ring = load_keyring(LEGACY / "keyring")
    for suffix in (".pdf", ".json"):
        report = verify_file(LEGACY / f"nitrate.{stage}{suffix}", keyring=ring)
        assert report.ok, report.problems
        assert report.record.digest == LEGACY_DIGESTS[stage]
        assert report.verdict == "intact" and not report.issuer_signed
        assert "a record of calib 0.1.0: its digests use that release's canonical JSON (sorted " \
               "keys, no spaces, UTF-8)" in report.notes
    # The JSON file's bytes are the record: hashlib on them gives the digest SOURCE.md states.
    data = (LEGACY / f"nitrate.{stage}.json").read_bytes()
    assert hashlib.sha256(data).hexdigest() == LEGACY_DIGESTS[stage]


def test_legacy_approval_key_signature_still_verifies():
    report = verify_file(LEGACY / "nitrate.approved.pdf", keyring=load_keyring(LEGACY / "keyring"))
    assert [s.status for s in report.signatures] == ["unkeyed", "unkeyed", "legacy-valid"]
    assert report.signatures[2].message == (
        "signature 3 (approved by M. Adeyemi): valid signature by calib 0.1.0 key "
        "d9c9e814e9a8a0fc820426640884b76d (m-adeyemi); such keys were not bound to a person's "
        "name")


def test_legacy_record_verifies_and_signs_after_a_layout_change(moved_margin, tmp_path):
    report = verify_file(LEGACY / "nitrate.reviewed.pdf", pages=record_pages())
    assert report.ok
    (note,) = [n for n in report.notes if n.startswith("note: ")]
    assert "would draw the record differently (pages 1, 2, 3 differ" in note
    assert "this PDF has no digital signature" in note
    # Signed further with a certified key: the file signed is kept byte for byte, one
    # incremental update appended, and the new version verifies.
    keys, ring = make_keys(tmp_path, "a-mbeki-hale")
    original = (LEGACY / "nitrate.reviewed.pdf").read_bytes()
    signed = sign_file(LEGACY / "nitrate.reviewed.pdf", role="approved", key=keys["a-mbeki-hale"],
                       pages=record_pages())
    assert signed.pdf.startswith(original)
    assert signed.previous.digest == LEGACY_DIGESTS["reviewed"]
    again = verify_bytes(signed.pdf, name="v3.pdf", keyring=ring)
    assert again.ok, again.problems
    assert [s.status for s in again.signatures] == ["unkeyed", "unkeyed", "valid"]
    assert again.record.body["signatures"][2]["name"] == APPROVER
    assert again.record.body["signatures"][2]["previous_digest"] == LEGACY_DIGESTS["reviewed"]
    # A printed-name-only review of the issued record is drawn anew, in the new layout.
    printed = sign_file(LEGACY / "nitrate.issued.pdf", role="reviewed", name=REVIEWER,
                        pages=record_pages())
    assert verify_bytes(printed.pdf, name="v2.pdf").ok


@pytest.mark.parametrize(("folder", "digests"), SIGNED_SETS,
                         ids=["2026-12-02", "0.2.0", "0.3.0"])
@pytest.mark.parametrize("stage", ["issued", "reviewed", "approved"])
def test_current_golden_records_verify(stage, folder, digests):
    ring = load_keyring(folder / "keyring")
    for suffix in (".pdf", ".json"):
        report = verify_file(folder / f"nitrate.{stage}{suffix}", keyring=ring)
        assert report.ok, report.problems
        assert report.verdict == "verified"
        assert report.record.digest == digests[stage]
    data = (folder / f"nitrate.{stage}.json").read_bytes()
    # RFC 8785: the file is its own canonical form, as the rfc8785 library writes it.
    assert rfc8785.dumps(json.loads(data)) == data
    assert hashlib.sha256(data).hexdigest() == digests[stage]


@pytest.mark.parametrize("folder", [CURRENT, RELEASE_020, RELEASE_030],
                         ids=["2026-12-02", "0.2.0", "0.3.0"])
def test_current_golden_records_verify_and_sign_after_a_layout_change(moved_margin, tmp_path,
                                                                      folder):
    ring = load_keyring(folder / "keyring")
    report = verify_file(folder / "nitrate.reviewed.pdf", keyring=ring, pages=record_pages())
    assert report.verdict == "verified"
    (note,) = [n for n in report.notes if n.startswith("note: ")]
    assert "page layout changes between releases are not a problem" in note
    # A key of this test's own lab authority signs; the keyring trusts both authorities.
    keyring(tmp_path / "ring")
    (tmp_path / "ring" / "golden-authority.cert.pem").write_bytes(
        (folder / "keyring" / "lab-authority.cert.pem").read_bytes())
    both = load_keyring(tmp_path / "ring")
    original = (folder / "nitrate.reviewed.pdf").read_bytes()
    signed = sign_bytes(original, role="approved", key=person_key("Nadia Ferreira"),
                        pages=record_pages(), keyring=both)
    assert signed.pdf.startswith(original)
    again = verify_bytes(signed.pdf, name="v3.pdf", keyring=both)
    assert again.verdict == "verified", again.problems
    assert again.pdf_signatures == 3
    assert authority()[0].holder in again.signatures[2].message


def test_golden_approved_records_are_closed():
    from calib.record.signing import SignOffError

    for folder in (LEGACY, CURRENT, RELEASE_020, RELEASE_030):
        with pytest.raises(SignOffError, match="^sign-off is closed: the record was approved by "):
            sign_file(folder / "nitrate.approved.pdf", role="rejected", key=person_key(REVIEWER),
                      pages=record_pages())
