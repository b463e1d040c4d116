"""``calib verify``: check that a record PDF (or JSON) is exactly what was issued and signed."""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING

from calib.cli.archive import ENV_VAR as ARCHIVE_ENV
from calib.cli.archive import add_archive_option, archive_path
from calib.cli import exits
from calib.cli.common import add_debug

if TYPE_CHECKING:
    from calib.record.verify import VerifyReport

EXAMPLES = f"""\
examples:
  calib verify nitrate.v3.pdf
  calib verify nitrate.v3.pdf --keyring lab-keyring/ --archive records.sqlite
  calib verify nitrate.v3.json --keyring lab-keyring/ --json

Checks that the attached record data is intact and matches the digest the pages state, that
the pages are exactly a fresh rendering of that data, that every signature's links to earlier
versions hold, that every key signature verifies with its key in the keyring (a folder of
*.pub.pem files), that the sign-off rules were kept, and with --archive (or {ARCHIVE_ENV} set)
that this version is in the archive with the same bytes and the archive's chain verifies.
A key signature that cannot be checked (no --keyring, or its key is not in the keyring) counts
as a problem.  A record JSON has no pages; the other checks apply.

exit codes: 0 intact, 5 not verified (each problem named on its own line), 2 usage
            error, 3 unreadable file, keyring, template or archive
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "verify", help="check a record PDF or JSON for any alteration",
        description="Verify a calibration record: digests, pages, signatures, archive entry.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("record", metavar="RECORD", help="record PDF or record JSON")
    parser.add_argument("--keyring", metavar="DIR", help="folder of public keys (*.pub.pem)")
    add_archive_option(parser, help_text="archive to look the version up in; default: the "
                                         f"{ARCHIVE_ENV} environment variable, if set")
    parser.add_argument("--template", metavar="T",
                        help="report template the record was issued with (default: bundled)")
    parser.add_argument("--json", action="store_true",
                        help="print the report as JSON (schema calib.verify/1)")
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib.record.keys import load_keyring
    from calib.record.verify import verify_file
    from calib.report import load_template

    keyring = load_keyring(args.keyring) if args.keyring else None
    from calib.service import record_template

    # The template the record names (calib.service), unless --template says otherwise.
    template = load_template(args.template) if args.template else record_template(args.record)
    db = archive_path(args)
    if db is None:
        report = verify_file(args.record, keyring=keyring, template=template)
    else:
        from calib.archive import Archive

        with Archive(db, create=False) as archive:
            report = verify_file(args.record, keyring=keyring, archive=archive,
                                 template=template)
    if args.json:
        json.dump(report.to_json(), sys.stdout, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print(report_text(report))
    return exits.OK if report.ok else exits.INTEGRITY


def report_text(report: VerifyReport) -> str:
    """Verdict line, then one line per problem, then what was checked."""
    count = len(report.problems)
    lines = [f"{report.file}: intact" if report.ok else
             f"{report.file}: NOT VERIFIED, {count} problem{'s' if count != 1 else ''}"]
    lines += [f"  problem: {p.message}" for p in report.problems]
    lines += [f"  checked: {note}" for note in report.notes]
    return "\n".join(lines)
