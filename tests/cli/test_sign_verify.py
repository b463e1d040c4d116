"""``calib keys``, ``calib sign`` and ``calib verify`` as a user runs them.

Exit codes are the project's table (0 intact/accepted, 1 not accepted, 2 usage, 3 unusable
input, 5 integrity failure, 6 refused action).  Every refusal asserts its message.
"""

from __future__ import annotations

import io
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from calib.cli.main import main
from calib.record import Record
from tests.record.integrity_helpers import (
    APPROVER,
    PASSPHRASE,
    PREPARER,
    REVIEWER,
    issued,
    issued_signed,
    keyring,
    person_key,
    render,
)

PASS = PASSPHRASE.decode()
REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(autouse=True)
def clean_env(monkeypatch):
    for name in ("CALIB_ARCHIVE", "CALIB_KEY_PASSPHRASE", "CALIB_AUTHORITY_PASSPHRASE"):
        monkeypatch.delenv(name, raising=False)
    # No terminal: a prompt would hang, so none may be shown.
    monkeypatch.setattr(sys, "stdin", io.StringIO())


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def lab(tmp_path, monkeypatch):
    """The issuer-signed nitrate record, a draft of it, the keyring and the signers' key files."""
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", PASS)
    _, pdf = issued_signed()
    (tmp_path / "nitrate.pdf").write_bytes(pdf)
    (tmp_path / "draft.pdf").write_bytes(render(issued()))
    keyring(tmp_path / "ring")
    keys = tmp_path / "keys"
    keys.mkdir(mode=0o700)
    for holder in (REVIEWER, APPROVER, PREPARER):
        source = person_key(holder).path
        shutil.copy(source, keys / source.name)
        (keys / source.name).chmod(0o600)
    return tmp_path


def key_file(lab: Path, holder: str) -> Path:
    return lab / "keys" / person_key(holder).path.name


def test_lab_init_and_new_key(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", "fernbrook authority")
    code, out, err = cli(capsys, "keys", "lab-init", "--lab", "Fernbrook Water Laboratory",
                         "--out", tmp_path / "ca")
    assert code == 0, err
    assert out.startswith("Lab authority Fernbrook Water Laboratory record signing authority "
                          "written:\n")
    monkeypatch.setenv("CALIB_AUTHORITY_PASSPHRASE", "fernbrook authority")
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", "kingfisher river 7")
    code, out, err = cli(capsys, "keys", "new", "Tomasz Øvergaard", "--authority",
                         tmp_path / "ca" / "lab-authority.key.json", "--out", tmp_path / "keys")
    assert code == 0, err
    assert out.startswith("Key of Tomasz Øvergaard written:\n  private key  "
                          f"{tmp_path / 'keys' / 'tomasz-overgaard.key.json'} (encrypted")
    assert "(issued by Fernbrook Water Laboratory record signing authority)" in out
    # A person's key cannot issue keys.
    monkeypatch.setenv("CALIB_AUTHORITY_PASSPHRASE", "kingfisher river 7")
    code, _, err = cli(capsys, "keys", "new", "Someone Else", "--authority",
                       tmp_path / "keys" / "tomasz-overgaard.key.json", "--out", tmp_path / "x")
    assert code == 2
    assert err == (f"calib keys new: error: {tmp_path / 'keys' / 'tomasz-overgaard.key.json'} "
                   "is the key of Tomasz Øvergaard, not the lab authority key "
                   "(lab-authority.key.json from calib keys lab-init)\n")


def test_short_passphrase_is_refused(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", "1234")
    code, out, err = cli(capsys, "keys", "lab-init", "--lab", "Fernbrook", "--out", tmp_path)
    assert code == 3 and out == ""
    assert err == ("calib: error: the passphrase has 4 characters; a key needs at least 12 (a "
                   "few words are easier to remember than symbols)\n")
    assert list(tmp_path.iterdir()) == []


def test_keys_never_wait_for_input_in_a_pipe(tmp_path):
    env = {k: v for k, v in os.environ.items() if not k.startswith("CALIB_")}
    env["PYTHONPATH"] = str(REPO)
    done = subprocess.run([sys.executable, "-m", "calib", "keys", "lab-init", "--lab", "X Lab",
                           "--out", str(tmp_path)], stdin=subprocess.DEVNULL,
                          capture_output=True, text=True, timeout=60, env=env, cwd=tmp_path,
                          check=False)
    assert done.returncode == 3
    assert ("no passphrase for the lab authority key: set CALIB_KEY_PASSPHRASE, or run calib "
            "on a terminal to be asked for one") in done.stderr


def test_key_holder_name_with_an_invisible_character_is_a_usage_error(tmp_path, capsys):
    with pytest.raises(SystemExit) as info:
        main(["keys", "new", "Tomasz\u200bØvergaard", "--authority", "x", "--out", str(tmp_path)])
    assert info.value.code == 2
    assert ("holds an invisible or control character (U+200B)"
            in capsys.readouterr().err)


def test_issued_reviewed_approved_with_keys(lab, capsys):
    code, out, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--key",
                         key_file(lab, REVIEWER), "--keyring", lab / "ring",
                         "--out", lab / "v2.pdf")
    assert code == 0, err
    assert f"  reviewed by {REVIEWER} at " in out
    assert f", signed with the key of {REVIEWER} ({person_key(REVIEWER).key_id})" in out
    code, out, err = cli(capsys, "sign", lab / "v2.pdf", "--role", "approved", "--name",
                         APPROVER, "--key", key_file(lab, APPROVER), "--out", lab / "v3.pdf")
    assert code == 0, err
    assert (lab / "v3.pdf").read_bytes().startswith((lab / "v2.pdf").read_bytes())
    code, out, _ = cli(capsys, "verify", lab / "v3.pdf", "--keyring", lab / "ring")
    assert code == 0
    assert out.splitlines()[0] == (f"{lab / 'v3.pdf'}: verified: intact, signed by its issuer, "
                                   "every signature verified with a key certified by the lab")
    assert "Caution: Results decide whether" in out
    code, out, _ = cli(capsys, "verify", lab / "v3.pdf", "--keyring", lab / "ring", "--json")
    data = json.loads(out)
    assert code == 0 and data["verdict"] == "verified" and data["pdf_signatures"] == 3
    assert [s["status"] for s in data["signatures"]] == ["valid", "valid", "valid"]


def test_a_key_signs_only_under_its_holders_name(lab, capsys):
    code, out, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                         "Second Signer", "--key", key_file(lab, REVIEWER),
                         "--out", lab / "v2.pdf")
    assert code == 6 and out == ""
    assert err == (f"calib sign: refused: the key {key_file(lab, REVIEWER).name} belongs to "
                   f"{REVIEWER}; a signature made with it carries that name, not "
                   "'Second Signer'\n")
    assert not (lab / "v2.pdf").exists()


