"""Signed-in people on a shared ``calib serve``: the sign-in page, roles, signing as oneself.

When the archive has users (or ``calib serve --users`` asks for them), every
page but the sign-in page needs a signed-in person (:class:`SignInGate`), and
each action needs a role: checking, issuing and quantifying need *analyst*,
signing needs *reviewer* or *approver* (for that meaning), the users page
*administrator*.  Sessions are kept in the archive database
(:mod:`calib.archive.people`), so several instances behind one proxy share them;
the browser holds only the random session id, in an HttpOnly, SameSite=Strict
cookie (Secure over HTTPS).

Signing (21 CFR 11.200(a): a signature not based on biometrics uses two
distinct components, here the signed-in name and the password typed again at
the moment of signing): :func:`signer_for` checks the password again, binds
the signature to the signed-in person's printed name, and unlocks their key
from the server's keys folder with the passphrase they type.  Without a key
there, the signature is the printed name only, and the page says so.

Without users (the single-user page on 127.0.0.1), nothing here applies.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import timedelta
from pathlib import Path
from typing import Any
from urllib.parse import quote, urlsplit

from starlette.concurrency import run_in_threadpool
from starlette.datastructures import FormData
from starlette.middleware.base import BaseHTTPMiddleware, RequestResponseEndpoint
from starlette.requests import Request
from starlette.responses import RedirectResponse, Response

from calib.web.base import PageError, _closing, _form, _render, _text, acting_name

__all__ = ["USER_COOKIE", "SignInGate", "Signer", "acting_name", "audit", "routes", "signer_for"]

USER_COOKIE = "calib_user"
#: Which roles may do what a meaning says (a rejection is a reviewer's or an approver's call).
_SIGNING_ROLES = {"reviewed": ("reviewer",), "approved": ("approver",),
                 "rejected": ("reviewer", "approver")}
_OPEN = ("/signin", "/static/")


def _needed_roles(method: str, path: str) -> tuple[str, ...]:
    """The roles of which one is needed for a request (empty: any signed-in person).

    Examples
    --------
    >>> _needed_roles("POST", "/check"), _needed_roles("GET", "/archive")
    (('analyst',), ())
    >>> _needed_roles("POST", "/sign"), _needed_roles("GET", "/users")
    (('reviewer', 'approver'), ('administrator',))
    >>> _needed_roles("POST", "/run/r1/sign"), _needed_roles("POST", "/archive/record/CR-1/sign")
    (('reviewer', 'approver'), ('reviewer', 'approver'))
    """
    if path == "/users" or path.startswith("/users/"):
        return ("administrator",)
    if method != "POST":
        return ()
    # Signing from the sign page or from an issued or archived record's page.
    if path == "/sign" or path.endswith("/sign"):
        return ("reviewer", "approver")
    if path in ("/check", "/quantify") or path.startswith("/run/"):
        return ("analyst",)
    return ()


@contextlib.contextmanager
def _people_of(app: Any) -> Iterator[Any]:
    """The archive's :class:`~calib.archive.people.People`, open for one request."""
    from calib.archive import Archive
    from calib.archive.people import People

    with Archive(app.state.archive, create=False) as archive:
        yield People(archive.storage, idle=app.state.idle)


def _users_on(app: Any) -> bool:
    return bool(getattr(app.state, "users", False))


async def audit(request: Request, event: str, *, subject: str = "",
                detail: dict[str, Any] | None = None) -> None:
    """Write ``event`` by the signed-in person to the audit trail (nothing without users)."""
    user = getattr(request.state, "user", None)
    if not _users_on(request.app) or user is None:
        return

    def write() -> None:
        from calib.archive.trail import record_event

        with _people_of(request.app) as people:
            record_event(people.storage, event, actor=user.name, subject=subject,
                         detail=detail or {}, at=people.now())

    await run_in_threadpool(write)


