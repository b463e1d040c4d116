"""What the server holds between pages: open runs and files waiting to be downloaded.

An uploaded file is kept as bytes in memory only; each time the library needs it
on disk it is written into a private temporary folder (mode 0700) that is
removed as soon as the call returns (:func:`private_copy`).  Nothing the browser
sends names a path: runs and downloads are looked up by random ids.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import tempfile
import threading
import time
from collections import OrderedDict
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from calib.errors import SessionsFull
from calib.web.security import new_token, safe_filename

if TYPE_CHECKING:
    from calib.options import Model, Weighting

__all__ = ["Download", "OpenRun", "Sessions", "SessionsFull", "Store", "private_copy", "scrub"]

_PREFIX = "calib-web-"
_PRIVATE = re.compile(re.escape(os.path.join(tempfile.gettempdir(), _PREFIX)) + r"[^/\\]+[/\\]")

#: How many runs and downloads are kept, per browser, before the oldest is forgotten.
_KEEP = 64
#: Most bytes of uploads (and, separately, of downloads) kept for one browser.
MAX_BYTES = 256 * 1024 * 1024
#: How many browsers may have runs open at once (a further one is refused, no one is evicted).
_KEEP_SESSIONS = 256
#: Seconds without use after which a browser's open runs and downloads are forgotten.
IDLE = 12 * 3600


@contextlib.contextmanager
def private_copy(name: str, data: bytes) -> Iterator[Path]:
    """Write ``data`` as ``name`` in a fresh private folder; remove the folder afterwards.

    Examples
    --------
    >>> with private_copy("run.csv", b"a,b") as path:
    ...     path.read_bytes(), path.name
    (b'a,b', 'run.csv')
    >>> path.exists(), path.parent.exists()
    (False, False)
    """
    folder = Path(tempfile.mkdtemp(prefix=_PREFIX))
    try:
        path = folder / safe_filename(name)
        path.write_bytes(data)
        yield path
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def scrub(text: str) -> str:
    """``text`` without the private folder's path: the page names files as uploaded.

    Examples
    --------
    >>> with private_copy("run.csv", b"") as path:
    ...     scrub(f"{path}: no standards found")
    'run.csv: no standards found'
    """
    return _PRIVATE.sub("", text)


@dataclass
class OpenRun:
    """A run file being checked: its bytes, the analyst's choices and the latest result."""

    name: str
    data: bytes
    profile: str = "default"
    #: The analyst's choices, typed (calib.web.pages.form_options); None: the profile's.
    model: Model | None = None
    weighting: Weighting | None = None
    confidence: float | None = None
    #: (target, reason) pairs, in the order the analyst gave them.
    exclusions: list[tuple[str, str]] = field(default_factory=list)
    #: Points put back, with the reason typed for it (shown on the page).
    reinclusions: list[tuple[str, str]] = field(default_factory=list)
    assessment: Any = None
    issued: Any = None
    issued_pdf: bytes | None = None
    filed: str = ""


@dataclass(frozen=True)
class Download:
    """A file made for the browser to download."""

    filename: str
    media_type: str
    data: bytes


class Store:
    """One browser's open runs and downloads by random id.

    The oldest of each kind is forgotten past :data:`_KEEP` items or past
    ``max_bytes`` of file data (uploads are held in memory), so one browser
    cannot fill the server's memory; the newest item is always kept.

    Examples
    --------
    >>> store = Store(max_bytes=10)
    >>> first = store.add_run(OpenRun("a.csv", b"123456"))
    >>> second = store.add_run(OpenRun("b.csv", b"123456"))
    >>> store.run(first) is None, store.run(second) is not None
    (True, True)
    """

    def __init__(self, max_bytes: int = MAX_BYTES) -> None:
        self._runs: OrderedDict[str, OpenRun] = OrderedDict()
        self._downloads: OrderedDict[str, Download] = OrderedDict()
        self._lock = threading.Lock()
        self._max_bytes = max_bytes

    def add_run(self, run: OpenRun) -> str:
        return self._add(self._runs, run)

    def run(self, run_id: str) -> OpenRun | None:
        with self._lock:
            return self._runs.get(run_id)

    def close_run(self, run_id: str) -> None:
        with self._lock:
            self._runs.pop(run_id, None)

    def add_download(self, download: Download) -> str:
        return self._add(self._downloads, download)

    def download(self, download_id: str) -> Download | None:
        with self._lock:
            return self._downloads.get(download_id)

    def _add(self, table: OrderedDict[str, Any], item: Any) -> str:
        key = new_token()[:22]
        with self._lock:
            table[key] = item
            while len(table) > _KEEP or (
                    len(table) > 1 and sum(len(v.data or b"") for v in table.values())
                    > self._max_bytes):
                table.popitem(last=False)
        return key


class Sessions:
    """One :class:`Store` per browser session, so one user's runs never evict or show another's.

    A browser is known by a random session cookie.  A run id is looked up only
    in the store of the browser that asks, so a run id seen by someone else
    (in a shared screen, a log, a link) answers "no such run" to them.  A store
    is made when a browser first opens a run or makes a download (a page view
    makes none), and forgotten after :data:`IDLE` seconds without use.  When
    :data:`_KEEP_SESSIONS` browsers are active, a new one is refused
    (:class:`SessionsFull`) rather than another user's runs being dropped.

    Examples
    --------
    >>> sessions = Sessions()
    >>> run_id = sessions.store("alice", create=True).add_run(OpenRun("a.csv", b""))
    >>> sessions.store("alice").run(run_id) is not None, sessions.store("bob").run(run_id)
    (True, None)
    >>> len(sessions)
    1
    """

    def __init__(self, keep: int = _KEEP_SESSIONS, idle: float = IDLE,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self._stores: OrderedDict[str, tuple[Store, float]] = OrderedDict()
        self._keep, self._idle, self._clock = keep, idle, clock
        self._lock = threading.Lock()

    def store(self, session: str, *, create: bool = False) -> Store:
        """The store of ``session``; an empty one (kept only with ``create``) the first time.

        Raises
        ------
        SessionsFull
            With ``create``, when :data:`_KEEP_SESSIONS` other browsers are active.
        """
        now = self._clock()
        with self._lock:
            for key in [k for k, (_, used) in self._stores.items() if now - used > self._idle]:
                del self._stores[key]
            found = self._stores.pop(session, None)
            if found is None:
                if not create:
                    return Store()
                if len(self._stores) >= self._keep:
                    raise SessionsFull(f"{self._keep} browsers have runs open")
                found = (Store(), now)
            self._stores[session] = (found[0], now)
            return found[0]

    def __len__(self) -> int:
        with self._lock:
            return len(self._stores)