def test_reviewer_cannot_also_approve_with_the_same_key(lab, capsys):
    key = key_file(lab, REVIEWER)
    assert cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--key", key,
               "--out", lab / "v2.pdf")[0] == 0
    code, _, err = cli(capsys, "sign", lab / "v2.pdf", "--role", "approved", "--key", key,
                       "--out", lab / "v3.pdf")
    assert code == 6
    assert err == (f"calib sign: refused: {REVIEWER} reviewed this record (as {REVIEWER}) and "
                   "may not also approve it: the profile does not allow it (its [signoff] table "
                   "would need allow_reviewer_to_approve = true)\n")


def test_self_approval_under_a_variant_name_is_refused(lab, capsys):
    body = json.loads(issued().canonical)
    body["prepared_by"] = body["signatures"][0]["name"] = "A. Preparer"
    (lab / "a.pdf").write_bytes(render(Record(body)))
    assert cli(capsys, "sign", lab / "a.pdf", "--role", "reviewed", "--name", REVIEWER,
               "--out", lab / "a2.pdf")[0] == 0
    code, _, err = cli(capsys, "sign", lab / "a2.pdf", "--role", "approved", "--name",
                       "Preparer, A.", "--out", lab / "a3.pdf")
    assert code == 6
    assert err == ("calib sign: refused: Preparer, A. prepared this record (as A. Preparer) and "
                   "may not also approve it: the profile does not allow it (its [signoff] table "
                   "would need allow_preparer_to_approve = true)\n")


def test_printed_name_only_on_a_digitally_signed_pdf_is_refused(lab, capsys):
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "v2.pdf")
    assert code == 6
    assert err == ("calib sign: refused: this record's PDF carries digital signatures; a "
                   "printed-name-only signature cannot be added to it without breaking them: "
                   "sign with your key (--key), or write the record JSON only\n")
    code, out, _ = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "v2.json")
    assert code == 0 and ", printed name only (no key): not key-verified" in out


