"""``calib archive``: list, show, export, verify, anchor and migrate the archive of records.

The archive comes from ``--archive DB`` or the ``CALIB_ARCHIVE`` environment
variable: a path is an SQLite file, ``postgresql://…`` a PostgreSQL database.
With neither, the command stops with exit code 2 (a
usage error: say which archive); an archive path that does not exist is exit
code 3 (reading never creates an archive, so a typing mistake is not taken
for an empty one).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import sys
from pathlib import Path
from typing import Any

from calib.cli.common import add_debug

ENV_VAR = "CALIB_ARCHIVE"
_NO_ARCHIVE = (f"no archive given: pass --archive DB or set the {ENV_VAR} environment variable "
              "to the archive file")
EXIT_USAGE = 2
EXIT_INTEGRITY = 5  # calib.cli.exits.INTEGRITY (kept literal: this module loads with the parser)

EXAMPLES = """\
examples:
  calib archive list --archive records.sqlite
  calib archive list --analyte Nitrate-N --from 2026-11-01 --to 2026-11-30 --verdict accepted
  calib archive show CR-3F9A1C2B77DE
  calib archive export CR-3F9A1C2B77DE --out exported/ --all-versions
  calib archive list --limit 50 --offset 100   (one page: entries 101-150)
  calib archive lot L24-118                  every record made with that lot (a recall)
  calib archive verify                       (with CALIB_ARCHIVE=records.sqlite set)
  calib archive verify --fast                hash pass only: links and entry hashes
  calib archive verify --record CR-3F9A1C2B77DE   one record only, in milliseconds
  calib archive head                         the head receipt line for the lab's logbook
  calib archive migrate records.sqlite postgresql://calib@lab-db/records

The archive is an SQLite file or a postgresql:// URL.  Each append moves its head receipt
(records.sqlite.head.json beside the file, or where CALIB_ARCHIVE_HEAD points), which
verify checks whenever it is present.

exit codes: 0 done / archive intact, 2 usage error (no archive named), 3 archive or record
            not found or unreadable, 5 archive damaged, altered or rolled back
