"""``calib keys new``: make a signer's Ed25519 key pair; and the passphrase rules of the CLI."""

from __future__ import annotations

import argparse
import os
import sys

from calib.cli.common import add_debug

PASSPHRASE_ENV = "CALIB_KEY_PASSPHRASE"

EXAMPLES = f"""\
examples:
  calib keys new t-overgaard --out ~/.calib-keys
  {PASSPHRASE_ENV}='heron 42 weir' calib keys new r-okafor --out keys/

The passphrase encrypting the private key comes from the environment variable
{PASSPHRASE_ENV} or, on a terminal, is asked for twice.  Copy NAME.pub.pem into
the lab keyring folder; keep NAME.key.pem to yourself.

exit codes: 0 key pair written, 2 usage error, 3 no passphrase, or the files exist
"""


def read_passphrase(*, purpose: str, confirm: bool = False) -> bytes:
    """The passphrase from ``CALIB_KEY_PASSPHRASE`` or, only on a terminal, a prompt.

    Without either it fails at once with a clear error: a command run from a
    script or a test must never wait for input that cannot come.
    """
    from calib.record.keys import PassphraseError

    value = os.environ.get(PASSPHRASE_ENV)
    if value is not None:
        if not value:
            raise PassphraseError(f"{PASSPHRASE_ENV} is set but empty; a key needs a passphrase")
        return value.encode("utf-8")
    if not sys.stdin.isatty():
        raise PassphraseError(
            f"no passphrase for {purpose}: set {PASSPHRASE_ENV}, or run calib on a terminal "
            "to be asked for one")
    import getpass

    first = getpass.getpass(f"Passphrase for {purpose}: ")
    if not first:
        raise PassphraseError("the passphrase must not be empty")
    if confirm and getpass.getpass("The same passphrase again: ") != first:
        raise PassphraseError("the two passphrases differ; nothing was written")
    return first.encode("utf-8")


def _key_name(text: str) -> str:
    from calib.record.keys import check_key_name

    try:
        return check_key_name(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "keys", help="make signing keys (Ed25519) for calib sign",
        description="Signing keys for calib sign: a key pair per signer, and a keyring folder "
                    "of public keys that calib verify checks signatures with.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    actions = parser.add_subparsers(dest="keys_command", metavar="ACTION")
    actions.required = True
    new = actions.add_parser(
        "new", help="make a key pair: NAME.key.pem (encrypted) and NAME.pub.pem",
        description="Make an Ed25519 key pair. The private key is written encrypted with a "
                    "passphrase; the public key is for the lab keyring.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    new.add_argument("name", metavar="NAME", type=_key_name,
                     help="key name: letters, digits, '.', '_' or '-' (e.g. t-overgaard)")
    new.add_argument("--out", metavar="DIR", required=True,
                     help="folder to write NAME.key.pem and NAME.pub.pem to")
    add_debug(new)
    new.set_defaults(handler=run_new)


def run_new(args: argparse.Namespace) -> int:
    from calib.record.keys import new_key

    passphrase = read_passphrase(purpose=f"the new key {args.name}", confirm=True)
    made = new_key(args.name, folder=args.out, passphrase=passphrase)
    print(f"Key pair {made.name} written:\n"
          f"  private key {made.private_path} (encrypted with the passphrase; keep it to "
          "yourself)\n"
          f"  public key  {made.public_path} (copy it into the lab keyring folder)\n"
          f"Key id: {made.key_id}")
    return 0
