"""Lab authority, certified keys, key files and keyrings: files, protection, every refusal.

External references: RFC 5280 (certificate subject, basic constraints, key usage) checked
with the ``cryptography`` library's own parser; RFC 7914 scrypt recomputed with
``hashlib.scrypt`` (OpenSSL) to decrypt a key file independently of calib; RFC 8032 §7.1
Ed25519 vectors (tests/data/signing) for the calib 0.1.0 public keys a keyring still holds.
"""

from __future__ import annotations

import base64
import hashlib
import json
import os
import stat
import tomllib
from pathlib import Path

import pytest
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from cryptography.hazmat.primitives.ciphers.aead import AESGCM
from cryptography.x509.oid import NameOID

from calib.errors import CalibError
from calib.record.keyfile import KeyFileError, PassphraseError, check_passphrase
from calib.record.keys import (
    key_file_stem,
    lab_init,
    load_keyring,
    load_signing_key,
    new_key,
)
from tests.record.integrity_helpers import KEYS_MADE, LAB, PASSPHRASE, authority, keyring

VECTORS = tomllib.loads(
    (Path(__file__).parents[1] / "data" / "signing" / "rfc8032_ed25519.toml").read_text())
POSIX = pytest.mark.skipif(os.name != "posix", reason="file modes are POSIX")


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """One person's key made with the cached lab authority."""
    folder = tmp_path_factory.mktemp("keys")
    ca, _ = authority()
    return new_key("Tomasz Øvergaard", folder=folder, passphrase=PASSPHRASE, authority=ca,
                   now=KEYS_MADE)


def test_lab_authority_is_a_self_signed_certificate_authority(tmp_path):
    out = lab_init("Kestrel Bioanalytical", folder=tmp_path / "ca", passphrase=PASSPHRASE)
    assert out.private_path.name == "lab-authority.key.json"
    cert = x509.load_pem_x509_certificate(out.certificate_path.read_bytes())
    assert cert.subject == cert.issuer
    assert cert.subject.get_attributes_for_oid(NameOID.COMMON_NAME)[0].value == \
        "Kestrel Bioanalytical record signing authority"
    assert cert.extensions.get_extension_for_class(x509.BasicConstraints).value.ca is True
    assert cert.extensions.get_extension_for_class(x509.KeyUsage).value.key_cert_sign is True
    cert.verify_directly_issued_by(cert)  # raises when the self-signature is wrong (RFC 5280)
    if os.name == "posix":
        assert stat.S_IMODE(out.private_path.stat().st_mode) == 0o600


def test_person_certificate_names_the_holder_and_is_issued_by_the_lab(made):
    cert = x509.load_pem_x509_certificate(made.certificate_path.read_bytes())
    # RFC 5280 §4.1.2.6: the subject names the holder; here the full printed name, accents kept.
    assert cert.subject.get_attributes_for_oid(NameOID.COMMON_NAME)[0].value == "Tomasz Øvergaard"
    assert cert.extensions.get_extension_for_class(x509.BasicConstraints).value.ca is False
    usage = cert.extensions.get_extension_for_class(x509.KeyUsage).value
    assert usage.digital_signature and usage.content_commitment and not usage.key_cert_sign
    ca, _ = authority()
    cert.verify_directly_issued_by(ca.certificate)
    assert made.private_path.name == "tomasz-overgaard.key.json"
    # Key id: the first 32 hex digits of SHA-256 over the DER SubjectPublicKeyInfo.
    spki = cert.public_key().public_bytes(serialization.Encoding.DER,
                                          serialization.PublicFormat.SubjectPublicKeyInfo)
    assert made.key_id == hashlib.sha256(spki).hexdigest()[:32]


