"""Verification of record PDFs and JSON: intact records pass, every alteration is named.

External checks: the PDF signatures are validated by pyhanko's own validator against the lab
authority (ISO 32000-2 §12.8, PAdES) and read back by pypdf as form fields; RFC 8785 digests
recomputed with the rfc8785 library; the alterations are those an editor or a forger would make.
"""

from __future__ import annotations

import io
import json
import re
import sqlite3

import pytest
from pypdf import PdfReader, PdfWriter

from calib.errors import InputError
from calib.record import Record
from calib.record.signoff import sign_bytes
from calib.record.verify import verify_bytes, verify_file
from calib.report import record_pages
from tests.record.integrity_helpers import (
    APPROVED_AT,
    APPROVER,
    PREPARER,
    REVIEWED_AT,
    REVIEWER,
    authority,
    issued,
    issued_signed,
    make_keys,
    render,
)


@pytest.fixture(scope="module")
def signed(tmp_path_factory):
    """Versions 1–3 of the nitrate record, every signature made with a key, as PDF files."""
    tmp = tmp_path_factory.mktemp("signed")
    keys, ring = make_keys(tmp / "keys", "t-overgaard", "a-mbeki-hale")
    v1, pdf1 = issued_signed()
    s2 = sign_bytes(pdf1, role="reviewed", key=keys["t-overgaard"], signed_at=REVIEWED_AT,
                    pages=record_pages())
    s3 = sign_bytes(s2.pdf, role="approved", key=keys["a-mbeki-hale"], signed_at=APPROVED_AT,
                    pages=record_pages())
    paths = []
    for n, pdf in enumerate((pdf1, s2.pdf, s3.pdf), start=1):
        path = tmp / f"nitrate.v{n}.pdf"
        path.write_bytes(pdf)
        paths.append(path)
    return {"versions": (v1, s2.record, s3.record), "paths": paths, "ring": ring, "keys": keys,
            "tmp": tmp}


def messages(report, area=None):
    return [p.message for p in report.problems if area is None or p.area == area]


def test_every_version_verifies_with_the_keyring(signed):
    for n, path in enumerate(signed["paths"], start=1):
        report = verify_file(path, keyring=signed["ring"])
        assert report.ok, report.problems
        assert report.verdict == "verified" and report.pdf_signatures == n
        assert report.record.digest == signed["versions"][n - 1].digest
        assert report.summary() == ("verified: intact, signed by its issuer, every signature "
                                    "verified with a key certified by the lab")
    report = verify_file(signed["paths"][2], keyring=signed["ring"], pages=record_pages())
    assert [s.status for s in report.signatures] == ["valid", "valid", "valid"]
    data = report.to_json()
    assert data["ok"] is True and data["schema"] == "calib.verify/2"
    assert data["verdict"] == "verified" and data["issuer_signed"] is True
    assert data["record_id"] == signed["versions"][0].record_id
    assert [s["key_holder"] for s in data["signatures"]] == [PREPARER, REVIEWER, APPROVER]
    assert ("note: this release draws the same pages from the record data, byte for byte"
            in report.notes)


def test_signed_pdf_opens_with_its_signatures_in_standard_tools(signed):
    # pypdf (an independent PDF library) sees one signature field per signature, and the
    # attached record JSON of the issued version.
    reader = PdfReader(signed["paths"][2])
    fields = reader.get_fields()
    assert sorted(fields) == ["calib-approved", "calib-prepared", "calib-reviewed"]
    assert all(f.get("/FT") == "/Sig" and f.get("/V") is not None for f in fields.values())
    sig = fields["calib-approved"]["/V"]
    assert sig["/SubFilter"] == "/ETSI.CAdES.detached" and sig["/Name"] == APPROVER
    assert reader.pages[-1].extract_text().startswith("Electronic signatures · record CR-")
    assert list(reader.attachments) == ["calib-record.json"]
    # pyhanko's validator, trusting only the lab authority: every signature intact, valid,
    # trusted, and only signature fields added after each.
    from asn1crypto import x509 as asn1_x509
    from cryptography.hazmat.primitives import serialization
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko_certvalidator import ValidationContext

    ca, _ = authority()
    root = asn1_x509.Certificate.load(ca.certificate.public_bytes(serialization.Encoding.DER))
    with open(signed["paths"][2], "rb") as fh:
        for embedded in PdfFileReader(fh).embedded_signatures:
            status = validate_pdf_signature(embedded, ValidationContext(
                trust_roots=[root], moment=embedded.self_reported_timestamp))
            assert status.bottom_line, status.pretty_print_details()


