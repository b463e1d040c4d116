"""A progress bar for long commands, drawn on the terminal only.

The core reports progress through a ``progress(done, total)`` callback and never
draws anything itself; this module is the command line's way of showing it.  The
bar goes to standard error, and only when standard error is a terminal and the
command is not writing JSON: on a pipe, in a log file or with ``--json`` nothing
at all is written, so machine readers never see it.  It appears only once the work
has lasted a moment (``delay`` seconds), so a short run stays quiet.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable
from typing import TextIO

__all__ = ["ProgressBar", "progress_for"]

#: Seconds of work before the bar first appears; short runs never show one.
DELAY = 1.0
WIDTH = 30


class ProgressBar:
    """A one-line bar, redrawn in place: ``label [#####-----] done/total``.

    Call the object as the core's ``progress(done, total)`` callback; call
    :meth:`close` when the work is over to clear the line.

    Examples
    --------
    >>> import io
    >>> out = io.StringIO()
    >>> bar = ProgressBar(out, label="checking", delay=0, width=10)
    >>> bar(5, 10)
    >>> out.getvalue()
    '\\rchecking [#####-----] 5/10'
    >>> bar.close()
    >>> out.getvalue().endswith(' ' * 26 + '\\r')
    True
    """

    def __init__(self, stream: TextIO, *, label: str = "", delay: float | None = None,
                 width: int = WIDTH, clock: Callable[[], float] = time.monotonic) -> None:
        self._stream = stream
        self._label = label
        self._delay = DELAY if delay is None else delay
        self._width = width
        self._clock = clock
        self._start = clock()
        self._drawn = 0  # length of the line on screen, 0 when none

    def __call__(self, done: int, total: int) -> None:
        if total <= 0 or self._clock() - self._start < self._delay:
            return
        filled = min(self._width, self._width * done // total)
        line = f"{self._label} [{'#' * filled}{'-' * (self._width - filled)}] {done}/{total}"
        self._stream.write("\r" + line.ljust(self._drawn))
        self._stream.flush()
        self._drawn = len(line)

    def close(self) -> None:
        """Clear the bar's line, if one was drawn, so the output that follows starts clean."""
        if self._drawn:
            self._stream.write("\r" + " " * self._drawn + "\r")
            self._stream.flush()
            self._drawn = 0


def progress_for(*, json_output: bool = False, label: str = "",
                 stream: TextIO | None = None) -> ProgressBar | None:
    """A bar on standard error when it is a terminal and the output is not JSON; else None.

    ``None`` is what the core takes for "report no progress".

    Examples
    --------
    >>> import io
    >>> progress_for(stream=io.StringIO()) is None   # not a terminal
    True
    """
    stream = sys.stderr if stream is None else stream
    if json_output or not _is_terminal(stream):
        return None
    return ProgressBar(stream, label=label)


def _is_terminal(stream: TextIO) -> bool:
    try:
        return stream.isatty()
    except (AttributeError, ValueError):  # closed or a stand-in without isatty
        return False
