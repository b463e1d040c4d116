"""Signing keys bound to people: a lab authority, one certified key per person, the keyring.

The lab makes one *authority* (:func:`lab_init`): an ECDSA P-256 key and a
self-signed X.509 certificate (RFC 5280) for "<lab> record signing
authority".  Each signer gets a key pair and a certificate issued by that
authority whose subject common name is the person's full printed name
(:func:`new_key`), so a key belongs to exactly one name, spaces and accents
included.  A signature made with the key can only carry that name.

Files::

    lab-authority.key.json   the authority's private key (calib.private-key/1, encrypted)
    lab-authority.cert.pem   its certificate: copy it into every keyring
    <name>.key.json          a signer's private key with their certificate inside
    <name>.cert.pem          the signer's certificate (for the record, or an auditor)

A *keyring* (:func:`load_keyring`) is a folder the verifier trusts: the lab
authority certificates (``*.cert.pem`` that are authorities) and, for records
signed by calib 0.1.0, that release's bare Ed25519 public keys
(``*.pub.pem``), which keep verifying their old signatures but cannot sign.

A key id is the first 32 hex digits of the SHA-256 of the public key: for
certified keys of its DER SubjectPublicKeyInfo, for the legacy Ed25519 keys
of the raw 32-byte key (as calib 0.1.0 computed it).
"""

from __future__ import annotations

import hashlib
import re
import unicodedata
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

from calib.record.identity import check_printed_name
from calib.record.keyfile import (
    KeyFileError,
    PassphraseError,
    check_passphrase,
    check_private_permissions,
    decrypt_key_file,
    encrypt_key_file,
    write_new,
)

__all__ = ["KEY_ALGORITHM", "LEGACY_ALGORITHM", "PRIVATE_SUFFIX", "Authority", "KeyFileError",
           "Keyring", "NewKey", "PassphraseError", "PublicKey", "SigningKey", "certificate_holder",
           "key_file_stem", "key_id_of", "lab_init", "load_certificate", "load_keyring",
           "load_signing_key", "new_key"]

KEY_ALGORITHM = "ecdsa-p256-sha256"
LEGACY_ALGORITHM = "ed25519"
PRIVATE_SUFFIX = ".key.json"
_CERT_SUFFIX = ".cert.pem"
_PUBLIC_SUFFIX = ".pub.pem"
_AUTHORITY_STEM = "lab-authority"
_PERSON_YEARS = 10
_AUTHORITY_YEARS = 40
_KEY_ID_DIGITS = 32