def test_key_signatures_without_a_keyring_are_not_confirmed(signed):
    report = verify_file(signed["paths"][1])
    key_id = signed["keys"]["t-overgaard"].key_id
    assert not report.ok and report.verdict == "not verified"
    assert messages(report)[1] == (f"signature 2 (reviewed by {REVIEWER}) was made with the "
                                   f"certified key of {REVIEWER} ({key_id}), but no keyring was "
                                   "given to check who issued its certificate")
    assert {p.area for p in report.problems} == {"unchecked"}


def test_signature_by_a_key_of_another_lab(signed, tmp_path):
    from tests.record.integrity_helpers import keyring

    stranger = keyring(tmp_path / "other", lab="Kestrel Bioanalytical")
    report = verify_file(signed["paths"][2], keyring=stranger)
    assert messages(report, "unchecked")[2] == (
        f"signature 3 (approved by {APPROVER}) was made with a key certified by 'Fernbrook "
        "Water Laboratory record signing authority', which is not a lab authority of the "
        f"keyring {stranger.folder}")


def test_forged_accepted_record_re_rendered_with_the_library(signed, tmp_path):
    # The attack: a rejected record edited to accepted, given review and approval
    # signatures dated before its creation, and drawn again with calib's own renderer.
    rejected = issued(levels=4)
    body = json.loads(rejected.canonical)
    body["check"]["verdict"] = "accepted"
    for curve in body["check"]["curves"]:
        curve["verdict"] = "accepted"
    forged = Record(body)
    v2 = Record({**forged.body, "signatures": [*forged.body["signatures"], {
        "role": "reviewed", "name": REVIEWER, "signed_at": "2026-11-20T10:00:00Z",
        "meaning": "Reviewed", "previous_digest": forged.digest}]})
    v3 = Record({**v2.body, "signatures": [*v2.body["signatures"], {
        "role": "approved", "name": APPROVER, "signed_at": "2026-11-21T10:00:00Z",
        "meaning": "Approved", "previous_digest": v2.digest}]})
    path = tmp_path / "forged.pdf"
    path.write_bytes(render(v3))
    for ring in (None, signed["ring"]):
        report = verify_file(path, keyring=ring)
        assert report.verdict == "not verified"
        assert messages(report, "rules") == [
            (f"signature 2 (reviewed by {REVIEWER}) breaks the sign-off rules: the signature is "
             "dated 2026-11-20 10:00:00 UTC, before the record was issued (2026-12-01 09:30:00 "
             "UTC)"),
            (f"signature 3 (approved by {APPROVER}) breaks the sign-off rules: the signature is "
             "dated 2026-11-21 10:00:00 UTC, before the record was issued (2026-12-01 09:30:00 "
             "UTC)")]
    # Dated plausibly, the forgery is still only what it is: a draft nobody signed with a key.
    v2 = Record({**forged.body, "signatures": [*forged.body["signatures"], {
        "role": "reviewed", "name": REVIEWER, "signed_at": "2026-12-02T10:00:00Z",
        "meaning": "Reviewed", "previous_digest": forged.digest}]})
    path.write_bytes(render(v2))
    report = verify_file(path, keyring=signed["ring"])
    assert report.verdict == "intact" and not report.issuer_signed
    assert report.summary() == (
        "intact, origin not verified throughout: draft: not signed by an issuer; signature 2 "
        f"(reviewed by {REVIEWER}) is a printed name only, not key-verified")
    assert report.notes[0] == ("draft: not signed by an issuer (anyone with calib could have "
                               "made this file)")
    # Edited from an issuer-signed record, keeping the issuer's key signature: it breaks.
    genuine = signed["versions"][0]
    body = json.loads(genuine.canonical)
    body["settings"]["confidence"] = 0.9
    path.write_bytes(render(Record(body)))
    report = verify_file(path, keyring=signed["ring"])
    assert messages(report, "signatures")[0].startswith(
        f"signature 1 (prepared by {PREPARER}) does not verify with the key of {PREPARER}")


