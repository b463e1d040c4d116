"""Digital signatures in the record PDF (ISO 32000-2 §12.8, ETSI EN 319 142 PAdES baseline B).

Every key signature of a record is also a PDF signature, so any PDF reader
shows who signed and whether the file changed since, without calib:

- the first key signature (usually the issuer's) appends a page "Electronic
  signatures" to the rendered record, in the same incremental update;
- each signature is one incremental update of the file: a signature field on
  that page whose visible appearance shows the role, printed name, UTC time,
  meaning and key, and a CMS signature (``ETSI.CAdES.detached``) over the
  byte ranges of everything before it, made with the signer's certified key;
- the signature dictionary's build properties (``/Prop_Build /App``) carry
  the record's signature entry as JSON under ``/CalibSignOff``; that
  dictionary lies inside the signed byte range, so the entry is signed twice:
  by the CMS signature and by its own key signature in the JSON.

The record JSON attached to the PDF is the version that was rendered; the
current version is that JSON with the entries of the later PDF signatures
appended (:func:`read_pdf_signatures`).  pyhanko writes and validates the
signatures; its validator also judges what each later update changed
(only new signature fields are allowed).
"""

from __future__ import annotations

import io
import json
import logging
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from calib.record.keys import SigningKey, certificate_holder
from calib.record.record import canonical_bytes
from calib.verdict_words import VERDICT_LABELS

__all__ = ["PdfSignature", "add_pdf_signature", "read_pdf_signatures"]

_ENTRY_KEY = "/CalibSignOff"
_PAGE_MARK = "/CalibSignaturePage"
_SLOTS = {"prepared": 0, "reviewed": 1, "approved": 2, "rejected": 2}
_ROLE_WORDS = {"prepared": "Prepared and issued", "reviewed": "Reviewed", "approved": "Approved",
               "rejected": VERDICT_LABELS["rejected"]}


@dataclass(frozen=True)
class PdfSignature:
    """One PDF signature of a record file, as pyhanko validated it.

    Attributes
    ----------
    field : str
        The signature field's name.
    revision : int
        The file revision it signed (0 is the file as first written).
    entry : dict or None
        The record signature entry it carries; None when it carries none.
    signer_der : bytes
        The signer's certificate (DER) from the CMS signature.
    signer : str
        Its holder's name.
    intact : bool
        The signed byte ranges hash to the digest the CMS signature signed.
    valid : bool
        The CMS signature verifies with the signer's certificate.
    trusted : bool
        The certificate chains to a lab authority of the keyring.
    whole_file : bool
        It covers the whole file (only the last signature can).
    changes_after : str
        What later updates changed, in pyhanko's words ("none", "form filling", ...).
    changes_ok : bool
        Whether those changes are only what later signatures add.
    """

    field: str
    revision: int
    entry: dict[str, Any] | None
    signer_der: bytes
    signer: str
    intact: bool
    valid: bool
    trusted: bool
    whole_file: bool
    changes_after: str
    changes_ok: bool


def _stamp_pdf(width: float, height: float, lines: list[tuple[str, bool]]) -> bytes:
    """A one-page PDF of ``width`` × ``height`` points with the signature's visible text."""
    from reportlab.lib.utils import simpleSplit
    from reportlab.pdfgen.canvas import Canvas

    from calib.fonts import BOLD, REGULAR, register_fonts

    register_fonts()
    out = io.BytesIO()
    canvas = Canvas(out, pagesize=(width, height), invariant=1)
    y = height - 14
    for text, bold in lines:
        font = BOLD if bold else REGULAR
        for part in simpleSplit(text, font, 8, width - 12):
            if y < 4:
                break
            canvas.setFont(font, 8)
            canvas.drawString(6, y, part)
            y -= 10
    canvas.showPage()
    canvas.save()
    return out.getvalue()


def _page_pdf(width: float, height: float, record_id: str) -> bytes:
    """The "Electronic signatures" page: heading and how to read the boxes."""
    from reportlab.lib.utils import simpleSplit
    from reportlab.pdfgen.canvas import Canvas

    from calib.fonts import BOLD, REGULAR, register_fonts

    register_fonts()
    out = io.BytesIO()
    canvas = Canvas(out, pagesize=(width, height), invariant=1)
    canvas.setFont(BOLD, 13)
    canvas.drawString(56, height - 60, f"Electronic signatures · record {record_id}")
    text = ("Each box below is a digital signature of this file (ISO 32000, PAdES): the "
            "signer's printed name, the date and time (UTC) and the meaning of the signature, "
            "made with a key certified by the laboratory. A PDF reader's signature panel shows "
            "whether the file changed after each signature. The record data is attached as "
            "calib-record.json.")
    y = height - 80
    canvas.setFont(REGULAR, 9)
    for line in simpleSplit(text, REGULAR, 9, width - 112):
        canvas.drawString(56, y, line)
        y -= 12
    canvas.showPage()
    canvas.save()
    return out.getvalue()


