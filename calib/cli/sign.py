"""``calib sign``: add a reviewed, approved or rejected signature as a new version of a record.

RECORD may be a record PDF or a record JSON file.  OUT's suffix chooses what is
written: ``.json`` writes the new version's canonical record JSON alone;
anything else writes its PDF.  With ``--key`` the PDF is the input PDF with one
more digital signature appended (an incremental update: the bytes signed
before stay as they were); without a key a PDF that has no digital signature is
drawn anew.  OUT must not exist: the version signed is never replaced.

Exit codes: 0 signed; 5 the record does not verify; 6 refused (a sign-off rule);
2 usage error (including an OUT that exists); 3 a record, key or template that cannot
be read, or no passphrase for ``--key``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from calib.cli import exits
from calib.cli.archive import ENV_VAR as ARCHIVE_ENV
from calib.cli.archive import add_archive_option, archive_path
from calib.cli.common import add_debug

ROLES = ("reviewed", "approved", "rejected")
EXIT_INTEGRITY, EXIT_REFUSED = exits.INTEGRITY, exits.REFUSED

EXAMPLES = f"""\
examples:
  calib sign nitrate.pdf --role reviewed --key ~/.calib-keys/tomasz-overgaard.key.json \\
      --out nitrate.v2.pdf
  calib sign nitrate.v2.pdf --role approved --key keys/adaeze-mbeki-hale.key.json \\
      --keyring lab-keyring/ --out nitrate.v3.pdf --archive records.sqlite
  calib sign draft.pdf --role reviewed --name "Tomasz Øvergaard" --out draft.v2.pdf

RECORD is a record PDF or its JSON.  OUT is the new version: a PDF, or the record JSON
alone when OUT ends in .json.  OUT must be a new file: the version signed stays as it was.
With --key (a key from calib keys new; passphrase from CALIB_KEY_PASSPHRASE or a prompt on a
terminal) the signature carries the key holder's printed name, is signed in the record JSON
and is a digital signature in the PDF (ISO 32000 / PAdES) that any PDF reader shows; --name,
if given, must be that name.  Without --key the signature is a printed name only, and every
verification says so.  With --archive, or {ARCHIVE_ENV} set, the new version is filed.

Refused (exit 6): a role already signed; approval before review; any signature after
approval or rejection; a role other than rejected on a rejected curve; a record with no
preparer reviewed or approved; the preparer reviewing or approving, or the reviewer
approving, unless the record's profile allows it ([signoff] allow_preparer_to_review,
allow_preparer_to_approve, allow_reviewer_to_approve); names with invisible characters or
mixed scripts; a signature without a key when the profile sets require_key_signatures; a
--name that is not the key holder's; a printed-name-only signature on a digitally signed PDF.

exit codes: 0 signed, 2 usage error (OUT exists), 3 unreadable record or key, no passphrase,
            key file others can change, 5 the record does not verify, 6 refused by a rule
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "sign", help="sign a record as reviewed, approved or rejected (writes a new version)",
        description="Add a signature (printed name, UTC date and time, meaning; with --key a "
                    "certified key signature and a PDF digital signature) to a calibration "
                    "record, as a new version.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("record", metavar="RECORD", help="record PDF or record JSON to sign")
    parser.add_argument("--role", required=True, choices=ROLES, help="what the signature means")
    parser.add_argument("--name", metavar="NAME",
                        help="printed name of the signer (required without --key; with --key "
                             "it must be the key holder's name)")
    parser.add_argument("--key", metavar="KEY",
                        help="your private key file (NAME.key.json from calib keys new)")
    parser.add_argument("--keyring", metavar="DIR",
                        help="lab keyring: check earlier key signatures before signing")
    parser.add_argument("--meaning", metavar="TEXT",
                        help="meaning of the signature (default: the template's words)")
    parser.add_argument("--out", required=True, metavar="OUT",
                        help="new version to write: .pdf, or .json for the record JSON only")
    add_archive_option(parser, help_text="archive to file the new version in; default: the "
                                         f"{ARCHIVE_ENV} environment variable, if set")
    parser.add_argument("--template", metavar="T",
                        help="report template to draw a new version with (default: the one the record names)")
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib.cli.keys import read_passphrase
    from calib.errors import IntegrityError
    from calib.record.keys import load_signing_key
    from calib.record.signing import SignOffError

    out = Path(args.out)
    if out.exists():
        same = out.resolve() == Path(args.record).resolve()
        print(f"calib sign: error: {out} {'is the record being signed' if same else 'exists'}; "
              "signing writes a new file and never replaces one", file=sys.stderr)
        return 2
    if args.key is None and not (args.name and args.name.strip()):
        print("calib sign: error: give --key (your certified key) or, for a printed-name-only "
              "signature, --name", file=sys.stderr)
        return 2
    key = None
    if args.key:
        key = load_signing_key(args.key, passphrase=read_passphrase(purpose=f"key {args.key}"))
    from calib import service

    db = archive_path(args)
    as_json = out.suffix.lower() == ".json"
    try:
        outcome = service.sign(args.record, role=args.role, name=args.name,
                               meaning=args.meaning, key=key, keyring=args.keyring,
                               template=args.template, archive=db, want_pdf=not as_json,
                               out=out)
    except IntegrityError as exc:
        print(f"calib sign: not signed: {exc}", file=sys.stderr)
        return EXIT_INTEGRITY
    except SignOffError as exc:
        print(f"calib sign: refused: {exc}", file=sys.stderr)
        return EXIT_REFUSED
    signed, entries = outcome.signed, outcome.entries
    record = signed.record
    entry = record.body["signatures"][-1]
    print(f"Record {record.record_id} version {len(record.body['signatures'])} written to {out}\n"
          f"  {entry['role']} by {entry['name']} at {entry['signed_at']}"
          + (f", signed with the key of {key.holder} ({key.key_id})" if key else
             ", printed name only (no key): not key-verified")
          + f"\n  version digest {record.digest}")
    if not record.body["signatures"][0].get("key_id"):
        print("  draft: not signed by an issuer")
    for e in entries:
        print(f"  filed in {db} as entry seq {e.seq} ({e.kind}, version digest "
              f"{e.version_digest[:16]}…)")
    return 0