def test_zero_width_signer_name_in_a_forged_record(tmp_path):
    v1 = issued()
    v2 = Record({**v1.body, "signatures": [*v1.body["signatures"], {
        "role": "reviewed", "name": "\u200b", "signed_at": "2026-12-02T10:00:00Z",
        "meaning": "Reviewed", "previous_digest": v1.digest}]})
    path = tmp_path / "ghost.json"
    path.write_bytes(v2.canonical)
    assert messages(verify_file(path), "rules") == [
        "signature 2 (reviewed by \u200b) breaks the sign-off rules: printed name '\\u200b' "
        "holds an invisible or control character (U+200B); a printed name must show every "
        "character it holds"]


def test_wrong_key_named_in_a_re_rendered_record(signed, tmp_path):
    # Someone swaps the reviewer's key id for the approver's and re-renders a consistent PDF.
    body = json.loads(signed["versions"][1].canonical)
    wrong = signed["keys"]["a-mbeki-hale"].key_id
    right = signed["keys"]["t-overgaard"].key_id
    body["signatures"][1]["key_id"] = wrong
    path = tmp_path / "swapped.pdf"
    path.write_bytes(render(Record(body)))
    report = verify_file(path, keyring=signed["ring"])
    assert messages(report) == [(f"signature 2 (reviewed by {REVIEWER}): names key {wrong}, but "
                                 f"its certificate holds key {right}")]


def test_edited_number_in_the_embedded_data(signed, tmp_path):
    # The pages stay as issued; the attached JSON gets one response changed.
    v2 = signed["versions"][1]
    body = json.loads(v2.canonical)
    body["check"]["curves"][0]["points"][3]["response"] = 0.9
    edited = Record(body)
    path = tmp_path / "edited.pdf"
    path.write_bytes(render_pages_with_attachment(v2, edited.canonical))
    report = verify_file(path, keyring=signed["ring"])
    found = messages(report)
    assert found[0] == (f"the PDF states version digest {v2.digest[:16]}…, but its attached "
                        f"record data has digest {edited.digest[:16]}…: the attached data was "
                        "changed")
    assert found[1] == (f"the PDF states record id {v2.record_id}, but its attached record data "
                        f"is {edited.record_id}")
    assert found[2].startswith(f"signature 2 (reviewed by {REVIEWER}) was made on another "
                               "version of the record")
    assert found[3].startswith(f"signature 1 (prepared by {PREPARER}) does not verify with the "
                               "key of")
    assert found[4].startswith(f"signature 2 (reviewed by {REVIEWER}) does not verify with the "
                               "key of")
    assert [p.area for p in report.problems] == ["data", "data", "data", "signatures",
                                                 "signatures"]


def test_edit_saved_as_an_incremental_update_after_the_last_signature(signed, tmp_path):
    # A PDF editor saving a change "incrementally" keeps the signed bytes and appends the edit.
    writer = PdfWriter(signed["paths"][2], incremental=True)
    stream = writer.pages[0]["/Contents"].get_object()
    stream.set_data(stream.get_data().replace(b"770.1969 cm", b"770.1968 cm", 1))
    out = io.BytesIO()
    writer.write(out)
    assert out.getvalue().startswith(signed["paths"][2].read_bytes())
    report = verify_bytes(out.getvalue(), name="edited.pdf", keyring=signed["ring"])
    assert report.verdict == "not verified"
    found = messages(report, "pdf")
    assert found[-1] == ("the file was changed after its last signature: it holds bytes that no "
                         "signature covers (an edit saved as an incremental update)")
    assert any(m.startswith("the PDF was changed after PDF signature 3 (field calib-approved, "
                            f"by {APPROVER}) in a way only later signatures may change it")
               for m in found)


