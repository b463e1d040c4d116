"""``calib verify``: check that a record PDF (or JSON) is what was issued and signed."""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING

from calib.cli import exits
from calib.cli.archive import ENV_VAR as ARCHIVE_ENV
from calib.cli.archive import add_archive_option, archive_path
from calib.cli.common import add_debug

if TYPE_CHECKING:
    from calib.record.verify import VerifyReport

_EXIT_VERIFIED, _EXIT_NOT_SIGNED, EXIT_INTEGRITY = exits.OK, exits.NOT_ACCEPTED, exits.INTEGRITY

EXAMPLES = f"""\
examples:
  calib verify nitrate.v3.pdf --keyring lab-keyring/
  calib verify nitrate.v3.pdf --keyring lab-keyring/ --archive records.sqlite
  calib verify nitrate.v3.json --keyring lab-keyring/ --json

Checks the record data (canonical JSON per RFC 8785, its digests and the links between
versions), every digital signature of the PDF (ISO 32000 / PAdES: intact, and nothing but
later signatures changed the file), every key signature (certificate issued by a lab
authority in the keyring, valid at the signing time, printed name = key holder), the
sign-off rules, and with --archive (or {ARCHIVE_ENV} set) the archived copy and chain.
Drawing the pages again is only a note: a layout change in a later calib is not a problem.
A key signature that cannot be checked (no --keyring, or its authority is not in it) counts
as a problem.  
The first line says "verified" (intact, signed by its issuer, every signature verified with
a certified key) or "intact, origin not verified throughout" (a draft not signed by an
issuer, or printed-name-only signatures: anyone with calib could make such a file).

exit codes: 0 intact (verified, or a draft: the first line says which),
            1 with --require-signed: intact but not signed throughout,
            2 usage error, 3 unreadable file, keyring or archive,
            5 NOT VERIFIED (each problem named on its own line)
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "verify", help="check a record PDF or JSON: content, signatures, archive",
        description="Verify a calibration record: content digest, signatures, archive entry.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("record", metavar="RECORD", help="record PDF or record JSON")
    parser.add_argument("--keyring", metavar="DIR",
                        help="folder of lab authority certificates (*.cert.pem; calib 0.1.0 "
                             "public keys *.pub.pem)")
    add_archive_option(parser, help_text="archive to look the version up in; default: the "
                                         f"{ARCHIVE_ENV} environment variable, if set")
    parser.add_argument("--template", metavar="T",
                        help="report template for the re-drawing note (default: bundled)")
    parser.add_argument("--require-signed", action="store_true",
                        help="exit 1 unless the record is signed by its issuer and every "
                             "signature is key-verified (a lab whose records are all signed)")
    parser.add_argument("--json", action="store_true",
                        help="print the report as JSON (schema calib.verify/2)")
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib import service

    # The template the record names, unless --template says otherwise (calib.service).
    report = service.verify(args.record, keyring=args.keyring, archive=archive_path(args),
                            template=args.template)
    if args.json:
        json.dump(report.to_json(), sys.stdout, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print(_report_text(report))
    return _exit_code(report, require_signed=args.require_signed)


def _exit_code(report: VerifyReport, *, require_signed: bool = False) -> int:
    """0 intact (verified, or a draft unless ``require_signed``), 1 not signed, 5 not verified."""
    if report.verdict == "not verified":
        return EXIT_INTEGRITY
    if report.verdict == "intact" and require_signed:
        return _EXIT_NOT_SIGNED
    return _EXIT_VERIFIED


def _report_text(report: VerifyReport) -> str:
    """Verdict line, then one line per problem, then what was checked."""
    from calib.cli import render

    lines = [f"{report.file}: {report.summary()}"]
    lines += [f"  problem: {p.message}" for p in report.problems]
    lines += [f"  checked: {note}" for note in report.notes]
    lines.append(render.cautions_text())
    return "\n".join(lines)
