"""What every page of ``calib serve`` shares: rendering, forms, the page's error sentence.

A route refuses a request by raising :class:`PageError` with the one sentence
to show; :func:`_render` fills a template with the page token and archive.
"""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from typing import Any

from jinja2 import Environment, PackageLoader, select_autoescape
from starlette.datastructures import FormData, UploadFile
from starlette.requests import Request
from starlette.responses import HTMLResponse, Response

from calib.errors import PageError
from calib.output import safe_file_name
from calib.web import pages
from calib.web.security import CSRF_COOKIE, CSRF_FIELD, new_token, same_token
from calib.web.state import OpenRun, Store, scrub

__all__ = ["PageError", "acting_name", "one_line"]

_Handler = Callable[[Request], Awaitable[Response]]


def one_line(text: str) -> str:
    """``text`` on one line, as the command line prints errors (no private folder named)."""
    return " ".join(scrub(str(text)).split())


def _environment() -> Environment:
    env = Environment(loader=PackageLoader("calib.web", "templates"),
                      autoescape=select_autoescape(default=True, default_for_string=True),
                      trim_blocks=True, lstrip_blocks=True)
    env.filters["num"] = pages.num
    env.filters["verdict_word"] = pages.verdict_word
    env.filters["check_word"] = pages.check_word
    return env


def _csrf(request: Request) -> str:
    """The form token of this browser (made on its first page)."""
    token = request.cookies.get(CSRF_COOKIE)
    if not token:
        token = request.state.__dict__.setdefault("new_csrf", new_token())
    return token


def acting_name(request: Request) -> str | None:
    """The signed-in person's printed name (None on the single-user page)."""
    user = getattr(request.state, "user", None)
    return user.name if user is not None else None


def _render(request: Request, name: str, *, status: int = 200, **context: Any) -> HTMLResponse:
    state = request.app.state
    context.setdefault("archive", state.archive)
    context.setdefault("signer", acting_name(request))  # the signed-in person, if any
    html = state.env.get_template(name).render(
        request=request, csrf_field=CSRF_FIELD, csrf=_csrf(request), **context)
    response = HTMLResponse(html, status_code=status)
    fresh = request.state.__dict__.get("new_csrf")
    if fresh and not request.cookies.get(CSRF_COOKIE):
        response.set_cookie(CSRF_COOKIE, fresh, httponly=True, samesite="strict")
    return response


async def _form(request: Request) -> FormData:
    """The POSTed form, after checking its cross-site token."""
    form = await request.form(max_files=4, max_fields=50,
                              max_part_size=request.app.state.max_upload)
    request.state.form = form
    if not same_token(_text(form, CSRF_FIELD), request.cookies.get(CSRF_COOKIE)):
        raise PageError("The form had no valid page token (the page may be old, or the form "
                        "came from another site); reload the page and send it again.", 403)
    return form


def _closing(handler: _Handler) -> _Handler:
    """``handler``, closing the uploaded files' spools when it is done, however it ends."""

    async def handle(request: Request) -> Response:
        try:
            return await handler(request)
        finally:
            form = getattr(request.state, "form", None)
            if form is not None:
                await form.close()

    return handle


def _text(form: FormData, name: str) -> str:
    value = form.get(name)
    return " ".join(value.split()) if isinstance(value, str) else ""


async def _file(form: FormData, name: str, *, what: str,
                required: bool = True) -> tuple[str, bytes] | None:
    value = form.get(name)
    if not isinstance(value, UploadFile) or not value.filename:
        if required:
            raise PageError(f"Choose the {what} to upload.")
        return None
    data = await value.read()
    await value.close()
    return value.filename, data


def _runs(request: Request, *, create: bool = False) -> Store:
    """This browser's open runs and downloads (never another browser's).

    ``create`` when adding: the browser's store is made then, and refused (503)
    when too many other browsers have runs open, rather than dropping theirs.
    """
    from calib.web.state import SessionsFull

    try:
        return request.app.state.sessions.store(request.state.session, create=create)
    except SessionsFull:
        raise PageError("Too many browsers have runs open on this server; close a run in "
                        "another browser, or try again later.", 503) from None


def _open_run(request: Request) -> tuple[str, OpenRun]:
    run_id = request.path_params["run_id"]
    run = _runs(request).run(run_id)
    if run is None:
        # Also what another browser's run id answers: whether it exists is not told.
        raise PageError("This run is not open in this browser (it was closed, the server was "
                        "restarted, or many runs were opened since); upload the file again.",
                        404)
    return run_id, run


def _archive_path(request: Request) -> str:
    path = request.app.state.archive
    if not path:
        raise PageError("No archive is open: start the server with calib serve --archive DB.",
                        409)
    return path


def _attachment(filename: str, media_type: str, data: bytes) -> Response:
    return Response(data, media_type=media_type, headers={
        "Content-Disposition": f'attachment; filename="{safe_file_name(filename)}"',
        "Cache-Control": "no-store"})