def key_id_of(public_key: Any) -> str:
    """Key id of a public key (see the module text)."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    if isinstance(public_key, Ed25519PublicKey):
        raw = public_key.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    else:
        raw = public_key.public_bytes(serialization.Encoding.DER,
                                      serialization.PublicFormat.SubjectPublicKeyInfo)
    return hashlib.sha256(raw).hexdigest()[:_KEY_ID_DIGITS]


def key_file_stem(holder: str) -> str:
    """A file name for a person's key: their name in lower-case ASCII words joined by hyphens.

    Examples
    --------
    >>> key_file_stem("Tomasz Øvergaard"), key_file_stem("Zoë Łukasiewicz-Ng")
    ('tomasz-overgaard', 'zoe-lukasiewicz-ng')
    """
    text = unicodedata.normalize("NFKC", holder).casefold().translate(
        str.maketrans({"ø": "o", "ł": "l", "đ": "d", "ß": "ss", "æ": "ae", "œ": "oe"}))
    ascii_text = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")
    stem = re.sub(r"[^a-z0-9]+", "-", ascii_text).strip("-")[:60]
    return stem or "key-" + hashlib.sha256(holder.encode("utf-8")).hexdigest()[:12]


def certificate_holder(cert: Any) -> str | None:
    """The subject common name of an X.509 certificate (the holder's printed name)."""
    from cryptography.x509.oid import NameOID

    names = cert.subject.get_attributes_for_oid(NameOID.COMMON_NAME)
    return str(names[0].value) if len(names) == 1 else None


@dataclass(frozen=True)
class SigningKey:
    """An unlocked private key with its certificate, ready to sign.

    Attributes
    ----------
    holder : str
        The certificate's subject name: the person (or the lab authority).
    key_id : str
        Fingerprint of the public key.
    certificate : cryptography.x509.Certificate
        Issued by the lab authority (self-signed for the authority itself).
    path : Path
        The key file.
    """

    holder: str
    key_id: str
    certificate: Any = field(repr=False)
    path: Path
    _key: Any = field(repr=False)

    @property
    def is_authority(self) -> bool:
        """Whether this is a lab authority's key (it certifies people, it does not sign records)."""
        from cryptography import x509

        try:
            return bool(self.certificate.extensions.get_extension_for_class(
                x509.BasicConstraints).value.ca)
        except x509.ExtensionNotFound:
            return False

    @property
    def certificate_der(self) -> bytes:
        """The certificate, DER encoded."""
        from cryptography.hazmat.primitives import serialization

        return self.certificate.public_bytes(serialization.Encoding.DER)

    def sign(self, data: bytes) -> bytes:
        """ECDSA P-256 / SHA-256 signature of ``data`` (DER encoded, as X.509 and CMS use)."""
        from cryptography.hazmat.primitives import hashes
        from cryptography.hazmat.primitives.asymmetric import ec

        return bytes(self._key.sign(data, ec.ECDSA(hashes.SHA256())))

    def private_der(self) -> bytes:
        """The private key as unencrypted PKCS #8 DER, for the PDF signer only; never stored."""
        from cryptography.hazmat.primitives import serialization

        return self._key.private_bytes(serialization.Encoding.DER,
                                       serialization.PrivateFormat.PKCS8,
                                       serialization.NoEncryption())


@dataclass(frozen=True)
class NewKey:
    """The files :func:`new_key` or :func:`lab_init` wrote.

    Attributes
    ----------
    holder : str
        Whose key it is.
    key_id : str
        Fingerprint of the public key.
    private_path, certificate_path : Path
        The encrypted private key and the certificate.
    """

    holder: str
    key_id: str
    private_path: Path
    certificate_path: Path


def _build_certificate(*, subject: Any, issuer: Any, public_key: Any, signer: Any,
                       authority: bool, years: int, now: datetime) -> Any:
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes

    builder = (x509.CertificateBuilder().subject_name(subject).issuer_name(issuer)
               .public_key(public_key).serial_number(x509.random_serial_number())
               .not_valid_before(now - timedelta(minutes=5))
               .not_valid_after(now + timedelta(days=365 * years))
               .add_extension(x509.BasicConstraints(ca=authority, path_length=0 if authority
                                                    else None), critical=True)
               .add_extension(x509.SubjectKeyIdentifier.from_public_key(public_key),
                              critical=False))
    if authority:
        usage = x509.KeyUsage(digital_signature=False, content_commitment=False,
                              key_encipherment=False, data_encipherment=False,
                              key_agreement=False, key_cert_sign=True, crl_sign=True,
                              encipher_only=False, decipher_only=False)
    else:
        usage = x509.KeyUsage(digital_signature=True, content_commitment=True,
                              key_encipherment=False, data_encipherment=False,
                              key_agreement=False, key_cert_sign=False, crl_sign=False,
                              encipher_only=False, decipher_only=False)
    return builder.add_extension(usage, critical=True).sign(signer, hashes.SHA256())


def _write_pair(folder: Path, stem: str, key: Any, cert: Any, holder: str,
                passphrase: bytes) -> NewKey:
    from cryptography.hazmat.primitives import serialization

    try:
        folder.mkdir(parents=True, exist_ok=True, mode=0o700)
    except OSError as exc:
        raise KeyFileError(f"{folder}: cannot make the key folder ({exc.strerror})") from None
    private_path, cert_path = folder / f"{stem}{PRIVATE_SUFFIX}", folder / f"{stem}{_CERT_SUFFIX}"
    for path in (private_path, cert_path):
        if path.exists():
            raise KeyFileError(f"{path}: already exists; keys are never overwritten (choose "
                               "another folder)")
    cert_pem = cert.public_bytes(serialization.Encoding.PEM)
    der = key.private_bytes(serialization.Encoding.DER, serialization.PrivateFormat.PKCS8,
                            serialization.NoEncryption())
    write_new(private_path, encrypt_key_file(der, passphrase=passphrase, holder=holder,
                                             certificate_pem=cert_pem.decode("ascii")),
              mode=0o600)
    try:
        write_new(cert_path, cert_pem, mode=0o644)
    except BaseException:
        private_path.unlink(missing_ok=True)
        raise
    return NewKey(holder, key_id_of(key.public_key()), private_path, cert_path)


def lab_init(lab_name: str, *, folder: str | Path, passphrase: bytes,
             now: datetime | None = None) -> NewKey:
    """Make the lab's signing authority: ``lab-authority.key.json`` and ``lab-authority.cert.pem``.

    Parameters
    ----------
    lab_name : str
        The laboratory's name, as records show it.
    folder : str or Path
        Where to write (created when missing); keep the private key offline.
    passphrase : bytes
        At least 12 characters.

    Raises
    ------
    ValueError
        If the lab name is unusable.
    PassphraseError
        If the passphrase is too short.
    KeyFileError
        If the files exist or cannot be written.
    """
    from cryptography import x509
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import NameOID

    lab = check_printed_name(lab_name, what="lab name")
    check_passphrase(passphrase)
    now = now or datetime.now(UTC)
    key = ec.generate_private_key(ec.SECP256R1())
    holder = f"{lab} record signing authority"
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, holder),
                      x509.NameAttribute(NameOID.ORGANIZATION_NAME, lab)])
    cert = _build_certificate(subject=name, issuer=name, public_key=key.public_key(), signer=key,
                              authority=True, years=_AUTHORITY_YEARS, now=now)
    return _write_pair(Path(folder), _AUTHORITY_STEM, key, cert, holder, passphrase)


