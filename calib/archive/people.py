"""People who sign in to a shared ``calib serve``: users, roles, passwords, sessions.

Users live in the archive database (format 3), so every ``calib serve``
instance in front of one database knows the same people and their sessions.

Passwords
    At least :data:`_MIN_PASSWORD` characters; stored only as an argon2id hash
    (argon2-cffi's defaults, RFC 9106).  After :data:`_MAX_FAILURES` failed
    sign-ins in a row the account is locked for :data:`_LOCK_MINUTES` minutes
    (common practice); while locked no password is even tried.  A wrong
    password and an unknown name get the same answer, so the page does not
    tell which names exist.

Sessions
    A random id (``secrets.token_urlsafe``, 256 bits) given to the browser;
    the database keeps only its SHA-256, so a copy of the database does not let
    anyone in.  A session ends on sign-out, after ``idle`` without use (30
    minutes by default) and at most :data:`_MAX_SESSION_HOURS` after sign-in.

Names are normalised as printed names are (:func:`calib.record.identity.check_printed_name`)
and two names that :func:`~calib.record.identity.person_key` makes equal are one person.
Every sign-in, failed sign-in, lock-out, sign-out and user change is written
to the audit trail (:mod:`calib.archive.trail`) in the same transaction.
"""

from __future__ import annotations

import hashlib
import secrets
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from typing import TYPE_CHECKING, Any

from calib.archive.trail import append_row
from calib.errors import RefusedAction, SignInRefused
from calib.record.identity import check_printed_name, person_key

if TYPE_CHECKING:
    from calib.archive.backends import Storage

__all__ = ["ROLES", "People", "RefusedAction", "SignInRefused", "User", "name_key"]

ROLES = ("analyst", "reviewer", "approver", "administrator")
_MIN_PASSWORD = 12
_MAX_FAILURES = 5
_LOCK_MINUTES = 15
_IDLE_MINUTES = 30
_MAX_SESSION_HOURS = 12
_MAX_PASSWORD = 1024  # argon2 reads any length; a megabyte "password" is only a way to load us


_WRONG = "the name or password is not right"


def name_key(name: str) -> str:
    """The key one person is stored under: their name's words, accents and case removed.

    Examples
    --------
    >>> name_key("Holt, Mira") == name_key("mira  HOLT")
    True
    """
    return " ".join(person_key(name))


def _parse_roles(roles: Iterable[str]) -> tuple[str, ...]:
    """Roles checked and in the order of :data:`ROLES`.

    Examples
    --------
    >>> _parse_roles(["reviewer", "analyst", "reviewer"])
    ('analyst', 'reviewer')
    >>> _parse_roles(["chemist"])
    Traceback (most recent call last):
    ...
    ValueError: unknown role 'chemist'; roles are analyst, reviewer, approver, administrator
    """
    given = list(roles)
    for role in given:
        if role not in ROLES:
            raise ValueError(f"unknown role {role!r}; roles are {', '.join(ROLES)}")
    if not given:
        raise ValueError(f"give at least one role ({', '.join(ROLES)})")
    return tuple(r for r in ROLES if r in given)


def _check_password_text(password: str) -> str:
    """``password`` when long enough, else ValueError (nothing of it is echoed).

    Examples
    --------
    >>> _check_password_text("short")
    Traceback (most recent call last):
    ...
    ValueError: a password needs at least 12 characters (this one has 5)
    """
    if not isinstance(password, str):
        raise ValueError("a password must be text")
    if len(password) < _MIN_PASSWORD:
        raise ValueError(f"a password needs at least {_MIN_PASSWORD} characters (this one has "
                         f"{len(password)})")
    if len(password) > _MAX_PASSWORD:
        raise ValueError(f"a password has at most {_MAX_PASSWORD} characters")
    return password


@dataclass(frozen=True)
class User:
    """A person who may sign in: printed name, roles, and the account's state."""

    name: str
    key: str
    roles: tuple[str, ...]
    disabled: bool
    failed: int
    locked_until: datetime | None
    created_at: str
    changed_at: str

    def has(self, *roles: str) -> bool:
        """Whether the user holds any of ``roles``."""
        return any(r in self.roles for r in roles)


