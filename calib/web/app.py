"""The pages of ``calib serve``: routes that call the library and render what it returns.

No statistics and no assembly happen here.  A route reads the form, calls
:mod:`calib.service` (the same calls as the command line) or reads
:mod:`calib.archive`, and renders a template; a :class:`~calib.errors.CalibError`
becomes one sentence on the page, the same words the command line prints.

Every browser has its own store of open runs and downloads (a session cookie),
every request must name an allowed host, and every response carries the
security headers of :mod:`calib.web.security` (:mod:`calib.web.guard`).  The
archive pages are in :mod:`calib.web.archive_pages`.
"""

from __future__ import annotations

import functools
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import FormData
from starlette.exceptions import HTTPException
from starlette.middleware import Middleware
from starlette.requests import Request
from starlette.responses import RedirectResponse, Response
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles

from calib.errors import CalibError
from calib.web import auth, pages
from calib.web.archive_pages import (
    archive_chain,
    archive_page,
    archive_pdf,
    archive_record,
    archive_verify_record,
    trend_page,
)
from calib.web.base import (
    PageError,
    _archive_path,
    _attachment,
    _closing,
    _environment,
    _file,
    _form,
    _open_run,
    _render,
    _runs,
    _text,
    one_line,
)
from calib.web.guard import Guard
from calib.web.security import DEFAULT_MAX_UPLOAD
from calib.web.sign_pages import (
    sign_archived,
    sign_issued,
    sign_page,
    sign_post,
    verify_page,
    verify_post,
)
from calib.web.state import Download, OpenRun, Sessions, private_copy

__all__ = ["PageError", "create_app", "one_line"]


# ---------------------------------------------------------------------- check a run

async def home(request: Request) -> Response:
    return _render(request, "home.html", choices=pages.choices(request.app.state.profiles))


async def _check_upload(request: Request) -> Response:
    form = await _form(request)
    name, data = await _file(form, "run", what="run file (the instrument export)")
    run = OpenRun(name=name, data=data, **_settings(form, request))
    await run_in_threadpool(_assess, run)
    run_id = _runs(request, create=True).add_run(run)
    return RedirectResponse(f"/run/{run_id}", 303)


def _settings(form: FormData, request: Request) -> dict[str, Any]:
    profile = _text(form, "profile") or "default"
    if profile not in request.app.state.profiles:
        raise PageError(f"Unknown profile {profile!r}: choose one from the list.")
    return pages.form_options(profile, _text(form, "model") or None,
                              _text(form, "weighting") or None, _text(form, "confidence") or None)


def _assess(run: OpenRun) -> None:
    """Check the run's bytes with its settings and exclusions (the library does the work)."""
    from calib import service
    from calib.checks.exclusions import parse_exclusion

    exclusions = [parse_exclusion(f"{t}={r}") for t, r in run.exclusions]
    with private_copy(run.name, run.data) as path:
        run.assessment = service.check(path, profile=run.profile, model=run.model,
                                       weighting=run.weighting, confidence=run.confidence,
                                       exclusions=exclusions).assessment
    run.issued = run.issued_pdf = None
    run.filed = ""


async def _run_page(request: Request) -> Response:
    run_id, run = _open_run(request)
    return _run_view(request, run_id, run)


def _run_view(request: Request, run_id: str, run: OpenRun, *, error: str = "",
              status: int = 200, notice: str = "") -> Response:
    show = request.query_params.get("show", "all")
    summary = pages.run_summary(run.assessment, show=show)
    single = None
    if len(run.assessment.curves) == 1:
        single = pages.curve_view(run.assessment, 0)
    return _render(request, "run.html", status=status, run_id=run_id, run=run, summary=summary,
                   curve=single, error=error, notice=notice, show=show,
                   choices=pages.choices(request.app.state.profiles))