def test_embedded_data_edited_by_hand_is_not_canonical(signed, tmp_path):
    v1 = signed["versions"][0]
    text = v1.canonical.replace(b'"created_at":"2026-12-01T09:30:00Z"',
                                b'"created_at": "2026-12-01T09:30:00Z"')
    path = tmp_path / "spaced.pdf"
    path.write_bytes(render_pages_with_attachment(v1, text))
    report = verify_file(path)
    assert messages(report, "data")[0] == ("the attached record data is not in calib's "
                                           "canonical form: it was edited or written by other "
                                           "software")
    assert not report.ok


def test_embedded_data_that_is_not_a_record(signed, tmp_path):
    v1 = signed["versions"][0]
    for data, message in [
        (b'{"schema": "calib.check/1"}',
         ("the attached record data is not a calib record document (not a calib.record/1 "
         "or calib.record/2 document)")),
        (b"{not json", ("the attached record data is not a calib record document (Expecting "
                       "property name enclosed in double quotes: line 1 column 2 (char 1))")),
        (b'{"a": "\xff"}', "the attached record data is not UTF-8 text"),
    ]:
        path = tmp_path / "bad.pdf"
        path.write_bytes(render_pages_with_attachment(v1, data))
        report = verify_file(path)
        assert messages(report) == [message] and report.record is None


def test_edited_byte_in_the_page_content(signed, tmp_path):
    # Decode page 1, move the lab name by a hundredth of a point, write the PDF back.
    original = signed["paths"][0].read_bytes()
    writer = PdfWriter(clone_from=PdfReader(io.BytesIO(original)))
    stream = writer.pages[0]["/Contents"].get_object()
    content = stream.get_data()
    assert b"770.1969 cm" in content
    stream.set_data(content.replace(b"770.1969 cm", b"770.1968 cm", 1))
    out = io.BytesIO()
    writer.write(out)
    path = tmp_path / "moved.pdf"
    path.write_bytes(out.getvalue())
    report = verify_file(path, keyring=signed["ring"])
    assert messages(report, "pdf")[0] == (
        f"PDF signature 1 (field calib-prepared, by {PREPARER}) does not verify: the bytes it "
        "signed were changed after signing, or it was not made with the signer's key")
    assert report.verdict == "not verified"


def test_one_flipped_byte_anywhere_in_a_page_stream(signed, tmp_path):
    original = signed["paths"][0].read_bytes()
    ref = PdfReader(io.BytesIO(original)).pages[1].raw_get("/Contents")
    start = re.search(rb"\n%d 0 obj" % ref.idnum, original).end()
    at = original.index(b"stream\n", start) + len(b"stream\n") + 300
    damaged = bytearray(original)
    damaged[at] ^= 0x04
    path = tmp_path / "flipped.pdf"
    path.write_bytes(bytes(damaged))
    report = verify_file(path, keyring=signed["ring"])
    assert not report.ok
    assert messages(report, "pdf")[-1] == (
        f"PDF signature 1 (field calib-prepared, by {PREPARER}) does not verify: the bytes it "
        "signed were changed after signing, or it was not made with the signer's key")


def test_removed_signature_in_a_re_rendered_record(signed, tmp_path):
    # Dropping the review from the approved version and rendering it again gives a PDF that
    # matches its data; the approval's link and the sign-off rules give it away.
    body = json.loads(signed["versions"][2].canonical)
    del body["signatures"][1]
    path = tmp_path / "no-review.pdf"
    path.write_bytes(render(Record(body)))
    report = verify_file(path, keyring=signed["ring"])
    found = messages(report)
    assert found[0].startswith(f"signature 2 (approved by {APPROVER}) was made on another "
                               "version of the record: it links to version digest "
                               f"{signed['versions'][1].digest[:16]}…")
    assert found[1] == (f"signature 2 (approved by {APPROVER}) breaks the sign-off rules: the "
                        "record must be reviewed before it is approved")
    # The approver's key signature itself still verifies: it signed the version with the
    # review, which is exactly what the broken link says.
    assert len(found) == 2
    assert [s.status for s in report.signatures] == ["valid", "valid"]


