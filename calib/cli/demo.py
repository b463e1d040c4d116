"""``calib demo``: check the bundled demo runs and write their records."""

from __future__ import annotations

import argparse
from pathlib import Path

from calib.cli.common import add_debug, add_force, add_template_option, refuse_existing

_DEMO_RUNS = ("fernbrook_nitrate_2026-11-30.xlsx", "fernbrook_fluoride_2026-11-30.csv")

EXAMPLES = """\
examples:
  calib demo                    writes into ./calib-demo
  calib demo --out /tmp/demo    writes elsewhere
  calib demo --template our-lab.toml   see the demo records in the lab's own layout

The demo runs are invented (the fictional Fernbrook Water Laboratory): a nitrate-N
curve that is accepted, and a fluoride curve whose intercept differs significantly
from zero because its dilution water was contaminated. The command exits 0 when the
demo ran, whatever the verdicts.  The records carry the fictional lab's letterhead
(report_templates/fernbrook-demo.toml), never the lab template set up with calib lab init.
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
    add_template_option(parser)
    add_debug(parser)
    parser.set_defaults(handler=run)


def _demo_runs() -> list[Path]:
    """Paths of the bundled demo runs."""
    from calib.resources import bundled_folder

    folder = bundled_folder("sample_runs")
    return [folder / name for name in _DEMO_RUNS]


def run(args: argparse.Namespace) -> int:
    from calib import service
    from calib.cli import render
    from calib.cli.progress import progress_for
    from calib.output import safe_file_name
    from calib.report.template import demo_template

    out = Path(args.out)
    targets = [out / f"{safe_file_name(path.stem)}{suffix}" for path in _demo_runs()
               for suffix in (".pdf", ".record.json")]
    if refuse_existing("demo", targets, force=args.force):
        return 2
    # The demo lab's letterhead unless another is asked for: never the user's lab template,
    # so a demo record cannot pass for one of the lab's own.
    template = args.template or demo_template()
    for path in _demo_runs():
        bar = progress_for(label=f"checking {path.name}")
        try:
            outcome = service.check(path, progress=bar)
        finally:
            if bar is not None:
                bar.close()
        stem = safe_file_name(path.stem)
        issued = service.issue(outcome, prepared_by="R. Okafor (demo analyst)",
                               template=template, pdf=out / f"{stem}.pdf",
                               record_json=out / f"{stem}.record.json", replace=args.force)
        pdf_path, json_path = issued.written
        print(render.assessment_text(outcome.assessment))
        print(f"Record {issued.record.record_id}: {pdf_path}\n  record data: {json_path}\n")
    print(render.cautions_text())
    return 0
