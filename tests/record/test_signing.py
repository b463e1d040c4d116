"""Sign-off on records: versions, digest links, key signatures and every sign-off rule."""

from __future__ import annotations

import base64
import hashlib
import json

import pytest

from calib.checks.profile import SignoffPolicy, signoff_policy
from calib.errors import ProfileError
from calib.record import Record, canonical_json
from calib.record.signing import (
    DEFAULT_MEANINGS,
    SignOffError,
    check_signatures,
    rule_problems,
    sign_record,
    signature_manifest,
)
from calib.record.versions import chain_problems, version_at, version_digests
from tests.record.integrity_helpers import (
    APPROVED_AT,
    APPROVER,
    LENIENT,
    PREPARER,
    REVIEWED_AT,
    REVIEWER,
    issued,
    make_keys,
)


@pytest.fixture
def keys(tmp_path):
    return make_keys(tmp_path, "t-overgaard", "a-mbeki-hale")


def test_prepared_reviewed_approved_with_keys(keys):
    signing, ring = keys
    v1 = issued()
    assert v1.body["check"]["verdict"] == "accepted"
    v2 = sign_record(v1, role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT,
                     key=signing["t-overgaard"])
    v3 = sign_record(v2, role="approved", name=APPROVER, signed_at=APPROVED_AT,
                     key=signing["a-mbeki-hale"], meaning="Approved for reporting batch 26-118")
    # One record id across versions; each version its own digest; the earlier ones unchanged.
    assert v1.record_id == v2.record_id == v3.record_id
    assert len({v1.digest, v2.digest, v3.digest}) == 3
    assert v1.content_digest == v2.content_digest == v3.content_digest
    assert [e["role"] for e in v1.body["signatures"]] == ["prepared"]
    assert version_digests(v3) == [version_at(v1, 0).digest, v1.digest, v2.digest, v3.digest]
    assert version_at(v3, 2).canonical == v2.canonical
    entry = v3.body["signatures"][2]
    assert entry == {
        "role": "approved", "name": APPROVER, "signed_at": "2026-12-03T08:45:30Z",
        "meaning": "Approved for reporting batch 26-118", "previous_digest": v2.digest,
        "key_id": signing["a-mbeki-hale"].key_id, "algorithm": "ed25519",
        "signature": entry["signature"],
    }
    assert v2.body["signatures"][1]["meaning"] == DEFAULT_MEANINGS["reviewed"]
    for version in (v1, v2, v3):
        assert chain_problems(version) == [] and rule_problems(version) == []
        assert all(c.ok for c in check_signatures(version, ring))
    statuses = [(c.status, c.key_name) for c in check_signatures(v3, ring)]
    assert statuses == [("unkeyed", None), ("valid", "t-overgaard"), ("valid", "a-mbeki-hale")]
    # The record read back from its canonical JSON gives the same digests and checks.
    again = Record.from_json(v3.canonical)
    assert again.digest == v3.digest
    assert [c.status for c in check_signatures(again, ring)] == ["unkeyed", "valid", "valid"]


def test_manifest_is_what_the_key_signed(keys):
    signing, ring = keys
    v2 = sign_record(issued(), role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT,
                     key=signing["t-overgaard"])
    entry = v2.body["signatures"][1]
    manifest = signature_manifest(v2.content_digest, entry)
    assert json.loads(manifest) == {
        "schema": "calib.signature/1", "content_digest": v2.content_digest,
        "previous_digest": issued().digest, "role": "reviewed", "name": REVIEWER,
        "signed_at": "2026-12-02T14:05:00Z", "meaning": DEFAULT_MEANINGS["reviewed"],
        "key_id": signing["t-overgaard"].key_id, "algorithm": "ed25519",
    }
    assert manifest == canonical_json(json.loads(manifest))
    signature = base64.b64decode(entry["signature"])
    assert ring.find(entry["key_id"]).verifies(signature, manifest)
    # Deterministic (RFC 8032): signing the same version again gives the same bytes.
    again = sign_record(issued(), role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT,
                        key=signing["t-overgaard"])
    assert again.canonical == v2.canonical