async def _curve_page(request: Request) -> Response:
    run_id, run = _open_run(request)
    index = request.path_params["index"]
    if not 0 <= index < len(run.assessment.curves):
        raise PageError(f"This run has no curve number {index + 1}.", 404)
    return _render(request, "curve.html", run_id=run_id, run=run,
                   curve=pages.curve_view(run.assessment, index))


async def _run_settings(request: Request) -> Response:
    form = await _form(request)
    run_id, run = _open_run(request)
    before = (run.profile, run.model, run.weighting, run.confidence)
    for key, value in _settings(form, request).items():
        setattr(run, key, value)
    try:
        await run_in_threadpool(_assess, run)
    except CalibError as exc:
        run.profile, run.model, run.weighting, run.confidence = before
        await run_in_threadpool(_assess, run)
        return _run_view(request, run_id, run, error=one_line(str(exc)), status=400)
    return RedirectResponse(f"/run/{run_id}", 303)


async def _run_exclude(request: Request) -> Response:
    form = await _form(request)
    run_id, run = _open_run(request)
    target, reason = _text(form, "target"), _text(form, "reason")
    place = _place(run, _text(form, "back"), _text(form, "row"))
    if not reason:
        return _review_view(request, run_id, run, place, error=(
            f"Excluding {target or 'a point'} needs a reason in words: type why in the box "
            "beside the point (spaces alone are not a reason)."))
    from calib.checks.exclusions import parse_exclusion

    try:
        parse_exclusion(f"{target}={reason}")
        run.exclusions.append((target, reason))
        await run_in_threadpool(_assess, run)
    except (ValueError, CalibError) as exc:
        if (target, reason) in run.exclusions:
            run.exclusions.remove((target, reason))
            await run_in_threadpool(_assess, run)
        return _review_view(request, run_id, run, place, error=one_line(str(exc)))
    await auth.audit(request, "exclusion", subject=run.name,
                     detail={"point": target, "reason": reason})
    return RedirectResponse(_back(run_id, run, place), 303)


async def _run_include(request: Request) -> Response:
    form = await _form(request)
    run_id, run = _open_run(request)
    target, reason = _text(form, "target"), _text(form, "reason")
    place = _place(run, _text(form, "back"), _text(form, "row"))
    kept = [(t, r) for t, r in run.exclusions if t != target]
    if len(kept) == len(run.exclusions):
        return _review_view(request, run_id, run, place, error=(
            f"{target or 'That point'} was not excluded on this page, so it cannot be put back "
            "here (a point the run file excludes stays out)."))
    if not reason:
        return _review_view(request, run_id, run, place, error=(
            f"Putting {target} back needs a reason: type it in the box beside the point."))
    run.exclusions = kept
    run.reinclusions.append((target, reason))
    await run_in_threadpool(_assess, run)
    return RedirectResponse(_back(run_id, run, place), 303)


def _place(run: OpenRun, back: str, row: str) -> tuple[int | None, int | None]:
    """The curve and standards-table row a form came from (None where not given or unknown)."""
    curve = int(back) if back.isdigit() and int(back) < len(run.assessment.curves) else None
    line = int(row) if row.isdigit() and 0 < int(row) <= 100_000 else None
    return curve, line


def _review_view(request: Request, run_id: str, run: OpenRun,
                 place: tuple[int | None, int | None], *, error: str) -> Response:
    """The page the form came from, with ``error`` (status 400): a curve page or the run's."""
    curve, _ = place
    if curve is None or len(run.assessment.curves) == 1:
        return _run_view(request, run_id, run, error=error, status=400)
    return _render(request, "curve.html", status=400, run_id=run_id, run=run, error=error,
                   curve=pages.curve_view(run.assessment, curve))


