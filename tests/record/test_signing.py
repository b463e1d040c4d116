"""Sign-off on records: versions, digest links, key signatures and every sign-off rule.

External checks: RFC 8785 canonical JSON recomputed with the ``rfc8785`` library; ECDSA
P-256 signatures (FIPS 186-5) verified with ``cryptography`` directly against the signer's
certificate; 21 CFR 11.50 (printed name, date and time, meaning) and 11.70/11.200 (a signature
is bound to one person and cannot be transferred) as the rules the attacks break.
"""

from __future__ import annotations

import base64
import hashlib
import json
from datetime import UTC, datetime

import pytest
import rfc8785
from cryptography import x509
from cryptography.hazmat.primitives import hashes
from cryptography.hazmat.primitives.asymmetric import ec

from calib.checks.profile import SignoffPolicy, signoff_policy
from calib.errors import ProfileError
from calib.record import Record
from calib.record.signing import (
    DEFAULT_MEANINGS,
    SignOffError,
    check_signatures,
    issue_signed,
    rule_problems,
    sign_record,
    signature_manifest,
)
from calib.record.versions import chain_problems, version_at, version_digests
from tests.record.integrity_helpers import (
    APPROVED_AT,
    APPROVER,
    ISSUED_AT,
    LENIENT,
    PREPARER,
    REVIEWED_AT,
    REVIEWER,
    authority,
    issued,
    make_keys,
    person_key,
)


@pytest.fixture
def keys(tmp_path):
    return make_keys(tmp_path, "t-overgaard", "a-mbeki-hale")


def test_prepared_reviewed_approved_with_keys(keys):
    signing, ring = keys
    v1 = issue_signed(issued(), person_key(PREPARER))
    v2 = sign_record(v1, role="reviewed", signed_at=REVIEWED_AT, key=signing["t-overgaard"])
    v3 = sign_record(v2, role="approved", name=APPROVER, signed_at=APPROVED_AT,
                     key=signing["a-mbeki-hale"])
    assert v3.record_id == v2.record_id == v1.record_id
    assert version_digests(v3)[1:] == [v1.digest, v2.digest, v3.digest]
    entry = v3.body["signatures"][2]
    assert (entry["role"], entry["name"], entry["signed_at"]) == (
        "approved", APPROVER, "2026-12-03T08:45:30Z")
    assert entry["meaning"] == DEFAULT_MEANINGS["approved"]
    assert entry["previous_digest"] == v2.digest
    checks = check_signatures(v3, ring)
    assert [c.status for c in checks] == ["valid", "valid", "valid"]
    assert [c.key_name for c in checks] == [PREPARER, REVIEWER, APPROVER]
    assert checks[2].message == (
        f"signature 3 (approved by {APPROVER}): valid signature by the key of {APPROVER} "
        f"({signing['a-mbeki-hale'].key_id}), certified by Fernbrook Water Laboratory record "
        "signing authority")
    assert chain_problems(v3) == [] and rule_problems(v3) == []


def test_manifest_is_what_the_key_signed(keys):
    signing, _ = keys
    v2 = sign_record(issued(), role="reviewed", signed_at=REVIEWED_AT,
                     key=signing["t-overgaard"])
    entry = v2.body["signatures"][1]
    manifest = signature_manifest(v2.content_digest, entry)
    # The manifest is RFC 8785 canonical JSON, recomputed with the rfc8785 library.
    assert manifest == rfc8785.dumps({
        "schema": "calib.signature/2", "content_digest": v2.content_digest,
        "previous_digest": entry["previous_digest"], "role": "reviewed", "name": REVIEWER,
        "signed_at": "2026-12-02T14:05:00Z", "meaning": DEFAULT_MEANINGS["reviewed"],
        "key_id": signing["t-overgaard"].key_id, "algorithm": "ecdsa-p256-sha256",
        "certificate_sha256": hashlib.sha256(entry["certificate"].encode()).hexdigest()})
    # Verified with the certificate the entry carries, by the cryptography library alone.
    cert = x509.load_der_x509_certificate(base64.b64decode(entry["certificate"]))
    cert.public_key().verify(base64.b64decode(entry["signature"]), manifest,
                             ec.ECDSA(hashes.SHA256()))


