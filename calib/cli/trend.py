"""``calib trend``: control charts of an analyte's accepted curves from the archive."""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING

from calib.cli import exits
from calib.cli.archive import add_archive_option, archive_path, iso_date, report_no_archive
from calib.cli.common import add_debug, add_template_option

if TYPE_CHECKING:
    from calib.archive import AnalyteTrend

# Kept here, not imported, so that building the parser stays free of the archive modules.
MIN_BASELINE = 3
QUANTITIES = {"slope": "slope b", "intercept": "intercept a", "residual_sd": "residual SD"}

EXAMPLES = """\
examples:
  calib trend Nitrate-N --archive records.sqlite
  calib trend "Cu 324.754" --instrument ICP-OES-2 --pdf cu-trend.pdf
  calib trend "Cu 324.754" --instrument ICP-OES-2 --freeze --baseline 8 \\
      --exclude "CR-0A1B2C3D4E5F=nebuliser partly blocked, slope 15 % low" \\
      --reviewed-by "M. Castellanos"
  calib trend Fluoride --baseline 15 --json > fluoride-trend.json

Slope, intercept and residual SD of the accepted curves, in run-date order, against
the mean ± 2s (warning) and ± 3s (action) of a baseline.

Where the limits come from:
  frozen baseline  (Phase II) the latest baseline frozen with --freeze for this analyte
                   (and instrument), kept beside the archive in <archive>.baselines/;
                   the output names its file and SHA-256. A rule that fires on a curve
                   the reviewer excluded from it is shown but does not count as a flag.
  otherwise        the first N accepted curves (--baseline, default 10), each judged
                   against the others, so that one bad curve cannot widen its own limits;
                   a curve too far from the others (Grubbs-type screening, 5 %) is set
                   aside and flagged.
--freeze (Phase I) chooses the first N accepted curves (from --baseline-start on),
leaves out those given with --exclude RECORD_ID=REASON, refuses while a kept curve is
too far from the others (the same screening), and writes the next version of the
baseline file (earlier versions are kept). --baseline N without --freeze charts
against the first N curves even when a frozen baseline exists (the output says so).

Flags follow the common control-chart run rules (Western Electric rules and a trend
rule; common practice): a point beyond 3s; 2 of 3 beyond 2s, or 4 of 5 beyond 1s, on
one side; 8 in a row on one side of the mean; 6 in a row rising or falling.

A flag says the calibration is changing; whether the method is still fit for purpose
is for a qualified person to judge under the lab's validated method.

exit codes: 0 no flags, 7 a run rule fired (a drift warning, not a verdict), 2 usage
            error (no archive named), 3 archive unreadable, analyte not found, too few
            accepted curves, or a baseline that cannot be frozen or read (edited, or not
            of this archive)
"""


