"""The calibration record: canonical JSON, its digests and the record id derived from them.

A record goes through versions as it is signed off (prepared, then reviewed,
then approved).  Its *content* is the body without ``signatures``; the
content digest stays the same across versions, and so does the record id,
which derives from it.  Each version, content plus the signatures so far,
has its own version digest: the SHA-256 of the whole canonical body
(:attr:`Record.digest`).  :mod:`calib.record.versions` builds on this.
"""

from __future__ import annotations

import hashlib
import json
import platform
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib import metadata
from typing import Any

from calib import __version__
from calib.cautions import CAUTIONS
from calib.checks.evaluate import RunAssessment
from calib.fit.bands import band_figures
from calib.record.document import check_document, finite_or_none
from calib.record.identity import check_printed_name

__all__ = ["JCS", "RECORD_SCHEMA", "Record", "build_record", "canonical_bytes", "canonical_json"]

#: Schema of the records calib issues.  Version 2 states each curve's weighting once, as
#: ``check.curves[i].weighting``: the weighting the fit used (``1/x2`` for ``mean-rf``).
#: Version 1 also had ``settings.weighting`` and ``fit_details[i].weight_function`` (the
#: fit's weights, which for ``mean-rf`` were 1/x2 where ``weighting`` said ``none``).
RECORD_SCHEMA = "calib.record/2"
#: Schemas calib reads, verifies and renders: every version it has issued.
_READ_SCHEMAS = ("calib.record/1", RECORD_SCHEMA)
#: Value of a record's ``canonicalization`` field: its digests are over RFC 8785 (JCS) bytes.
#: Records without the field (calib 0.1.0) use :func:`canonical_json`, kept for them.
JCS = "RFC 8785"
PREPARED_MEANING = "Prepared: I evaluated this calibration and issued this record"


def canonical_json(data: Any) -> bytes:
    """Canonical JSON bytes: sorted keys, UTF-8, no insignificant whitespace, no NaN.

    Floats are written with the shortest text that reads back to the same
    double, so nothing is rounded.

    Examples
    --------
    >>> canonical_json({"b": 0.1, "a": "µg"})
    b'{"a":"\\xc2\\xb5g","b":0.1}'
    """
    return json.dumps(
        data, sort_keys=True, ensure_ascii=False, separators=(",", ":"), allow_nan=False
    ).encode("utf-8")


def canonical_bytes(data: Any, *, jcs: bool) -> bytes:
    """``data`` in RFC 8785 canonical form when ``jcs``, else calib 0.1.0's :func:`canonical_json`.

    RFC 8785 (JSON Canonicalization Scheme) is an open standard with libraries
    in many languages, so anyone can recompute a digest without calib.

    Examples
    --------
    >>> canonical_bytes({"b": 1.0, "a": "µg"}, jcs=True)
    b'{"a":"\xc2\xb5g","b":1}'
    >>> canonical_bytes({"b": 1.0, "a": "µg"}, jcs=False)
    b'{"a":"\xc2\xb5g","b":1.0}'
    """
    if jcs:
        import rfc8785

        try:
            return rfc8785.dumps(data)
        except (rfc8785.CanonicalizationError, TypeError) as exc:
            raise ValueError(f"cannot be canonicalised per RFC 8785: {exc}") from None
    return canonical_json(data)