"""


def add_archive_option(parser: argparse.ArgumentParser, *, help_text: str | None = None) -> None:
    """``--archive DB``, falling back on the ``CALIB_ARCHIVE`` environment variable."""
    parser.add_argument("--archive", metavar="DB", help=help_text or (
        "archive: an SQLite file or a postgresql://… URL; default: the "
        f"{ENV_VAR} environment variable"))


def archive_path(args: argparse.Namespace) -> str | None:
    """The archive the user named, by option or environment; None when neither is set."""
    return getattr(args, "archive", None) or os.environ.get(ENV_VAR) or None


def report_no_archive() -> int:
    """Say that no archive was named; returns the usage-error exit code."""
    print(f"calib: error: {_NO_ARCHIVE}", file=sys.stderr)
    return EXIT_USAGE


def iso_date(text: str) -> str:
    """argparse type: a calendar date ``YYYY-MM-DD``.

    Examples
    --------
    >>> iso_date("2026-11-30")
    '2026-11-30'
    """
    try:
        return dt.date.fromisoformat(text).isoformat()
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a date YYYY-MM-DD, got {text!r}") from None


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "archive", help="list, show, export and verify archived calibration records",
        description="The archive holds every issued and signed version of each record (JSON "
                    "and PDF), append-only and hash-chained.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    actions = parser.add_subparsers(dest="action", metavar="ACTION")
    actions.required = True

    def action(name: str, help_text: str, handler: Any) -> argparse.ArgumentParser:
        p = actions.add_parser(name, help=help_text, description=help_text.capitalize() + ".",
                               epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter)
        add_archive_option(p)
        add_debug(p)
        p.set_defaults(handler=handler)
        return p

    p = action("list", "list archive entries, oldest first", _run_list)
    p.add_argument("--analyte", metavar="A",
                   help="only records with a curve of this analyte (any part of the name, any "
                        "case: Pb finds 'Pb 220.353')")
    p.add_argument("--from", dest="date_from", type=iso_date, metavar="DATE",
                   help="only runs dated on or after DATE (YYYY-MM-DD)")
    p.add_argument("--to", dest="date_to", type=iso_date, metavar="DATE",
                   help="only runs dated on or before DATE (YYYY-MM-DD)")
    p.add_argument("--verdict", choices=("accepted", "rejected", "needs-review"),
                   help="only records with this run verdict")
    p.add_argument("--instrument", metavar="I",
                   help="only runs on this instrument (any part of the name, any case)")
    p.add_argument("--limit", type=_count, metavar="N",
                   help="list at most N entries (one page)")
    p.add_argument("--offset", type=_count, default=0, metavar="N",
                   help="skip the first N matching entries (with --limit: the next page)")
    p.add_argument("--json", action="store_true", help="print the entries as a JSON list")
    p = action("lot", "list every record whose standards came from a lot (a recall)", _run_lot)
    p.add_argument("lot", metavar="LOT", help="the lot, as its certificate names it (whole, any "
                                              "case)")
    p.add_argument("--material", metavar="ID", help="only this reference material id")
    p.add_argument("--json", action="store_true", help="print the records as a JSON list")
    p = action("show", "show a record's versions, curves and signatures", run_show)
    p.add_argument("record_id", metavar="RECORD_ID", help="record id, e.g. CR-3F9A1C2B77DE")
    p.add_argument("--json", action="store_true", help="print the versions as JSON")
    p = action("export", "write a record's PDF and JSON from the archive", _run_export)
    p.add_argument("record_id", metavar="RECORD_ID", help="record id, e.g. CR-3F9A1C2B77DE")
    p.add_argument("--out", metavar="DIR", required=True, help="folder to write into")
    p.add_argument("--all-versions", action="store_true",
                   help="every version, not only the latest")
    p = action("verify", "check every entry and the hash chain of the archive", _run_verify)
    p.add_argument("--head", metavar="HASH",
                   help="an entry hash noted earlier; it must still be in the archive")
    p.add_argument("--fast", action="store_true",
                   help="hash pass only: every link and entry hash, no JSON or PDF read")
    p.add_argument("--record", metavar="RECORD_ID",
                   help="check only this record's versions: each entry, its links on either "
                        "side, its JSON and PDF, and the head receipt (no pass over the chain)")
    action("head", "print the archive's head and its receipt line for the logbook", _run_head)
    p = actions.add_parser(
        "migrate", help="copy an archive to another file or database and prove the chain equal",
        description="Copy every entry of SRC, as is, into the new or empty archive DST (an "
                    "SQLite file or a postgresql:// URL), then verify DST and compare every "
                    "entry hash with SRC.", epilog=EXAMPLES,
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("source", metavar="SRC", help="the archive to copy")
    p.add_argument("target", metavar="DST", help="the new archive (must be empty)")
    p.add_argument("--target-head", metavar="FILE",
                   help="head receipt of DST (default: beside an SQLite DST; none for a "
                        "database, whose head is printed for the logbook)")
    add_debug(p)
    p.set_defaults(handler=_run_migrate)


def _count(text: str) -> int:
    """argparse type: a whole number, 0 or more."""
    if not text.isdigit():
        raise argparse.ArgumentTypeError(f"expected a whole number 0 or more, got {text!r}")
    return int(text)


def _open(path: str) -> Any:
    from calib.archive import Archive

    return Archive(path, create=False)


def _run_list(args: argparse.Namespace) -> int:
    path = archive_path(args)
    if path is None:
        return report_no_archive()
    filters = {"analyte": args.analyte, "verdict": args.verdict, "instrument": args.instrument,
               "date_from": args.date_from, "date_to": args.date_to, "partial": True}
    with _open(path) as archive:
        found = archive.entries(**filters, data=False, limit=args.limit, offset=args.offset)
        paged = args.limit is not None or args.offset
        total = archive.count(**filters) if paged else len(found)
    if args.json:
        json.dump([e.summary() for e in found], sys.stdout, ensure_ascii=False, indent=1)
        sys.stdout.write("\n")
        return 0
    print(_entries_table(found) if found else f"No entries in {path} match.")
    if paged and found:
        print(f"(entries {args.offset + 1}–{args.offset + len(found)} of {total} matching)")
    return 0


def _run_lot(args: argparse.Namespace) -> int:
    """Every issued record whose standards came from ``args.lot`` (record JSON, page by page)."""
    from calib.record.lots import records_with_lot

    path = archive_path(args)
    if path is None:
        return report_no_archive()
    found = []
    with _open(path) as archive:
        after = 0
        while True:
            page = archive.entries(kind="issued", limit=500, after_seq=after)
            if not page:
                break
            after = page[-1].seq
            found += records_with_lot(
                (((e.seq, e.record_id, e.run_date), json.loads(e.json)) for e in page),
                args.lot, material=args.material)
        where = archive.location
    if args.json:
        json.dump([{"seq": u.key[0], "record_id": u.key[1], "run_date": u.key[2],
                    "material": u.material, "lot": u.lot, "run_file": u.run_file,
                    "analytes": list(u.analytes)} for u in found],
                  sys.stdout, ensure_ascii=False, indent=1)
        sys.stdout.write("\n")
        return 0
    if not found:
        print(f"No record in {where} names lot {args.lot.strip()!r}"
              + (f" of material {args.material}" if args.material else "") + ".")
        return 0
    print(f"{len(found)} record{'s' if len(found) != 1 else ''} in {where} used lot "
          f"{found[0].lot}:")
    print(f"{'seq':>5}  {'record':<15}  {'run date':<10}  {'material':<16}  {'run file':<30}  "
          "analytes")
    for u in found:
        seq, record_id, run_date = u.key
        print(f"{seq:>5}  {record_id:<15}  {run_date or '—':<10}  {u.material:<16}  "
              f"{u.run_file:<30}  {', '.join(u.analytes)}")
    return 0


def _entries_table(entries: list[Any]) -> str:
    head = (f"{'seq':>5}  {'archived (UTC)':<20}  {'record':<15}  {'kind':<6}  "
            f"{'run date':<10}  {'verdict':<12}  {'sign-off':<22}  analytes")
    lines = [head]
    for e in entries:
        names = ", ".join(e.analytes[:3]) + (f" +{len(e.analytes) - 3} more"
                                             if len(e.analytes) > 3 else "")
        lines.append(f"{e.seq:>5}  {e.created_at:<20}  {e.record_id:<15}  {e.kind:<6}  "
                     f"{e.run_date:<10}  {e.verdict:<12}  {', '.join(e.roles) or '—':<22}  {names}")
    return "\n".join(lines)


def _record_versions(path: str, record_id: str) -> list[Any]:
    """Every archived version of ``record_id``, oldest first; an unknown id is an error."""
    from calib.archive import ArchiveError

    with _open(path) as archive:
        versions = archive.entries(record_id=record_id)
    if not versions:
        raise ArchiveError(f"no record {record_id} in {path}")
    return versions


def run_show(args: argparse.Namespace) -> int:
    path = archive_path(args)
    if path is None:
        return report_no_archive()
    versions = _record_versions(path, args.record_id)
    body = _readable_body(versions[-1])
    if args.json:
        json.dump({"record_id": versions[0].record_id,
                   "versions": [v.summary() for v in versions],
                   "signatures": body.get("signatures", [])},
                  sys.stdout, ensure_ascii=False, indent=1)
        sys.stdout.write("\n")
        return 0
    print(_record_text(versions, body, path))
    return 0


def _readable_body(entry: Any) -> dict[str, Any]:
    """The entry's record JSON, parsed; a damaged entry is an error pointing at verify."""
    from calib.archive import ArchiveError

    hint = f"entry seq {entry.seq} does not match its digest; run calib archive verify"
    try:
        body = json.loads(entry.json)
    except ValueError:
        raise ArchiveError(hint) from None
    if not entry.digest_matches:
        print(f"calib: warning: {hint}", file=sys.stderr)
    return body if isinstance(body, dict) else {}


