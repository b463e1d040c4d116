"""``calib check``: fit and judge the curves of a run file."""

from __future__ import annotations

import argparse
import json
import sys

from calib.cli.common import add_debug, add_fit_options, sheet_arg

EXAMPLES = """\
examples:
  calib check sample_runs/fernbrook_nitrate_2026-11-30.xlsx
  calib check run.csv --model quadratic --weighting 1/x --confidence 0.99
  calib check run.xlsx --pdf nitrate-record.pdf --prepared-by "R. Okafor"
  calib check run.xlsx --json | python -m json.tool

exit codes: 0 every curve accepted, 1 a curve rejected or needs review,
            2 usage error, 3 unusable input
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "check", help="fit and judge the calibration curves of a run file",
        description="Fit every analyte's standards, apply the acceptance profile and print the "
                    "verdicts; optionally issue the PDF calibration record.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("run", metavar="RUN", help="instrument export: .xlsx or .csv")
    add_fit_options(parser)
    parser.add_argument("--json", action="store_true",
                        help="print the calib.check/1 JSON document instead of tables")
    parser.add_argument("--pdf", metavar="OUT", help="write the PDF calibration record to OUT")
    parser.add_argument("--prepared-by", metavar="NAME",
                        help="printed name of the analyst issuing the record")
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib.cautions import CAUTIONS
    from calib.cli import render
    from calib.output import write_atomic
    from calib.record import check_document
    from calib.workflow import check_file, issue_record

    assessment = check_file(
        args.run, sheet=sheet_arg(args.sheet), profile=args.profile, model=args.model,
        weighting=args.weighting, confidence=args.confidence,
    )
    written = None
    if args.pdf:
        record, pdf = issue_record(assessment, prepared_by=args.prepared_by)
        written = (write_atomic(args.pdf, pdf), record)
    if args.json:
        json.dump(check_document(assessment), sys.stdout, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
        print(f"calib: caution: {CAUTIONS}", file=sys.stderr)
    else:
        print(render.assessment_text(assessment))
        if written:
            print(f"\nRecord {written[1].record_id} written to {written[0]}")
        print("\n" + render.cautions_text())
    return 0 if assessment.verdict.value == "accepted" else 1