@dataclass(frozen=True)
class Record:
    """An issued calibration record.

    Attributes
    ----------
    body : dict
        The record data (schema ``calib.record/2``; ``/1`` still read).
    """

    body: dict[str, Any]

    @property
    def jcs(self) -> bool:
        """Whether the record is canonicalised per RFC 8785 (records of calib 0.1.0 are not)."""
        return self.body.get("canonicalization") == JCS

    @property
    def canonical(self) -> bytes:
        """The canonical JSON bytes the digest is computed on (RFC 8785 unless a 0.1.0 record)."""
        return canonical_bytes(self.body, jcs=self.jcs)

    @property
    def digest(self) -> str:
        """Version digest: SHA-256 of :attr:`canonical` (content and signatures), in hex."""
        return hashlib.sha256(self.canonical).hexdigest()

    @property
    def content_digest(self) -> str:
        """SHA-256 (hex) of the canonical body without ``signatures``; the same in every version."""
        content = {key: value for key, value in self.body.items() if key != "signatures"}
        return hashlib.sha256(canonical_bytes(content, jcs=self.jcs)).hexdigest()

    @property
    def record_id(self) -> str:
        """Short identifier derived from the content digest, e.g. ``CR-3F9A1C2B77DE``.

        Signing adds a version but keeps the id: the id names the calibration,
        the version digest names one signed state of it.
        """
        return "CR-" + self.content_digest[:12].upper()

    @classmethod
    def from_json(cls, data: bytes | str) -> Record:
        """Read a record back from its JSON."""
        body = json.loads(data)
        if not isinstance(body, dict) or body.get("schema") not in _READ_SCHEMAS:
            raise ValueError(f"not a {' or '.join(_READ_SCHEMAS)} document")
        return cls(body)


def build_record(
    assessment: RunAssessment,
    *,
    prepared_by: str | None = None,
    created_at: datetime | None = None,
) -> Record:
    """Assemble the record of an assessed run.

    Parameters
    ----------
    assessment : RunAssessment
        The fitted and checked run.
    prepared_by : str, optional
        Printed name of the analyst issuing the record (ValueError when it holds
        invisible characters or mixes scripts: :func:`calib.record.identity.check_printed_name`).
    created_at : datetime, optional
        Issue time (UTC); now when omitted.
    """
    if prepared_by is not None:
        prepared_by = check_printed_name(prepared_by, what="the preparer's printed name")
    when = (created_at or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    run, profile = assessment.run, assessment.profile
    signatures = []
    if prepared_by:
        signatures.append(
            {"role": "prepared", "name": prepared_by, "signed_at": when, "meaning": PREPARED_MEANING}
        )
    body = {
        "schema": RECORD_SCHEMA,
        "canonicalization": JCS,
        "created_at": when,
        "tool": {"name": "calib", "version": __version__},
        "libraries": _library_versions(),
        "prepared_by": prepared_by,
        "signatures": signatures,
        "run": {
            "file": run.source.file,
            "sha256": run.source.sha256,
            "sheet": run.source.sheet,
            "layout": run.source.layout,
            "metadata": dict(run.metadata),
            "units": dict(run.units),
            "analyte_units": {a: dict(u) for a, u in run.analyte_units.items()},
            "warnings": list(run.warnings),
        },
        # The weighting is each curve's (check.curves[i].weighting), stated once.
        "settings": {
            "model": assessment.model.value,
            "confidence": assessment.confidence,
        },
        "profile": {
            "name": profile.name,
            "version": profile.version,
            "sha256": profile.sha256,
            "text": profile.text,
        },
        "cautions": CAUTIONS,
        "check": check_document(assessment),
        "fit_details": [
            {
                "analyte": c.analyte,
                "coefficient_names": list(c.fit.names),
                "covariance": [[finite_or_none(v) for v in row] for row in c.fit.covariance.tolist()],
                "t_critical": finite_or_none(c.fit.t_critical()),
                "x_min": float(c.fit.x.min()),
                "x_max": float(c.fit.x.max()),
                # What the prediction band needs (calib.fit.bands.prediction_band), but
                # the weighting: the curve's own ``weighting`` is the fit's.
                **{k: v for k, v in band_figures(c.fit).items() if k != "weight_function"},
            }
            for c in assessment.curves
            if c.fit is not None
        ],
    }
    if assessment.standards is not None:
        # Which reference materials the standards came from (ISO/IEC 17025 §6.5, §7.5).
        from calib.io.standards import standards_section

        body["standards"] = standards_section(assessment.standards)
    return Record(body)


def _library_versions() -> dict[str, str]:
    versions = {"python": platform.python_version()}
    for name in ("numpy", "scipy", "reportlab"):
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return versions
