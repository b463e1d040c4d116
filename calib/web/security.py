"""What keeps the local page safe: cross-site tokens, the access token, upload limits.

A page served on 127.0.0.1 can still be reached by any other site the browser
has open, through forms it posts or links it follows.  So every POST carries
a token the page put in the form, which must equal the one in our cookie
(another site can read neither), and a request whose ``Origin`` is another
site is refused outright.  When the server listens on another interface, an
access token printed at start must be presented once; it is then kept in a
cookie for the browser session.

DNS rebinding: a page on another site can make the victim's browser resolve its
own name to 127.0.0.1 and then read our pages as "same origin".  What gives it
away is the ``Host`` header, which still carries the attacker's name; so every
request must name an allowed host (:func:`host_allowed`: the loopback names,
plus the names ``calib serve`` was told to answer to), or it gets 400.  Each
response carries a Content-Security-Policy (own scripts and styles only, no
framing: ``frame-ancestors 'none'``) and ``X-Content-Type-Options: nosniff``.

Private keys: a key file and its passphrase are accepted only over HTTPS or
from this computer itself (:func:`key_upload_allowed`), never in plain text
over the network.
"""

from __future__ import annotations

import hmac
import ipaddress
import secrets
from urllib.parse import urlsplit

from calib.output import safe_file_name

__all__ = ["ACCESS_COOKIE", "CSRF_COOKIE", "CSRF_FIELD", "DEFAULT_MAX_UPLOAD", "SECURITY_HEADERS",
           "SESSION_COOKIE", "host_allowed", "is_loopback", "key_upload_allowed", "new_token",
           "safe_filename", "same_origin", "same_token"]

CSRF_COOKIE = "calib_form"
CSRF_FIELD = "form_token"
ACCESS_COOKIE = "calib_access"
SESSION_COOKIE = "calib_session"
#: Host names every server answers to: this computer's own.
_LOOPBACK_NAMES = ("localhost", "127.0.0.1", "::1")
#: Sent with every response.  The pages use only our own script and style sheet, so
#: nothing inline is allowed; no other site may frame them (clickjacking on the sign form).
SECURITY_HEADERS = {
    "Content-Security-Policy": ("default-src 'self'; script-src 'self'; style-src 'self'; "
                                "img-src 'self' data:; object-src 'none'; base-uri 'none'; "
                                "form-action 'self'; frame-ancestors 'none'"),
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    # Not "no-referrer": with it browsers send "Origin: null" on our own form posts.
    "Referrer-Policy": "same-origin",
}
#: Instrument exports are small; 20 MB leaves room for a large multi-analyte workbook.
DEFAULT_MAX_UPLOAD = 20 * 1024 * 1024



def new_token() -> str:
    """A fresh random token (URL-safe text, 256 bits)."""
    return secrets.token_urlsafe(32)


def same_token(given: str | None, expected: str | None) -> bool:
    """Whether two tokens are present and equal, compared in constant time.

    Examples
    --------
    >>> same_token("abc", "abc"), same_token("abc", "abd"), same_token(None, "abc")
    (True, False, False)
    """
    if not given or not expected:
        return False
    return hmac.compare_digest(given.encode(), expected.encode())


def same_origin(origin: str | None, host: str | None) -> bool:
    """Whether an ``Origin`` header names the host the request came to (absent: True).

    Browsers send ``Origin`` on every cross-site POST; a missing one is an older
    browser or a same-origin request, and the form token still guards it.

    Examples
    --------
    >>> same_origin("http://127.0.0.1:8750", "127.0.0.1:8750")
    True
    >>> same_origin("https://elsewhere.example", "127.0.0.1:8750")
    False
    >>> same_origin(None, "127.0.0.1:8750")
    True
    """
    if origin is None:
        return True
    if origin == "null" or not host:
        return False
    return urlsplit(origin).netloc.lower() == host.lower()


def _host_name(host: str | None) -> str:
    """The name part of a ``Host`` header or URL authority, lower-case, without port or brackets.

    Examples
    --------
    >>> _host_name("127.0.0.1:8750"), _host_name("[::1]:8750"), _host_name("LabPC.example")
    ('127.0.0.1', '::1', 'labpc.example')
    >>> _host_name(None), _host_name("a b")
    ('', '')
    """
    text = (host or "").strip().lower()
    if not text or any(c.isspace() or c in "/@\\" for c in text):
        return ""
    if text.startswith("["):
        end = text.find("]")
        return text[1:end] if end > 0 else ""
    if text.count(":") == 1:
        text = text.split(":", 1)[0]
    return text.rstrip(".")


def host_allowed(host: str | None, allowed: tuple[str, ...] = ()) -> bool:
    """Whether a request's ``Host`` names this server: a loopback name or an allowed one.

    Examples
    --------
    >>> host_allowed("127.0.0.1:8750"), host_allowed("localhost"), host_allowed("[::1]:80")
    (True, True, True)
    >>> host_allowed("attacker.example:8750")
    False
    >>> host_allowed("labpc.fernbrook.example:8750", ("labpc.fernbrook.example",))
    True
    >>> host_allowed(None)
    False
    """
    name = _host_name(host)
    return bool(name) and (name in _LOOPBACK_NAMES or name in {_host_name(a) for a in allowed})


def key_upload_allowed(scheme: str, client_host: str | None) -> bool:
    """Whether a private key may be received: over HTTPS, or from this computer.

    Examples
    --------
    >>> key_upload_allowed("https", "10.0.0.7"), key_upload_allowed("http", "127.0.0.1")
    (True, True)
    >>> key_upload_allowed("http", "10.0.0.7"), key_upload_allowed("http", None)
    (False, False)
    """
    return scheme == "https" or (client_host is not None and is_loopback(client_host))


def is_loopback(host: str) -> bool:
    """Whether ``host`` is a loopback address or ``localhost``.

    Examples
    --------
    >>> is_loopback("127.0.0.1"), is_loopback("localhost"), is_loopback("::1")
    (True, True, True)
    >>> is_loopback("0.0.0.0")
    False
    """
    if host.lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def safe_filename(name: str | None, *, fallback: str = "upload") -> str:
    """The last part of a browser-sent file name, reduced to plain characters.

    The name only labels the file inside our private temporary folder (and in
    the record, as the run file's name); no folder the browser names is used.

    Examples
    --------
    >>> safe_filename("C:\\\\runs\\\\fluoride run.csv")
    'fluoride run.csv'
    >>> safe_filename("../../etc/passwd")
    'passwd'
    >>> safe_filename("..")
    'upload'
    """
    base = (name or "").replace("\\", "/").rsplit("/", 1)[-1]
    if base.strip(" .") == "":
        return fallback
    return safe_file_name(base, fallback=fallback)
