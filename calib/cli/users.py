"""``calib users`` and ``calib audit``: the people of a shared server, and what they did.

Users live in the archive database (``--archive DB`` or ``CALIB_ARCHIVE``).  A
password is read from ``CALIB_USER_PASSWORD`` (for scripted set-up) or asked
twice at the terminal; it is never an option, so it stays out of shell history
and process lists.
"""

from __future__ import annotations

import argparse
import getpass
import os
import sys
from typing import Any

from calib.cli.archive import add_archive_option, archive_path, report_no_archive
from calib.cli.common import add_debug

_PASSWORD_ENV = "CALIB_USER_PASSWORD"
ROLES = ("analyst", "reviewer", "approver", "administrator")  # calib.archive.people.ROLES
EXIT_USAGE, EXIT_INTEGRITY = 2, 5

_USERS_EXAMPLES = f"""\
examples:
  calib users add "Mira Holt" --role administrator --archive records.sqlite
  calib users add "Osric Venn" --role analyst --archive postgresql://calib@lab-db/records
  calib users add "Talia Brennock" --role reviewer --role approver
  calib users list
  calib users disable "Osric Venn" --by "Mira Holt"
  calib users enable "Osric Venn"
  calib users reset-password "Osric Venn"        (clears a lock-out too)
  calib users roles "Osric Venn" --role analyst --role reviewer

Roles: analyst (check, issue, quantify), reviewer and approver (sign in that role),
administrator (users).  The password comes from {_PASSWORD_ENV} or is asked twice; at least
12 characters.  Once an archive has users, calib serve with it asks everyone to sign in.
Every change is written to the audit trail (calib audit list).
"""