def _record_text(versions: list[Any], body: dict[str, Any], path: str) -> str:
    from calib.archive import record_facts
    from calib.cli.render import num

    latest = versions[-1]
    run = body.get("run") or {}
    facts = record_facts(body)
    count = f"{len(versions)} version{'s' if len(versions) != 1 else ''}"
    lines = [f"Record {latest.record_id}: {count} in {path}",
             f"  run file    {run.get('file')} (SHA-256 {str(run.get('sha256'))[:16]}…)",
             f"  run date    {latest.run_date}   instrument {latest.instrument or '—'}",
             f"  verdict     {latest.verdict}",
             "  curves"]
    for c in facts.curves:
        lines.append(f"    {c.analyte}: {c.verdict}, slope {num(c.slope)}, intercept "
                     f"{num(c.intercept)}, residual SD {num(c.residual_sd)}")
    lines.append("  versions")
    for v in versions:
        lines.append(f"    seq {v.seq:<5} {v.kind:<7} archived {v.created_at}  "
                     f"version {v.version_digest[:16]}…  sign-off {', '.join(v.roles) or '—'}")
    lines.append("  signatures (latest version)")
    for s in body.get("signatures") or []:
        key = f"  key {s['key_id'][:16]}" if s.get("key_id") else ""
        lines.append(f"    {s.get('role', '?'):<9} {s.get('name', '?')}  {s.get('signed_at', '?')}"
                     f"  “{s.get('meaning', '')}”{key}")
    return "\n".join(lines)