def test_key_file_decrypts_with_standard_scrypt_and_aes_gcm(made):
    # Unlock the file without calib: RFC 7914 scrypt (OpenSSL via hashlib) and AES-256-GCM
    # (NIST SP 800-38D) with the header as associated data, as the module text says.
    doc = json.loads(made.private_path.read_text(encoding="utf-8"))
    kdf = doc["kdf"]
    assert (kdf["name"], kdf["n"], kdf["r"], kdf["p"]) == ("scrypt", 2 ** 17, 8, 1)
    key = hashlib.scrypt(PASSPHRASE, salt=base64.b64decode(kdf["salt"]), n=kdf["n"],
                         r=kdf["r"], p=kdf["p"], maxmem=256 * 2 ** 20, dklen=32)
    header = json.dumps({k: v for k, v in doc.items() if k != "encrypted_key"}, sort_keys=True,
                        ensure_ascii=False, separators=(",", ":")).encode()
    der = AESGCM(key).decrypt(base64.b64decode(doc["cipher"]["nonce"]),
                              base64.b64decode(doc["encrypted_key"]), header)
    private = serialization.load_der_private_key(der, password=None)
    assert isinstance(private, ec.EllipticCurvePrivateKey) and private.curve.name == "secp256r1"
    signed = load_signing_key(made.private_path, passphrase=PASSPHRASE)
    # The key calib unlocks signs what the certificate's public key verifies (ECDSA, FIPS 186).
    signed.certificate.public_key().verify(signed.sign(b"abc"), b"abc",
                                           ec.ECDSA(hashes.SHA256()))
    assert signed.holder == "Tomasz Øvergaard" and not signed.is_authority


@pytest.mark.parametrize("passphrase, message", [
    (b"", "the passphrase has 0 characters; a key needs at least 12 (a few words are easier "
          "to remember than symbols)"),
    (b"1234", "the passphrase has 4 characters; a key needs at least 12 (a few words are "
              "easier to remember than symbols)"),
    (b"\xff" * 20, "the passphrase is not UTF-8 text"),
])
def test_short_passphrases_are_refused(passphrase, message, tmp_path):
    with pytest.raises(PassphraseError) as info:
        lab_init(LAB, folder=tmp_path, passphrase=passphrase)
    assert str(info.value) == message
    assert check_passphrase("ünïcödé ok 12".encode()) == "ünïcödé ok 12".encode()
    assert not list(tmp_path.iterdir())


def test_wrong_passphrase_and_edited_header(made, tmp_path):
    with pytest.raises(KeyFileError) as info:
        load_signing_key(made.private_path, passphrase=b"not the passphrase")
    assert str(info.value) == (f"{made.private_path}: cannot unlock the private key: wrong "
                               "passphrase, or the file was changed")
    # Someone edits the holder inside the file: GCM's associated data no longer matches.
    doc = json.loads(made.private_path.read_text(encoding="utf-8"))
    doc["holder"] = "Adaeze Mbeki-Hale"
    edited = tmp_path / "edited.key.json"
    edited.write_text(json.dumps(doc), encoding="utf-8")
    edited.chmod(0o600)
    with pytest.raises(KeyFileError) as info:
        load_signing_key(edited, passphrase=PASSPHRASE)
    assert str(info.value) == (f"{edited}: cannot unlock the private key: wrong passphrase, or "
                               "the file was changed")


def test_weakened_kdf_parameters_are_refused(made, tmp_path):
    doc = json.loads(made.private_path.read_text(encoding="utf-8"))
    doc["kdf"]["n"] = 2 ** 10
    weak = tmp_path / "weak.key.json"
    weak.write_text(json.dumps(doc), encoding="utf-8")
    weak.chmod(0o600)
    with pytest.raises(KeyFileError) as info:
        load_signing_key(weak, passphrase=PASSPHRASE)
    assert str(info.value) == (f"{weak}: the key's passphrase protection is not what calib "
                               "accepts (scrypt N ≥ 131072, r ≥ 8, AES-256-GCM); it may have been "
                               "weakened: make a new key")


@POSIX
@pytest.mark.parametrize("mode, message", [
    (0o666, "the private key file can be changed by other users (mode 666); calib refuses it, "
            "as someone could have put their own key there: check the file, then run chmod 600"),
    (0o620, "the private key file can be changed by other users (mode 620); calib refuses it, "
            "as someone could have put their own key there: check the file, then run chmod 600"),
])
def test_key_files_others_can_change_are_refused(made, tmp_path, mode, message):
    copy = tmp_path / "copy.key.json"
    copy.write_bytes(made.private_path.read_bytes())
    copy.chmod(mode)
    with pytest.raises(KeyFileError) as info:
        load_signing_key(copy, passphrase=PASSPHRASE)
    assert str(info.value) == f"{copy}: {message} {copy}"
    copy.chmod(0o644)  # readable is not refused: the key inside is encrypted
    assert load_signing_key(copy, passphrase=PASSPHRASE).holder == "Tomasz Øvergaard"