def _user(row: tuple[Any, ...]) -> User:
    key, name, roles, _hash, disabled, failed, locked, created, changed = row
    return User(str(name), str(key), tuple(r for r in str(roles).split(",") if r),
                bool(disabled), int(failed),
                datetime.fromtimestamp(float(locked), UTC) if locked is not None else None,
                str(created), str(changed))


def _token_hash(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


_COLUMNS = ("name_key, name, roles, password_hash, disabled, failed, locked_until, created_at,"
            " changed_at")


class People:
    """The users and sessions of one archive database.

    Parameters
    ----------
    storage : Storage
        The archive's storage (format 3).
    idle : timedelta
        A session unused this long is over.
    clock : callable, optional
        Returns the current UTC time (tests move it forward).
    hasher : argon2.PasswordHasher, optional
        Defaults to argon2id with argon2-cffi's default cost.
    """

    def __init__(self, storage: Storage, *, idle: timedelta = timedelta(minutes=_IDLE_MINUTES),
                 clock: Callable[[], datetime] | None = None, hasher: Any = None) -> None:
        from argon2 import PasswordHasher, Type

        if idle <= timedelta(0):
            raise ValueError(f"idle sign-out must be a positive time; got {idle}")
        self.storage = storage
        self.idle = idle
        self._clock = clock or (lambda: datetime.now(UTC))
        self._hasher = hasher or PasswordHasher(type=Type.ID)

    def now(self) -> datetime:
        return self._clock().astimezone(UTC)

    def _stamp(self) -> str:
        return self.now().strftime("%Y-%m-%dT%H:%M:%SZ")

    # ------------------------------------------------------------------------- users

    def has_users(self) -> bool:
        """Whether any user exists (then every page of ``calib serve`` needs sign-in)."""
        return bool(self.storage.query("SELECT 1 FROM users LIMIT 1"))

    def users(self) -> list[User]:
        """Every user, by name."""
        return sorted((_user(r) for r in self.storage.query(f"SELECT {_COLUMNS} FROM users")),
                      key=lambda u: u.key)

    def user(self, name: str) -> User | None:
        """The user ``name`` names (as :func:`name_key` compares), or None."""
        rows = self.storage.query(f"SELECT {_COLUMNS} FROM users WHERE name_key = ?",
                                  (name_key(name),))
        return _user(rows[0]) if rows else None

    def _existing(self, name: str) -> User:
        found = self.user(name)
        if found is None:
            raise RefusedAction(f"no user named {name!r} in this archive (calib users list "
                                "shows them)")
        return found

    def add(self, name: str, roles: Iterable[str], password: str, *, by: str) -> User:
        """Add a user; ValueError for an unusable name, role or password."""
        printed = check_printed_name(name, what="a user's full name")
        chosen = _parse_roles(roles)
        hashed = self._hasher.hash(_check_password_text(password))
        key, stamp = name_key(printed), self._stamp()
        with self.storage.write():
            clash = self.storage.query("SELECT name FROM users WHERE name_key = ?", (key,))
            if clash:
                raise RefusedAction(f"{printed!r} is already a user (as {clash[0][0]!r}): one "
                                    "person has one account")
            self.storage.execute(f"INSERT INTO users ({_COLUMNS}) VALUES (?, ?, ?, ?, 0, 0, "
                                 "NULL, ?, ?)", (key, printed, ",".join(chosen), hashed,
                                                 stamp, stamp))
            append_row(self.storage, "user added", actor=by, subject=printed,
                       detail={"roles": list(chosen)}, at=self.now())
        return self._existing(printed)

    def _admins_left(self, without: str) -> int:
        return sum(1 for u in self.users()
                   if u.key != without and not u.disabled and "administrator" in u.roles)

    def set_disabled(self, name: str, disabled: bool, *, by: str) -> User:
        """Disable (sessions end at once) or enable a user."""
        user = self._existing(name)
        if disabled and "administrator" in user.roles and not self._admins_left(user.key):
            raise RefusedAction(f"{user.name} is the last enabled administrator; add or enable "
                                "another administrator first")
        with self.storage.write():
            self.storage.execute("UPDATE users SET disabled = ?, failed = 0, locked_until = "
                                 "NULL, changed_at = ? WHERE name_key = ?",
                                 (int(disabled), self._stamp(), user.key))
            if disabled:
                self._end_sessions(user.key)
            append_row(self.storage, "user disabled" if disabled else "user enabled", actor=by,
                       subject=user.name, at=self.now())
        return self._existing(name)

    def reset_password(self, name: str, password: str, *, by: str) -> User:
        """Give a user a new password (clears a lock-out; their sessions end)."""
        user = self._existing(name)
        hashed = self._hasher.hash(_check_password_text(password))
        with self.storage.write():
            self.storage.execute("UPDATE users SET password_hash = ?, failed = 0, locked_until "
                                 "= NULL, changed_at = ? WHERE name_key = ?",
                                 (hashed, self._stamp(), user.key))
            self._end_sessions(user.key)
            append_row(self.storage, "password reset", actor=by, subject=user.name,
                       at=self.now())
        return self._existing(name)

    def set_roles(self, name: str, roles: Iterable[str], *, by: str) -> User:
        """Replace a user's roles."""
        user = self._existing(name)
        chosen = _parse_roles(roles)
        if ("administrator" in user.roles and "administrator" not in chosen
                and not user.disabled and not self._admins_left(user.key)):
            raise RefusedAction(f"{user.name} is the last enabled administrator; the role "
                                "cannot be taken away")
        with self.storage.write():
            self.storage.execute("UPDATE users SET roles = ?, changed_at = ? WHERE name_key = ?",
                                 (",".join(chosen), self._stamp(), user.key))
            append_row(self.storage, "roles changed", actor=by, subject=user.name,
                       detail={"from": list(user.roles), "to": list(chosen)}, at=self.now())
        return self._existing(name)

    # ---------------------------------------------------------------------- passwords

    def check_password(self, name: str, password: str, *, purpose: str = "sign-in") -> User:
        """The user, when ``password`` is theirs and the account may act; else SignInRefused.

        A failure counts towards the lock-out and is written to the audit trail
        (committed before it is reported), whatever the ``purpose`` (signing in,
        or the password typed again to sign).  The slow argon2 check runs outside
        the archive's write lock, so sign-ins never hold up records being filed.
        """
        from argon2.exceptions import InvalidHashError, VerificationError

        typed = " ".join(str(name).split())
        key = name_key(typed) if typed else ""
        before = self.storage.query("SELECT password_hash, locked_until FROM users WHERE "
                                    "name_key = ?", (key,)) if key else []
        good = False
        if before and not (before[0][1] is not None
                           and float(before[0][1]) > self.now().timestamp()):
            try:
                good = (len(password) <= _MAX_PASSWORD
                        and self._hasher.verify(str(before[0][0]), password))
            except (VerificationError, InvalidHashError):
                good = False
        checked = str(before[0][0]) if before else ""
        with self.storage.write():
            # A password reset between the check and now makes the check void.
            if good and self.storage.query("SELECT password_hash FROM users WHERE name_key = ?",
                                           (key,)) != [(checked,)]:
                good = False
            user, refusal = self._outcome(typed, key, good, purpose)
        if refusal is not None:
            raise SignInRefused(refusal)
        assert user is not None
        return self._existing(user.name)

    def _outcome(self, typed: str, key: str, good: bool,
                 purpose: str) -> tuple[User | None, str | None]:
        """Record the result of a password check under the write lock; (user, why refused)."""
        now = self.now()
        rows = self.storage.query(f"SELECT {_COLUMNS} FROM users WHERE name_key = ?",
                                  (key,)) if key else []
        if not rows:
            append_row(self.storage, "failed sign-in", actor=typed[:200], at=now,
                       detail={"purpose": purpose, "reason": "unknown name"})
            return None, _WRONG
        user = _user(rows[0])
        if user.locked_until is not None and user.locked_until > now:
            append_row(self.storage, "failed sign-in", actor=user.name, at=now,
                       detail={"purpose": purpose, "reason": "locked"})
            return user, (f"this account is locked after {_MAX_FAILURES} failed sign-ins until "
                          f"{user.locked_until:%Y-%m-%d %H:%M} UTC; try again then, or ask an "
                          "administrator to reset the password")
        if not good:
            failed = (0 if user.locked_until is not None else user.failed) + 1
            locked = ((now + timedelta(minutes=_LOCK_MINUTES)).timestamp()
                      if failed >= _MAX_FAILURES else None)
            self.storage.execute("UPDATE users SET failed = ?, locked_until = ? WHERE "
                                 "name_key = ?", (0 if locked else failed, locked, user.key))
            append_row(self.storage, "failed sign-in", actor=user.name, at=now,
                       detail={"purpose": purpose, "reason": "wrong password",
                               "failures": failed})
            if locked is not None:
                self._end_sessions(user.key)
                append_row(self.storage, "lock-out", actor=user.name, at=now,
                           detail={"minutes": _LOCK_MINUTES})
            return user, _WRONG
        if user.disabled:
            append_row(self.storage, "failed sign-in", actor=user.name, at=now,
                       detail={"purpose": purpose, "reason": "disabled"})
            return user, "this account is disabled; ask an administrator"
        if user.failed or user.locked_until is not None:
            self.storage.execute("UPDATE users SET failed = 0, locked_until = NULL WHERE "
                                 "name_key = ?", (user.key,))
        return user, None

    # ------------------------------------------------------------------------ sessions

    def sign_in(self, name: str, password: str) -> tuple[str, User]:
        """Check the password and open a session; returns the session id and the user."""
        user = self.check_password(name, password)
        token = secrets.token_urlsafe(32)
        now = self.now()
        with self.storage.write():
            self.storage.execute("INSERT INTO sessions VALUES (?, ?, ?, ?, NULL)",
                                 (_token_hash(token), user.key, now.timestamp(),
                                  now.timestamp()))
            append_row(self.storage, "sign-in", actor=user.name, at=now)
        return token, user

    def session_user(self, token: str | None) -> User | None:
        """The signed-in user of session ``token``, or None (unknown, ended, idle, disabled).

        A session found idle is ended here and its idle sign-out written to the trail.
        """
        if not token or len(token) > 100:
            return None
        digest, now = _token_hash(token), self.now()
        rows = self.storage.query(
            "SELECT s.created_at, s.last_seen, u.disabled, u.name FROM sessions s JOIN users u "
            "ON u.name_key = s.name_key WHERE s.token_hash = ? AND s.ended_at IS NULL",
            (digest,))
        if not rows:
            return None
        created, last_seen, disabled, name = rows[0]
        stamp = now.timestamp()
        if disabled:
            return None
        if (stamp - float(last_seen) > self.idle.total_seconds()
                or stamp - float(created) > _MAX_SESSION_HOURS * 3600):
            with self.storage.write():
                self.storage.execute("UPDATE sessions SET ended_at = ? WHERE token_hash = ? AND "
                                     "ended_at IS NULL", (stamp, digest))
                append_row(self.storage, "idle sign-out", actor=str(name), at=now,
                           detail={"idle_minutes": round(self.idle.total_seconds() / 60, 1)})
            return None
        if stamp - float(last_seen) > 30:  # write at most twice a minute per session
            self.storage.execute("UPDATE sessions SET last_seen = ? WHERE token_hash = ?",
                                 (stamp, digest))
        return self.user(str(name))

    def sign_out(self, token: str | None) -> None:
        """End session ``token`` (nothing happens for an unknown or ended one)."""
        user = self.session_user(token)
        if user is None or token is None:
            return
        with self.storage.write():
            self.storage.execute("UPDATE sessions SET ended_at = ? WHERE token_hash = ?",
                                 (self.now().timestamp(), _token_hash(token)))
            append_row(self.storage, "sign-out", actor=user.name, at=self.now())

    def _end_sessions(self, key: str) -> None:
        self.storage.execute("UPDATE sessions SET ended_at = ? WHERE name_key = ? AND ended_at "
                             "IS NULL", (self.now().timestamp(), key))