class SignInGate(BaseHTTPMiddleware):
    """Every page needs a signed-in person and, for an action, one of its roles."""

    async def dispatch(self, request: Request, call_next: RequestResponseEndpoint) -> Response:
        app = request.app
        if not _users_on(app) or request.url.path.startswith(_OPEN):
            return await call_next(request)
        token = request.cookies.get(USER_COOKIE)

        def look_up() -> Any:
            with _people_of(app) as people:
                return people.session_user(token)

        user = await run_in_threadpool(look_up) if token else None
        if user is None:
            if request.method == "GET":
                target = request.url.path + (f"?{request.url.query}" if request.url.query
                                             else "")
                return RedirectResponse(f"/signin?next={quote(target, safe='')}", 303)
            return _render(request, "error.html", status=401, message=(
                "You are not signed in (or were signed out after a time without use), so "
                "nothing was done: sign in and send the form again."))
        request.state.user = user
        # Open runs belong to this sign-in, not to the browser: another person signing in
        # on the same browser sees none of them.
        request.state.session = "user-" + token[:40]
        roles = _needed_roles(request.method, request.url.path)
        if roles and not user.has(*roles):
            return _render(request, "error.html", status=403, message=(
                f"This needs the role {' or '.join(roles)}; {user.name} has "
                f"{', '.join(user.roles)}. Ask an administrator if that is wrong."))
        return await call_next(request)


def _next(target: str) -> str:
    """Where to go after signing in: a path on this server only (never another site)."""
    parts = urlsplit(target)
    if (not target.startswith("/") or target.startswith("//") or parts.scheme or parts.netloc
            or "\\" in target):
        return "/"
    return target


async def _signin_page(request: Request) -> Response:
    return _render(request, "signin.html", next=_next(request.query_params.get("next", "/")),
                   error="")


async def _signin_post(request: Request) -> Response:
    from calib.archive.people import SignInRefused

    form = await _form(request)
    name, target = _text(form, "name"), _next(_text(form, "next") or "/")
    password = form.get("password")
    password = password if isinstance(password, str) else ""

    def sign_in() -> tuple[str, Any]:
        with _people_of(request.app) as people:
            return people.sign_in(name, password)

    try:
        token, _user = await run_in_threadpool(sign_in)
    except SignInRefused as exc:
        return _render(request, "signin.html", status=401, next=target,
                       error=f"Not signed in: {exc}.")
    response = RedirectResponse(target, 303)
    response.set_cookie(USER_COOKIE, token, httponly=True, samesite="strict",
                        secure=request.url.scheme == "https")
    return response


async def _signout_post(request: Request) -> Response:
    await _form(request)
    token = request.cookies.get(USER_COOKIE)

    def sign_out() -> None:
        with _people_of(request.app) as people:
            people.sign_out(token)

    await run_in_threadpool(sign_out)
    response = RedirectResponse("/signin", 303)
    response.delete_cookie(USER_COOKIE, httponly=True, samesite="strict")
    return response


async def _users_page(request: Request) -> Response:
    def listing() -> tuple[list[Any], Any]:
        with _people_of(request.app) as people:
            return people.users(), people.now()

    users, now = await run_in_threadpool(listing)
    return _render(request, "users.html", users=users, now=now)


def routes() -> list[Any]:
    """The sign-in, sign-out and users routes (added only when the server has users)."""
    from starlette.routing import Route

    return [Route("/signin", _signin_page), Route("/signin", _closing(_signin_post),
                                                  methods=["POST"]),
            Route("/signout", _closing(_signout_post), methods=["POST"]),
            Route("/users", _users_page)]


# ----------------------------------------------------------------------------- signing


@dataclass(frozen=True)
class Signer:
    """Who signs, as established at the moment of signing."""

    name: str
    key: Any
    #: Why there is no key (shown with the signature), empty when there is one.
    no_key: str