def test_removed_signature_in_the_attached_data_only(signed, tmp_path):
    v3 = signed["versions"][2]
    body = json.loads(v3.canonical)
    body["signatures"].pop()
    path = tmp_path / "cut.pdf"
    path.write_bytes(render_pages_with_attachment(v3, Record(body).canonical))
    report = verify_file(path, keyring=signed["ring"])
    assert messages(report)[0].startswith(f"the PDF states version digest {v3.digest[:16]}…")


def test_json_record_verifies_digests_and_signatures(signed, tmp_path):
    v3 = signed["versions"][2]
    path = tmp_path / "nitrate.v3.json"
    path.write_bytes(v3.canonical)
    report = verify_file(path, keyring=signed["ring"])
    assert report.ok and report.kind == "json" and report.verdict == "verified"
    assert "a JSON record has no pages; verify its PDF to check the issued file" in report.notes
    body = json.loads(v3.canonical)
    body["check"]["curves"][0]["coefficients"]["slope"]["estimate"] *= 1.01
    path.write_bytes(Record(body).canonical)
    report = verify_file(path, keyring=signed["ring"])
    assert {p.area for p in report.problems} == {"data", "signatures"}
    path.write_bytes(json.dumps(body, indent=1).encode())
    assert messages(verify_file(path, keyring=signed["ring"]))[0] == (
        "the file is not in calib's canonical form: it was edited or written by other software")


def test_unreadable_files(tmp_path):
    missing = tmp_path / "nowhere.pdf"
    with pytest.raises(InputError) as info:
        verify_file(missing)
    assert str(info.value) == f"{missing}: file not found"
    gif = tmp_path / "logo.gif"
    gif.write_bytes(b"GIF89a....")
    with pytest.raises(InputError) as info:
        verify_file(gif)
    assert str(info.value) == f"{gif}: neither a calib record PDF nor a record JSON file"
    from reportlab.pdfgen.canvas import Canvas

    plain = tmp_path / "plain.pdf"
    canvas = Canvas(str(plain), invariant=1)
    canvas.drawString(72, 720, "No record here.")
    canvas.save()
    with pytest.raises(InputError) as info:
        verify_file(plain)
    assert str(info.value) == (f"{plain}: not a calib record PDF: it has no attached "
                               "calib-record.json")
    broken = tmp_path / "broken.pdf"
    broken.write_bytes(b"%PDF-1.4\n" + b"\x00" * 40)
    with pytest.raises(InputError) as info:
        verify_file(broken)
    assert str(info.value).startswith(f"{broken}: not a readable PDF (")
    bad_json = tmp_path / "bad.json"
    bad_json.write_bytes(b'{"schema": "calib.check/1"}')
    assert messages(verify_file(bad_json)) == [
        ("the file is not a calib record document (not a calib.record/1 or calib.record/2 "
         "document)")]


def test_another_template_is_only_a_note(signed, tmp_path):
    from calib.report import load_template

    lab = tmp_path / "lab.toml"
    lab.write_text('[lab]\nname = "Kestrel Bioanalytical"\n[page]\nsize = "Letter"\n',
                   encoding="utf-8")
    template = load_template(lab)
    v1 = issued()
    path = tmp_path / "kestrel.pdf"
    path.write_bytes(render(v1, template))
    assert "note: this release draws the same pages from the record data, byte for byte" in \
        verify_file(path, pages=record_pages(template)).notes
    report = verify_file(path, pages=record_pages())
    assert report.ok and report.verdict == "intact"
    (note,) = [n for n in report.notes if n.startswith("note: ")]
    assert note.startswith("note: this release (calib ")
    assert "page layout changes between releases are not a problem" in note
    assert note.endswith(f"; the PDF names report template {template.fingerprint[:16]}")


