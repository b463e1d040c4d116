"""Records, keys and PDFs for the sign-off and verification tests.

The records are real: the invented Fernbrook nitrate standards (tests/report/conftest.py,
fixed seed) fitted and checked by calib, so every figure agrees with every other.  People,
the lab authority and key holders are invented.  Keys are made once per test process
(scrypt makes each one take a noticeable fraction of a second), certified from
2026-11-01 so the fixed signing times below fall inside their validity.
"""

from __future__ import annotations

import atexit
import functools
import shutil
import tempfile
from datetime import UTC, datetime
from pathlib import Path

from calib.checks import evaluate_run
from calib.checks.profile import parse_profile, shipped_profiles
from calib.record import Record, build_record
from calib.record.keys import lab_init, load_keyring, load_signing_key, new_key
from calib.record.signing import issue_signed
from calib.record.signoff import issue_pdf
from calib.report import record_pages, write_pdf
from tests.conftest import make_run
from tests.report.conftest import nitrate_standards

PREPARER = "Zoë Łukasiewicz-Ng"
REVIEWER = "Tomasz Øvergaard"
APPROVER = "Adaeze Mbeki-Hale"
ISSUED_AT = datetime(2026, 12, 1, 9, 30, tzinfo=UTC)
REVIEWED_AT = datetime(2026, 12, 2, 14, 5, tzinfo=UTC)
APPROVED_AT = datetime(2026, 12, 3, 8, 45, 30, tzinfo=UTC)
PASSPHRASE = b"heron 42 weir"
LAB = "Fernbrook Water Laboratory"
KEYS_MADE = datetime(2026, 11, 1, tzinfo=UTC)
#: Short key names used by the tests, and the people they belong to.
HOLDERS = {"z-lukasiewicz-ng": PREPARER, "t-overgaard": REVIEWER, "a-mbeki-hale": APPROVER}
LENIENT = ("\n[signoff]\nallow_preparer_to_review = true\nallow_preparer_to_approve = true\n"
           "allow_reviewer_to_approve = true\n")


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


_STORE: dict = {}


def _store() -> Path:
    if "dir" not in _STORE:
        folder = Path(tempfile.mkdtemp(prefix="calib-test-keys-"))
        atexit.register(shutil.rmtree, folder, True)
        _STORE["dir"] = folder
    return _STORE["dir"]


def authority(lab: str = LAB):
    """The (cached) unlocked lab authority key of ``lab`` and its certificate path."""
    if ("ca", lab) not in _STORE:
        made = lab_init(lab, folder=_store() / f"ca-{len(_STORE)}", passphrase=PASSPHRASE,
                        now=KEYS_MADE)
        _STORE["ca", lab] = (load_signing_key(made.private_path, passphrase=PASSPHRASE),
                             made.certificate_path)
    return _STORE["ca", lab]


def person_key(holder: str, lab: str = LAB):
    """The (cached) unlocked key of ``holder``, certified by the authority of ``lab``."""
    if ("key", holder, lab) not in _STORE:
        ca, _ = authority(lab)
        made = new_key(holder, folder=_store() / f"p-{len(_STORE)}", passphrase=PASSPHRASE,
                       authority=ca, now=KEYS_MADE)
        _STORE["key", holder, lab] = load_signing_key(made.private_path, passphrase=PASSPHRASE)
    return _STORE["key", holder, lab]


def keyring(folder: Path, lab: str = LAB):
    """A keyring folder trusting the authority of ``lab``."""
    folder.mkdir(parents=True, exist_ok=True)
    shutil.copy(authority(lab)[1], folder / "lab-authority.cert.pem")
    return load_keyring(folder)


def make_keys(folder: Path, *names: str):
    """Keys for ``names`` (short names of :data:`HOLDERS`, or full names) and a keyring."""
    keys = {name: person_key(HOLDERS.get(name, name)) for name in names}
    return keys, keyring(folder / "ring")


def issued_signed(**options) -> tuple[Record, bytes]:
    """The nitrate record signed by its issuer (the preparer's key), and its signed PDF."""
    key = person_key(PREPARER)
    record = issue_signed(issued(**options), key)
    return record, issue_pdf(record, pages=record_pages(), key=key)