def _back(run_id: str, run: OpenRun, place: tuple[int | None, int | None]) -> str:
    """Where to return after a form: the same curve and table row (never another site).

    A run of one curve shows it on the run's own page, so that page is the place.
    """
    curve, row = place
    if curve is None:
        return f"/run/{run_id}"
    anchor = f"#std-{curve}-{row}" if row is not None else f"#curve-{curve}"
    if len(run.assessment.curves) == 1:
        return f"/run/{run_id}{anchor}"
    return f"/run/{run_id}/curve/{curve}{anchor}"


async def _run_close(request: Request) -> Response:
    await _form(request)
    run_id, _ = _open_run(request)
    _runs(request).close_run(run_id)
    return RedirectResponse("/", 303)


# ---------------------------------------------------------------------- issue the record

async def _issue_page(request: Request) -> Response:
    run_id, run = _open_run(request)
    return _render(request, "issue.html", run_id=run_id, run=run,
                   templates=request.app.state.report_templates,
                   lab_template=_lab_template_label())


def _lab_template_label() -> str:
    """Which letterhead a record gets when no template is chosen (calib lab init)."""
    from calib.report.template import NOT_CONFIGURED, resolve_template

    try:
        template = resolve_template()
    except CalibError as exc:
        return f"the lab's template cannot be used: {one_line(str(exc))}"
    if template.lab.name == NOT_CONFIGURED:
        return ("none set up, so the record says “Laboratory not configured” "
                "(calib lab init --template FILE sets one up)")
    return f"the lab's, {template.source} ({template.lab.name})"


async def _issue_post(request: Request) -> Response:
    form = await _form(request)
    run_id, run = _open_run(request)
    # Signed in: the record is prepared by that person, whatever the form says.
    prepared_by = auth.acting_name(request) or _text(form, "prepared_by")
    if not prepared_by:
        raise PageError("Type the printed name of the analyst issuing the record.")
    template = _template_path(request, _text(form, "template"))
    file_it = form.get("file_in_archive") == "yes"
    if file_it:
        _archive_path(request)

    def issue() -> None:
        from calib import service

        issued = service.issue(run.assessment, prepared_by=prepared_by, template=template,
                               archive=request.app.state.archive if file_it else None)
        run.issued, run.issued_pdf = issued.record, issued.pdf
        run.filed = ""
        if issued.filed is not None:
            run.filed = (f"Record {issued.filed.record_id} filed in the archive as entry seq "
                         f"{issued.filed.seq}.")

    await run_in_threadpool(issue)
    await auth.audit(request, "issue", subject=run.issued.record_id,
                     detail={"file": run.name, "digest": run.issued.digest})
    return RedirectResponse(f"/run/{run_id}/issued", 303)


def _template_path(request: Request, name: str) -> Path | None:
    """A report template chosen by name from the folder given at start (never a path)."""
    if not name:
        return None
    found = request.app.state.report_templates.get(name)
    if found is None:
        raise PageError(f"Unknown report template {name!r}: choose one from the list.")
    return found


async def _issued_page(request: Request) -> Response:
    run_id, run = _open_run(request)
    if run.issued is None:
        return RedirectResponse(f"/run/{run_id}/issue", 303)
    return _render(request, "issued.html", run_id=run_id, run=run, record=run.issued,
                   curves=pages.record_curves(run.issued.body),
                   version=len(run.issued.body.get("signatures") or ()))


async def issued_pdf(request: Request) -> Response:
    _, run = _open_run(request)
    if run.issued_pdf is None:
        raise PageError("No record has been issued for this run yet.", 404)
    return _attachment(f"{run.issued.record_id}.pdf", "application/pdf", run.issued_pdf)



async def download(request: Request) -> Response:
    item = _runs(request).download(request.path_params["download_id"])
    if item is None:
        raise PageError("This download is no longer available; make the file again.", 404)
    return _attachment(item.filename, item.media_type, item.data)


# ---------------------------------------------------------------------- quantify

async def _quantify_page(request: Request) -> Response:
    return _render(request, "quantify.html", result=None)


