"""``calib trend``: control charts of an analyte's accepted curves from the archive."""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING

from calib.cli.archive import add_archive_option, archive_path, report_no_archive
from calib.cli import exits
from calib.cli.common import add_debug, add_template_option

if TYPE_CHECKING:
    from calib.archive import AnalyteTrend

# Kept here, not imported, so that building the parser stays free of the archive modules.
MIN_BASELINE = 3
QUANTITIES = {"slope": "slope b", "intercept": "intercept a", "residual_sd": "residual SD"}

EXAMPLES = """\
examples:
  calib trend Nitrate-N --archive records.sqlite
  calib trend Nitrate-N --baseline 15 --pdf nitrate-trend.pdf
  calib trend Fluoride --instrument IC-2 --json > fluoride-trend.json

Slope, intercept and residual SD of the accepted curves, in run-date order, against
the mean ± 2s (warning) and ± 3s (action) of a baseline: the first N accepted curves.
Flags follow the common control-chart run rules (Western Electric rules and a trend
rule): a point beyond 3s; 2 of 3 beyond 2s, or 4 of 5 beyond 1s, on one side; 8 in a
row on one side of the mean; 6 in a row rising or falling.

exit codes: 0 no flags, 7 a run rule fired (a drift warning, not a verdict), 2 usage
            error (no archive named), 3 archive unreadable, analyte not found, or too few
            accepted curves
"""


def _baseline(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < MIN_BASELINE:
        raise argparse.ArgumentTypeError(f"a baseline needs at least 3 curves, got {value}")
    return value


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "trend", help="control charts of an analyte's slope, intercept and residual SD",
        description="Chart the accepted curves of one analyte from the archive with control "
                    "limits and run rules, to see an instrument drift before a curve fails.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("analyte", metavar="ANALYTE", help="analyte name (case-insensitive)")
    add_archive_option(parser)
    parser.add_argument("--baseline", type=_baseline, default=10, metavar="N",
                        help="the first N accepted curves set the limits (default 10; all when "
                             "fewer; at least 3)")
    parser.add_argument("--instrument", metavar="I", help="only runs on this instrument")
    parser.add_argument("--pdf", metavar="OUT", help="write the control charts as a PDF to OUT")
    add_template_option(parser)
    parser.add_argument("--json", action="store_true",
                        help="print the calib.trend/1 JSON document instead of tables")
    add_debug(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib import service
    from calib.archive import trend_document

    path = archive_path(args)
    if path is None:
        return report_no_archive()
    outcome = service.trend(path, args.analyte, baseline=args.baseline,
                            instrument=args.instrument, pdf=args.pdf, template=args.template)
    trend = outcome.trend
    if args.json:
        json.dump(trend_document(trend), sys.stdout, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print(trend_text(trend, path=path))
        if args.pdf:
            print(f"\nControl charts written to {args.pdf}")
    return exits.FLAGGED if trend.flagged else exits.OK


def trend_text(trend: AnalyteTrend, *, path: str) -> str:
    """The trend as terminal tables: limits, every point with the rules that fired, flags."""
    from calib.archive import RULES
    from calib.cli.render import num

    pts = trend.points
    left = f" ({len(trend.left_out)} not accepted, left out)" if trend.left_out else ""
    span = f"{pts[0].run_date} to {pts[-1].run_date}"
    base = min(trend.baseline, len(pts))
    lines = [
        f"{trend.analyte} in {path}: {len(pts)} accepted curves, {span}{left}",
        f"Limits from the first {base} accepted curves: mean ± 2s warning, ± 3s action",
        "",
        f"  {'quantity':<14}" + "".join(f"{h:>11}" for h in ("mean", "SD", "−3s", "−2s", "+2s",
                                                             "+3s")) + "  flagged",
    ]
    for c in trend.charts:
        label = f"  {QUANTITIES[c.quantity]:<14}"
        if c.limits is None:
            lines.append(f"{label}not evaluated: {c.reason}")
            continue
        lim = c.limits
        values = (lim.mean, lim.sd, lim.action[0], *lim.warning, lim.action[1])
        lines.append(label + "".join(f"{num(v, 5):>11}" for v in values)
                     + f"  {len(c.flagged_points())}")
    lines += ["", f"  {'#':>4}  {'run date':<10}  {'record':<15}"
              + "".join(f"{QUANTITIES[c.quantity]:>15}" for c in trend.charts)
              + "  rules that fired"]
    for i, p in enumerate(pts):
        cells = "".join(
            f"{num(getattr(p.figures, c.quantity), 5) + (' *' if c.rules_at(i) else '  '):>15}"
            for c in trend.charts)
        fired = "; ".join(f"{c.quantity}: {c.hits_text(i)}" for c in trend.charts
                          if c.rules_at(i))
        lines.append(f"  {i + 1:>4}  {p.run_date:<10}  {p.record_id:<15}{cells}  {fired}")
    flagged = {i for c in trend.charts for i in c.flagged_points()}
    fired_rules = [r for r in RULES if any(h.rule == r for c in trend.charts for h in c.hits)]
    lines.append("")
    if flagged:
        lines.append(f"FLAGGED: run rules fired on {len(flagged)} of {len(pts)} curves (*). "
                     + "; ".join(f"{r}: {RULES[r]}" for r in fired_rules) + ".")
    else:
        lines.append("No run rule fired.")
    lines += [f"Note: {note}." for note in trend.notes]
    return "\n".join(lines)