@POSIX
def test_key_in_a_folder_anyone_can_change_is_refused(made, tmp_path):
    shared = tmp_path / "shared"
    shared.mkdir()
    copy = shared / "k.key.json"
    copy.write_bytes(made.private_path.read_bytes())
    copy.chmod(0o600)
    shared.chmod(0o777)
    with pytest.raises(KeyFileError) as info:
        load_signing_key(copy, passphrase=PASSPHRASE)
    assert str(info.value) == (f"{shared}: the folder of the private key can be changed by any "
                               "user; calib refuses keys kept there: move the key to a folder of "
                               "your own")


def test_key_of_calib_0_1_0_no_longer_signs(tmp_path):
    legacy = Ed25519PrivateKey.generate().private_bytes(
        serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
        serialization.BestAvailableEncryption(PASSPHRASE))
    path = tmp_path / "r-okafor.key.pem"
    path.write_bytes(legacy)
    path.chmod(0o600)
    with pytest.raises(KeyFileError) as info:
        load_signing_key(path, passphrase=PASSPHRASE)
    assert str(info.value).startswith(f"{path}: a key file of calib 0.1.0 (a bare key, not bound "
                                      "to a person, with weak passphrase protection)")


def test_names_that_cannot_hold_a_key(tmp_path):
    ca, _ = authority()
    with pytest.raises(ValueError) as info:
        new_key("Tomasz\u200bØvergaard", folder=tmp_path, passphrase=PASSPHRASE, authority=ca)
    assert "holds an invisible or control character (U+200B)" in str(info.value)
    person = load_signing_key(
        new_key("Rachel Okafor", folder=tmp_path, passphrase=PASSPHRASE, authority=ca,
                now=KEYS_MADE).private_path, passphrase=PASSPHRASE)
    with pytest.raises(ValueError) as info:
        new_key("Someone Else", folder=tmp_path / "x", passphrase=PASSPHRASE, authority=person)
    assert str(info.value).endswith("is the key of Rachel Okafor, not a lab authority key: "
                                    "people's keys are issued with the lab authority key "
                                    "(calib keys lab-init)")


def test_keys_are_never_overwritten(made):
    ca, _ = authority()
    with pytest.raises(KeyFileError) as info:
        new_key("Tomasz Øvergaard", folder=made.private_path.parent, passphrase=PASSPHRASE,
                authority=ca)
    assert str(info.value) == (f"{made.private_path}: already exists; keys are never "
                               "overwritten (choose another folder)")
    assert issubclass(KeyFileError, CalibError) and issubclass(PassphraseError, CalibError)


def test_key_file_stems():
    assert key_file_stem("Adaeze Mbeki-Hale") == "adaeze-mbeki-hale"
    assert key_file_stem("鈴木 花子").startswith("key-")  # no ASCII letters: a digest instead


def test_keyring_trusts_authorities_and_legacy_keys(tmp_path):
    ring = keyring(tmp_path / "ring")
    assert [a.name for a in ring.authorities] == [f"{LAB} record signing authority"]
    v = VECTORS["test1"]
    private = Ed25519PrivateKey.from_private_bytes(bytes.fromhex(v["secret_key"]))
    (tmp_path / "ring" / "old.pub.pem").write_bytes(private.public_key().public_bytes(
        serialization.Encoding.PEM, serialization.PublicFormat.SubjectPublicKeyInfo))
    ring = load_keyring(tmp_path / "ring")
    (old,) = ring.keys
    # RFC 8032 §7.1 TEST 1: the empty message and its published signature.
    assert old.verifies(bytes.fromhex(v["signature"]), b"")
    assert not old.verifies(bytes.fromhex(v["signature"]), b"x")


def test_keyring_refusals(made, tmp_path):
    with pytest.raises(KeyFileError) as info:
        load_keyring(tmp_path / "nowhere")
    assert str(info.value) == f"keyring {tmp_path / 'nowhere'}: not a folder"
    empty = tmp_path / "empty"
    empty.mkdir()
    (empty / "tomasz.cert.pem").write_bytes(made.certificate_path.read_bytes())
    with pytest.raises(KeyFileError) as info:
        load_keyring(empty)
    assert str(info.value) == (f"keyring {empty}: trusts nothing: it holds no lab authority "
                               "certificate (*.cert.pem) and no calib 0.1.0 public key "
                               "(*.pub.pem)")
    (empty / "broken.cert.pem").write_text("not a certificate")
    with pytest.raises(KeyFileError) as info:
        load_keyring(empty)
    assert str(info.value) == f"{empty / 'broken.cert.pem'}: not an X.509 certificate"
