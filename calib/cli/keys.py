"""``calib keys``: the lab's signing authority and each signer's certified key; passphrase rules."""

from __future__ import annotations

import argparse
import os
import sys

from calib.cli.common import add_debug

_PASSPHRASE_ENV = "CALIB_KEY_PASSPHRASE"
_AUTHORITY_ENV = "CALIB_AUTHORITY_PASSPHRASE"

EXAMPLES = f"""\
examples:
  calib keys lab-init --lab "Fernbrook Water Laboratory" --out lab-authority/
  calib keys new "Tomasz Øvergaard" --authority lab-authority/lab-authority.key.json \\
      --out ~/.calib-keys
  cp lab-authority/lab-authority.cert.pem lab-keyring/     # what calib verify --keyring trusts

The lab makes its signing authority once (keep lab-authority.key.json offline, with its
passphrase known to the people who issue keys).  Each signer gets a key whose certificate
names them by their full printed name: a signature made with it always carries that name.
Passphrases (at least 12 characters) come from {_PASSPHRASE_ENV} (the new or used key) and
{_AUTHORITY_ENV} (the authority key), or, on a terminal, are asked for.

exit codes: 0 written, 2 usage error, 3 no or short passphrase, files exist, unreadable or
            unprotected authority key
"""


def read_passphrase(*, purpose: str, confirm: bool = False, env: str = _PASSPHRASE_ENV) -> bytes:
    """The passphrase from the environment variable ``env`` or, only on a terminal, a prompt.

    Without either it fails at once with a clear error: a command run from a
    script or a test must never wait for input that cannot come.
    """
    from calib.record.keys import PassphraseError

    value = os.environ.get(env)
    if value is not None:
        if not value:
            raise PassphraseError(f"{env} is set but empty; a key needs a passphrase")
        return value.encode("utf-8")
    if not sys.stdin.isatty():
        raise PassphraseError(
            f"no passphrase for {purpose}: set {env}, or run calib on a terminal to be asked "
            "for one")
    import getpass

    first = getpass.getpass(f"Passphrase for {purpose}: ")
    if not first:
        raise PassphraseError("the passphrase must not be empty")
    if confirm and getpass.getpass("The same passphrase again: ") != first:
        raise PassphraseError("the two passphrases differ; nothing was written")
    return first.encode("utf-8")


def _printed_name(text: str) -> str:
    from calib.record.identity import check_printed_name

    try:
        return check_printed_name(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "keys", help="the lab's signing authority and each signer's certified key",
        description="Signing keys for calib: a lab authority certifies one key per person, by "
                    "full printed name; calib verify trusts the authority's certificate.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    actions = parser.add_subparsers(dest="keys_command", metavar="ACTION")
    actions.required = True
    init = actions.add_parser(
        "lab-init", help="make the lab's signing authority (once per lab)",
        description="Make the lab's signing authority: lab-authority.key.json (encrypted) and "
                    "lab-authority.cert.pem (copy it into the lab keyring).",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    init.add_argument("--lab", required=True, metavar="NAME", type=_printed_name,
                      help='the laboratory\'s name, e.g. "Fernbrook Water Laboratory"')
    init.add_argument("--out", required=True, metavar="DIR", help="folder to write to")
    add_debug(init)
    init.set_defaults(handler=_run_lab_init)
    new = actions.add_parser(
        "new", help="make a signer's key and certificate, issued by the lab authority",
        description="Make a signer's ECDSA P-256 key (encrypted with their passphrase) and an "
                    "X.509 certificate naming them, signed by the lab authority.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    new.add_argument("holder", metavar="FULL_NAME", type=_printed_name,
                     help='the signer\'s full printed name, e.g. "Tomasz Øvergaard"')
    new.add_argument("--authority", required=True, metavar="KEY",
                     help="the lab authority key (lab-authority.key.json)")
    new.add_argument("--out", required=True, metavar="DIR",
                     help="folder to write NAME.key.json and NAME.cert.pem to")
    add_debug(new)
    new.set_defaults(handler=_run_new)


def _run_lab_init(args: argparse.Namespace) -> int:
    from calib.record.keys import lab_init

    passphrase = read_passphrase(purpose="the lab authority key", confirm=True)
    made = lab_init(args.lab, folder=args.out, passphrase=passphrase)
    print(f"Lab authority {made.holder} written:\n"
          f"  private key  {made.private_path} (encrypted; keep it offline)\n"
          f"  certificate  {made.certificate_path} (copy it into the lab keyring folder)\n"
          f"Key id: {made.key_id}")
    return 0


def _run_new(args: argparse.Namespace) -> int:
    from calib.record.keys import load_signing_key, new_key

    authority = load_signing_key(args.authority, passphrase=read_passphrase(
        purpose=f"the lab authority key {args.authority}", env=_AUTHORITY_ENV))
    if not authority.is_authority:
        print(f"calib keys new: error: {args.authority} is the key of {authority.holder}, not "
              "the lab authority key (lab-authority.key.json from calib keys lab-init)",
              file=sys.stderr)
        return 2
    passphrase = read_passphrase(purpose=f"the new key of {args.holder}", confirm=True)
    made = new_key(args.holder, folder=args.out, passphrase=passphrase, authority=authority)
    print(f"Key of {made.holder} written:\n"
          f"  private key  {made.private_path} (encrypted with the passphrase; keep it to "
          "yourself)\n"
          f"  certificate  {made.certificate_path} (issued by {authority.holder})\n"
          f"Key id: {made.key_id}")
    return 0