def _baseline(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < MIN_BASELINE:
        raise argparse.ArgumentTypeError(f"a baseline needs at least 3 curves, got {value}")
    return value


def _exclusion(text: str) -> tuple[str, str]:
    from calib.archive.baseline import parse_exclusion

    try:
        return parse_exclusion(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "trend", help="control charts of an analyte's slope, intercept and residual SD",
        description="Chart the accepted curves of one analyte from the archive with control "
                    "limits and run rules, to see an instrument drift before a curve fails.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("analyte", metavar="ANALYTE", help="analyte name (case-insensitive)")
    add_archive_option(parser)
    parser.add_argument("--baseline", type=_baseline, metavar="N",
                        help="limits from the first N accepted curves (default 10; all when "
                             "fewer; at least 3), or with --freeze the N curves to freeze")
    parser.add_argument("--instrument", metavar="I", help="only runs on this instrument")
    parser.add_argument("--pdf", metavar="OUT", help="write the control charts as a PDF to OUT")
    add_template_option(parser)
    parser.add_argument("--json", action="store_true",
                        help="print the calib.trend/1 JSON document instead of tables")
    frozen = parser.add_argument_group("frozen baseline (Phase I, then Phase II)")
    frozen.add_argument("--freeze", action="store_true",
                        help="establish and freeze a reviewed baseline from the first N "
                             "accepted curves, then chart against it")
    frozen.add_argument("--baseline-start", type=iso_date, metavar="DATE",
                        help="with --freeze: choose curves run on or after DATE (YYYY-MM-DD)")
    frozen.add_argument("--exclude", type=_exclusion, action="append", default=[],
                        metavar="RECORD_ID=REASON",
                        help="with --freeze: leave this curve out of the baseline, for the "
                             "reason given (repeat for several)")
    frozen.add_argument("--reviewed-by", metavar="NAME",
                        help="with --freeze: full name of the person who reviewed the baseline")
    frozen.add_argument("--note", metavar="TEXT", default="",
                        help="with --freeze: the reviewer's note, kept in the baseline file")
    frozen.add_argument("--baseline-file", metavar="FILE",
                        help="chart against this frozen baseline file instead of the latest "
                             "one beside the archive")
    add_debug(parser)
    parser.set_defaults(handler=run)


def _usage_problem(args: argparse.Namespace) -> str:
    if not args.freeze:
        given = [o for o, v in (("--exclude", args.exclude), ("--reviewed-by", args.reviewed_by),
                                ("--note", args.note), ("--baseline-start", args.baseline_start))
                 if v]
        if given:
            return f"{', '.join(given)} only go{'es' if len(given) == 1 else ''} with --freeze"
        if args.baseline and args.baseline_file:
            return "--baseline and --baseline-file choose the limits two ways; give one"
        return ""
    if args.baseline_file:
        return "--freeze writes a new baseline; --baseline-file reads one: give one of them"
    if not (args.reviewed_by or "").strip():
        return "--freeze needs --reviewed-by NAME: a baseline is frozen once a person reviewed it"
    return ""


def run(args: argparse.Namespace) -> int:
    from calib import service
    from calib.archive import trend_document

    problem = _usage_problem(args)
    if problem:
        print(f"calib trend: error: {problem}", file=sys.stderr)
        return exits.USAGE
    path = archive_path(args)
    if path is None:
        return report_no_archive()
    freeze = (service.Freeze(reviewed_by=args.reviewed_by, exclude=dict(args.exclude),
                             start=args.baseline_start, note=args.note)
              if args.freeze else None)
    outcome = service.trend(path, args.analyte, baseline=args.baseline,
                            instrument=args.instrument, pdf=args.pdf, template=args.template,
                            freeze=freeze, baseline_file=args.baseline_file)
    trend = outcome.trend
    if args.json:
        json.dump(trend_document(trend), sys.stdout, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
    else:
        if outcome.note:
            print(outcome.note + "\n")
        print(_trend_text(trend, path=path))
        if args.pdf:
            print(f"\nControl charts written to {args.pdf}")
    return exits.FLAGGED if trend.flagged else exits.OK


def _trend_text(trend: AnalyteTrend, *, path: str) -> str:
    """The trend as terminal tables: limits, every point with the rules that fired, flags."""
    from calib.archive import RULES
    from calib.cli.render import num

    pts = trend.points
    left = f" ({len(trend.left_out)} not accepted, left out)" if trend.left_out else ""
    span = f"{pts[0].run_date} to {pts[-1].run_date}"
    lines = [
        f"{trend.analyte} in {path}: {len(pts)} accepted curves, {span}{left}",
        f"{trend.limits_text()}.",
        "Warning limits mean ± 2s, action limits mean ± 3s.",
        "",
        f"  {'quantity':<14}" + "".join(f"{h:>11}" for h in ("mean", "SD", "−3s", "−2s", "+2s",
                                                             "+3s")) + "  flagged",
    ]
    reviewed = trend.reviewed
    for c in trend.charts:
        label = f"  {QUANTITIES[c.quantity]:<14}"
        if c.limits is None:
            lines.append(f"{label}not evaluated: {c.reason}")
            continue
        lim = c.limits
        values = (lim.mean, lim.sd, lim.action[0], *lim.warning, lim.action[1])
        lines.append(label + "".join(f"{num(v, 5):>11}" for v in values)
                     + f"  {len(set(c.flagged_points()) - reviewed)}")
    lines += ["", f"  {'#':>4}  {'run date':<10}  {'record':<15}  {'phase':<9}"
              + "".join(f"{QUANTITIES[c.quantity]:>15}" for c in trend.charts)
              + "  rules that fired"]
    for i, p in enumerate(pts):
        cells = "".join(
            f"{num(getattr(p.figures, c.quantity), 5) + (' *' if c.rules_at(i) else '  '):>15}"
            for c in trend.charts)
        fired = "; ".join(f"{c.quantity}: {c.hits_text(i)}" for c in trend.charts
                          if c.rules_at(i))
        if fired and i in reviewed and trend.frozen is not None:
            fired += f" [reviewed: {trend.frozen.exclusion(p.record_id)}]"
        lines.append(f"  {i + 1:>4}  {p.run_date:<10}  {p.record_id:<15}  {trend.phase(i):<9}"
                     f"{cells}  {fired}")
    flagged = trend.flagged_points()
    fired_rules = [r for r in RULES if any(h.rule == r and h.index not in reviewed
                                           for c in trend.charts for h in c.hits)]
    lines.append("")
    if flagged:
        dates = ", ".join(pts[i].run_date for i in flagged)
        lines.append(f"FLAGGED: run rules fired on {len(flagged)} of {len(pts)} curves (*; "
                     f"run dates {dates}). "
                     + "; ".join(f"{r}: {RULES[r]}" for r in fired_rules) + ".")
    else:
        lines.append("No run rule fired" + (" outside the curves the baseline's reviewer "
                                            "excluded" if reviewed else "") + ".")
    lines += [f"Note: {note}." for note in trend.notes]
    lines.append("A flag says the calibration is changing; whether the method is still fit for "
                 "purpose is for a qualified person to judge.")
    return "\n".join(lines)
