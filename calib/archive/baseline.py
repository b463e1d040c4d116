"""A frozen, reviewed baseline for an analyte's control charts (Phase I), kept as a small file.

Control limits drawn afresh from whatever curves the archive holds move as
curves are added, and a bad curve inside them widens its own limits.  A lab
instead *establishes* a baseline once (Phase I): it chooses runs from a period
it knows was in control, excludes the out-of-control ones with a reason, has a
person review the result, and *freezes* the limits.  Later curves are then
monitored against those fixed limits (Phase II; :func:`calib.archive.trend.analyte_trend`
with ``frozen=``).

Where it is kept
    A JSON file (schema ``calib.baseline/1``) in a folder beside the archive,
    ``<archive file>.baselines/``, named after the analyte (and instrument) with
    a version number: ``Cu 324.754@ICP-OES-2.v1.json``.  Freezing again writes
    the next version and never overwrites one, so earlier baselines stay for
    the auditor; the trend uses the highest version.  The archive itself is
    append-only and holds records only, so the baseline lives beside it.
What it holds
    The chosen curves with their figures (record id, run date, slope,
    intercept, residual SD), the excluded curves with the reason, the limits
    computed from the kept curves, who reviewed it and when, the archive state
    it was drawn from, and a SHA-256 digest of all that (RFC 8785 canonical
    JSON), so an edit to the file is detected on reading; the limits are also
    recomputed from the stored figures and the figures compared with the archive.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
import statistics
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import rfc8785

from calib.archive.control import MIN_BASELINE, ControlLimits, screened_limits
from calib.errors import BaselineError

__all__ = [
    "BASELINE_SCHEMA",
    "BaselineCurve",
    "BaselineError",
    "FrozenBaseline",
    "baseline_document",
    "baseline_folder",
    "establish_baseline",
    "latest_baseline_file",
    "load_baseline",
    "next_baseline_file",
    "parse_exclusion",
]

BASELINE_SCHEMA = "calib.baseline/1"
_QUANTITIES = ("slope", "intercept", "residual_sd")
_VERSIONED = re.compile(r"^(?P<stem>.+)\.v(?P<n>[1-9]\d{0,5})\.json$")
_MIN_REASON = 4


@dataclass(frozen=True)
class BaselineCurve:
    """One curve chosen for a baseline, with the figures the limits came from.

    Attributes
    ----------
    record_id, run_date : str
        The archived record and its run date.
    slope, intercept, residual_sd : float or None
        The curve's figures.
    reason : str
        Why it was excluded; empty for a curve kept in the limits.
    """

    record_id: str
    run_date: str
    slope: float | None
    intercept: float | None
    residual_sd: float | None
    reason: str = ""


@dataclass(frozen=True)
class FrozenBaseline:
    """Fixed control limits of one analyte, established from reviewed runs.

    Attributes
    ----------
    analyte : str
        The analyte.
    instrument : str or None
        The instrument the runs were made on, when the trend is per instrument.
    model, weighting : str
        How the baseline curves were fitted.
    curves : tuple of BaselineCurve
        The curves kept: the limits are their mean and SD.
    excluded : tuple of BaselineCurve
        Chosen curves excluded by the reviewer, each with its reason.
    limits : mapping
        Quantity → ControlLimits, or None when the curves have no such figure.
    established_at, reviewed_by : str
        When (UTC, ISO 8601) and by whom the baseline was reviewed and frozen.
    selection : str
        How the curves were chosen, in words.
    archive : mapping
        The archive state it was drawn from (``name``, ``seq``, ``entry_hash``).
    note : str
        The reviewer's note.
    file, sha256 : str
        File it was read from and that file's SHA-256; empty until written or read.
    """

    analyte: str
    instrument: str | None
    model: str
    weighting: str
    curves: tuple[BaselineCurve, ...]
    excluded: tuple[BaselineCurve, ...]
    limits: Mapping[str, ControlLimits | None] = field(hash=False)
    established_at: str
    reviewed_by: str
    selection: str
    archive: Mapping[str, Any] = field(hash=False)
    note: str = ""
    file: str = ""
    sha256: str = ""

    @property
    def records(self) -> frozenset[str]:
        """Record ids of the kept curves."""
        return frozenset(c.record_id for c in self.curves)

    def exclusion(self, record_id: str) -> str:
        """The reason ``record_id`` was excluded; empty when it was not."""
        return next((c.reason for c in self.excluded if c.record_id == record_id), "")

    def name(self) -> str:
        """How the trend output names it: file and digest prefix, or the freeze time."""
        if self.file:
            return f"{Path(self.file).name} (SHA-256 {self.sha256[:16]})"
        return f"frozen {self.established_at} by {self.reviewed_by}"


def _figure(curve: Any, quantity: str) -> float | None:
    value = getattr(curve.figures, quantity)
    return float(value) if value is not None and math.isfinite(value) else None


def _as_baseline_curve(curve: Any, reason: str = "") -> BaselineCurve:
    return BaselineCurve(curve.record_id, curve.run_date,
                         *(_figure(curve, q) for q in _QUANTITIES), reason=reason)


def _limits(curves: Sequence[BaselineCurve]) -> dict[str, ControlLimits | None]:
    out: dict[str, ControlLimits | None] = {}
    for q in _QUANTITIES:
        values = [getattr(c, q) for c in curves if getattr(c, q) is not None]
        if len(values) < MIN_BASELINE or statistics.stdev(values) == 0:
            out[q] = None
        else:
            out[q] = ControlLimits(statistics.fmean(values), statistics.stdev(values), len(values))
    return out


def parse_exclusion(text: str) -> tuple[str, str]:
    """``RECORD_ID=REASON`` → (record id, reason); ValueError when either is missing.

    Examples
    --------
    >>> parse_exclusion("CR-0A1B2C3D4E5F = nebuliser blocked, slope 15 % low")
    ('CR-0A1B2C3D4E5F', 'nebuliser blocked, slope 15 % low')
    """
    record, sep, reason = text.partition("=")
    record, reason = record.strip(), " ".join(reason.split())
    if not sep or not record:
        raise ValueError(f"an exclusion is RECORD_ID=REASON; got {text!r}")
    if len(reason) < _MIN_REASON:
        raise ValueError(f"excluding {record} from the baseline needs a reason "
                         f"(at least {_MIN_REASON} characters); got {reason!r}")
    return record, reason


def establish_baseline(curves: Sequence[Any], *, analyte: str, count: int,
                       reviewed_by: str, established_at: str,
                       exclude: Mapping[str, str] | None = None, start: str | None = None,
                       instrument: str | None = None, archive: Mapping[str, Any] | None = None,
                       note: str = "") -> FrozenBaseline:
    """Phase I: choose the first ``count`` accepted curves, exclude some with a reason, freeze.

    Parameters
    ----------
    curves : sequence of ArchivedCurve
        The analyte's archived curves (:meth:`calib.archive.Archive.curve_history`).
    analyte : str
        The analyte.
    count : int
        How many accepted curves (in run-date order) to choose, excluded ones included.
    reviewed_by : str
        Full printed name of the person who reviewed the baseline.
    established_at : str
        UTC time of the freeze (ISO 8601).
    exclude : mapping, optional
        Record id → reason, for chosen curves left out of the limits.
    start : str, optional
        ``YYYY-MM-DD``: choose from this run date on (after a service, say).
    instrument : str, optional
        The instrument the trend is restricted to.
    archive : mapping, optional
        The archive state read (``name``, ``seq``, ``entry_hash``).
    note : str
        The reviewer's note.

    Returns
    -------
    FrozenBaseline

    Raises
    ------
    BaselineError
        Too few curves; an exclusion names a curve not chosen; the kept curves
        mix models, weightings, instruments or units; or a kept curve lies
        too far from the others on any chart (the screening of
        :func:`calib.archive.control.screened_limits`; it must be excluded with a reason).
    """
    exclude = {k.strip().upper(): v for k, v in (exclude or {}).items()}
    if not reviewed_by.strip():
        raise BaselineError("a baseline is frozen only once a person has reviewed it: "
                            "give the reviewer's full name")
    ordered = sorted((c for c in curves if c.accepted),
                     key=lambda c: (c.run_date, c.seq, c.figures.position))
    if start is not None:
        ordered = [c for c in ordered if c.run_date >= start]
    since = f" from {start} on" if start else ""
    if len(ordered) < count:
        raise BaselineError(f"{analyte}: {len(ordered)} accepted curve"
                            f"{'s' if len(ordered) != 1 else ''}{since}, fewer than the "
                            f"{count} asked for the baseline")
    chosen = ordered[:count]
    ids = {c.record_id.upper() for c in chosen}
    unknown = sorted(set(exclude) - ids)
    if unknown:
        raise BaselineError(f"cannot exclude {', '.join(unknown)}: not among the {count} curves "
                            f"chosen for the baseline ({chosen[0].run_date} to "
                            f"{chosen[-1].run_date})")
    kept = [c for c in chosen if c.record_id.upper() not in exclude]
    if len(kept) < MIN_BASELINE:
        raise BaselineError(f"{len(kept)} curves left after the exclusions; a baseline needs at "
                            f"least {MIN_BASELINE}")
    for label, key in (("models or weightings", lambda c: (c.figures.model, c.figures.weighting)),
                       ("instruments", lambda c: c.instrument),
                       ("units", lambda c: (c.figures.concentration_unit,
                                            c.figures.response_unit))):
        if len({key(c) for c in kept}) > 1:
            raise BaselineError(f"the baseline curves mix {label}; choose runs made the same "
                                "way (--instrument, --baseline-start)")
    problems = []
    for q in _QUANTITIES:
        values = [_figure(c, q) for c in kept]
        if any(v is None for v in values):
            continue
        try:
            _, out = screened_limits(values, baseline=None)
        except ValueError:
            continue
        problems += [f"{kept[o.index].record_id} ({kept[o.index].run_date}) {q} "
                     f"{o.reason}" for o in out]
    if problems:
        raise BaselineError("the baseline is not in control: " + "; ".join(problems)
                            + ". Exclude such a curve with a reason (--exclude RECORD_ID=REASON) "
                            "or choose other runs")
    frozen = tuple(_as_baseline_curve(c) for c in kept)
    selection = (f"the first {count} accepted curves{since} ({chosen[0].run_date} to "
                 f"{chosen[-1].run_date}), {len(chosen) - len(kept)} excluded")
    return FrozenBaseline(
        analyte=analyte, instrument=instrument, model=kept[0].figures.model,
        weighting=kept[0].figures.weighting, curves=frozen,
        excluded=tuple(_as_baseline_curve(c, exclude[c.record_id.upper()]) for c in chosen
                       if c.record_id.upper() in exclude),
        limits=_limits(frozen), established_at=established_at, reviewed_by=reviewed_by.strip(),
        selection=selection, archive=dict(archive or {}), note=note.strip())


def _content(b: FrozenBaseline) -> dict[str, Any]:
    def curve(c: BaselineCurve) -> dict[str, Any]:
        out = {"record_id": c.record_id, "run_date": c.run_date,
               **{q: getattr(c, q) for q in _QUANTITIES}}
        return {**out, "reason": c.reason} if c.reason else out

    return {
        "schema": BASELINE_SCHEMA, "analyte": b.analyte, "instrument": b.instrument,
        "model": b.model, "weighting": b.weighting, "established_at": b.established_at,
        "reviewed_by": b.reviewed_by, "selection": b.selection, "note": b.note,
        "archive": dict(b.archive),
        "curves": [curve(c) for c in b.curves], "excluded": [curve(c) for c in b.excluded],
        "limits": {q: None if lim is None else {"mean": lim.mean, "sd": lim.sd,
                                                "n": lim.baseline}
                   for q, lim in b.limits.items()},
    }


def baseline_document(b: FrozenBaseline) -> bytes:
    """The baseline file's bytes: its content and the SHA-256 of its canonical JSON."""
    content = _content(b)
    digest = hashlib.sha256(rfc8785.dumps(content)).hexdigest()
    text = json.dumps({**content, "digest": digest}, ensure_ascii=False, indent=2,
                      allow_nan=False)
    return (text + "\n").encode("utf-8")


