"""``calib check`` over several run files or a folder: each checked, one summary, one exit code.

- A folder stands for the run files directly in it (not its sub-folders) whose
  suffix calib reads, in name order; other files there are left alone and named.
- Each file is checked on its own; a file that cannot be used is reported as
  UNUSABLE with the reason and the others are still checked.
- The exit code is the worst: 3 when any file was unusable, else 1 when any
  curve was rejected or needs review, else 0.
- ``--pdf``, ``--xlsx`` and ``--csv`` name folders: each run's files are
  ``RUN-NAME.pdf`` / ``.xlsx`` / ``.csv`` there (RUN-NAME is the run file's
  name without its suffix).  Each run's files are written on their own (all of
  that run's or none), so one unusable file does not stop the others.
- ``--json`` prints one ``calib.check-set/1`` document: the worst verdict and,
  per file, its ``calib.check/1`` document or the reason it was unusable.
- ``--exclude``, ``--range`` and ``--show-import`` name cells and curves of one
  file, so they are refused with several.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from calib.cli import exits
from calib.cli.check_text import RunLine, summary_text, worst
from calib.verdict_words import VERDICT_WORDS

if TYPE_CHECKING:
    from calib.service import CheckOutcome

_RUN_SUFFIXES = (".xlsx", ".xlsm", ".xls", ".ods", ".csv", ".tsv", ".txt")
"""Suffixes of the run files a folder is searched for."""

_EXIT = {"accepted": exits.OK, "needs-review": exits.NOT_ACCEPTED, "rejected": exits.NOT_ACCEPTED,
         "unusable": exits.INPUT}


def expand_runs(names: Sequence[str]) -> list[Path] | None:
    """The run files named on the command line, folders opened; None (after saying why) on error.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> for n in ("b.csv", "a.xlsx", "notes.pdf"): _ = (d / n).write_bytes(b"")
    >>> [p.name for p in expand_runs([str(d)])]
    ['a.xlsx', 'b.csv']
    """
    runs: list[Path] = []
    for name in names:
        path = Path(name)
        if path.is_dir():
            found = sorted(p for p in path.iterdir()
                           if p.is_file() and p.suffix.lower() in _RUN_SUFFIXES
                           and not p.name.startswith((".", "~$")))
            if not found:
                _usage(f"folder {name} holds no run files ({', '.join(_RUN_SUFFIXES)})")
                return None
            runs += found
        else:
            runs.append(path)
    seen: dict[Path, Path] = {}
    for p in runs:
        key = p.resolve()
        if key in seen:
            _usage(f"{p} is named twice; each run file is checked once")
            return None
        seen[key] = p
    return runs


def _output_names(runs: Sequence[Path]) -> dict[Path, str] | None:
    """Each run's output stem; None (after saying why) when two runs would share one.

    Examples
    --------
    >>> names = _output_names([Path("x/a.xlsx"), Path("y/b.csv")])
    >>> [names[p] for p in (Path("x/a.xlsx"), Path("y/b.csv"))]
    ['a', 'b']
    >>> _output_names([Path("x/a.xlsx"), Path("y/a.csv")]) is None
    True
    """
    from calib.output import safe_file_name

    stems: dict[str, Path] = {}
    for p in runs:
        stem = safe_file_name(p.stem)
        if stem.casefold() in stems:
            _usage(f"{stems[stem.casefold()]} and {p} would both write {stem}.*: rename one, or "
                   "check them one at a time")
            return None
        stems[stem.casefold()] = p
    return {p: safe_file_name(p.stem) for p in runs}


def run_many(args: argparse.Namespace, runs: Sequence[Path], imap: Any, *,
             check: Callable[[argparse.Namespace, Any], CheckOutcome]) -> int:
    """Check several run files; print each, then one summary; return the worst exit code.

    ``check`` reads and judges one run file as ``calib check`` of that file alone does.
    """
    from calib import service
    from calib.cli import render
    from calib.cli.archive import archive_path
    from calib.cli.check_text import brief_text, default_text
    from calib.cli.common import refuse_existing
    from calib.errors import InputError

    for option, given in (("--exclude", args.exclude), ("--range", args.ranges),
                          ("--show-import", args.show_import)):
        if given:
            _usage(f"{option} applies to one run file; check that file on its own "
                   f"({len(runs)} run files given)")
            return 2
    names = _output_names(runs)
    if names is None:
        return 2
    folders = {}
    for option, value, suffix in (("--pdf", args.pdf, ".pdf"), ("--xlsx", args.xlsx, ".xlsx"),
                                  ("--csv", args.csv, ".csv")):
        if value is None:
            continue
        folder = Path(value)
        if folder.exists() and not folder.is_dir() or folder.suffix.lower() == suffix:
            _usage(f"with several run files {option} names a folder (one file per run), "
                   f"not {value}")
            return 2
        folders[suffix] = folder
    if ".pdf" in folders and refuse_existing(
            "check", [folders[".pdf"] / f"{names[p]}.pdf" for p in runs], force=args.force):
        return 2
    archive = archive_path(args)
    lines: list[RunLine] = []
    documents: list[dict[str, Any]] = []
    texts: list[str] = []
    for path in runs:
        one = argparse.Namespace(**{**vars(args), "run": str(path)})
        try:
            outcome = check(one, imap)
        except InputError as exc:
            lines.append(RunLine(path.name, "unusable", error=str(exc)))
            documents.append({"file": str(path), "verdict": "unusable", "error": str(exc)})
            texts.append(f"{path}: {VERDICT_WORDS['unusable']}: {exc}")
            continue
        out = {suffix: folder / f"{names[path]}{suffix}" for suffix, folder in folders.items()}
        said = []
        if ".pdf" in out or archive:
            issued = service.issue(outcome, prepared_by=args.prepared_by, template=args.template,
                                   pdf=out.get(".pdf"), xlsx=out.get(".xlsx"),
                                   csv=out.get(".csv"), archive=archive, replace=args.force)
            said += [f"Record {issued.record.record_id} written to {out['.pdf']}"] \
                if ".pdf" in out else []
            if issued.filed is not None:
                said.append(f"Record {issued.record.record_id} filed in archive "
                            f"{issued.archive} as entry seq {issued.filed.seq}")
                said += [issued.logbook] if issued.logbook else []
        else:
            service.export(outcome, xlsx=out.get(".xlsx"), csv=out.get(".csv"))
        said += [f"{what} written to {out[s]}" for s, what in
                 ((".xlsx", "Results workbook"), (".csv", "Results CSV")) if s in out]
        curves = outcome.assessment.curves
        lines.append(RunLine(path.name, outcome.verdict, len(curves),
                             sum(c.verdict.value != "accepted" for c in curves)))
        documents.append({"file": str(path), "verdict": outcome.verdict,
                          "check": outcome.document})
        if args.brief:
            body = brief_text(outcome.assessment)
        elif args.full:
            body = render.assessment_text(outcome.assessment)
        else:
            body = default_text(outcome.assessment)
        texts.append("\n".join([body, *said]))
        if args.json:
            for s in said:
                print(f"calib: {s}", file=sys.stderr)
    verdict = worst(lines)
    if args.json:
        sys.stdout.write(json.dumps({"schema": "calib.check-set/1", "verdict": verdict,
                                     "runs": documents}, ensure_ascii=False,
                                    allow_nan=False) + "\n")
        from calib.cautions import CAUTIONS

        print(f"calib: caution: {CAUTIONS}", file=sys.stderr)
    else:
        rule = "=" * 72
        for text in texts:
            print(f"{rule}\n{text}\n")
        print(summary_text(lines))
        print("\n" + render.cautions_text())
    return _EXIT[verdict]


def _usage(message: str) -> None:
    print(f"calib check: error: {message}", file=sys.stderr)