def test_a_key_signs_only_as_its_holder(keys):
    # The issue's attack: a key made for one person signing as "Second Signer".
    signing, ring = keys
    key = signing["t-overgaard"]
    with pytest.raises(SignOffError) as info:
        sign_record(issued(), role="reviewed", name="Second Signer", key=key)
    assert str(info.value) == (f"the key {key.path.name} belongs to {REVIEWER}; a signature "
                               "made with it carries that name, not 'Second Signer'")
    with pytest.raises(SignOffError) as info:
        sign_record(issued(), role="reviewed", name="T. Øvergaard", key=key)
    assert str(info.value).endswith("carries that name, not 'T. Øvergaard'")
    # The entry edited afterwards to show another name: the key signature no longer holds.
    v2 = sign_record(issued(), role="reviewed", key=key, signed_at=REVIEWED_AT)
    body = json.loads(v2.canonical)
    body["signatures"][1]["name"] = "Second Signer"
    assert check_signatures(Record(body), ring)[1].status == "bad-signature"


def test_same_key_for_two_names_and_a_re_signed_entry(keys):
    # A forger holding the reviewer's key re-signs an entry under another name: the signature
    # verifies, but the certificate names its holder, so the name is refused.
    signing, ring = keys
    key = signing["t-overgaard"]
    v2 = sign_record(issued(), role="reviewed", key=key, signed_at=REVIEWED_AT)
    body = json.loads(v2.canonical)
    entry = body["signatures"][1]
    entry["name"] = "Second Signer"
    entry["signature"] = base64.b64encode(
        key.sign(signature_manifest(Record(body).content_digest, entry))).decode()
    check = check_signatures(Record(body), ring)[1]
    assert check.status == "wrong-name"
    assert check.message == (
        f"signature 2 (reviewed by Second Signer) was made with the key of {REVIEWER} "
        f"({key.key_id}), but carries the printed name 'Second Signer': a key signs only as its "
        "holder")


def test_authority_key_does_not_sign_records():
    ca, _ = authority()
    with pytest.raises(SignOffError) as info:
        sign_record(issued(), role="reviewed", key=ca)
    assert str(info.value).endswith("is the lab authority key: it certifies people's keys and "
                                    "does not sign records; review with your own key")


def test_key_from_another_lab_and_expired_certificates(keys, tmp_path):
    _, ring = keys
    stranger = person_key(REVIEWER, lab="Kestrel Bioanalytical")
    v2 = sign_record(issued(), role="reviewed", key=stranger, signed_at=REVIEWED_AT)
    check = check_signatures(v2, ring)[1]
    assert check.status == "unknown-key"
    assert check.message == (
        f"signature 2 (reviewed by {REVIEWER}) was made with a key certified by 'Kestrel "
        "Bioanalytical record signing authority', which is not a lab authority of the keyring "
        f"{ring.folder}")
    # Dated before the certificate existed (keys of the tests are certified from 2026-11-01).
    early = Record({**issued().body, "created_at": "2026-10-01T09:00:00Z"})
    body = {**early.body, "signatures": [{**early.body["signatures"][0],
                                          "signed_at": "2026-10-01T09:00:00Z"}]}
    v2 = sign_record(Record(body), role="reviewed", key=person_key(REVIEWER),
                     signed_at=datetime(2026, 10, 2, tzinfo=UTC))
    check = check_signatures(v2, ring)[1]
    assert check.status == "expired"
    assert check.message.endswith("is dated 2026-10-02T00:00:00Z, outside the validity of "
                                  f"{REVIEWER}'s certificate (2026-10-31 to 2036-10-29)")


