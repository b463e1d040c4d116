"""Options and helpers shared by the commands."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from calib.options import Model, Weighting

MODELS = tuple(m.value for m in Model)
WEIGHTINGS = tuple(w.value for w in Weighting)


def confidence_level(text: str) -> float:
    """argparse type: a confidence level from 0.5 to below 1 (``95`` is read as 0.95)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number such as 0.95, got {text!r}") from None
    if 50 <= value < 100:
        value /= 100
    if not 0.5 <= value < 1:
        raise argparse.ArgumentTypeError(f"must be from 0.5 to below 1 (e.g. 0.95), got {text!r}")
    return value


def add_fit_options(parser: argparse.ArgumentParser) -> None:
    """--model, --weighting, --confidence, --profile, --sheet."""
    parser.add_argument("--model", choices=MODELS, help="calibration model (default: the profile's)")
    parser.add_argument("--weighting", choices=WEIGHTINGS,
                        help="weights of the standards (default: the profile's)")
    parser.add_argument("--confidence", type=confidence_level, metavar="C",
                        help="confidence level of intervals, e.g. 0.95 (default: the profile's)")
    parser.add_argument("--profile", default="default", metavar="P",
                        help="acceptance profile: a shipped name or a TOML file (default: default)")
    parser.add_argument("--sheet", metavar="S",
                        help="sheet name or 0-based index (default: first sheet with standards)")


def add_import_options(parser: argparse.ArgumentParser) -> None:
    """--map, --show-import: how the run file is read, and showing what was recognised."""
    parser.add_argument("--map", metavar="TOML",
                        help="import map for this instrument method's exports (column names, "
                             "sheet, header row, sample-type patterns, units)")
    parser.add_argument("--show-import", action="store_true",
                        help="print what the importer recognised (sheet, layout, columns, units, "
                             "metadata, sample types, exclusions) and stop")


def add_force(parser: argparse.ArgumentParser, *, what: str) -> None:
    """--force: replace existing record files instead of refusing."""
    parser.add_argument("--force", action="store_true",
                        help=f"replace {what} that already exist (default: refuse, exit 2)")


def add_template_option(parser: argparse.ArgumentParser) -> None:
    """--template: the report template of this command's PDF (default: the lab's)."""
    parser.add_argument("--template", metavar="TOML",
                        help="report template (lab letterhead and wording) of the PDF; "
                             "default: the one set up with calib lab init, else none "
                             "(\"Laboratory not configured\")")


def refuse_existing(command: str, paths: list[Path], *, force: bool) -> bool:
    """Say so and return True when a record file would be overwritten without --force."""
    existing = [p for p in paths if p.exists()] if not force else []
    if existing:
        print(f"calib {command}: error: {existing[0]} exists; records are never overwritten "
              f"silently: choose another name, or add --force to replace it", file=sys.stderr)
    return bool(existing)


def add_debug(parser: argparse.ArgumentParser) -> None:
    """--debug: show the traceback instead of one line."""
    parser.add_argument("--debug", action="store_true", help="show tracebacks on errors")


def sheet_arg(value: str | None) -> str | int | None:
    """A --sheet value: an index when it is a whole number, else a name."""
    if value is None:
        return None
    return int(value) if value.isdigit() else value