class _Imported:
    """A page of a PDF in memory as the content of a signature appearance (pyhanko PdfContent)."""

    def __new__(cls, data: bytes):  # built lazily so pyhanko is imported only when signing
        from pyhanko.pdf_utils.content import PdfContent
        from pyhanko.pdf_utils.layout import BoxConstraints
        from pyhanko.pdf_utils.reader import PdfFileReader

        class Imported(PdfContent):
            def render(self) -> bytes:
                xobj = self._ensure_writer.import_page_as_xobject(
                    PdfFileReader(io.BytesIO(data)), page_ix=0)
                self.resources.xobject["/CalibStamp"] = xobj
                x1, y1, x2, y2 = xobj.get_object()["/BBox"]
                self.box = BoxConstraints(width=abs(x1 - x2), height=abs(y1 - y2))
                return b"/CalibStamp Do"

        return Imported()


def _signature_page(writer: Any) -> tuple[int, float, float]:
    """Index and size of the signature page; the page count when the file has none yet."""
    count = int(writer.root["/Pages"]["/Count"])
    for index in range(count):
        page = writer.find_page_for_modification(index)[0].get_object()
        if page.get(_PAGE_MARK):
            box = [float(v) for v in page["/MediaBox"]]
            return index, box[2] - box[0], box[3] - box[1]
    last = writer.find_page_for_modification(count - 1)[0].get_object()
    box = [float(v) for v in last["/MediaBox"]]
    width, height = box[2] - box[0], box[3] - box[1]
    return count, width, height


def _append_page(writer: Any, width: float, height: float, record_id: str) -> None:
    from pyhanko.pdf_utils import generic
    from pyhanko.pdf_utils.reader import PdfFileReader

    xobj = writer.import_page_as_xobject(
        PdfFileReader(io.BytesIO(_page_pdf(width, height, record_id))), page_ix=0)
    contents = writer.add_object(generic.StreamObject(stream_data=b"q /CalibPage Do Q"))
    page = generic.DictionaryObject({
        generic.pdf_name("/Type"): generic.pdf_name("/Page"),
        generic.pdf_name("/MediaBox"): generic.ArrayObject(
            [generic.FloatObject(0), generic.FloatObject(0), generic.FloatObject(width),
             generic.FloatObject(height)]),
        generic.pdf_name("/Resources"): generic.DictionaryObject({
            generic.pdf_name("/XObject"): generic.DictionaryObject(
                {generic.pdf_name("/CalibPage"): xobj})}),
        generic.pdf_name("/Contents"): contents,
        generic.pdf_name(_PAGE_MARK): generic.BooleanObject(True),
    })
    writer.insert_page(page)


def add_pdf_signature(pdf: bytes, *, key: SigningKey, entry: Mapping[str, Any],
                      record_id: str, signed_at: datetime, authority: str = "") -> bytes:
    """``pdf`` with one more incremental update: the PDF signature of ``entry`` by ``key``.

    Parameters
    ----------
    pdf : bytes
        The record PDF as it is (rendered, or already signed).
    key : SigningKey
        The signer's certified key (the one that signed ``entry``).
    entry : mapping
        The record's new signature entry (role, name, signed_at, meaning, key fields).
    record_id : str
        Shown on the signature page.
    signed_at : datetime
        The entry's time; the PDF signature states the same.
    authority : str
        Name of the certifying authority, shown in the box.

    Raises
    ------
    ValueError
        If the role's signature field exists already.
    """
    from asn1crypto import keys as asn1_keys
    from asn1crypto import x509 as asn1_x509
    from pyhanko.pdf_utils import generic
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.sign import fields, signers
    from pyhanko.sign.signers.pdf_byterange import BuildProps
    from pyhanko.stamp import TextStampStyle
    from pyhanko_certvalidator.registry import SimpleCertificateStore

    role = str(entry.get("role"))
    field_name = f"calib-{role}"
    writer = IncrementalPdfFileWriter(io.BytesIO(pdf), strict=False)
    if any(name == field_name for name, _, _ in fields.enumerate_sig_fields(writer)):
        raise ValueError(f"the PDF already has a {role} signature field")
    page_index, width, height = _signature_page(writer)
    if page_index == int(writer.root["/Pages"]["/Count"]):
        _append_page(writer, width, height, record_id)
    slot = _SLOTS.get(role, 2)
    top = height - 130 - slot * 150
    box = (56, top - 130, width - 56, top)
    when = str(entry.get("signed_at", "")).replace("T", " ").replace("Z", " UTC")
    lines = [(f"{_ROLE_WORDS.get(role, role)} by {entry.get('name')}", True),
             (f"Signed {when}", False), (f"Meaning: {entry.get('meaning')}", False),
             (f"Key {entry.get('key_id')}" + (f", certified by {authority}" if authority
                                               else ""), False),
             ("Digital signature (ISO 32000 / PAdES); calib checks it with calib verify.",
              False)]
    stamp = _stamp_pdf(box[2] - box[0], box[3] - box[1], lines)
    entry_text = canonical_bytes(dict(entry), jcs=True).decode("utf-8")

    class Props(BuildProps):
        def as_pdf_object(self) -> Any:
            props = super().as_pdf_object()
            props[generic.pdf_name(_ENTRY_KEY)] = generic.TextStringObject(entry_text)
            return props

    class TimedSigner(signers.PdfSigner):
        def init_signing_session(self, pdf_out: Any, existing_fields_only: bool = False) -> Any:
            session = super().init_signing_session(pdf_out, existing_fields_only)
            session.system_time = signed_at
            return session

    cert = asn1_x509.Certificate.load(key.certificate_der)
    signer = signers.SimpleSigner(signing_cert=cert,
                                  signing_key=asn1_keys.PrivateKeyInfo.load(key.private_der()),
                                  cert_registry=SimpleCertificateStore.from_certs([cert]))
    meta = signers.PdfSignatureMetadata(
        field_name=field_name, reason=str(entry.get("meaning")), name=str(entry.get("name")),
        subfilter=fields.SigSeedSubFilter.PADES, md_algorithm="sha256",
        app_build_props=Props(name="calib"))
    style = TextStampStyle(stamp_text="", background=_Imported(stamp), background_opacity=1,
                           border_width=1)
    out = io.BytesIO()
    TimedSigner(meta, signer=signer, stamp_style=style,
                new_field_spec=fields.SigFieldSpec(field_name, on_page=page_index,
                                                   box=box)).sign_pdf(writer, output=out)
    return out.getvalue()


