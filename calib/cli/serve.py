"""``calib serve``: the local web page for the bench, on this computer."""

from __future__ import annotations

import argparse
import sys

from calib.cli.archive import add_archive_option, archive_path
from calib.cli.common import add_debug

DEFAULT_PORT = 8750

EXAMPLES = """\
examples:
  calib serve                                  http://127.0.0.1:8750/ (open it in a browser)
  calib serve --archive records.sqlite --open  with the archive, and open the browser
  calib serve --port 9000 --templates lab-templates/
  calib serve --host 0.0.0.0                   other computers too: prints an access token

The server listens on 127.0.0.1 unless --host says otherwise; on any other interface
every browser must present the access token printed at start.  Stop it with Ctrl+C.
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "serve", help="serve the local web page: check, issue, sign, archive, quantify",
        description="Run calib's pages in a local web server; everything calib check, "
                    "quantify, sign, verify, archive and trend do, in a browser.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--port", type=int, default=DEFAULT_PORT, metavar="N",
                        help=f"port to listen on (default {DEFAULT_PORT})")
    parser.add_argument("--host", default="127.0.0.1", metavar="H",
                        help="interface to listen on (default 127.0.0.1, this computer only)")
    add_archive_option(parser, help_text="archive to search and file records in; default: "
                                         "the CALIB_ARCHIVE environment variable, when set")
    parser.add_argument("--templates", metavar="DIR",
                        help="folder of the lab's report templates (*.toml), offered by name "
                             "when issuing a record")
    parser.add_argument("--open", action="store_true", help="open the page in a browser")
    add_debug(parser)
    parser.set_defaults(handler=run)


def server_url(host: str, port: int, token: str | None = None) -> str:
    """The address to open.

    Examples
    --------
    >>> server_url("127.0.0.1", 8750)
    'http://127.0.0.1:8750/'
    >>> server_url("::1", 8750, "abc")
    'http://[::1]:8750/?token=abc'
    """
    shown = f"[{host}]" if ":" in host else host
    return f"http://{shown}:{port}/" + (f"?token={token}" if token else "")


def run(args: argparse.Namespace) -> int:
    import os

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
    token = None if is_loopback(args.host) else new_token()
    app = create_app(archive=archive_path(args), templates=args.templates, access_token=token)
    url = server_url(args.host, args.port, token)
    print(f"calib: serving on {url}", flush=True)
    if token:
        print("calib: listening beyond this computer; every browser needs the access token "
              f"above ({token})", flush=True)
    print("calib: press Ctrl+C to stop", flush=True)
    if args.open:
        import webbrowser

        webbrowser.open(url)
    uvicorn.run(app, host=args.host, port=args.port, log_level="warning")
    return 0
