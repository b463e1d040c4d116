"""``calib check``: fit and judge the curves of a run file."""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING

from calib.cli.archive import add_archive_option, archive_path
from calib.cli.common import (
    add_debug,
    add_fit_options,
    add_force,
    add_import_options,
    add_template_option,
    refuse_existing,
    refuse_fit_options,
    sheet_arg,
)

if TYPE_CHECKING:
    from calib.checks.exclusions import Exclusion
    from calib.checks.narrowing import WorkingRange
    from calib.io import ImportMap
    from calib.service import CheckOutcome, IssueOutcome

EXAMPLES = """\
examples:
  calib check sample_runs/fernbrook_nitrate_2026-11-30.xlsx
  calib check run.xlsx --brief                 one line per analyte
  calib check run.xlsx --full                  every check of every curve
  calib check monday.xlsx tuesday.xlsx         several runs, one summary, the worst exit code
  calib check runs/ --pdf records/             every run file in a folder, one record each
  calib check run.csv --model quadratic --weighting 1/x --confidence 0.99
  calib check run.csv --model mean-rf          mean response factor (fitted with weights 1/x2)
  calib check run.xlsx --pdf nitrate-record.pdf --prepared-by "R. Okafor"
  calib check run.xlsx --prepared-by "R. Okafor" --archive records.sqlite
  calib check run.xlsx --pdf record.pdf --template our-lab.toml   another letterhead, this once
  calib check run.xlsx --json | python -m json.tool
  calib check export.txt --show-import          what the importer recognised, then stop
  calib check export.txt --map ic2-anions.toml  read with an import map
  calib check kx214.xlsx --profile bioanalytical --exclude "Run!D12=vial cap not seated"
  calib check kx214.xlsx --profile bioanalytical --range "KX-214:2..1000"   apply the proposed range
  calib check run.xlsx --range "2..500=LLOQ outside ±20 %, SOP 7.3" --xlsx results.xlsx
  calib check run.xlsx --csv results.csv       one row per curve, for a LIMS or a script
  calib check icp.xlsx --standards metals-standards.toml --pdf icp.pdf   name the materials

--confidence is a fraction (0.95, 0.99); a percentage such as 95 is refused.
--model mean-rf takes no weighting but its own (1/x2): another is refused (exit 2).

exit codes: 0 every curve accepted, 1 a curve rejected or needs review,
            2 usage error, 3 unusable input (also a full disk; nothing is written),
            4 internal error; with several run files the worst of them (3 when one
            could not be used: the others are still checked)
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "check", help="fit and judge the calibration curves of a run file",
        description="Fit every analyte's standards, apply the acceptance profile and print the "
                    "verdicts; optionally issue the PDF calibration record.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("run", metavar="RUN", nargs="+",
                        help="instrument export (.xlsx, .xlsm, .xls, .ods, .csv, .tsv or .txt), "
                             "several, or a folder of them")
    add_fit_options(parser)
    parser.add_argument("--json", action="store_true",
                        help="print the calib.check/1 JSON document instead of tables; with "
                             "several run files one calib.check-set/1 document listing them")
    length = parser.add_mutually_exclusive_group()
    length.add_argument("--brief", action="store_true",
                        help="one line per analyte: verdict and the checks that failed or warned")
    length.add_argument("--full", action="store_true",
                        help="every check of every curve (default: details only of the curves "
                             "not accepted)")
    parser.add_argument("--pdf", metavar="OUT",
                        help="write the PDF calibration record to OUT (with several run files: "
                             "a folder, one RUN-NAME.pdf each)")
    add_force(parser, what="a --pdf record file")
    add_template_option(parser)
    parser.add_argument("--prepared-by", metavar="NAME",
                        help="printed name of the analyst issuing the record")
    parser.add_argument("--key", metavar="KEY",
                        help="sign the issued record with your certified key (from calib keys "
                             "new; passphrase from CALIB_KEY_PASSPHRASE or a prompt); without "
                             "it the record is an unsigned draft")
    parser.add_argument("--exclude", action="append", default=[], metavar="CELL=REASON",
                        type=_exclusion,
                        help="leave a point out of the fit, named by its source cell (Run!C7, or "
                             "C7) or sample name, with the reason; repeatable")
    parser.add_argument("--range", action="append", default=[], metavar="[ANALYTE:]LOW..HIGH",
                        type=_working_range, dest="ranges",
                        help="apply a working range: standards outside LOW..HIGH leave the fit; "
                             "append =REASON unless it is the range calib proposes; repeatable, "
                             "one per analyte")
    parser.add_argument("--standards", metavar="FILE",
                        help="TOML or CSV file naming the reference materials (id, lot, "
                             "certified value and uncertainty, expiry) and how each level was "
                             "prepared; the record carries it and flags an expired material")
    parser.add_argument("--xlsx", metavar="OUT", help="write the results workbook to OUT "
                                                      "(several run files: a folder)")
    parser.add_argument("--csv", metavar="OUT", help="write the results, one row per curve, to "
                                                     "OUT (several run files: a folder)")
    add_archive_option(parser, help_text="file the issued record (JSON and PDF) in this archive; "
                                         "default: the CALIB_ARCHIVE environment variable, "
                                         "when set")
    add_import_options(parser)
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib import service
    from calib.cautions import CAUTIONS

    if refuse_fit_options("check", args):
        return 2
    imap = None
    if args.map:
        from calib.io import load_map

        imap = load_map(args.map)  # read once, before the run file, so its errors come first
    if args.standards:
        from calib.io.standards import read_standards

        args.standards = read_standards(args.standards)  # once, and its errors before the runs'
    from calib.cli.check_many import expand_runs, run_many

    runs = expand_runs(args.run)
    if runs is None:
        return 2
    if args.key and not (args.pdf or archive_path(args)):
        print("calib check: error: --key signs the issued record: give --pdf OUT or --archive DB",
              file=sys.stderr)
        return 2
    if len(runs) > 1 or any(Path(r).is_dir() for r in args.run):
        if args.key:
            print("calib check: error: --key issues one signed record: check one run file at a "
                  "time", file=sys.stderr)
            return 2
        return run_many(args, runs, imap, check=_check)
    args.run = str(runs[0])
    if args.show_import:
        print(service.describe_import(args.run, sheet=sheet_arg(args.sheet), map=imap))
        return 0
    from calib.checks.narrowing import RangeError
    from calib.cli import render  # imported after --show-import, which needs no checks

    if args.pdf and refuse_existing("check", [Path(args.pdf)], force=args.force):
        return 2
    try:
        outcome = _check(args, imap)
    except RangeError as exc:
        print(f"calib check: error: {exc}; write --range LOW..HIGH=REASON", file=sys.stderr)
        return 2
    archive = archive_path(args)
    issued = None
    # Everything is computed first and written last, all files or none (calib.service).
    if args.pdf or archive:
        key = None
        if args.key:
            from calib.cli.keys import read_passphrase
            from calib.record.keys import load_signing_key

            key = load_signing_key(args.key, passphrase=read_passphrase(purpose=f"key {args.key}"))
        issued = service.issue(outcome, prepared_by=args.prepared_by, template=args.template,
                               pdf=args.pdf, xlsx=args.xlsx, csv=args.csv, archive=archive,
                               replace=args.force, key=key)
        written = issued.written
    else:
        written = service.export(outcome, xlsx=args.xlsx, csv=args.csv)
    exported = _export_lines(args) if written else []
    filed = None
    if issued is not None and issued.filed is not None:
        filed = (f"Record {issued.filed.record_id} filed in archive {issued.archive} as entry "
                 f"seq {issued.filed.seq}" + (f"\n{issued.logbook}" if issued.logbook else ""))
    document = outcome.document
    if args.json:
        # One write: json.dump's many small writes cost seconds on a 500-analyte run.
        sys.stdout.write(json.dumps(document, ensure_ascii=False, allow_nan=False) + "\n")
        print(f"calib: caution: {CAUTIONS}", file=sys.stderr)
        if filed:
            print(f"calib: {filed}", file=sys.stderr)
        for line in exported:
            print(f"calib: {line}", file=sys.stderr)
    else:
        from calib.cli.check_text import brief_text, default_text
        from calib.export import verdict_text

        if args.brief:
            print(brief_text(outcome.assessment))
        elif args.full:
            print(verdict_text(document, colour=_colour()) + "\n")
            print(render.assessment_text(outcome.assessment))
        else:
            print(verdict_text(document, colour=_colour()) + "\n")
            print(default_text(outcome.assessment))
        if issued is not None and args.pdf:
            print(f"\nRecord {issued.record.record_id} written to {args.pdf}")
        if issued is not None:
            print(f"Report template: {_template_line(issued)}")
        if filed:
            print(f"\n{filed}")
        for line in exported:
            print(f"\n{line}")
        print("\n" + render.cautions_text())
    return 0 if outcome.accepted else 1


def _template_line(issued: IssueOutcome) -> str:
    section = issued.record.body["template"]
    if section["laboratory"] == "not configured":
        return ("none set up: the record says \"Laboratory not configured\" "
                "(calib lab init --template FILE)")
    return f"{section['name']} (SHA-256 {section['sha256'][:16]}…)"


def _check(args: argparse.Namespace, imap: ImportMap | None) -> CheckOutcome:
    """Read and judge the run with the analyst's exclusions, ranges and the archive's slopes."""
    from calib import service
    from calib.cli.progress import progress_for

    bar = progress_for(json_output=args.json, label="checking curves")
    try:
        return service.check(args.run, sheet=sheet_arg(args.sheet), profile=args.profile,
                             model=args.model, weighting=args.weighting,
                             confidence=args.confidence, map=imap, exclusions=args.exclude,
                             ranges=args.ranges, archive=archive_path(args), progress=bar,
                             standards=args.standards)
    finally:
        if bar is not None:
            bar.close()


def _export_lines(args: argparse.Namespace) -> list[str]:
    """The sentences saying where --xlsx and --csv went."""
    done = []
    for path, what in ((args.xlsx, "Results workbook"), (args.csv, "Results CSV")):
        if path:
            done.append(f"{what} written to {path}")
    return done


def _colour() -> bool:
    """Colour the verdict words only on a terminal, and never when NO_COLOR is set."""
    return (sys.stdout.isatty() and not os.environ.get("NO_COLOR")
            and os.environ.get("TERM") != "dumb")


def _exclusion(text: str) -> Exclusion:
    from calib.checks.exclusions import parse_exclusion

    try:
        return parse_exclusion(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _working_range(text: str) -> WorkingRange:
    from calib.checks.narrowing import parse_range

    try:
        return parse_range(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None
