"""``calib demo``: check the bundled demo runs and write their records."""

from __future__ import annotations

import argparse
from pathlib import Path

from calib.cli.common import add_debug, add_force, refuse_existing

DEMO_RUNS = ("fernbrook_nitrate_2026-11-30.xlsx", "fernbrook_fluoride_2026-11-30.csv")

EXAMPLES = """\
examples:
  calib demo                    writes into ./calib-demo
  calib demo --out /tmp/demo    writes elsewhere

The demo runs are invented (the fictional Fernbrook Water Laboratory): a nitrate-N
curve that is accepted, and a fluoride curve whose intercept differs significantly
from zero because its dilution water was contaminated. The command exits 0 when the
demo ran, whatever the verdicts.
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "demo", help="check the bundled demo runs and write their PDF records",
        description="Check the bundled demo runs and write their PDF and JSON records.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--out", metavar="DIR", default="calib-demo",
                        help="folder for the records (default: ./calib-demo)")
    add_force(parser, what="demo records")
    add_debug(parser)
    parser.set_defaults(handler=run)


def demo_runs() -> list[Path]:
    """Paths of the bundled demo runs."""
    from calib.resources import bundled_folder

    folder = bundled_folder("sample_runs")
    return [folder / name for name in DEMO_RUNS]


def run(args: argparse.Namespace) -> int:
    from calib.cli import render
    from calib.cli.progress import progress_for
    from calib.output import safe_file_name, write_atomic
    from calib.workflow import check_file, issue_record

    out = Path(args.out)
    targets = [out / f"{safe_file_name(path.stem)}{suffix}" for path in demo_runs()
               for suffix in (".pdf", ".record.json")]
    if refuse_existing("demo", targets, force=args.force):
        return 2
    for path in demo_runs():
        bar = progress_for(label=f"checking {path.name}")
        try:
            assessment = check_file(path, progress=bar)
        finally:
            if bar is not None:
                bar.close()
        record, pdf = issue_record(assessment, prepared_by="R. Okafor (demo analyst)")
        stem = safe_file_name(path.stem)
        pdf_path = write_atomic(out / f"{stem}.pdf", pdf, replace=args.force)
        json_path = write_atomic(out / f"{stem}.record.json", record.canonical,
                                 replace=args.force)
        print(render.assessment_text(assessment))
        print(f"Record {record.record_id}: {pdf_path}\n  record data: {json_path}\n")
    print(render.cautions_text())
    return 0
