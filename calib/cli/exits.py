"""Exit codes of every ``calib`` command, one meaning each, and the one place errors map to them.

A script or a LIMS job reads the exit code alone, so a code never stands for two
different things: "the curve was rejected" (1) is not "the record was altered"
(5), and neither is "the sign-off rules refused this signature" (6).

Commands return :data:`OK`, :data:`NOT_ACCEPTED`, :data:`INTEGRITY`,
:data:`REFUSED` or :data:`FLAGGED` for outcomes; everything raised is turned
into a code by :func:`code_for` (called only by :func:`calib.cli.main.main`).
"""

from __future__ import annotations

from calib.output import disk_message

__all__ = [
    "FLAGGED", "INPUT", "INTEGRITY", "INTERNAL", "NOT_ACCEPTED", "OK", "REFUSED", "TABLE",
    "USAGE", "code_for", "disk_message",
]

OK = 0
"""Accepted (check, quantify), intact (verify, archive verify), or the command did its job."""
NOT_ACCEPTED = 1
"""A curve was rejected or needs review, or a QC rule failed (check, quantify)."""
USAGE = 2
"""The command line was wrong (unknown option, missing value, a file that would be replaced)."""
INPUT = 3
"""Input that cannot be read or used: run file, profile, template, key, archive path, a full disk."""
INTERNAL = 4
"""A bug in calib: please report it with the ``--debug`` output."""
INTEGRITY = 5
"""A record did not verify, or the archive is damaged or altered."""
REFUSED = 6
"""An action the sign-off rules refuse (e.g. the preparer approving their own record)."""
FLAGGED = 7
"""``calib trend``: a control-chart run rule fired.  A warning about drift, not a verdict on
any record, so it has its own code rather than borrowing 1."""

TABLE = (
    (OK, "accepted / intact / done"),
    (NOT_ACCEPTED, "not accepted: a curve rejected or needing review, or a QC rule failed"),
    (USAGE, "usage error (wrong option, or an output file that exists without --force)"),
    (INPUT, "unusable input: run file, profile, template, key or archive unreadable; disk full"),
    (INTERNAL, "internal error (a bug in calib: please report it with the --debug output)"),
    (INTEGRITY, "integrity failure: record not verified, or archive damaged or altered"),
    (REFUSED, "refused action: a sign-off rule forbids it"),
    (FLAGGED, "calib trend only: a control-chart run rule fired"),
)
"""Code and meaning, as the README and ``calib --help`` print them."""

# Exceptions whose *class name* decides the code.  By name, so that mapping an error
# never imports the record or archive packages (and survives their rewrites).
_BY_NAME = {
    "SignOffError": REFUSED,
    "RefusedAction": REFUSED,
    "IntegrityError": INTEGRITY,
    "OptionError": USAGE,
}


def code_for(exc: BaseException) -> int:
    """The exit code of an exception raised by a command.

    Examples
    --------
    >>> from calib.errors import InputError
    >>> code_for(InputError("not a number", file="run.csv", row=3))
    3
    >>> code_for(OSError(28, "No space left on device"))
    3
    >>> code_for(ZeroDivisionError())
    4
    """
    from calib.errors import CalibError

    for cls in type(exc).__mro__:
        if cls.__name__ in _BY_NAME:
            return _BY_NAME[cls.__name__]
    if isinstance(exc, CalibError):
        return INPUT
    if isinstance(exc, FileExistsError):
        return USAGE
    if disk_message(exc) is not None:
        return INPUT
    return INTERNAL
