"""The exceptions calib raises.

One tree, so callers can catch everything calib means to raise with a single
``except CalibError``::

    CalibError                 base of everything below
    ├── InputError             a run file cannot be read or used (names file, sheet, row, column)
    ├── CellError              a cell is not what its column needs (also a ValueError; calib.io)
    ├── NumberTextError        text reads as a number in two ways (also a ValueError; calib.io)
    ├── RangeError             a working range cannot be applied (also a ValueError; calib.checks)
    ├── ProfileError           an acceptance profile is malformed (names file and line)
    ├── OptionError            a model, weighting or confidence that cannot be used (a usage error)
    ├── TemplateError          a report template is malformed or points outside its folder
    ├── ConfigError            the lab settings file (calib lab init) cannot be used
    ├── NotAcceptedError       raised only on request, by CurveAssessment.raise_for_verdict()
    ├── SignOffError           a sign-off the rules refuse (calib.record.signing)
    ├── KeyFileError           a signing key cannot be read (calib.record.keys)
    ├── PassphraseError        no passphrase for a signing key (calib.record.keys)
    ├── IntegrityError         a record does not verify, so nothing is done with it
    ├── ArchiveError           the archive cannot be opened or refuses a write (calib.archive.store)
    ├── BaselineError          a trend baseline cannot be set up, read or used (calib.archive)
    ├── RefusedAction          a change of users the rules refuse (calib.archive.people)
    ├── SignInRefused          a sign-in, or the password typed again to sign, refused
    ├── SessionsFull           calib serve has runs open for too many browsers (calib.web)
    └── PageError              a request a page of calib serve refuses, with its HTTP status

Every exception class calib defines is here (tests/test_errors_home.py checks it);
the modules named above re-export theirs, so ``from calib.io.cells import
CellError`` still works.  Wrong *arguments* (an unknown model name, a
confidence of 1.5) raise the built-in ``ValueError`` naming the parameter and
the value; the fit options a caller chooses (model, weighting, confidence, and
the pairs of model and weighting that cannot go together) raise
:class:`OptionError`, which is both.  A curve that fails its acceptance rules is
*not* an error: it is a verdict in the result.
"""

from __future__ import annotations

__all__ = ["ArchiveError", "BaselineError", "CalibError", "CellError", "ConfigError",
           "InputError", "IntegrityError", "KeyFileError", "NotAcceptedError", "NumberTextError",
           "OptionError", "PageError", "PassphraseError", "ProfileError", "RangeError",
           "RefusedAction", "SessionsFull", "SignInRefused", "SignOffError", "TemplateError"]


class CalibError(Exception):
    """Base class of every exception calib raises on purpose."""


class InputError(CalibError):
    """A run file cannot be read or used.

    The message names the place: file, and where known sheet, row (1-based,
    as the spreadsheet shows it) and column (header text or letter), and says
    what was expected there.

    Examples
    --------
    >>> str(InputError("not a number", file="run.csv", row=7, column="response"))
    'run.csv, row 7, column response: not a number'
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        sheet: str | None = None,
        row: int | None = None,
        column: str | None = None,
    ) -> None:
        self.message = message
        self.file = file
        self.sheet = sheet
        self.row = row
        self.column = column
        super().__init__(self.__str__())

    def __str__(self) -> str:
        place = []
        if self.file:
            place.append(self.file)
        if self.sheet:
            place.append(f"sheet {self.sheet}")
        if self.row is not None:
            place.append(f"row {self.row}")
        if self.column:
            place.append(f"column {self.column}")
        return f"{', '.join(place)}: {self.message}" if place else self.message


class ProfileError(CalibError):
    """An acceptance profile cannot be used (the message names file and line)."""


class OptionError(CalibError, ValueError):
    """A fit option (model, weighting, confidence) or a pair of them that cannot be used.

    Raised where the options come in (command line, web form, library call) before
    anything is fitted; the command line exits 2 (usage error).  Also a ``ValueError``,
    as wrong arguments are.
    """


class TemplateError(CalibError):
    """A report template cannot be used."""


class ConfigError(CalibError):
    """The lab settings file cannot be used (the message names the file and the key)."""


class IntegrityError(CalibError):
    """A record (or archive) does not verify, so it is not signed or filed (exit code 5)."""


class NotAcceptedError(CalibError):
    """A curve was not accepted and the caller asked for an exception."""


class CellError(CalibError, ValueError):
    """A cell cannot be read as what its column needs.

    The message says what was found and what was expected; it names no place,
    the caller adds file, sheet, row and column.
    """


class NumberTextError(CalibError, ValueError):
    """Text that looks like a number cannot be read unambiguously (the message says why)."""


class RangeError(CalibError, ValueError):
    """A working range that cannot be applied (no such analyte, no reason given)."""


class SignOffError(CalibError):
    """The sign-off rules refuse a signature (the message says which rule)."""


class KeyFileError(CalibError):
    """A key file or keyring cannot be written, read or unlocked (the message names the file)."""


class PassphraseError(CalibError):
    """No usable passphrase was given for a private key."""


class ArchiveError(CalibError):
    """The archive cannot be opened or used, or an append was refused."""


class BaselineError(CalibError):
    """A baseline cannot be established, read or used (the message says why)."""


class RefusedAction(CalibError):
    """A user change the rules refuse (a second user of one name, the last administrator...)."""


class SignInRefused(CalibError):
    """A sign-in (or the password typed again to sign) was refused; the message says why."""


class SessionsFull(CalibError):
    """Every place for a browser's store on ``calib serve`` is taken by an active browser."""


class PageError(CalibError):
    """A request a page of ``calib serve`` refuses, with the one sentence to show and the HTTP status."""

    def __init__(self, message: str, status: int = 400) -> None:
        super().__init__(message)
        self.message = message
        self.status = status
