"""The middleware in front of every page: allowed hosts, access token, POST origin, sessions.

See :mod:`calib.web.security` for why each check exists.
"""

from __future__ import annotations

from urllib.parse import urlsplit

from starlette.middleware.base import BaseHTTPMiddleware, RequestResponseEndpoint
from starlette.requests import Request
from starlette.responses import RedirectResponse, Response

from calib.web import pages
from calib.web.base import _render
from calib.web.security import (
    ACCESS_COOKIE,
    SECURITY_HEADERS,
    SESSION_COOKIE,
    host_allowed,
    new_token,
    same_origin,
    same_token,
)

__all__ = ["Guard"]


class Guard(BaseHTTPMiddleware):
    """Allowed hosts, the access token, the origin check of every POST, sessions, headers."""

    async def dispatch(self, request: Request, call_next: RequestResponseEndpoint) -> Response:
        response = await self._checked(request, call_next)
        for name, value in SECURITY_HEADERS.items():
            response.headers.setdefault(name, value)
        fresh = getattr(request.state, "new_session", None)
        if fresh:
            response.set_cookie(SESSION_COOKIE, fresh, httponly=True, samesite="strict",
                                secure=request.url.scheme == "https")
        return response

    async def _checked(self, request: Request, call_next: RequestResponseEndpoint) -> Response:
        app_state = request.app.state
        if not host_allowed(request.headers.get("host"), app_state.allowed_hosts):
            # DNS rebinding: another site's name pointed at this computer.
            return _render(request, "error.html", status=400, message=(
                "This server does not answer to that host name, so the request was refused "
                "(start calib serve with --allow-host NAME to add one)."))
        session = request.cookies.get(SESSION_COOKIE, "")
        if not (20 <= len(session) <= 64 and session.isascii()
                and session.replace("-", "").replace("_", "").isalnum()):
            session = request.state.new_session = new_token()
        request.state.session = session
        token = app_state.access_token
        if token and not same_token(request.cookies.get(ACCESS_COOKIE), token):
            given = request.query_params.get("token")
            if not same_token(given, token):
                return _render(request, "error.html", status=403, message=(
                    "This page needs the access token printed when calib serve started: "
                    "open the address it printed, with ?token=… at the end."))
            # Keep the token in a cookie and drop it from the address bar.
            response = RedirectResponse(request.url.remove_query_params("token"), 303)
            response.set_cookie(ACCESS_COOKIE, token, httponly=True, samesite="strict")
            return response
        if request.method == "POST":
            origin = request.headers.get("origin")
            if not same_origin(origin, request.headers.get("host")) or (
                    origin is not None
                    and not host_allowed(urlsplit(origin).netloc, app_state.allowed_hosts)):
                return _render(request, "error.html", status=403, message=(
                    "This form was sent from another site, so it was refused."))
            length = request.headers.get("content-length")
            if length is None or not length.isdigit():
                return _render(request, "error.html", status=411, message=(
                    "The form was sent without its length, so it was refused; send it again "
                    "from the page."))
            if int(length) > app_state.max_upload:
                return _render(request, "error.html", status=413, message=(
                    f"The file is too large: at most {pages.size_text(app_state.max_upload)} "
                    "can be uploaded."))
        return await call_next(request)