async def _quantify_post(request: Request) -> Response:
    form = await _form(request)
    curve = await _file(form, "curve", what="curve (an issued record, or a run file)")
    samples = await _file(form, "samples", what="samples file", required=False)
    force = form.get("force") == "yes"
    assert curve is not None

    def quantify() -> tuple[dict[str, Any], bytes, bytes]:
        import tempfile

        from calib import service

        # The workbook and the PDF report are made with the results, as
        # calib quantify --xlsx --pdf makes them; the PDF is read back and deleted.
        with tempfile.TemporaryDirectory(prefix="calib-web-") as folder, \
                private_copy(curve[0], curve[1]) as curve_path:
            pdf = Path(folder) / "quantify.pdf"
            if samples is None:
                outcome = service.quantify(curve_path, None, force=force, workbook=True,
                                           pdf=pdf)
            else:
                with private_copy(samples[0], samples[1]) as samples_path:
                    outcome = service.quantify(curve_path, samples_path, force=force,
                                               workbook=True, pdf=pdf)
            return outcome.document, outcome.workbook, pdf.read_bytes()

    document, workbook, pdf = await run_in_threadpool(quantify)
    store = _runs(request, create=True)
    stem = Path(curve[0]).stem or "quantify"
    xlsx = store.add_download(Download(
        f"{stem}-results.xlsx",
        "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet", workbook))
    pdf_id = store.add_download(Download(f"{stem}-results.pdf", "application/pdf", pdf))
    return _render(request, "quantify.html", result=pages.quantify_view(document), xlsx=xlsx,
                   pdf=pdf_id, curve_name=curve[0])


# ---------------------------------------------------------------------- errors

async def _page_error(request: Request, exc: Exception) -> Response:
    assert isinstance(exc, PageError)
    return _render(request, "error.html", status=exc.status, message=exc.message)


async def _calib_error(request: Request, exc: Exception) -> Response:
    return _render(request, "error.html", status=400, message=one_line(str(exc)))


async def _http_error(request: Request, exc: Exception) -> Response:
    assert isinstance(exc, HTTPException)
    message = ("There is no such page." if exc.status_code == 404 else
               "That request is not allowed here." if exc.status_code == 405 else
               one_line(exc.detail))
    return _render(request, "error.html", status=exc.status_code, message=message)


async def _internal_error(request: Request, exc: Exception) -> Response:
    from calib.output import disk_message

    disk = disk_message(exc)
    if disk is not None:  # the server's disk, not a bug: say so, as the command line does
        return _render(request, "error.html", status=507,
                       message=one_line(disk[0].upper() + disk[1:] + "."))
    message = (f"Internal error: {type(exc).__name__}: {one_line(str(exc))} (a bug in calib: "
               "please report it with the file you used).")
    return _render(request, "error.html", status=500, message=message)


def _existing_archive(path: str | None) -> str | None:
    """The archive to verify against: None until the first record is filed in it."""
    if path is None:
        return None
    return path if "://" in path or os.path.exists(path) else None