def test_an_edited_number_breaks_the_links_and_the_key_signature(keys):
    signing, ring = keys
    v2 = sign_record(issued(), role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT,
                     key=signing["t-overgaard"])
    body = json.loads(v2.canonical)
    body["check"]["curves"][0]["points"][0]["response"] += 0.001
    tampered = Record(body)
    assert tampered.record_id != v2.record_id  # the id derives from the content
    (problem,) = chain_problems(tampered)
    assert problem.startswith(f"signature 2 (reviewed by {REVIEWER}) was made on another "
                              "version of the record: it links to version digest "
                              f"{v2.body['signatures'][1]['previous_digest'][:16]}…")
    assert check_signatures(tampered, ring)[1].status == "bad-signature"


def test_removed_signature_breaks_the_link_of_the_next():
    v2 = sign_record(issued(), role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT)
    v3 = sign_record(v2, role="approved", name=APPROVER, signed_at=APPROVED_AT)
    body = json.loads(v3.canonical)
    del body["signatures"][1]
    cut = Record(body)
    assert chain_problems(cut)[0].startswith(
        f"signature 2 (approved by {APPROVER}) was made on another version of the record")
    assert rule_problems(cut) == [
        (f"signature 2 (approved by {APPROVER}) breaks the sign-off rules: the record must be "
        "reviewed before it is approved")]


def test_malformed_signature_entries():
    body = json.loads(issued().canonical)
    body["signatures"] += ["scribble", {"role": "witnessed", "name": "", "signed_at": "x",
                                        "meaning": "m"}]
    problems = chain_problems(Record(body))
    assert problems == [
        "signature 2 is not a signature entry",
        "signature 3 (witnessed by ?) lacks name",
        "signature 3 (witnessed by ?) has an unknown role 'witnessed'",
        "signature 3 (witnessed by ?) does not name the version it signed (no previous_digest)",
    ]
    body["signatures"] = {"role": "prepared"}
    assert chain_problems(Record(body)) == ["the record's signatures are not a list"]


def test_preparer_may_not_review_or_approve():
    v1 = issued()
    with pytest.raises(SignOffError) as info:
        # The same printed name, however it is typed.
        sign_record(v1, role="reviewed", name="  zoë  ŁUKASIEWICZ-NG ")
    assert str(info.value) == (
        f"zoë ŁUKASIEWICZ-NG prepared this record (as {PREPARER}) and may not also review it: "
        "the profile does not allow it (its [signoff] table would need "
        "allow_preparer_to_review = true)")
    v2 = sign_record(v1, role="reviewed", name=REVIEWER)
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="approved", name=PREPARER)
    assert str(info.value) == (
        f"{PREPARER} prepared this record (as {PREPARER}) and may not also approve it: the "
        "profile does not allow it (its [signoff] table would need "
        "allow_preparer_to_approve = true)")
    # Withdrawing one's own curve needs no second person.
    assert sign_record(v2, role="rejected", name=PREPARER).body["signatures"][-1]["role"] == \
        "rejected"


def _prepared_by(name: str) -> Record:
    body = json.loads(issued().canonical)
    body["prepared_by"] = name
    body["signatures"][0]["name"] = name
    return Record(body)


@pytest.mark.parametrize("variant", ["A Preparer", "Preparer, A.", "a. preparer",
                                     "Anna Preparer"])
def test_self_approval_by_variant_names_is_refused(variant):
    # The issue's attack: "A. Preparer" approving as "A Preparer" or "Preparer, A.".
    v2 = sign_record(_prepared_by("A. Preparer"), role="reviewed", name=REVIEWER)
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="approved", name=variant)
    assert str(info.value) == (
        f"{variant} prepared this record (as A. Preparer) and may not also approve it: the "
        "profile does not allow it (its [signoff] table would need "
        "allow_preparer_to_approve = true)")


