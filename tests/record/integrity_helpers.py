"""Records, keys and PDFs for the sign-off and verification tests.

The records are real: the invented Fernbrook nitrate standards (tests/report/conftest.py,
fixed seed) fitted and checked by calib, so every figure agrees with every other.  People
and key names are invented.
"""

from __future__ import annotations

import functools
from datetime import UTC, datetime
from pathlib import Path

from calib.checks import evaluate_run
from calib.checks.profile import parse_profile, shipped_profiles
from calib.record import Record, build_record
from calib.record.keys import load_keyring, load_signing_key, new_key
from calib.report import write_pdf
from tests.conftest import make_run
from tests.report.conftest import nitrate_standards

PREPARER = "Zoë Łukasiewicz-Ng"
REVIEWER = "Tomasz Øvergaard"
APPROVER = "Adaeze Mbeki-Hale"
ISSUED_AT = datetime(2026, 12, 1, 9, 30, tzinfo=UTC)
REVIEWED_AT = datetime(2026, 12, 2, 14, 5, tzinfo=UTC)
APPROVED_AT = datetime(2026, 12, 3, 8, 45, 30, tzinfo=UTC)
PASSPHRASE = b"heron 42 weir"
LENIENT = "\n[signoff]\nallow_preparer_to_review = true\nallow_preparer_to_approve = true\n"


@functools.cache
def _assessment(profile_extra: str, levels: int):
    standards = [s for s in nitrate_standards() if s.level <= levels]
    excluded = {i: s.excluded for i, s in enumerate(standards) if s.excluded}
    run = make_run([s.x for s in standards], [s.y for s in standards], analyte="Nitrate-N",
                   excluded=excluded)
    profile = parse_profile(shipped_profiles()["default"] + profile_extra,
                            origin="profile test")
    return evaluate_run(run, profile=profile)


def issued(*, profile_extra: str = "", levels: int = 6) -> Record:
    """The issued nitrate record (version 1: prepared).  ``levels=4`` gives a rejected curve."""
    return build_record(_assessment(profile_extra, levels), prepared_by=PREPARER,
                        created_at=ISSUED_AT)


def render(record: Record, template=None) -> bytes:
    return write_pdf(record.body, digest=record.digest, record_id=record.record_id,
                     template=template, attachment=record.canonical)


def make_keys(folder: Path, *names: str):
    """Key pairs for ``names``: private keys in folder/private, public keys in folder/ring."""
    keys = {}
    for name in names:
        made = new_key(name, folder=folder / "private", passphrase=PASSPHRASE)
        (folder / "ring").mkdir(parents=True, exist_ok=True)
        made.public_path.rename(folder / "ring" / made.public_path.name)
        keys[name] = load_signing_key(made.private_path, passphrase=PASSPHRASE)
    return keys, load_keyring(folder / "ring")