_AUDIT_EXAMPLES = """\
examples:
  calib audit list --archive records.sqlite              the newest 50 rows
  calib audit list --actor "Osric Venn" --since 2026-10-01 --limit 500
  calib audit list --event "failed sign-in"
  calib audit verify                                     every row's hash and link

exit codes: 0 done / trail intact, 2 usage error, 3 archive unreadable, 5 trail altered
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    users = sub.add_parser("users", help="people who sign in to calib serve: add, list, "
                                         "disable, enable, reset-password, roles",
                           description="Manage the people of a shared calib serve, kept in "
                                       "the archive database.",
                           epilog=_USERS_EXAMPLES,
                           formatter_class=argparse.RawDescriptionHelpFormatter)
    actions = users.add_subparsers(dest="action", metavar="ACTION")
    actions.required = True
    for name, text in (("add", "add a person"), ("list", "list the people and their state"),
                       ("disable", "stop a person signing in (their sessions end)"),
                       ("enable", "let a disabled person sign in again"),
                       ("reset-password", "give a person a new password"),
                       ("roles", "replace a person's roles")):
        action = actions.add_parser(name, help=text, description=text[0].upper() + text[1:] + ".",
                                    epilog=_USERS_EXAMPLES,
                                    formatter_class=argparse.RawDescriptionHelpFormatter)
        if name != "list":
            action.add_argument("name", metavar='"FULL NAME"', help="the person's printed name")
        if name in ("add", "roles"):
            action.add_argument("--role", action="append", required=True, choices=ROLES,
                                help="a role; repeat for several")
        if name != "list":
            action.add_argument("--by", metavar="NAME",
                                help="who makes the change, for the audit trail (default: "
                                     "this computer's account name)")
        add_archive_option(action)
        add_debug(action)
        action.set_defaults(handler=_run_users)

    audit = sub.add_parser("audit", help="the audit trail: list or verify it",
                           description="List or verify the audit trail of a shared calib serve.",
                           epilog=_AUDIT_EXAMPLES,
                           formatter_class=argparse.RawDescriptionHelpFormatter)
    steps = audit.add_subparsers(dest="action", metavar="ACTION")
    steps.required = True
    listing = steps.add_parser("list", help="rows of the trail, oldest first",
                               epilog=_AUDIT_EXAMPLES,
                               formatter_class=argparse.RawDescriptionHelpFormatter)
    listing.add_argument("--actor", metavar="NAME", help="only what this person did")
    listing.add_argument("--event", metavar="EVENT", help="only this event, e.g. 'sign-in'")
    listing.add_argument("--since", metavar="YYYY-MM-DD", help="only from this date (UTC)")
    listing.add_argument("--limit", type=int, default=50, metavar="N",
                         help="the newest N rows (default 50)")
    verify = steps.add_parser("verify", help="recompute every row's hash and link",
                              epilog=_AUDIT_EXAMPLES,
                              formatter_class=argparse.RawDescriptionHelpFormatter)
    for step in (listing, verify):
        add_archive_option(step)
        add_debug(step)
        step.set_defaults(handler=_run_audit)


def _password(name: str) -> str:
    given = os.environ.get(_PASSWORD_ENV)
    if given is not None:
        return given
    if not sys.stdin.isatty():
        raise ValueError(f"no password: set {_PASSWORD_ENV} or run this at a terminal to be "
                         "asked for it")
    first = getpass.getpass(f"Password for {name}: ")
    if getpass.getpass("The same password again: ") != first:
        raise ValueError("the two passwords differ; nothing was changed")
    return first


def _by(args: argparse.Namespace) -> str:
    if args.by:
        return " ".join(args.by.split())
    try:
        return f"{getpass.getuser()} (computer account)"
    except (KeyError, OSError):
        return "unknown computer account"


def _state(user: Any, now: Any) -> str:
    if user.disabled:
        return "disabled"
    if user.locked_until is not None and user.locked_until > now:
        return f"locked until {user.locked_until:%Y-%m-%d %H:%M} UTC"
    return "enabled"


def _run_users(args: argparse.Namespace) -> int:
    from calib.archive import Archive
    from calib.archive.people import People

    location = archive_path(args)
    if location is None:
        return report_no_archive()
    try:
        password = _password(args.name) if args.action in ("add", "reset-password") else ""
        with Archive(location, create=args.action == "add") as archive:
            people = People(archive.storage)
            if args.action == "list":
                users, now = people.users(), people.now()
                if not users:
                    print(f"calib: no users in {archive.location}: calib serve with it is "
                          "the single-user local page (add one with calib users add)")
                    return 0
                width = max(len(u.name) for u in users)
                print(f"{'name':<{width}}  {'roles':<30}  {'state':<28}  changed")
                for u in users:
                    print(f"{u.name:<{width}}  {', '.join(u.roles):<30}  "
                          f"{_state(u, now):<28}  {u.changed_at}")
                return 0
            by = _by(args)
            if args.action == "add":
                user = people.add(args.name, args.role, password, by=by)
                print(f"calib: added {user.name} ({', '.join(user.roles)}) to "
                      f"{archive.location}")
            elif args.action in ("disable", "enable"):
                user = people.set_disabled(args.name, args.action == "disable", by=by)
                print(f"calib: {user.name} is {args.action}d")
            elif args.action == "reset-password":
                user = people.reset_password(args.name, password, by=by)
                print(f"calib: new password set for {user.name}; their sessions were ended")
            else:
                user = people.set_roles(args.name, args.role, by=by)
                print(f"calib: {user.name} now has the roles {', '.join(user.roles)}")
    except ValueError as exc:
        print(f"calib users: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    print("calib: the lab's computerised-system validation (21 CFR 11, EU GMP Annex 11, GAMP 5) "
          "decides who may hold which role; a qualified person reviews the accounts")
    return 0


def _run_audit(args: argparse.Namespace) -> int:
    from calib.archive import Archive
    from calib.archive.trail import EVENTS, trail_rows, verify_trail

    location = archive_path(args)
    if location is None:
        return report_no_archive()
    if args.action == "list":
        if args.limit < 1:
            print(f"calib audit: error: --limit must be at least 1, got {args.limit}",
                  file=sys.stderr)
            return EXIT_USAGE
        if args.event and args.event not in EVENTS:
            print(f"calib audit: error: unknown --event {args.event!r}; one of: "
                  f"{', '.join(EVENTS)}", file=sys.stderr)
            return EXIT_USAGE
    with Archive(location, create=False) as archive:
        if args.action == "verify":
            report = verify_trail(archive.storage)
            if report.ok:
                print(f"calib: audit trail intact: {report.rows} rows, head {report.head_hash}")
                return 0
            print(f"calib: audit trail NOT intact ({report.rows} rows):", file=sys.stderr)
            for problem in report.problems:
                print(f"  {problem}", file=sys.stderr)
            return EXIT_INTEGRITY
        rows = trail_rows(archive.storage, actor=args.actor, event=args.event,
                          since=args.since, limit=args.limit)
    if not rows:
        print("calib: no rows match")
        return 0
    for row in rows:
        detail = ", ".join(f"{k}={v}" for k, v in sorted(row.detail.items()))
        print(f"{row.seq:>6}  {row.at}  {row.event:<16}  {row.actor}"
              + (f" → {row.subject}" if row.subject else "") + (f"  ({detail})" if detail else ""))
    return 0