@pytest.mark.parametrize("variant, message", [
    ("A\u200b. Preparer", "printed name 'A\\u200b. Preparer' holds an invisible or control "
                          "character (U+200B); a printed name must show every character it holds"),
    ("A. Prep\u0430rer", "printed name 'A. Prepаrer' mixes letters of the CYRILLIC and LATIN "
                         "scripts, which can look alike; write it in one script"),
    ("\u200b", "printed name '\\u200b' holds an invisible or control character (U+200B); a "
               "printed name must show every character it holds"),
])
def test_invisible_and_look_alike_names_are_refused(variant, message):
    v2 = sign_record(_prepared_by("A. Preparer"), role="reviewed", name=REVIEWER)
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="approved", name=variant)
    assert str(info.value) == message


def test_a_record_without_a_preparer_cannot_be_reviewed():
    body = json.loads(issued().canonical)
    body["prepared_by"], body["signatures"] = None, []
    anonymous = Record(body)
    for role in ("reviewed", "approved"):
        with pytest.raises(SignOffError) as info:
            sign_record(anonymous, role=role, name=REVIEWER)
        assert str(info.value) == (f"the record names no preparer, so it cannot be {role}: a "
                                   "second person's check needs the first person's name (issue "
                                   "it with the preparer's name)")
    assert sign_record(anonymous, role="rejected", name=REVIEWER).body["signatures"][0][
        "role"] == "rejected"


def test_reviewer_may_not_approve_unless_the_profile_allows_it(keys):
    signing, _ = keys
    v2 = sign_record(issued(), role="reviewed", name="T. Øvergaard", signed_at=REVIEWED_AT)
    # By name (an initial matches the full first name) and by key.
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="approved", key=signing["t-overgaard"], signed_at=APPROVED_AT)
    assert str(info.value) == (
        f"{REVIEWER} reviewed this record (as T. Øvergaard) and may not also approve it: the "
        "profile does not allow it (its [signoff] table would need "
        "allow_reviewer_to_approve = true)")
    allowed = issued(profile_extra="\n[signoff]\nallow_reviewer_to_approve = true\n")
    v2 = sign_record(allowed, role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT)
    v3 = sign_record(v2, role="approved", name=REVIEWER, signed_at=APPROVED_AT)
    assert rule_problems(v3) == []
    assert rule_problems(v3, SignoffPolicy()) == [
        (f"signature 3 (approved by {REVIEWER}) breaks the sign-off rules: {REVIEWER} reviewed "
         f"this record (as {REVIEWER}) and may not also approve it: the profile does not allow "
         "it (its [signoff] table would need allow_reviewer_to_approve = true)")]


def test_signatures_follow_the_issue_and_each_other():
    v1 = issued()  # issued 2026-12-01 09:30 UTC
    with pytest.raises(SignOffError) as info:
        sign_record(v1, role="reviewed", name=REVIEWER, signed_at=datetime(2026, 11, 30,
                                                                            tzinfo=UTC))
    assert str(info.value) == ("the signature is dated 2026-11-30 00:00:00 UTC, before the "
                               "record was issued (2026-12-01 09:30:00 UTC)")
    v2 = sign_record(v1, role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT)
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="approved", name=APPROVER, signed_at=ISSUED_AT)
    assert str(info.value) == (f"the signature is dated 2026-12-01 09:30:00 UTC, before the "
                               f"reviewed signature of {REVIEWER} (2026-12-02 14:05:00 UTC) "
                               "that it follows")
    # Back-dated in a forged record: the replayed rules find it.
    v3 = sign_record(v2, role="approved", name=APPROVER, signed_at=APPROVED_AT)
    body = json.loads(v3.canonical)
    body["signatures"][1]["signed_at"] = "2026-11-01T08:00:00Z"
    body["signatures"][2]["previous_digest"] = version_at(Record(body), 2).digest
    assert rule_problems(Record(body)) == [
        (f"signature 2 (reviewed by {REVIEWER}) breaks the sign-off rules: the signature is "
         "dated 2026-11-01 08:00:00 UTC, before the record was issued (2026-12-01 09:30:00 "
         "UTC)")]