def create_app(*, archive: str | os.PathLike[str] | None = None,
               templates: str | os.PathLike[str] | None = None,
               access_token: str | None = None,
               max_upload: int = DEFAULT_MAX_UPLOAD,
               allowed_hosts: Sequence[str] = (),
               keyring: str | os.PathLike[str] | None = None,
               users: bool | None = None, idle_minutes: float = 30,
               signing_keys: str | os.PathLike[str] | None = None) -> Starlette:
    """The web application behind ``calib serve``.

    Parameters
    ----------
    archive : path, optional
        The archive to search, file records in and chart trends from.
    templates : path, optional
        A folder of the lab's report templates (``*.toml``), offered by name when
        issuing a record.
    access_token : str, optional
        When set, every browser must present it once (``?token=…``); ``calib serve``
        sets one whenever it listens beyond the loopback interface.
    max_upload : int
        Largest request body accepted, in bytes.
    allowed_hosts : sequence of str
        Host names the server answers to besides the loopback names (``localhost``,
        ``127.0.0.1``, ``::1``); a request naming any other host gets 400.
    keyring : path, optional
        The lab's folder of public keys: the Verify pages check key signatures with it.
    users : bool, optional
        Require sign-in (:mod:`calib.web.auth`).  Default: when the archive exists
        and has users.  True needs an archive with at least one user.
    idle_minutes : float
        With users: a session unused this long is signed out.
    signing_keys : path, optional
        With users: the folder of people's encrypted keys (``NAME.key.json``), each
        unlocked with the passphrase its holder types when signing.

    Examples
    --------
    >>> app = create_app()
    >>> sorted(r.path for r in app.routes)[:3]
    ['/', '/archive', '/archive/chain']
    """
    from calib.checks.profile import shipped_profiles

    routes = [
        Route("/", home),
        Route("/check", _closing(_check_upload), methods=["POST"]),
        Route("/run/{run_id}", _run_page),
        Route("/run/{run_id}/curve/{index:int}", _curve_page),
        Route("/run/{run_id}/settings", _closing(_run_settings), methods=["POST"]),
        Route("/run/{run_id}/exclude", _closing(_run_exclude), methods=["POST"]),
        Route("/run/{run_id}/include", _closing(_run_include), methods=["POST"]),
        Route("/run/{run_id}/close", _closing(_run_close), methods=["POST"]),
        Route("/run/{run_id}/issue", _issue_page),
        Route("/run/{run_id}/issue", _closing(_issue_post), methods=["POST"]),
        Route("/run/{run_id}/issued", _issued_page),
        Route("/run/{run_id}/record.pdf", issued_pdf),
        Route("/run/{run_id}/sign", _closing(sign_issued), methods=["POST"]),
        Route("/sign", sign_page),
        Route("/sign", _closing(sign_post), methods=["POST"]),
        Route("/verify", verify_page),
        Route("/verify", _closing(verify_post), methods=["POST"]),
        Route("/download/{download_id}", download),
        Route("/archive", archive_page),
        Route("/archive/chain", archive_chain),
        Route("/archive/trend", trend_page),
        Route("/archive/record/{record_id}", archive_record),
        Route("/archive/record/{record_id}/verify", archive_verify_record),
        Route("/archive/record/{record_id}/sign", _closing(sign_archived), methods=["POST"]),
        Route("/archive/record/{record_id}/{seq:int}.pdf", archive_pdf),
        Route("/quantify", _quantify_page),
        Route("/quantify", _closing(_quantify_post), methods=["POST"]),
        Mount("/static", StaticFiles(packages=[("calib.web", "static")]), name="static"),
    ]
    with_users = auth.server_has_users(archive) if users is None else users
    if with_users:
        auth.check_users_setup(archive, idle_minutes)
        routes[-1:-1] = auth.routes()
    app = Starlette(
        routes=routes, middleware=[Middleware(Guard), Middleware(auth.SignInGate)],
        exception_handlers={PageError: _page_error, CalibError: _calib_error,
                            HTTPException: _http_error, Exception: _internal_error},
    )
    app.state.env = _environment()
    app.state.sessions = Sessions()
    app.state.archive = os.fspath(archive) if archive is not None else None
    app.state.allowed_hosts = tuple(allowed_hosts)
    app.state.keyring = os.fspath(keyring) if keyring is not None else None
    app.state.archive_if_exists = functools.partial(_existing_archive, app.state.archive)
    app.state.access_token = access_token
    app.state.users = with_users
    app.state.idle = auth.idle_time(idle_minutes)
    app.state.signing_keys = os.fspath(signing_keys) if signing_keys is not None else None
    app.state.max_upload = max_upload
    app.state.profiles = tuple(shipped_profiles())
    app.state.report_templates = (
        {p.stem: p for p in sorted(Path(templates).glob("*.toml"))} if templates else {})
    return app