def test_draft_is_intact_but_says_it_is_not_signed(lab, capsys):
    code, out, _ = cli(capsys, "verify", lab / "draft.pdf")
    assert code == 0
    assert out.splitlines()[0] == (f"{lab / 'draft.pdf'}: intact, origin not verified "
                                   "throughout: draft: not signed by an issuer")
    assert cli(capsys, "verify", lab / "draft.pdf", "--require-signed")[0] == 1
    code, out, _ = cli(capsys, "sign", lab / "draft.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "draft2.pdf")
    assert code == 0 and "  draft: not signed by an issuer" in out.splitlines()


def test_altered_record_is_not_signed_and_not_verified(lab, capsys):
    pdf = bytearray((lab / "nitrate.pdf").read_bytes())
    at = pdf.index(b"/Keywords (CR-") + len(b"/Keywords (CR-")
    pdf[at] = ord("0") if pdf[at] != ord("0") else ord("1")
    (lab / "altered.pdf").write_bytes(bytes(pdf))
    code, _, err = cli(capsys, "sign", lab / "altered.pdf", "--role", "reviewed", "--key",
                       key_file(lab, REVIEWER), "--out", lab / "v2.pdf")
    assert code == 5
    assert err.startswith("calib sign: not signed: the record does not verify, so it was not "
                          "signed: ")
    code, out, _ = cli(capsys, "verify", lab / "altered.pdf", "--keyring", lab / "ring")
    assert code == 5
    assert out.splitlines()[0].startswith(f"{lab / 'altered.pdf'}: NOT VERIFIED, ")
    assert any(line.startswith("  problem: PDF signature 1 (field calib-prepared") for line in
               out.splitlines())


def test_key_file_others_can_change_is_refused(lab, capsys):
    if os.name != "posix":
        pytest.skip("file modes are POSIX")
    key = key_file(lab, REVIEWER)
    key.chmod(0o666)
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--key", key,
                       "--out", lab / "v2.pdf")
    assert code == 3
    assert err == (f"calib: error: {key}: the private key file can be changed by other users "
                   "(mode 666); calib refuses it, as someone could have put their own key "
                   f"there: check the file, then run chmod 600 {key}\n")


def test_usage_errors(lab, capsys):
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed",
                       "--out", lab / "v2.pdf")
    assert code == 2
    assert err == ("calib sign: error: give --key (your certified key) or, for a "
                   "printed-name-only signature, --name\n")
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name", "X",
                       "--out", lab / "nitrate.pdf")
    assert code == 2
    assert err == (f"calib sign: error: {lab / 'nitrate.pdf'} is the record being signed; "
                   "signing writes a new file and never replaces one\n")


def test_unreadable_inputs_exit_3(lab, capsys):
    code, _, err = cli(capsys, "verify", lab / "nowhere.pdf")
    assert code == 3 and err == f"calib: error: {lab / 'nowhere.pdf'}: file not found\n"
    code, _, err = cli(capsys, "verify", lab / "nitrate.pdf", "--keyring", lab / "keys")
    assert code == 3
    assert err.startswith(f"calib: error: keyring {lab / 'keys'}: trusts nothing")


def test_archive_from_the_environment_and_no_forks(lab, capsys, monkeypatch):
    db = lab / "records.sqlite"
    monkeypatch.setenv("CALIB_ARCHIVE", str(db))
    code, out, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--key",
                         key_file(lab, REVIEWER), "--out", lab / "v2.pdf")
    assert code == 0, err
    assert f"  filed in {db} as entry seq 1 (issued, " in out
    assert f"  filed in {db} as entry seq 2 (signed, " in out
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--key",
                       key_file(lab, APPROVER), "--out", lab / "v2-other.pdf")
    assert code == 6
    record_id = issued().record_id
    assert err == (f"calib sign: refused: the archive holds a version of {record_id} that the "
                   "one given does not continue (entry seq 2: prepared, reviewed); sign the "
                   "archived version instead\n")
    assert not (lab / "v2-other.pdf").exists()
    code, out, _ = cli(capsys, "verify", lab / "v2.pdf", "--keyring", lab / "ring")
    assert code == 0 and f"entry seq 2 of the archive {db}" in out


@pytest.mark.parametrize("command", [["sign"], ["verify"], ["keys"], ["keys", "new"],
                                     ["keys", "lab-init"]])
def test_help_has_examples(command, capsys):
    with pytest.raises(SystemExit) as info:
        main([*command, "--help"])
    assert info.value.code == 0
    assert "examples:" in capsys.readouterr().out


def test_signed_record_verifies_in_a_fresh_process(lab, capsys):
    # Another interpreter and hash seed: the signatures and digests hold on their own.
    code, _, _ = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--key",
                     key_file(lab, REVIEWER), "--out", lab / "v2.pdf")
    assert code == 0
    env = {k: v for k, v in os.environ.items() if not k.startswith("CALIB_")}
    env.update(PYTHONPATH=str(REPO), PYTHONHASHSEED="321", SOURCE_DATE_EPOCH="1700000000")
    done = subprocess.run([sys.executable, "-m", "calib", "verify", str(lab / "v2.pdf"),
                           "--keyring", str(lab / "ring")], capture_output=True, text=True,
                          timeout=120, env=env, cwd=lab, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    assert done.stdout.splitlines()[0].endswith(": verified: intact, signed by its issuer, every "
                                                "signature verified with a key certified by "
                                                "the lab")