def test_profile_can_require_key_signatures(keys):
    signing, _ = keys
    strict = issued(profile_extra="\n[signoff]\nrequire_key_signatures = true\n")
    with pytest.raises(SignOffError) as info:
        sign_record(strict, role="reviewed", name=REVIEWER)
    assert str(info.value) == ("the record's profile requires key signatures ([signoff] "
                               "require_key_signatures = true): sign with your key to review it")
    v2 = sign_record(strict, role="reviewed", key=signing["t-overgaard"], signed_at=REVIEWED_AT)
    assert v2.body["signatures"][1]["key_id"] == signing["t-overgaard"].key_id


def test_issuer_signature_binds_the_preparer(keys):
    signing, ring = keys
    with pytest.raises(SignOffError) as info:
        issue_signed(issued(), signing["t-overgaard"])  # prepared by Zoë, key of Tomasz
    assert str(info.value).endswith(f"belongs to {REVIEWER}; a signature made with it carries "
                                    f"that name, not '{PREPARER}'")
    v1 = issue_signed(issued(), person_key(PREPARER))
    assert v1.record_id == issued().record_id
    assert check_signatures(v1, ring)[0].status == "valid"
    with pytest.raises(SignOffError, match="^only a freshly issued record"):
        issue_signed(v1, person_key(PREPARER))


def test_profile_can_allow_the_preparer():
    v1 = issued(profile_extra=LENIENT)
    assert signoff_policy(v1.body["profile"]["text"]) == SignoffPolicy(True, True, True)
    v2 = sign_record(v1, role="reviewed", name=PREPARER)
    v3 = sign_record(v2, role="approved", name=PREPARER)
    assert rule_problems(v3) == []
    # The same record judged by the default policy would have been refused.
    assert rule_problems(v3, SignoffPolicy()) == [
        (f"signature 2 (reviewed by {PREPARER}) breaks the sign-off rules: {PREPARER} prepared "
         f"this record (as {PREPARER}) and may not also review it: the profile does not allow "
         "it (its [signoff] table would need allow_preparer_to_review = true)"),
        (f"signature 3 (approved by {PREPARER}) breaks the sign-off rules: {PREPARER} prepared "
         f"this record (as {PREPARER}) and may not also approve it: the profile does not allow "
         "it (its [signoff] table would need allow_preparer_to_approve = true)"),
    ]


def test_rejected_curve_can_be_signed_only_as_rejected():
    v1 = issued(levels=4)  # four levels where the profile needs five: rejected
    assert v1.body["check"]["verdict"] == "rejected"
    for role in ("reviewed", "approved"):
        with pytest.raises(SignOffError) as info:
            sign_record(v1, role=role, name=REVIEWER)
        assert str(info.value) == ("the run's verdict is rejected, so the record can be signed "
                                   "only as rejected")
    v2 = sign_record(v1, role="rejected", name=REVIEWER)
    assert v2.body["signatures"][-1]["meaning"] == DEFAULT_MEANINGS["rejected"]
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="rejected", name=APPROVER)
    assert str(info.value) == (f"sign-off is closed: the record was rejected by {REVIEWER} on "
                               f"{v2.body['signatures'][-1]['signed_at'][:10]} "
                               f"{v2.body['signatures'][-1]['signed_at'][11:19]} UTC")


def test_order_and_repetition_rules():
    v1 = issued()
    with pytest.raises(SignOffError, match="^the record must be reviewed before it is approved$"):
        sign_record(v1, role="approved", name=APPROVER)
    v2 = sign_record(v1, role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT)
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="reviewed", name=APPROVER)
    assert str(info.value) == ("the record is already reviewed (by Tomasz Øvergaard on "
                               "2026-12-02 14:05:00 UTC)")
    v3 = sign_record(v2, role="approved", name=APPROVER, signed_at=APPROVED_AT)
    for role in ("reviewed", "approved", "rejected"):
        with pytest.raises(SignOffError) as info:
            sign_record(v3, role=role, name="Someone Else")
        assert str(info.value) == ("sign-off is closed: the record was approved by "
                                   "Adaeze Mbeki-Hale on 2026-12-03 08:45:30 UTC")


