"""What keeps the local page safe: cross-site tokens, the access token, upload limits.

A page served on 127.0.0.1 can still be reached by any other site the browser
has open, through forms it posts or links it follows.  So every POST carries
a token the page put in the form, which must equal the one in our cookie
(another site can read neither), and a request whose ``Origin`` is another
site is refused outright.  When the server listens on another interface, an
access token printed at start must be presented once; it is then kept in a
cookie for the browser session.
"""

from __future__ import annotations

import hmac
import ipaddress
import secrets
from urllib.parse import urlsplit

from calib.output import safe_file_name

__all__ = [
    "ACCESS_COOKIE",
    "CSRF_COOKIE",
    "CSRF_FIELD",
    "DEFAULT_MAX_UPLOAD",
    "is_loopback",
    "new_token",
    "safe_filename",
    "same_origin",
    "same_token",
]

CSRF_COOKIE = "calib_form"
CSRF_FIELD = "form_token"
ACCESS_COOKIE = "calib_access"
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
