"""``calib`` command line: parse, call the library, render, exit.

Exit codes are in :mod:`calib.cli.exits` (one meaning each); this module is the one
place where an exception becomes an exit code.  Heavy libraries are imported inside
the commands so ``calib --help`` is fast.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from calib import __version__
from calib.cli import (
    archive,
    check,
    demo,
    exits,
    keys,
    lab,
    profiles,
    quantify,
    serve,
    sign,
    trend,
    users,
    verify,
)

_EXIT_OK, _EXIT_NOT_ACCEPTED, EXIT_USAGE, _EXIT_INPUT, _EXIT_INTERNAL = 0, 1, 2, 3, 4
EXIT_INTEGRITY, EXIT_REFUSED, _EXIT_FLAGGED = exits.INTEGRITY, exits.REFUSED, exits.FLAGGED

_DESCRIPTION = """\
Validate calibration curves from instrument exports and issue calibration records.

examples:
  calib demo                                   check the bundled demo runs, write their PDF records
  calib check run.xlsx                         fit and judge every analyte, print the verdicts
  calib check run.csv --weighting 1/x2 --pdf record.pdf --prepared-by "A. Analyst"
  calib check run.xlsx --json > result.json    machine-readable result (schema calib.check/1)
  calib quantify record.pdf batch.xlsx --pdf results.pdf   samples with intervals and flags
  calib profiles show bioanalytical > sop.toml a shipped acceptance profile to copy and edit
  calib sign record.pdf --role reviewed --name "B. Reviewer" --out record-v2.pdf
  calib verify record-v2.pdf --keyring lab-keys/
  calib archive list --analyte Nitrate-N       records filed with --archive (or CALIB_ARCHIVE)
  calib trend Nitrate-N --pdf trend.pdf        slope, intercept and residual SD over time
  calib serve --archive records.sqlite         the same in a browser, on this computer
  calib lab init --template our-lab.toml       once: the lab's letterhead on every record
  calib users add "Mira Holt" --role administrator --archive records.sqlite   a shared server

exit codes:
""" + "\n".join(f"  {code}  {meaning}" for code, meaning in exits.TABLE) + "\n"


def _build_parser() -> argparse.ArgumentParser:
    """The argument parser of every command."""
    parser = argparse.ArgumentParser(
        prog="calib", description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--version", action="version", version=f"calib {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for module in (check, quantify, demo, profiles, sign, verify, keys, archive, trend, serve,
                   lab, users):
        module.add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit code."""
    parser = _build_parser()
    args = parser.parse_args(argv)
    from calib.errors import CalibError

    try:
        return int(args.handler(args))
    except CalibError as exc:
        if args.debug:
            raise
        code = exits.code_for(exc)
        word = "refused" if code == exits.REFUSED else "error"
        print(f"calib: {word}: {_one_line(str(exc))}", file=sys.stderr)
        return code
    except BrokenPipeError:
        # The reader of our output went away (e.g. `calib check ... | head`): not an error of ours.
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return _EXIT_OK
    except KeyboardInterrupt:
        print("calib: interrupted; no output file was written", file=sys.stderr)
        return 130
    except Exception as exc:
        if args.debug:
            raise
        if isinstance(exc, FileExistsError):
            print(f"calib: error: {exc.filename} exists; records are never overwritten "
                  "silently: choose another name, or add --force to replace it", file=sys.stderr)
            return exits.USAGE
        disk = exits.disk_message(exc)
        if disk is not None:
            print(f"calib: error: {_one_line(disk)}", file=sys.stderr)
            return exits.INPUT
        print(
            f"calib: internal error: {type(exc).__name__}: {_one_line(str(exc))} "
            "(run again with --debug for the traceback, and please report it)",
            file=sys.stderr,
        )
        return _EXIT_INTERNAL


def _one_line(text: str) -> str:
    return " ".join(text.split())


if __name__ == "__main__":
    sys.exit(main())