def test_signing_refuses_a_record_whose_links_are_broken():
    v2 = sign_record(issued(), role="reviewed", name=REVIEWER)
    body = json.loads(v2.canonical)
    body["settings"]["confidence"] = 0.9
    with pytest.raises(SignOffError) as info:
        sign_record(Record(body), role="approved", name=APPROVER)
    assert str(info.value).startswith(
        "the record's earlier signatures do not verify: signature 2 (reviewed by "
        "Tomasz Øvergaard) was made on another version of the record")


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"role": "prepared", "name": "X"},
     "role must be one of reviewed, approved, rejected; got 'prepared'"),
    ({"role": "reviewed", "name": "  "}, "name must be the signer's printed name; got '  '"),
    ({"role": "reviewed"}, "name must be the signer's printed name; got None"),
    ({"role": "reviewed", "name": "X", "meaning": ""}, "meaning must be a non-empty text; got ''"),
])
def test_wrong_arguments(kwargs, message):
    with pytest.raises(ValueError) as info:
        sign_record(issued(), **kwargs)
    assert str(info.value) == message


def test_malformed_signoff_table_in_the_profile():
    bad = issued(profile_extra="")
    body = json.loads(bad.canonical)
    body["profile"]["text"] += "\n[signoff]\nallow_preparer_to_approve = \"yes\"\n"
    with pytest.raises(ProfileError) as info:
        sign_record(Record(body), role="reviewed", name=REVIEWER)
    assert str(info.value).startswith("the record's profile, line ")
    assert str(info.value).endswith(": [signoff] allow_preparer_to_approve must be true or "
                                    "false, got 'yes'")
    body["profile"]["text"] += "allow_analyst_to_approve = true\n"
    with pytest.raises(ProfileError, match="unknown key 'allow_analyst_to_approve' in "
                                           r"\[signoff\]; expected one of "
                                           "allow_preparer_to_review, allow_preparer_to_approve, "
                                           "allow_reviewer_to_approve, require_key_signatures"):
        signoff_policy(body["profile"]["text"].replace('"yes"', "true"))


def test_record_id_ignores_signatures_only():
    # RFC 8785 canonical JSON recomputed with the rfc8785 library, then SHA-256 (FIPS 180-4).
    v1 = issued()
    assert v1.body["canonicalization"] == "RFC 8785"
    assert v1.canonical == rfc8785.dumps(json.loads(v1.canonical))
    content = {k: v for k, v in v1.body.items() if k != "signatures"}
    expected = hashlib.sha256(rfc8785.dumps(content)).hexdigest()
    assert v1.content_digest == expected and v1.record_id == "CR-" + expected[:12].upper()


def test_a_second_preparer_signature_breaks_the_rules():
    v2 = sign_record(issued(), role="reviewed", name=REVIEWER)
    body = json.loads(v2.canonical)
    body["signatures"][1]["role"] = "prepared"
    assert rule_problems(Record(body)) == [
        f"signature 2 (prepared by {REVIEWER}): only the first signature can be the preparer's"]


def test_signoff_table_that_is_not_a_table_or_not_toml():
    with pytest.raises(ProfileError) as info:
        signoff_policy('signoff = "lenient"\n', origin="lab.toml")
    assert str(info.value) == "lab.toml, line 1: 'signoff' must be a table"
    with pytest.raises(ProfileError) as info:
        signoff_policy("[signoff\n", origin="lab.toml")
    assert str(info.value).startswith("lab.toml: not valid TOML (")


def test_versions_refuse_wrong_arguments():
    from calib.record.versions import next_version

    v1 = issued()
    with pytest.raises(ValueError, match="^count must be from 0 to 1; got 2$"):
        version_at(v1, 2)
    with pytest.raises(ValueError, match="^entry must have previous_digest equal to the "
                                         "record's version digest$"):
        next_version(v1, {"role": "reviewed", "previous_digest": "0" * 64})
