"""``calib sign``: add a reviewed, approved or rejected signature as a new version of a record.

RECORD may be a record PDF or a record JSON file.  OUT's suffix chooses what is
written: ``.json`` writes the new version's canonical record JSON alone;
anything else writes its PDF, which carries the same JSON attached inside
(one file holds both, so nothing is written beside it).  OUT must not exist:
the version signed is never replaced.

Exit codes: 0 signed; 5 the record does not verify; 6 refused (the sign-off
rules forbid the signature, or the archive holds a version this one does not
continue): a policy refusal, not unreadable input; 2 usage error (including
an OUT that exists); 3 a record, key or template that cannot be read, or no
passphrase for ``--key``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from calib.cli.archive import ENV_VAR as ARCHIVE_ENV
from calib.cli.archive import add_archive_option, archive_path
from calib.cli import exits
from calib.cli.common import add_debug

ROLES = ("reviewed", "approved", "rejected")

EXAMPLES = f"""\
examples:
  calib sign nitrate.pdf --role reviewed --name "T. Øvergaard" --out nitrate.v2.pdf
  calib sign nitrate.v2.pdf --role approved --name "M. Adeyemi" --key keys/m-adeyemi.key.pem \\
      --out nitrate.v3.pdf --archive records.sqlite
  calib sign fluoride.pdf --role rejected --name "T. Øvergaard" --out fluoride.v2.pdf

RECORD is a record PDF or its JSON.  OUT is the new version: a PDF (with the record JSON
attached inside), or the record JSON alone when OUT ends in .json.  OUT must be a new file:
the version signed stays as it was.  With --key the signature is also made with the Ed25519
key (passphrase from CALIB_KEY_PASSPHRASE, or a prompt
on a terminal).  With --archive, or {ARCHIVE_ENV} set, the new version is filed in the
archive (and the version signed, if the archive does not hold it yet).

Refused (exit 6; exit 5 for a record that does not verify): a role already signed; approval before
review; any signature after approval or rejection; a role other than rejected on a rejected
curve; the preparer reviewing or approving unless the record's profile allows it
([signoff] allow_preparer_to_review / allow_preparer_to_approve).

exit codes: 0 signed, 6 refused by a sign-off rule, 5 record not verified, 2 usage error
            (OUT exists), 3 unreadable record or key
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "sign", help="sign a record as reviewed, approved or rejected (writes a new version)",
        description="Add a signature (printed name, UTC date and time, meaning; optionally an "
                    "Ed25519 key signature) to a calibration record, as a new version.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("record", metavar="RECORD", help="record PDF or record JSON to sign")
    parser.add_argument("--role", required=True, choices=ROLES, help="what the signature means")
    parser.add_argument("--name", required=True, metavar="NAME",
                        help="printed name of the signer")
    parser.add_argument("--key", metavar="KEY",
                        help="private key file (NAME.key.pem) to sign with")
    parser.add_argument("--meaning", metavar="TEXT",
                        help="meaning of the signature (default: the template's words)")
    parser.add_argument("--out", required=True, metavar="OUT",
                        help="new version to write: .pdf, or .json for the record JSON only")
    add_archive_option(parser, help_text="archive to file the new version in; default: the "
                                         f"{ARCHIVE_ENV} environment variable, if set")
    parser.add_argument("--template", metavar="T",
                        help="report template the record was issued with (default: bundled)")
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib.cli.keys import read_passphrase
    from calib.output import write_atomic
    from calib.record.keys import load_signing_key
    from calib.record.signing import SignOffError
    from calib.record.signoff import file_versions, sign_file
    from calib.report import load_template

    out = Path(args.out)
    if out.exists():
        same = out.resolve() == Path(args.record).resolve()
        print(f"calib sign: error: {out} {'is the record being signed' if same else 'exists'}; "
              "signing writes a new file and never replaces one", file=sys.stderr)
        return 2
    key = None
    if args.key:
        key = load_signing_key(args.key, passphrase=read_passphrase(purpose=f"key {args.key}"))
    from calib.service import record_template

    # The template the record names (calib.service), unless --template says otherwise.
    template = load_template(args.template) if args.template else record_template(args.record)
    db = archive_path(args)
    try:
        signed = sign_file(args.record, role=args.role, name=args.name, meaning=args.meaning,
                           key=key, template=template)
        entries = []
        if db is not None:
            from calib.archive import Archive

            with Archive(db) as archive:
                entries = file_versions(archive, signed)
    except SignOffError as exc:
        print(f"calib sign: refused: {exc}", file=sys.stderr)
        # Not verifying is an integrity failure; any other refusal is a sign-off rule.
        return (exits.INTEGRITY if str(exc).startswith("the record does not verify")
                else exits.REFUSED)
    record = signed.record
    write_atomic(out, record.canonical if out.suffix.lower() == ".json" else signed.pdf)
    entry = record.body["signatures"][-1]
    print(f"Record {record.record_id} version {len(record.body['signatures'])} written to {out}\n"
          f"  {entry['role']} by {entry['name']} at {entry['signed_at']}"
          + (f", signed with key {key.key_id} ({key.name})" if key else ", without a key")
          + f"\n  version digest {record.digest}")
    for e in entries:
        print(f"  filed in {db} as entry seq {e.seq} ({e.kind}, version digest "
              f"{e.version_digest[:16]}…)")
    return 0