async def signer_for(request: Request, form: FormData, role: str) -> Signer | None:
    """The signed-in person, after their password typed again; None without users.

    Raises
    ------
    PageError
        The role is not theirs, the password is missing or wrong, or their key
        would not unlock.  Nothing is signed.
    """
    from calib.archive.people import SignInRefused

    user = getattr(request.state, "user", None)
    if not _users_on(request.app) or user is None:
        return None
    allowed = _SIGNING_ROLES.get(role, ())
    if not user.has(*allowed):
        raise PageError(f"A signature meaning {role} needs the role {' or '.join(allowed)}; "
                        f"{user.name} has {', '.join(user.roles)}. Nothing was signed.", 403)
    password = form.get("password")
    if not isinstance(password, str) or not password:
        await audit(request, "refused signature", detail={"reason": "no password",
                                                          "meaning": role})
        raise PageError("Type your password again to sign: a signature needs both your "
                        "signed-in name and your password at the moment of signing "
                        "(21 CFR 11.200(a)). Nothing was signed.", 403)
    passphrase = form.get("passphrase")
    passphrase = passphrase if isinstance(passphrase, str) else ""

    def establish() -> Signer:
        with _people_of(request.app) as people:
            people.check_password(user.name, password, purpose="signature")
        return _with_key(request, user.name, passphrase)

    try:
        return await run_in_threadpool(establish)
    except SignInRefused as exc:
        raise PageError(f"The signature was not made: {exc}.", 403) from None


def _with_key(request: Request, name: str, passphrase: str) -> Signer:
    from calib.record.identity import same_person
    from calib.record.keys import PRIVATE_SUFFIX, key_file_stem, load_signing_key

    folder = request.app.state.signing_keys
    path = Path(folder) / f"{key_file_stem(name)}{PRIVATE_SUFFIX}" if folder else None
    if path is None or not path.is_file():
        why = ("no keys folder was given to calib serve" if path is None
               else f"no key for {name} in the keys folder of this server")
        return Signer(name, None, f"printed name only: {why}")
    if not passphrase:
        raise PageError(f"{name} has a key on this server: type its passphrase to sign with "
                        "it. Nothing was signed.", 403)
    key = load_signing_key(path, passphrase=passphrase.encode())
    if not same_person(key.holder, name):
        raise PageError(f"The key kept for {name} was issued to {key.holder}; nothing was "
                        "signed (ask the lab's key administrator).", 403)
    return Signer(name, key, "")


# ------------------------------------------------------------------------------ set-up


def idle_time(minutes: float) -> timedelta:
    """The idle sign-out time; ValueError unless 1 to 1440 minutes.

    Examples
    --------
    >>> idle_time(30)
    datetime.timedelta(seconds=1800)
    >>> idle_time(0)
    Traceback (most recent call last):
    ...
    ValueError: idle sign-out must be 1 to 1440 minutes; got 0
    """
    if not 1 <= minutes <= 1440:
        raise ValueError(f"idle sign-out must be 1 to 1440 minutes; got {minutes:g}")
    return timedelta(minutes=minutes)


def server_has_users(archive: Any) -> bool:
    """Whether the archive exists and has users (then sign-in is required)."""
    import os

    from calib.archive import Archive
    from calib.archive.backends import is_database_url
    from calib.archive.people import People

    if archive is None or (not is_database_url(archive) and not os.path.isfile(archive)):
        return False
    with Archive(os.fspath(archive), create=False) as opened:
        return People(opened.storage).has_users()


def check_users_setup(archive: Any, idle_minutes: float) -> None:
    """ValueError unless sign-in can work: an archive with at least one user."""
    idle_time(idle_minutes)
    if archive is None:
        raise ValueError("sign-in needs the archive database that holds the users: give "
                         "--archive DB")
    if not server_has_users(archive):
        raise ValueError("the archive has no users yet, so nobody could sign in: add an "
                         "administrator first (calib users add \"FULL NAME\" --role "
                         "administrator --archive DB)")