def _run_export(args: argparse.Namespace) -> int:
    path = archive_path(args)
    if path is None:
        return report_no_archive()
    from calib.output import safe_file_name, write_atomic

    versions = _record_versions(path, args.record_id)
    damaged = [v.seq for v in versions if not v.digest_matches]
    if damaged:
        print(f"calib: error: entry seq {damaged[0]} of {versions[0].record_id} does not match "
              "its digest; nothing was exported (run calib archive verify)", file=sys.stderr)
        return EXIT_INTEGRITY
    chosen = list(enumerate(versions, start=1)) if args.all_versions else [(0, versions[-1])]
    out = Path(args.out)
    for number, entry in chosen:
        stem = safe_file_name(entry.record_id + (f"-v{number}-{entry.kind}" if number else ""))
        pdf = write_atomic(out / f"{stem}.pdf", entry.pdf)
        data = write_atomic(out / f"{stem}.record.json", entry.json)
        print(f"seq {entry.seq} ({entry.kind}): {pdf}\n  record data: {data}")
    return 0


def _run_verify(args: argparse.Namespace) -> int:
    path = archive_path(args)
    if path is None:
        return report_no_archive()
    if args.record:
        return _verify_record(path, args.record)
    with _open(path) as archive:
        report = archive.verify_chain(expected_head=args.head, deep=not args.fast,
                                      pdfs=not args.fast)
        where = archive.location
    head = (f"head seq {report.head_seq}, entry hash {report.head_hash}"
            if report.head_seq else "empty")
    what = ("every link and entry hash intact (hash pass only: JSON and PDFs not read)"
            if args.fast else "every digest, PDF and the hash chain intact")
    if report.ok:
        print(f"Archive {where}: {report.entries} entries, {what}; {head}")
        print(_receipt_note(report))
        return 0
    print(f"Archive {where}: {len(report.problems)} problem"
          f"{'s' if len(report.problems) != 1 else ''} in {report.entries} entries; {head}")
    for problem in report.problems:
        print(f"  {problem}")
    return EXIT_INTEGRITY


def _verify_record(path: str, record_id: str) -> int:
    from calib.archive import ArchiveError

    with _open(path) as archive:
        versions = archive.entries(record_id=record_id, data=False)
        if not versions:
            raise ArchiveError(f"no record {record_id} in {archive.location}")
        reports = [archive.verify_entry(v.version_digest) for v in versions]
        where = archive.location
    problems = list(dict.fromkeys(str(p) for r in reports for p in r.problems))
    seqs = ", ".join(str(v.seq) for v in versions)
    if not problems:
        print(f"Record {versions[0].record_id} in {where}: entries seq {seqs} intact, each "
              "linked to its neighbours, JSON and PDF matching; "
              + ("head receipt matches." if reports[-1].receipt else "no head receipt kept."))
        return 0
    print(f"Record {versions[0].record_id} in {where}: {len(problems)} problem"
          f"{'s' if len(problems) != 1 else ''} (entries seq {seqs})")
    for problem in problems:
        print(f"  {problem}")
    return EXIT_INTEGRITY


def logbook_note(archive: Any) -> str:
    """The line a command that appended prints for the lab's logbook ("" without a receipt).

    For ``calib check --archive`` and ``calib sign --archive``: call it on the open archive
    right after ``append``.
    """
    receipt = getattr(archive, "last_receipt", None)
    if receipt is None:
        return ""
    return f"For the logbook: {receipt.logbook_line()}"


def _receipt_note(report: Any) -> str:
    if report.receipt is not None:
        return (f"Head receipt {report.receipt_path} (seq {report.receipt.seq}, written "
                f"{report.receipt.written_at}) matches the archive.")
    if report.receipt_path is not None:
        return (f"No head receipt at {report.receipt_path} yet: note the head above in the "
                "lab's logbook to detect later truncation.")
    return ("This archive keeps no head receipt (set CALIB_ARCHIVE_HEAD): note the head above "
            "in the lab's logbook to detect later truncation.")


def _run_head(args: argparse.Namespace) -> int:
    from calib.archive.audit import receipt_problems

    path = archive_path(args)
    if path is None:
        return report_no_archive()
    with _open(path) as archive:
        head = archive.head()
        problems = receipt_problems(archive)
        receipt_path = archive.receipt_path
        archive_id = archive.archive_id
    if head is None:
        print(f"Archive {archive_id} is empty.")
    else:
        print(f"calib archive head {archive_id}: seq {head[0]}, entry hash {head[1]}")
    if problems:
        for problem in problems:
            print(f"  {problem}")
        return EXIT_INTEGRITY
    print(f"(head receipt: {receipt_path or 'none kept; set CALIB_ARCHIVE_HEAD'}; copy the line "
          "above into the lab's logbook)")
    return 0


def _run_migrate(args: argparse.Namespace) -> int:
    from calib.archive.migrate import migrate_archive

    report = migrate_archive(args.source, args.target, target_receipt=args.target_head)
    print(f"Copied {report.entries} entries from {report.source} to {report.target}.")
    print(f"Both hold the same chain: every seq has the same entry hash; head seq "
          f"{report.head_seq}, entry hash {report.head_hash}. The copy verifies in full.")
    return 0