def test_archive_entry_and_chain(signed):
    archive_module = pytest.importorskip("calib.archive")
    db = signed["tmp"] / "records.sqlite"
    v1, v2, _ = signed["versions"]
    p1, p2, p3 = (p.read_bytes() for p in signed["paths"])
    with archive_module.Archive(db) as archive:
        archive.append(v1, p1, kind="issued")
        archive.append(v2, p2, kind="signed")
        report = verify_file(signed["paths"][1], keyring=signed["ring"], archive=archive)
        assert report.ok, report.problems
        assert f"this version is entry seq 2 of the archive {db}, byte for byte" in report.notes
        assert (f"entry seq 2 of the archive {db} is linked to its neighbours in the hash chain "
                "(head seq 2; head receipt matches)") in report.notes
        older = verify_file(signed["paths"][0], archive=archive, keyring=signed["ring"])
        assert older.ok
        assert (f"the archive {db} holds a later version of {v1.record_id}: entry seq 2 "
                "(prepared, reviewed)") in older.notes
        report = verify_file(signed["paths"][2], keyring=signed["ring"], archive=archive)
        assert messages(report) == [(f"this version (digest {signed['versions'][2].digest[:16]}…) "
                                    f"is not in the archive {db}")]
    assert p3  # the approved version was never filed
    # Tamper with the archive behind its back: drop the guard and rewrite an entry's verdict.
    conn = sqlite3.connect(db)
    for (name,) in conn.execute("SELECT name FROM sqlite_master WHERE type = 'trigger'"):
        conn.execute(f"DROP TRIGGER {name}")
    conn.execute("UPDATE entries SET verdict = 'rejected' WHERE seq = 1")
    conn.commit()
    conn.close()
    with archive_module.Archive(db, create=False) as archive:
        report = verify_file(signed["paths"][1], keyring=signed["ring"], archive=archive)
    archive_problems = messages(report, "archive")
    assert archive_problems and all(m.startswith(f"the archive {db}: ") for m in archive_problems)
    assert any("seq 1" in m for m in archive_problems)


def render_pages_with_attachment(record: Record, attachment: bytes) -> bytes:
    """The record's own pages with other bytes attached as its JSON (a swapped attachment)."""
    from calib.report import write_pdf

    return write_pdf(record.body, digest=record.digest, record_id=record.record_id,
                     attachment=attachment)


def test_keywords_removed_from_the_pdf(signed, tmp_path):
    writer = PdfWriter(clone_from=PdfReader(signed["paths"][0]))
    writer.add_metadata({"/Keywords": "nothing to see"})
    path = tmp_path / "no-keywords.pdf"
    writer.write(path)
    found = messages(verify_file(path, keyring=signed["ring"]))
    assert found[0] == ("the PDF does not state a version digest in its document keywords, as "
                        "every calib record does")
    assert found[1] == (f"PDF signature 1 (field calib-prepared, by {PREPARER}) does not verify: "
                        "the bytes it signed were changed after signing, or it was not made with "
                        "the signer's key")


def test_a_second_attachment_under_the_record_name(signed, tmp_path):
    writer = PdfWriter(clone_from=PdfReader(signed["paths"][0]))
    writer.add_attachment("calib-record.json", b"{}")
    path = tmp_path / "two.pdf"
    writer.write(path)
    assert messages(verify_file(path), "data") == [
        "the PDF holds 2 attached files named as the record; a calib record has one"]


def test_attachment_with_a_value_json_cannot_carry(signed, tmp_path):
    path = tmp_path / "nan.pdf"
    path.write_bytes(render_pages_with_attachment(
        signed["versions"][0], b'{"schema":"calib.record/1","x":NaN}'))
    (message,) = messages(verify_file(path))
    # The json module's own words follow (they vary a little between Python versions).
    assert message.startswith("the attached record data holds a value JSON cannot carry (Out "
                              "of range float values are not JSON compliant")


