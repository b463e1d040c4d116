"""``calib serve``: the local web page for the bench, on this computer."""

from __future__ import annotations

import argparse
import sys

from calib.cli.archive import add_archive_option, archive_path
from calib.cli.common import add_debug

_DEFAULT_PORT = 8750

EXAMPLES = """\
examples:
  calib serve                                  http://127.0.0.1:8750/ (open it in a browser)
  calib serve --archive records.sqlite --open  with the archive, and open the browser
  calib serve --port 9000 --templates lab-templates/
  calib serve --archive records.sqlite --keyring lab-keyring/   Verify page checks lab keys
  calib serve --host 0.0.0.0 --allow-host labpc.fernbrook.example \
      --tls-cert labpc.crt --tls-key labpc.key     other computers too, over HTTPS
  calib serve --archive postgresql://calib@lab-db/records --users --signing-keys keys/ \
      --host 0.0.0.0 --allow-host calib.fernbrook.example --tls-cert s.crt --tls-key s.key
                                               the lab's shared server: everyone signs in

The server listens on 127.0.0.1 unless --host says otherwise.  On any other interface it
needs HTTPS (--tls-cert and --tls-key), or --insecure-http to accept plain HTTP on a network
you trust (a private key is then never accepted from another computer); every browser must
present the access token printed at start.  The server answers only to the loopback names
and those given with --allow-host (a request naming another host gets 400: this stops
DNS-rebinding attacks).  When the archive has users (calib users add), every page needs
sign-in instead of the access token, each action needs its role, and signing asks for the
password again.  Stop it with Ctrl+C.
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "serve", help="serve the local web page: check, issue, sign, archive, quantify",
        description="Run calib's pages in a local web server; everything calib check, "
                    "quantify, sign, verify, archive and trend do, in a browser.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--port", type=int, default=_DEFAULT_PORT, metavar="N",
                        help=f"port to listen on (default {_DEFAULT_PORT})")
    parser.add_argument("--host", default="127.0.0.1", metavar="H",
                        help="interface to listen on (default 127.0.0.1, this computer only)")
    add_archive_option(parser, help_text="archive to search and file records in; default: "
                                         "the CALIB_ARCHIVE environment variable, when set")
    parser.add_argument("--templates", metavar="DIR",
                        help="folder of the lab's report templates (*.toml), offered by name "
                             "when issuing a record")
    parser.add_argument("--keyring", metavar="DIR",
                        help="the lab's public keys (*.pub.pem): the Verify pages check key "
                             "signatures with them")
    parser.add_argument("--allow-host", action="append", default=[], metavar="NAME",
                        help="a host name browsers use to reach this server, besides localhost "
                             "and 127.0.0.1; repeatable")
    parser.add_argument("--tls-cert", metavar="PEM", help="TLS certificate: serve over HTTPS")
    parser.add_argument("--tls-key", metavar="PEM", help="private key of --tls-cert")
    parser.add_argument("--insecure-http", action="store_true",
                        help="allow plain HTTP beyond this computer (not recommended: forms "
                             "and records cross the network unencrypted)")
    parser.add_argument("--users", action="store_true",
                        help="require sign-in (the default whenever the archive has users)")
    parser.add_argument("--idle-minutes", type=float, default=30, metavar="N",
                        help="with users: sign out a session unused for N minutes (default 30)")
    parser.add_argument("--signing-keys", metavar="DIR",
                        help="with users: folder of people's encrypted keys (NAME.key.json), "
                             "each unlocked by the passphrase its holder types when signing")
    parser.add_argument("--open", action="store_true", help="open the page in a browser")
    add_debug(parser)
    parser.set_defaults(handler=run)


def _server_url(host: str, port: int, token: str | None = None, *, tls: bool = False) -> str:
    """The address to open.

    Examples
    --------
    >>> _server_url("127.0.0.1", 8750)
    'http://127.0.0.1:8750/'
    >>> _server_url("::1", 8750, "abc", tls=True)
    'https://[::1]:8750/?token=abc'
    """
    shown = f"[{host}]" if ":" in host else host
    return (f"{'https' if tls else 'http'}://{shown}:{port}/"
            + (f"?token={token}" if token else ""))


_WILDCARDS = ("0.0.0.0", "::", "")


def run(args: argparse.Namespace) -> int:
    import os

    # Before numpy loads: one BLAS thread per request (calib.web.threads says why).
    from calib.web.threads import limit_blas_threads

    blas = limit_blas_threads()
    try:
        import uvicorn

        from calib.web import create_app
        from calib.web.security import is_loopback, new_token
    except ImportError as exc:
        print(f"calib serve: error: the web page needs {exc.name}; install it with "
              "pip install 'calib[web]'", file=sys.stderr)
        return 3
    if not 0 < args.port < 65536:
        print(f"calib serve: error: --port must be from 1 to 65535, got {args.port}",
              file=sys.stderr)
        return 2
    if args.templates and not os.path.isdir(args.templates):
        print(f"calib serve: error: --templates {args.templates} is not a folder",
              file=sys.stderr)
        return 3
    if args.keyring and not os.path.isdir(args.keyring):
        print(f"calib serve: error: --keyring {args.keyring} is not a folder", file=sys.stderr)
        return 3
    if bool(args.tls_cert) != bool(args.tls_key):
        print("calib serve: error: --tls-cert and --tls-key go together: give both",
              file=sys.stderr)
        return 2
    for option, path in (("--tls-cert", args.tls_cert), ("--tls-key", args.tls_key)):
        if path and not os.path.isfile(path):
            print(f"calib serve: error: {option} {path}: file not found", file=sys.stderr)
            return 3
    tls = bool(args.tls_cert)
    loopback = is_loopback(args.host)
    if not loopback and not tls and not args.insecure_http:
        print(f"calib serve: error: --host {args.host} reaches other computers, and plain HTTP "
              "would carry forms, records and passphrases unencrypted: give --tls-cert and "
              "--tls-key (or put an HTTPS proxy in front and add --insecure-http)",
              file=sys.stderr)
        return 2
    allowed = list(args.allow_host)
    if not loopback and args.host not in _WILDCARDS:
        allowed.append(args.host)  # the name it listens on is one browsers may use
    if args.signing_keys and not os.path.isdir(args.signing_keys):
        print(f"calib serve: error: --signing-keys {args.signing_keys} is not a folder",
              file=sys.stderr)
        return 3
    from calib.web.auth import server_has_users

    users = True if args.users else server_has_users(archive_path(args))
    # With users, signing in replaces the access token (one token per instance would stop
    # several instances behind one proxy from serving the same people).
    token = None if loopback or users else new_token()
    try:
        app = create_app(archive=archive_path(args), templates=args.templates,
                         access_token=token, allowed_hosts=allowed, keyring=args.keyring,
                         users=users, idle_minutes=args.idle_minutes,
                         signing_keys=args.signing_keys)
    except ValueError as exc:
        print(f"calib serve: error: {exc}", file=sys.stderr)
        return 2
    url = _server_url(args.host, args.port, token, tls=tls)
    print(f"calib: serving on {url}", flush=True)
    if token:
        print("calib: listening beyond this computer; every browser needs the access token "
              f"above ({token})", flush=True)
    print(f"calib: {blas}", flush=True)
    if users:
        print("calib: every page needs sign-in (users of the archive); the lab's computerised-"
              "system validation (21 CFR 11, EU GMP Annex 11, GAMP 5) remains the lab's "
              "responsibility", flush=True)
    print("calib: press Ctrl+C to stop", flush=True)
    if args.open:
        import webbrowser

        webbrowser.open(url)
    if not loopback and not allowed:
        print("calib: only the names localhost and 127.0.0.1 are answered; add the name other "
              "computers use with --allow-host NAME", flush=True)
    tls_options = {"ssl_certfile": args.tls_cert, "ssl_keyfile": args.tls_key} if tls else {}
    uvicorn.run(app, host=args.host, port=args.port, log_level="warning", **tls_options)
    return 0
