"""calib check --key: the issued record is signed by its issuer (ISO 32000 signature, key entry)."""

from __future__ import annotations

from pathlib import Path

from calib.cli.main import main
from calib.record.verify import verify_file
from tests.record.integrity_helpers import PASSPHRASE, REVIEWER, keyring, person_key

RUN = Path(__file__).resolve().parents[2] / "sample_runs" / "fernbrook_nitrate_2026-11-30.xlsx"


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def test_check_with_a_key_issues_a_record_signed_by_its_issuer(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", PASSPHRASE.decode())
    key = person_key(REVIEWER).path
    out = tmp_path / "nitrate.pdf"
    code, _, err = cli(capsys, "check", RUN, "--pdf", out, "--key", key)
    assert code == 0, err
    report = verify_file(out, keyring=keyring(tmp_path / "ring"))
    assert report.ok and report.issuer_signed, report.problems
    assert report.verdict == "verified"
    # The key holder is the preparer, and the prepared entry carries the key signature.
    prepared = report.record.body["signatures"][0]
    assert prepared["role"] == "prepared" and prepared["name"] == REVIEWER
    assert prepared.get("key_id")


def test_without_a_key_the_record_is_a_draft(tmp_path, capsys):
    out = tmp_path / "nitrate.pdf"
    code, _, err = cli(capsys, "check", RUN, "--pdf", out, "--prepared-by", "R. Okafor")
    assert code == 0, err
    report = verify_file(out)
    assert report.ok and not report.issuer_signed
    assert report.verdict == "intact"


def test_a_key_without_a_record_to_issue_is_a_usage_error(capsys):
    code, _, err = cli(capsys, "check", RUN, "--key", "k.key.json")
    assert code == 2
    assert err == ("calib check: error: --key signs the issued record: give --pdf OUT or "
                   "--archive DB\n")
