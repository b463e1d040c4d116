"""``calib quantify``: concentrations, intervals and flags of a batch's samples."""

from __future__ import annotations

import argparse
import sys

from calib.cli.common import (
    add_debug,
    add_fit_options,
    add_template_option,
    refuse_fit_options,
    sheet_arg,
)

EXAMPLES = """\
examples:
  calib quantify run.xlsx                      the run's own unknowns and QCs against its curves
  calib quantify run.xlsx batch.csv            the samples in batch.csv against run.xlsx's curves
  calib quantify record.pdf batch.xlsx --pdf results.pdf --xlsx results.xlsx
  calib quantify record.json batch.csv --json > results.json   (schema calib.quantify/1)
  calib quantify run.csv batch.csv --force     quantify against a rejected curve (flagged)
  calib quantify run.xlsx --model mean-rf --confidence 0.99   (a fraction: 95 is refused)
  calib quantify record.pdf lims.csv --map lims.toml   headings of the samples file named by a map
  calib quantify run.xlsx soils.xlsx           with "Sample weight (g)" and "Final volume (mL)"
                                               columns: results are contents in mg/kg (C × V / m)

The samples must be on the curve's response basis: a curve fitted on ratios to an internal
standard needs the samples' IS responses; a raw curve refuses samples with an IS column unless
--ignore-internal-standard is given.  A dilution factor below 1 is refused unless
--dilution-below-one confirms it.  See README, "Quantifying samples".

A sample above the top standard is reported as "> ULOQ" (dilute and re-run), never as a number.
exit codes: 0 every curve accepted and the QCs pass, 1 a curve rejected or needing review,
            or the QC rule failed, 2 usage error, 3 unusable input (also a full disk),
            4 internal error
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "quantify", help="quantify unknown samples and QCs against a checked curve",
        description="Read each sample's concentration back from the curve with its standard "
                    "error and confidence interval, apply dilution factors, flag results outside "
                    "the calibrated range and judge the QCs.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("curve", metavar="CURVE",
                        help="a run file (its standards are fitted and checked first) or an "
                             "issued record (.pdf or .json)")
    parser.add_argument("samples", metavar="SAMPLES", nargs="?",
                        help="unknowns and QCs (.xlsx, .csv...); default: those in the run file")
    add_fit_options(parser)
    parser.set_defaults(profile=None)
    parser.add_argument("--samples-sheet", metavar="S", help="sheet of the samples file")
    parser.add_argument("--map", metavar="TOML",
                        help="import map of the samples file (headings, sheet, header row, "
                             "units, sample-type patterns; [columns] may also name "
                             "dilution_factor, sample_weight, final_volume); without SAMPLES, "
                             "the run file's map")
    parser.add_argument("--ignore-internal-standard", action="store_true",
                        help="quantify the samples' raw responses although the samples file "
                             "has an internal-standard column (curves fitted on raw responses "
                             "only)")
    parser.add_argument("--dilution-below-one", action="store_true",
                        help="accept dilution factors below 1 (the sample was concentrated); "
                             "refused by default")
    parser.add_argument("--force", action="store_true",
                        help="quantify against a rejected curve too; every such result is "
                             "flagged 'forced' and the outputs say so")
    parser.add_argument("--json", action="store_true",
                        help="print the calib.quantify/1 JSON document instead of tables")
    parser.add_argument("--xlsx", metavar="OUT", help="write the results workbook to OUT")
    parser.add_argument("--pdf", metavar="OUT", help="write the batch report PDF to OUT")
    add_template_option(parser)
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib import service
    from calib.quantify.source import is_record_file
    from calib.quantify.text import batch_text

    fixed = [f"--{n}" for n in ("model", "weighting", "sheet") if getattr(args, n) is not None]
    if fixed and is_record_file(args.curve):
        print(f"calib quantify: error: {' and '.join(fixed)} apply to a run file; an issued "
              "record's curve is fixed", file=sys.stderr)
        return 2
    if refuse_fit_options("quantify", args):
        return 2
    outcome = service.quantify(
        args.curve, args.samples, template=args.template, xlsx=args.xlsx, pdf=args.pdf,
        sheet=sheet_arg(args.sheet), samples_sheet=sheet_arg(args.samples_sheet),
        profile=args.profile, model=args.model, weighting=args.weighting,
        confidence=args.confidence, force=args.force, samples_map=args.map,
        ignore_internal_standard=args.ignore_internal_standard,
        dilution_below_one=args.dilution_below_one, sample_entries=not args.json)
    document = outcome.document
    if args.json:
        from calib.quantify.document import quantify_json

        # One piece, the samples written a column at a time (json.dumps' bytes).
        sys.stdout.write(quantify_json(document, outcome.report.batch) + "\n")
        print(f"calib: caution: {document['cautions']}", file=sys.stderr)
    else:
        print(batch_text(document))
        for path in outcome.written:
            print(f"Written: {path}")
    for analyte, why in document["refused"].items():
        print(f"calib: {analyte}: {why}", file=sys.stderr)
    return 0 if outcome.accepted else 1
