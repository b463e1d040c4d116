"""Options and helpers shared by the commands."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from calib.errors import OptionError
from calib.options import Model, Weighting, parse_confidence, parse_option

MODELS = tuple(m.value for m in Model)
WEIGHTINGS = tuple(w.value for w in Weighting)


def _confidence_level(text: str) -> float:
    """argparse type: a confidence level, a fraction from 0.5 to below 1 (``95`` is refused).

    The rule of :func:`calib.options.check_confidence`, as in the web form, the
    profile and the library.
    """
    try:
        return parse_confidence(text)
    except OptionError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _model(text: str) -> Model:
    try:
        return parse_option(Model, text, name="model")  # type: ignore[return-value]
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _weighting(text: str) -> Weighting:
    try:
        return parse_option(Weighting, text, name="weighting")  # type: ignore[return-value]
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def add_fit_options(parser: argparse.ArgumentParser) -> None:
    """--model, --weighting, --confidence, --profile, --sheet (read into typed values)."""
    parser.add_argument("--model", type=_model, metavar="{" + ",".join(MODELS) + "}",
                        help="calibration model, e.g. --model quadratic; mean-rf (the mean "
                             "response factor) is fitted with its own weighting 1/x2 "
                             "(default: the profile's)")
    parser.add_argument("--weighting", type=_weighting, metavar="{" + ",".join(WEIGHTINGS) + "}",
                        help="weights of the standards, e.g. --weighting 1/x2; mean-rf takes "
                             "1/x2 and no other (default: the profile's)")
    parser.add_argument("--confidence", type=_confidence_level, metavar="C",
                        help="confidence level of intervals, a fraction from 0.5 to below 1, "
                             "e.g. --confidence 0.99 (95 is refused: write 0.95; default: the "
                             "profile's)")
    parser.add_argument("--profile", default="default", metavar="P",
                        help="acceptance profile: a shipped name or a TOML file (default: default)")
    parser.add_argument("--sheet", metavar="S",
                        help="sheet name or 0-based index (default: first sheet with standards)")


def refuse_fit_options(command: str, args: argparse.Namespace) -> bool:
    """Say so and return True when --model and --weighting cannot go with each other or the profile.

    Checked before any file is read, so the answer is a usage error (exit 2) even
    with several run files; the profile's ``[[analyte]]`` entries are checked too.
    """
    if args.model is None and args.weighting is None:
        return False  # the profile's own options were checked when it was loaded
    from calib.checks.overrides import given_options
    from calib.checks.profile import load_profile

    try:
        given_options(load_profile(args.profile or "default"), args.model, args.weighting,
                      args.confidence)
    except OptionError as exc:
        print(f"calib {command}: error: {exc}", file=sys.stderr)
        return True
    return False


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