def new_key(holder: str, *, folder: str | Path, passphrase: bytes, authority: SigningKey,
            now: datetime | None = None) -> NewKey:
    """Make a person's key pair and certificate, issued by the lab ``authority``.

    Parameters
    ----------
    holder : str
        The person's full printed name (spaces and accents welcome; no
        invisible characters, one script): the only name the key can sign as.
    folder : str or Path
        Where to write ``<name>.key.json`` and ``<name>.cert.pem``.
    passphrase : bytes
        The person's passphrase, at least 12 characters.
    authority : SigningKey
        The unlocked lab authority key (:func:`lab_init`).

    Raises
    ------
    ValueError
        If the name is unusable, or ``authority`` is not an authority key.
    PassphraseError, KeyFileError
        As for :func:`lab_init`.
    """
    from cryptography import x509
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import NameOID

    person = check_printed_name(holder)
    if not authority.is_authority:
        raise ValueError(f"{authority.path} is the key of {authority.holder}, not a lab "
                         "authority key: people's keys are issued with the lab authority key "
                         "(calib keys lab-init)")
    check_passphrase(passphrase)
    now = now or datetime.now(UTC)
    key = ec.generate_private_key(ec.SECP256R1())
    org = authority.certificate.subject.get_attributes_for_oid(NameOID.ORGANIZATION_NAME)
    subject = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, person)]
                        + [x509.NameAttribute(NameOID.ORGANIZATION_NAME, str(org[0].value))
                           for _ in org[:1]])
    cert = _build_certificate(subject=subject, issuer=authority.certificate.subject,
                              public_key=key.public_key(), signer=authority._key,
                              authority=False, years=_PERSON_YEARS, now=now)
    return _write_pair(Path(folder), key_file_stem(person), key, cert, person, passphrase)


def _read(path: Path, what: str) -> bytes:
    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise KeyFileError(f"{path}: {what} not found") from None
    except OSError as exc:
        raise KeyFileError(f"{path}: cannot read the {what} ({exc.strerror})") from None


def load_signing_key(path: str | Path, *, passphrase: bytes) -> SigningKey:
    """Read and unlock a private key file written by :func:`new_key` or :func:`lab_init`.

    Raises
    ------
    KeyFileError
        If the file is missing, writable or readable by other users, of calib
        0.1.0, weakly protected, damaged, or the passphrase does not unlock it;
        or its certificate does not belong to its key.
    """
    from cryptography import x509
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric import ec

    path = Path(path)
    data = _read(path, "private key")
    check_private_permissions(path)
    der, doc = decrypt_key_file(data, passphrase=passphrase, path=path)
    try:
        key = serialization.load_der_private_key(der, password=None)
        cert = x509.load_pem_x509_certificate(str(doc.get("certificate", "")).encode("ascii"))
    except (ValueError, TypeError, UnicodeEncodeError):
        raise KeyFileError(f"{path}: the key or its certificate is damaged") from None
    if not isinstance(key, ec.EllipticCurvePrivateKey) or key.curve.name != "secp256r1":
        raise KeyFileError(f"{path}: not an ECDSA P-256 key")
    if key_id_of(cert.public_key()) != key_id_of(key.public_key()):
        raise KeyFileError(f"{path}: the certificate in the file is not the certificate of its "
                           "key")
    holder = certificate_holder(cert)
    if holder is None or holder != doc.get("holder"):
        raise KeyFileError(f"{path}: the certificate does not name the key's holder")
    return SigningKey(holder, key_id_of(key.public_key()), cert, path, key)