def _fail(path: Path, message: str) -> BaselineError:
    return BaselineError(f"{path}: {message}")


def load_baseline(path: str | Path) -> FrozenBaseline:
    """Read a baseline file, checking its digest and recomputing its limits.

    Raises
    ------
    BaselineError
        If the file cannot be read, is not a ``calib.baseline/1`` document, was
        edited after it was frozen (digest), or its limits do not follow from
        its curves.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
        data = json.loads(raw.decode("utf-8"))
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise _fail(path, f"not a readable baseline file ({exc})") from None
    if not isinstance(data, dict) or data.get("schema") != BASELINE_SCHEMA:
        raise _fail(path, f"not a {BASELINE_SCHEMA} document")
    stated = data.pop("digest", None)
    try:
        digest = hashlib.sha256(rfc8785.dumps(data)).hexdigest()
    except Exception as exc:  # rfc8785 refuses NaN, huge integers...; say so, not crash
        raise _fail(path, f"cannot be put in canonical form ({exc})") from None
    if stated != digest:
        raise _fail(path, "the baseline was edited after it was frozen (its digest does not "
                          "match its content)")
    try:
        curves = tuple(_curve(c, with_reason=False) for c in data["curves"])
        excluded = tuple(_curve(c, with_reason=True) for c in data["excluded"])
        baseline = FrozenBaseline(
            analyte=str(data["analyte"]), instrument=data["instrument"], model=str(data["model"]),
            weighting=str(data["weighting"]), curves=curves, excluded=excluded,
            limits=_limits(curves), established_at=str(data["established_at"]),
            reviewed_by=str(data["reviewed_by"]), selection=str(data["selection"]),
            archive=dict(data["archive"]), note=str(data["note"]), file=str(path),
            sha256=hashlib.sha256(raw).hexdigest())
    except (KeyError, TypeError, ValueError) as exc:
        raise _fail(path, f"incomplete baseline document ({exc})") from None
    for q, lim in baseline.limits.items():
        stored = data["limits"].get(q) if isinstance(data["limits"], dict) else None
        if (lim is None) != (stored is None) or (lim is not None and not (
                math.isclose(lim.mean, stored["mean"], rel_tol=1e-12, abs_tol=1e-300)
                and math.isclose(lim.sd, stored["sd"], rel_tol=1e-12)
                and lim.baseline == stored["n"])):
            raise _fail(path, f"the {q} limits do not follow from the baseline's curves")
    return baseline


def _curve(c: Mapping[str, Any], *, with_reason: bool) -> BaselineCurve:
    def number(key: str) -> float | None:
        v = c[key]
        if v is None:
            return None
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise ValueError(f"{key} is not a number")
        return float(v)

    reason = str(c["reason"]) if with_reason else ""
    if with_reason and len(reason.strip()) < _MIN_REASON:
        raise ValueError(f"exclusion of {c['record_id']} has no reason")
    return BaselineCurve(str(c["record_id"]), str(c["run_date"]),
                         *(number(q) for q in _QUANTITIES), reason=reason)


def baseline_folder(archive_file: str | Path) -> Path:
    """Folder beside the archive where its baselines are kept.

    Examples
    --------
    >>> baseline_folder("lab/records.sqlite").as_posix()
    'lab/records.sqlite.baselines'
    """
    path = Path(archive_file)
    return path.with_name(path.name + ".baselines")


def _stem(analyte: str, instrument: str | None) -> str:
    from calib.output import safe_file_name

    return safe_file_name(analyte + (f"@{instrument}" if instrument else ""))


def _versions(folder: Path, analyte: str, instrument: str | None) -> list[tuple[int, Path]]:
    stem = _stem(analyte, instrument).casefold()
    found = []
    if folder.is_dir():
        for p in folder.iterdir():
            m = _VERSIONED.match(p.name)
            if m and m["stem"].casefold() == stem:
                found.append((int(m["n"]), p))
    return sorted(found)


def latest_baseline_file(folder: Path, analyte: str, instrument: str | None) -> Path | None:
    """The highest-numbered baseline file of ``analyte`` (and instrument); None when none.

    The analyte matches ignoring case, as the archive matches it.
    """
    versions = _versions(folder, analyte, instrument)
    return versions[-1][1] if versions else None


def next_baseline_file(folder: Path, analyte: str, instrument: str | None) -> Path:
    """Where the next version of the baseline goes (``<analyte>[@instrument].vN.json``).

    Examples
    --------
    >>> next_baseline_file(Path("none-here"), "Cu 324.754", "ICP-OES-2").name
    'Cu 324.754@ICP-OES-2.v1.json'
    """
    versions = _versions(folder, analyte, instrument)
    n = versions[-1][0] + 1 if versions else 1
    return folder / f"{_stem(analyte, instrument)}.v{n}.json"