def read_pdf_signatures(pdf: bytes, *, trust_roots: list[Any] | None = None
                        ) -> tuple[list[PdfSignature], list[str]]:
    """The PDF signatures of a record file, validated, oldest first; and what could not be read.

    Validation trusts only ``trust_roots`` and uses each signature's own stated
    time as the moment of validation (no time-stamp authority is involved), so
    a certificate that expired since still validates a signature made while it
    was valid.

    Parameters
    ----------
    pdf : bytes
        The record PDF.
    trust_roots : list of cryptography certificates, optional
        The keyring's lab authorities; without them nothing is ``trusted``.

    Returns
    -------
    (list of PdfSignature, list of str)
        The signatures, and damage found while reading them (empty when none).
    """
    from asn1crypto import x509 as asn1_x509
    from cryptography.hazmat.primitives import serialization
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.fields import enumerate_sig_fields
    from pyhanko.sign.validation.pdf_embedded import EmbeddedPdfSignature

    roots = [asn1_x509.Certificate.load(c.public_bytes(serialization.Encoding.DER))
             for c in trust_roots or ()]
    found: list[PdfSignature] = []
    damage: list[str] = []
    embedded = []
    try:
        reader = PdfFileReader(io.BytesIO(pdf), strict=False)
        fields = list(enumerate_sig_fields(reader, filled_status=True))
    except Exception as exc:  # noqa: BLE001 - a hostile file may break the parser anywhere
        return [], [f"its digital signatures cannot be read ({type(exc).__name__}: {exc})"]
    for name, _, field_ref in fields:
        try:  # one damaged signature must not hide the others
            embedded.append(EmbeddedPdfSignature(reader, field_ref, name))
        except Exception as exc:  # noqa: BLE001
            damage.append(f"signature field {name!r} cannot be read ({type(exc).__name__}: "
                          f"{exc})")
    embedded.sort(key=lambda s: s.signed_revision)
    # Without trust roots pyhanko logs every failed certificate path; the report says it instead.
    log = logging.getLogger("pyhanko")
    level = log.level
    log.setLevel(logging.CRITICAL)
    try:
        for sig in embedded:
            _validate_one(sig, roots, found, damage)
    finally:
        log.setLevel(level)
    return found, damage


def _validate_one(sig: Any, roots: list[Any], found: list[PdfSignature],
                  damage: list[str]) -> None:
    from cryptography import x509
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko_certvalidator import ValidationContext

    try:
        when = sig.self_reported_timestamp
        context = ValidationContext(trust_roots=roots, allow_fetching=False, moment=when,
                                    revocation_mode="soft-fail")
        status = validate_pdf_signature(sig, context)
        signer_der = sig.signer_cert.dump()
    except Exception as exc:  # noqa: BLE001 - a hostile file may break the validator anywhere
        damage.append(f"signature field {sig.field_name!r} cannot be validated "
                      f"({type(exc).__name__}: {exc})")
        return
    entry = _entry_of(sig.sig_object)
    level = status.modification_level
    changes = "none" if level is None else level.name.lower().replace("_", " ")
    holder = certificate_holder(x509.load_der_x509_certificate(signer_der)) or "?"
    found.append(PdfSignature(
        field=str(sig.field_name), revision=int(sig.signed_revision), entry=entry,
        signer_der=signer_der, signer=holder, intact=bool(status.intact),
        valid=bool(status.valid), trusted=bool(status.trusted),
        whole_file=status.coverage.name == "ENTIRE_FILE",
        changes_after=changes, changes_ok=bool(status.docmdp_ok) and changes in (
            "none", "lta updates", "form filling")))


def _entry_of(sig_object: Any) -> dict[str, Any] | None:
    try:
        text = sig_object["/Prop_Build"]["/App"][_ENTRY_KEY]
        entry = json.loads(str(text))
    except (KeyError, TypeError, ValueError):
        return None
    return entry if isinstance(entry, dict) else None