def test_signature_checks_name_each_failure(keys, tmp_path):
    signing, ring = keys
    v2 = sign_record(issued(), role="reviewed", name=REVIEWER, signed_at=REVIEWED_AT,
                     key=signing["t-overgaard"])
    key_id = signing["t-overgaard"].key_id
    label = f"signature 2 (reviewed by {REVIEWER})"
    (check,) = check_signatures(v2, None)[1:]
    assert (check.status, check.message) == (
        "no-keyring", f"{label} was made with key {key_id}, but no keyring was given to check it")

    _, other_ring = make_keys(tmp_path / "elsewhere", "someone-else")
    (check,) = check_signatures(v2, other_ring)[1:]
    assert (check.status, check.message) == (
        "unknown-key", (f"{label} was made with key {key_id}, which is not in the keyring "
                       f"{other_ring.folder}"))

    def edited(**changes):
        body = json.loads(v2.canonical)
        body["signatures"][1].update(changes)
        return Record(body)

    # The key id swapped for another key of the keyring: that key does not verify it.
    wrong = signing["a-mbeki-hale"].key_id
    (check,) = check_signatures(edited(key_id=wrong), ring)[1:]
    assert (check.status, check.message) == (
        "bad-signature", (f"{label} does not verify with key {wrong} (a-mbeki-hale): the signed "
                         "data was changed, or the signature is not from this key"))
    # The meaning reworded after signing.
    (check,) = check_signatures(edited(meaning="Reviewed quickly"), ring)[1:]
    assert check.status == "bad-signature"
    (check,) = check_signatures(edited(signature="abc"), ring)[1:]
    assert (check.status, check.message) == (
        "damaged", (f"{label}: the signature value is damaged (not a 64-byte Ed25519 signature "
                   "in base64)"))
    (check,) = check_signatures(edited(algorithm="rsa"), ring)[1:]
    assert (check.status, check.message) == (
        "damaged", f"{label}: the key signature is damaged (key id '{key_id}', algorithm 'rsa')")


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
        "zoë ŁUKASIEWICZ-NG prepared this record and may not also review it: the profile "
        "does not allow it (its [signoff] table would need allow_preparer_to_review = true)")
    v2 = sign_record(v1, role="reviewed", name=REVIEWER)
    with pytest.raises(SignOffError) as info:
        sign_record(v2, role="approved", name=PREPARER)
    assert str(info.value) == (
        f"{PREPARER} prepared this record and may not also approve it: the profile does not "
        "allow it (its [signoff] table would need allow_preparer_to_approve = true)")
    # Withdrawing one's own curve needs no second person.
    assert sign_record(v2, role="rejected", name=PREPARER).body["signatures"][-1]["role"] == \
        "rejected"


def test_profile_can_allow_the_preparer():
    v1 = issued(profile_extra=LENIENT)
    assert signoff_policy(v1.body["profile"]["text"]) == SignoffPolicy(True, True)
    v2 = sign_record(v1, role="reviewed", name=PREPARER)
    v3 = sign_record(v2, role="approved", name=PREPARER)
    assert rule_problems(v3) == []
    # The same record judged by the default policy would have been refused.
    assert rule_problems(v3, SignoffPolicy()) == [
        (f"signature 2 (reviewed by {PREPARER}) breaks the sign-off rules: {PREPARER} prepared "
        "this record and may not also review it: the profile does not allow it (its [signoff] "
        "table would need allow_preparer_to_review = true)"),
        (f"signature 3 (approved by {PREPARER}) breaks the sign-off rules: {PREPARER} prepared "
        "this record and may not also approve it: the profile does not allow it (its [signoff] "
        "table would need allow_preparer_to_approve = true)"),
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
                                           "allow_preparer_to_review, allow_preparer_to_approve"):
        signoff_policy(body["profile"]["text"].replace('"yes"', "true"))


def test_record_id_ignores_signatures_only():
    v1 = issued()
    content = {k: v for k, v in v1.body.items() if k != "signatures"}
    expected = hashlib.sha256(canonical_json(content)).hexdigest()
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