def test_undecodable_parts_are_findings_not_unreadable_files(signed, monkeypatch):
    from calib.record import pdfread

    real = pdfread.read_back

    def damaged(pdf):
        contents = real(pdf)
        return pdfread.PdfContents({}, contents.keywords, contents.pages,
                                   ("the attached files cannot be read (error: bad stream)",))

    monkeypatch.setattr(pdfread, "read_back", damaged)
    report = verify_file(signed["paths"][0])
    assert messages(report) == [
        "the attached record data cannot be read: the PDF is damaged",
        "the PDF is damaged: the attached files cannot be read (error: bad stream)",
    ]
    assert report.record is None


class FakeEntry:
    def __init__(self, seq, record, pdf, roles=()):
        self.seq, self.json, self.pdf, self.roles = seq, record.canonical, pdf, roles
        self.version_digest = record.digest


class FakeArchive:
    """Stands in for calib.archive.Archive: one entry, chain as given."""

    path = "fake.sqlite"

    def __init__(self, entry, problems=()):
        self.entry, self.problems = entry, problems

    def find_digest(self, digest):
        return self.entry if self.entry.version_digest == digest else None

    def latest(self, record_id):
        return self.entry

    def verify_entry(self, digest):
        from types import SimpleNamespace

        return SimpleNamespace(ok=not self.problems, problems=self.problems, head_seq=4,
                               receipt=None)


def test_archive_copy_that_differs(signed):
    v1 = signed["versions"][0]
    entry = FakeEntry(4, v1, b"%PDF-other")
    entry.json = b"{}"
    report = verify_file(signed["paths"][0], archive=FakeArchive(entry, ("entry seq 4: bad",)))
    assert messages(report, "archive") == [
        ("entry seq 4 of the archive fake.sqlite holds other record data under this version "
        "digest"),
        "the PDF differs from the copy in the archive fake.sqlite (entry seq 4)",
        "the archive fake.sqlite: entry seq 4: bad",
    ]


def test_signature_added_with_a_key_of_another_lab(signed):
    # Anyone can make a lab authority of their own and append a PDF signature: the signature is
    # intact, but its certificate does not chain to the lab's authority, so it is not accepted.
    from tests.record.integrity_helpers import person_key

    outsider = person_key("Mallory Quist", lab="Kestrel Bioanalytical")
    pdf = signed["paths"][1].read_bytes()
    forged = sign_bytes(pdf, role="approved", key=outsider, signed_at=APPROVED_AT,
                        pages=record_pages())
    report = verify_bytes(forged.pdf, name="forged.pdf", keyring=signed["ring"])
    assert report.verdict == "not verified" and report.pdf_signatures == 3
    assert messages(report) == [
        ("signature 3 (approved by Mallory Quist) was made with a key certified by 'Kestrel "
         "Bioanalytical record signing authority', which is not a lab authority of the keyring "
         f"{signed['ring'].folder}")]


def test_record_from_pdf_gives_the_current_version(signed):
    from calib.record import record_from_pdf

    for path, version in zip(signed["paths"], signed["versions"]):
        assert record_from_pdf(path.read_bytes()).canonical == version.canonical


def test_damaged_signature_value_is_a_finding_not_a_crash(signed):
    # Overwrite the start of the last signature's CMS value (/Contents <hex>) with zeros.
    pdf = bytearray(signed["paths"][1].read_bytes())
    at = pdf.rindex(b"/Contents <") + len(b"/Contents <")
    pdf[at:at + 64] = b"0" * 64
    report = verify_bytes(bytes(pdf), name="damaged.pdf", keyring=signed["ring"])
    assert report.verdict == "not verified"
    found = messages(report, "pdf")
    assert found[0].startswith("the PDF is damaged: signature field 'calib-reviewed' cannot be "
                               "read (ValueError: ")
    # The issuer's signature still reads and verifies; the review it cannot count.
    assert found[1:] == ["the file was changed after its last signature: it holds bytes that no "
                         "signature covers (an edit saved as an incremental update)"]
    assert [s.role for s in report.signatures] == ["prepared"]
