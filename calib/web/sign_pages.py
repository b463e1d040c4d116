"""The sign and verify pages of ``calib serve``: signing an uploaded, issued or archived record.

Every route calls :func:`calib.service.sign` or :func:`calib.service.verify`;
a signed-in person signs as themselves (:func:`calib.web.auth.signer_for`).
"""

from __future__ import annotations

from typing import Any

from starlette.concurrency import run_in_threadpool
from starlette.datastructures import FormData
from starlette.requests import Request
from starlette.responses import Response

from calib.web import auth, pages
from calib.web.base import PageError, _archive_path, _file, _form, _open_run, _render, _runs, _text
from calib.web.security import key_upload_allowed
from calib.web.state import Download, private_copy

__all__ = ["sign_archived", "sign_issued", "sign_page", "sign_post", "verify_page",
           "verify_post"]


async def sign_page(request: Request) -> Response:
    signed_in = auth.acting_name(request)
    return _render(request, "sign.html", signer=signed_in)


async def sign_post(request: Request) -> Response:
    form = await _form(request)
    upload = await _file(form, "record", what="record (its PDF or JSON)")
    assert upload is not None
    outcome = await _sign(request, form, upload, file_it=form.get("file_in_archive") == "yes")
    return _signed_view(request, outcome)


async def sign_issued(request: Request) -> Response:
    """Sign the record just issued for this run, from its page (no download and upload)."""
    form = await _form(request)
    run_id, run = _open_run(request)
    if run.issued is None or run.issued_pdf is None:
        raise PageError("No record has been issued for this run yet.", 404)
    upload = (f"{run.issued.record_id}.pdf", run.issued_pdf)
    outcome = await _sign(request, form, upload, file_it=form.get("file_in_archive") == "yes")
    # The run's record is now the signed version: a later signature continues it.
    run.issued, run.issued_pdf = outcome.record, outcome.signed.pdf
    return _signed_view(request, outcome,
                        back=(f"/run/{run_id}/issued", f"the record of {run.name}"))


async def sign_archived(request: Request) -> Response:
    """Sign the latest archived version of a record, from its archive page; file the new one."""
    form = await _form(request)
    record_id = request.path_params["record_id"]
    from calib.archive import Archive

    with Archive(_archive_path(request), create=False) as store:
        latest = store.latest(record_id)
    if latest is None:
        raise PageError(f"No record {record_id} in the archive.", 404)
    outcome = await _sign(request, form, (f"{latest.record_id}.pdf", latest.pdf), file_it=True)
    return _signed_view(request, outcome,
                        back=(f"/archive/record/{latest.record_id}",
                              f"record {latest.record_id} in the archive"))


async def _sign(request: Request, form: FormData, upload: tuple[str, bytes], *,
                file_it: bool) -> Any:
    """Check the signing form, sign the record bytes with calib.service.sign, file if asked."""
    role, name = _text(form, "role"), _text(form, "name")
    if role not in ("reviewed", "approved", "rejected"):
        raise PageError("Choose what the signature means: reviewed, approved or rejected.")
    signer = await auth.signer_for(request, form, role)  # signed in: password again, own key
    if signer is not None:
        name = signer.name
    if not name:
        raise PageError("Type the printed name of the signer.")
    meaning = _text(form, "meaning") or None
    key_file = None if signer else await _file(form, "key", what="key file", required=False)
    if key_file and not key_upload_allowed(request.url.scheme,
                                           request.client.host if request.client else None):
        # The key and its passphrase would have crossed the network in plain text.
        raise PageError("A private key is accepted only over HTTPS or on this computer itself: "
                        "the key and its passphrase were not used (start calib serve with "
                        "--tls-cert and --tls-key, or sign with calib sign).", 403)
    passphrase = form.get("passphrase")
    passphrase = passphrase if isinstance(passphrase, str) else ""
    if key_file and not passphrase:
        raise PageError("A key file needs its passphrase: type it in the passphrase box.")
    if file_it:
        _archive_path(request)

    def sign() -> Any:
        from calib import service
        from calib.record.keys import load_signing_key

        key = signer.key if signer else None
        if key_file:
            with private_copy(key_file[0], key_file[1]) as path:
                key = load_signing_key(path, passphrase=passphrase.encode())
        with private_copy(upload[0], upload[1]) as path:
            return service.sign(path, role=role, name=name, meaning=meaning, key=key,
                                archive=request.app.state.archive if file_it else None)

    outcome = await run_in_threadpool(sign)
    record = outcome.record
    await auth.audit(request, "signature", subject=record.record_id, detail={
        "meaning": role, "digest": record.digest, "key": bool(signer and signer.key)})
    request.state.keyed = bool(key_file) or bool(signer and signer.key)
    request.state.no_key = signer.no_key if signer else ""
    return outcome


def _signed_view(request: Request, outcome: Any, *, back: tuple[str, str] | None = None) -> Response:
    record = outcome.record
    # Version N holds N signatures (prepared is 1), as calib sign and calib verify count.
    version = len(record.body["signatures"])
    download = _runs(request, create=True).add_download(Download(
        f"{record.record_id}-v{version}.pdf", "application/pdf", outcome.signed.pdf))
    return _render(request, "signed.html", record=record, signature=record.body["signatures"][-1],
                   version=version, download=download, entries=outcome.entries,
                   keyed=bool(getattr(request.state, "keyed", False)),
                   no_key=getattr(request.state, "no_key", ""), back=back)


async def verify_page(request: Request) -> Response:
    return _render(request, "verify.html", report=None)


async def verify_post(request: Request) -> Response:
    form = await _form(request)
    upload = await _file(form, "record", what="record (its PDF or JSON)")
    assert upload is not None

    def verify() -> Any:
        from calib import service

        # With the lab's keyring and archive given to calib serve: a key signature is
        # checked against the lab's keys, and the version against the archive.
        with private_copy(upload[0], upload[1]) as path:
            return service.verify(path, keyring=request.app.state.keyring,
                                  archive=request.app.state.archive_if_exists())

    report = await run_in_threadpool(verify)
    return _render(request, "verify.html", report=pages.verify_view(report, upload[0]))