def load_certificate(data: bytes) -> Any:
    """An X.509 certificate from PEM or DER bytes (ValueError when it is neither)."""
    from cryptography import x509

    if data.lstrip().startswith(b"-----BEGIN"):
        return x509.load_pem_x509_certificate(data)
    return x509.load_der_x509_certificate(data)


@dataclass(frozen=True)
class Authority:
    """A trusted lab authority of the keyring: its certificate and where it came from."""

    name: str
    certificate: Any = field(repr=False)
    path: Path

    def issued(self, cert: Any) -> bool:
        """Whether ``cert`` was issued (and signed) by this authority."""
        if cert.issuer != self.certificate.subject:
            return False
        try:
            cert.verify_directly_issued_by(self.certificate)
        except (ValueError, TypeError, Exception):  # InvalidSignature is not a ValueError
            return False
        return True


@dataclass(frozen=True)
class PublicKey:
    """A bare Ed25519 public key of calib 0.1.0 (verifies old signatures only)."""

    name: str
    key_id: str
    path: Path
    _key: Any = field(repr=False)

    def verifies(self, signature: bytes, data: bytes) -> bool:
        """Whether ``signature`` is this key's Ed25519 signature of ``data``."""
        from cryptography.exceptions import InvalidSignature

        try:
            self._key.verify(signature, data)
        except InvalidSignature:
            return False
        return True


@dataclass(frozen=True)
class Keyring:
    """What the verifier trusts: lab authorities, and legacy public keys.

    Attributes
    ----------
    folder : Path
        The keyring folder.
    authorities : tuple of Authority
        Certificates of lab authorities (``*.cert.pem`` that are authorities).
    keys : tuple of PublicKey
        calib 0.1.0 public keys (``*.pub.pem``).
    """

    folder: Path
    authorities: tuple[Authority, ...] = ()
    keys: tuple[PublicKey, ...] = ()

    def find(self, key_id: str) -> PublicKey | None:
        """The legacy public key with ``key_id``, or None."""
        return next((k for k in self.keys if k.key_id == key_id), None)

    def issuer_of(self, cert: Any) -> Authority | None:
        """The trusted authority that issued ``cert``, or None."""
        return next((a for a in self.authorities if a.issued(cert)), None)


def _is_authority(cert: Any) -> bool:
    from cryptography import x509

    try:
        return bool(cert.extensions.get_extension_for_class(x509.BasicConstraints).value.ca)
    except x509.ExtensionNotFound:
        return False


def load_keyring(folder: str | Path) -> Keyring:
    """Read a keyring folder: authority certificates and legacy public keys.

    Person certificates (``*.cert.pem`` that are not authorities) may lie in
    the folder too; they are not trusted by being there (records carry the
    signer's certificate, and the authority vouches for it).

    Raises
    ------
    KeyFileError
        If the folder does not exist, trusts nothing, or holds a file that is
        not what its name says (a keyring must be clean).
    """
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    folder = Path(folder)
    if not folder.is_dir():
        raise KeyFileError(f"keyring {folder}: not a folder")
    authorities = []
    for path in sorted(folder.glob(f"*{_CERT_SUFFIX}")):
        try:
            cert = load_certificate(_read(path, "certificate"))
        except ValueError:
            raise KeyFileError(f"{path}: not an X.509 certificate") from None
        if _is_authority(cert):
            try:
                cert.verify_directly_issued_by(cert)
            except Exception:  # noqa: BLE001 - any failure means it is not self-signed
                raise KeyFileError(f"{path}: an authority certificate that is not self-signed; "
                                   "a keyring holds the lab's own authority") from None
            authorities.append(Authority(certificate_holder(cert) or path.name, cert, path))
    keys = []
    for path in sorted(folder.glob(f"*{_PUBLIC_SUFFIX}")):
        try:
            key = serialization.load_pem_public_key(_read(path, "public key"))
        except (ValueError, TypeError):
            raise KeyFileError(f"{path}: not a public key in PEM form") from None
        if not isinstance(key, Ed25519PublicKey):
            raise KeyFileError(f"{path}: not an Ed25519 public key")
        keys.append(PublicKey(path.name.removesuffix(_PUBLIC_SUFFIX), key_id_of(key), path, key))
    if not authorities and not keys:
        raise KeyFileError(f"keyring {folder}: trusts nothing: it holds no lab authority "
                           f"certificate (*{_CERT_SUFFIX}) and no calib 0.1.0 public key "
                           f"(*{_PUBLIC_SUFFIX})")
    return Keyring(folder, tuple(authorities), tuple(keys))
