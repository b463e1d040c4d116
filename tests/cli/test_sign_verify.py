"""``calib keys new``, ``calib sign`` and ``calib verify`` as a user runs them."""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from calib.cli.main import main
from calib.record import Record
from tests.record.integrity_helpers import APPROVER, PREPARER, REVIEWER, issued, render

PASS = "heron 42 weir"
REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(autouse=True)
def clean_env(monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE", raising=False)
    monkeypatch.delenv("CALIB_KEY_PASSPHRASE", raising=False)
    # No terminal: a prompt would hang, so none may be shown.
    monkeypatch.setattr(sys, "stdin", io.StringIO())


def cli(capsys, *args):
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def lab(tmp_path, monkeypatch, capsys):
    """Keys of the reviewer and the approver (public halves in ring/), and the issued PDF."""
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", PASS)
    for name in ("t-overgaard", "a-mbeki-hale"):
        code, _, err = cli(capsys, "keys", "new", name, "--out", tmp_path / "private")
        assert code == 0, err
        (tmp_path / "ring").mkdir(exist_ok=True)
        (tmp_path / "private" / f"{name}.pub.pem").rename(tmp_path / "ring" / f"{name}.pub.pem")
    v1 = tmp_path / "nitrate.pdf"
    v1.write_bytes(render(issued()))
    return tmp_path


def test_keys_new_without_a_passphrase_fails_at_once(tmp_path, capsys):
    code, out, err = cli(capsys, "keys", "new", "t-overgaard", "--out", tmp_path)
    assert code == 3 and out == ""
    assert err == ("calib: error: no passphrase for the new key t-overgaard: set "
                   "CALIB_KEY_PASSPHRASE, or run calib on a terminal to be asked for one\n")
    assert list(tmp_path.iterdir()) == []


def test_keys_new_never_waits_for_input_in_a_pipe(tmp_path):
    env = {k: v for k, v in os.environ.items() if k != "CALIB_KEY_PASSPHRASE"}
    env["PYTHONPATH"] = str(REPO)
    done = subprocess.run([sys.executable, "-m", "calib", "keys", "new", "x", "--out",
                           str(tmp_path)], stdin=subprocess.DEVNULL, capture_output=True,
                          text=True, timeout=60, env=env, cwd=tmp_path, check=False)
    assert done.returncode == 3
    assert "no passphrase for the new key x: set CALIB_KEY_PASSPHRASE" in done.stderr


def test_keys_new_with_an_empty_passphrase_variable(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", "")
    code, _, err = cli(capsys, "keys", "new", "x", "--out", tmp_path)
    assert code == 3
    assert err == "calib: error: CALIB_KEY_PASSPHRASE is set but empty; a key needs a passphrase\n"


def test_keys_new_on_a_terminal_asks_twice(tmp_path, capsys, monkeypatch):
    import getpass

    monkeypatch.setattr(sys.stdin, "isatty", lambda: True)
    answers = iter(["kingfisher 7", "kingfisher 8"])
    monkeypatch.setattr(getpass, "getpass", lambda prompt: next(answers))
    code, _, err = cli(capsys, "keys", "new", "x", "--out", tmp_path)
    assert code == 3
    assert err == "calib: error: the two passphrases differ; nothing was written\n"
    assert list(tmp_path.iterdir()) == []
    answers = iter(["kingfisher 7", "kingfisher 7"])
    code, out, _ = cli(capsys, "keys", "new", "x", "--out", tmp_path)
    assert code == 0 and "Key id: " in out


def test_keys_new_prints_files_and_key_id(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", PASS)
    code, out, _ = cli(capsys, "keys", "new", "t-overgaard", "--out", tmp_path)
    assert code == 0
    lines = out.splitlines()
    assert lines[0] == "Key pair t-overgaard written:"
    assert lines[1] == (f"  private key {tmp_path / 't-overgaard.key.pem'} (encrypted with the "
                        "passphrase; keep it to yourself)")
    assert lines[2] == (f"  public key  {tmp_path / 't-overgaard.pub.pem'} (copy it into the lab "
                        "keyring folder)")
    assert len(lines[3].removeprefix("Key id: ")) == 32
    code, _, err = cli(capsys, "keys", "new", "t-overgaard", "--out", tmp_path)
    assert code == 3
    assert err == (f"calib: error: {tmp_path / 't-overgaard.key.pem'}: already exists; keys are "
                   "never overwritten (choose another name or folder)\n")


def test_keys_new_refuses_a_bad_name(tmp_path, capsys):
    with pytest.raises(SystemExit) as info:
        main(["keys", "new", "../x", "--out", str(tmp_path)])
    assert info.value.code == 2
    assert ("argument NAME: key name must be 1 to 64 letters, digits, '.', '_' or '-', "
            "starting with a letter or digit; got '../x'") in capsys.readouterr().err


def test_prepared_reviewed_approved_round_trip(lab, capsys):
    db = lab / "records.sqlite"
    has_archive = _archive_available()
    code, out, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                         REVIEWER, "--key", lab / "private" / "t-overgaard.key.pem",
                         "--out", lab / "nitrate.v2.pdf", *(["--archive", db] if has_archive
                                                            else []))
    assert code == 0, err
    v1 = Record.from_json(issued().canonical)
    assert out.splitlines()[0] == f"Record {v1.record_id} version 2 written to {lab / 'nitrate.v2.pdf'}"
    assert out.splitlines()[1].startswith(f"  reviewed by {REVIEWER} at 20")
    assert ", signed with key " in out and "(t-overgaard)" in out
    code, out, err = cli(capsys, "sign", lab / "nitrate.v2.pdf", "--role", "approved",
                         "--name", APPROVER, "--key", lab / "private" / "a-mbeki-hale.key.pem",
                         "--meaning", "Approved for reporting batch 26-118",
                         "--out", lab / "nitrate.v3.pdf", *(["--archive", db] if has_archive
                                                            else []))
    assert code == 0, err
    # The earlier versions stay as they were, and every version verifies.
    assert (lab / "nitrate.pdf").read_bytes() == render(issued())
    for name in ("nitrate.pdf", "nitrate.v2.pdf", "nitrate.v3.pdf"):
        code, out, err = cli(capsys, "verify", lab / name, "--keyring", lab / "ring")
        assert code == 0, out
        assert out.splitlines()[0] == f"{lab / name}: intact"
    code, out, _ = cli(capsys, "verify", lab / "nitrate.v3.pdf", "--keyring", lab / "ring",
                       "--json")
    report = json.loads(out)
    assert report["ok"] is True
    assert [(s["role"], s["status"]) for s in report["signatures"]] == [
        ("prepared", "unkeyed"), ("reviewed", "valid"), ("approved", "valid")]
    if has_archive:
        code, out, _ = cli(capsys, "verify", lab / "nitrate.v3.pdf", "--keyring", lab / "ring",
                           "--archive", db)
        assert code == 0
        assert f"  checked: this version is entry seq 3 of the archive {db}, byte for byte" in \
            out.splitlines()


def test_preparer_cannot_approve(lab, capsys):
    code, _, _ = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                     REVIEWER, "--out", lab / "v2.pdf")
    assert code == 0
    code, out, err = cli(capsys, "sign", lab / "v2.pdf", "--role", "approved", "--name",
                         PREPARER, "--out", lab / "v3.pdf")
    assert code == 6 and out == ""
    assert err == (f"calib sign: refused: {PREPARER} prepared this record and may not also "
                   "approve it: the profile does not allow it (its [signoff] table would need "
                   "allow_preparer_to_approve = true)\n")
    assert not (lab / "v3.pdf").exists()


def test_rejected_curve_only_as_rejected(tmp_path, capsys):
    path = tmp_path / "short.pdf"
    path.write_bytes(render(issued(levels=4)))
    code, _, err = cli(capsys, "sign", path, "--role", "reviewed", "--name", REVIEWER,
                       "--out", tmp_path / "v2.pdf")
    assert code == 6
    assert err == ("calib sign: refused: the run's verdict is rejected, so the record can be "
                   "signed only as rejected\n")
    code, out, _ = cli(capsys, "sign", path, "--role", "rejected", "--name", REVIEWER,
                       "--out", tmp_path / "v2.pdf")
    assert code == 0 and ", without a key" in out
    code, out, _ = cli(capsys, "verify", tmp_path / "v2.pdf")
    assert code == 0


def test_out_must_be_a_new_file(lab, capsys):
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "nitrate.pdf")
    assert code == 2
    assert err == (f"calib sign: error: {lab / 'nitrate.pdf'} is the record being signed; "
                   "signing writes a new file and never replaces one\n")
    (lab / "taken.pdf").write_bytes(b"x")
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "taken.pdf")
    assert code == 2
    assert err == (f"calib sign: error: {lab / 'taken.pdf'} exists; signing writes a new file "
                   "and never replaces one\n")


def test_json_out_and_json_in(lab, capsys):
    code, _, _ = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                     REVIEWER, "--out", lab / "v2.json")
    assert code == 0
    data = (lab / "v2.json").read_bytes()
    record = Record.from_json(data)
    assert record.canonical == data and len(record.body["signatures"]) == 2
    code, _, _ = cli(capsys, "sign", lab / "v2.json", "--role", "approved", "--name",
                     APPROVER, "--out", lab / "v3.pdf")
    assert code == 0
    code, out, _ = cli(capsys, "verify", lab / "v3.pdf")
    assert code == 0, out


def test_sign_refuses_an_altered_record(lab, capsys):
    v1 = issued()
    body = json.loads(v1.canonical)
    body["check"]["verdict"] = "accepted"
    body["check"]["curves"][0]["points"][0]["response"] *= 2
    from calib.report import write_pdf

    (lab / "altered.pdf").write_bytes(write_pdf(v1.body, digest=v1.digest,
                                                record_id=v1.record_id,
                                                attachment=Record(body).canonical))
    code, _, err = cli(capsys, "sign", lab / "altered.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "v2.pdf")
    assert code == 5
    assert err.startswith("calib sign: refused: the record does not verify, so it was not "
                          f"signed: the PDF states version digest {v1.digest[:16]}…")
    assert not (lab / "v2.pdf").exists()


def test_wrong_passphrase_and_missing_record(lab, capsys, monkeypatch):
    monkeypatch.setenv("CALIB_KEY_PASSPHRASE", "wrong")
    key = lab / "private" / "t-overgaard.key.pem"
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--key", key, "--out", lab / "v2.pdf")
    assert code == 3
    assert err == (f"calib: error: {key}: cannot unlock the private key: wrong passphrase, or "
                   "the file is damaged\n")
    monkeypatch.delenv("CALIB_KEY_PASSPHRASE")
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--key", key, "--out", lab / "v2.pdf")
    assert code == 3
    assert err == (f"calib: error: no passphrase for key {key}: set CALIB_KEY_PASSPHRASE, or run "
                   "calib on a terminal to be asked for one\n")
    code, _, err = cli(capsys, "sign", lab / "nowhere.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "v2.pdf")
    assert code == 3
    assert err == f"calib: error: {lab / 'nowhere.pdf'}: file not found\n"


def test_verify_names_each_problem_on_its_own_line(lab, capsys):
    code, _, _ = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                     REVIEWER, "--key", lab / "private" / "t-overgaard.key.pem",
                     "--out", lab / "v2.pdf")
    assert code == 0
    code, out, _ = cli(capsys, "verify", lab / "v2.pdf")
    lines = out.splitlines()
    assert code == 5
    assert lines[0] == f"{lab / 'v2.pdf'}: NOT VERIFIED, 1 problem"
    assert lines[1].startswith(f"  problem: signature 2 (reviewed by {REVIEWER}) was made with "
                               "key ")
    assert lines[1].endswith(", but no keyring was given to check it")
    # Flip one byte of the attached data's neighbourhood: the PDF no longer matches itself.
    data = bytearray((lab / "v2.pdf").read_bytes())
    at = data.index(b"/Title (") + len(b"/Title (")
    data[at] = ord("c")
    (lab / "v2-edited.pdf").write_bytes(bytes(data))
    code, out, _ = cli(capsys, "verify", lab / "v2-edited.pdf", "--keyring", lab / "ring")
    assert code == 5
    assert ("  problem: the PDF does not match a fresh rendering of its attached record data: "
            "the page content is the same, but the file around it differs") in out.splitlines()


def test_verify_unreadable_inputs_exit_3(lab, capsys):
    code, _, err = cli(capsys, "verify", lab / "missing.pdf")
    assert (code, err) == (3, f"calib: error: {lab / 'missing.pdf'}: file not found\n")
    code, _, err = cli(capsys, "verify", lab / "nitrate.pdf", "--keyring", lab / "nokeys")
    assert (code, err) == (3, f"calib: error: keyring {lab / 'nokeys'}: not a folder\n")
    if _archive_available():
        code, _, err = cli(capsys, "verify", lab / "nitrate.pdf", "--archive", lab / "none.db")
        assert (code, err) == (3, f"calib: error: {lab / 'none.db'}: no archive at this path\n")


@pytest.mark.skipif("not _archive_available()")
def test_archive_from_the_environment_and_no_forks(lab, capsys, monkeypatch):
    db = lab / "records.sqlite"
    monkeypatch.setenv("CALIB_ARCHIVE", str(db))
    code, out, _ = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       REVIEWER, "--out", lab / "v2.pdf")
    assert code == 0
    assert f"  filed in {db} as entry seq 1 (issued, " in out
    assert f"  filed in {db} as entry seq 2 (signed, " in out
    code, _, err = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                       "Someone Else", "--out", lab / "v2-other.pdf")
    assert code == 6
    record_id = issued().record_id
    assert err == (f"calib sign: refused: the archive holds a version of {record_id} that the "
                   "one given does not continue (entry seq 2: prepared, reviewed); sign the "
                   "archived version instead\n")
    assert not (lab / "v2-other.pdf").exists()
    code, out, _ = cli(capsys, "verify", lab / "v2.pdf")
    assert code == 0 and f"entry seq 2 of the archive {db}" in out
    code, out, _ = cli(capsys, "verify", lab / "nitrate.pdf")
    assert code == 0 and f"holds a later version of {record_id}: entry seq 2" in out


@pytest.mark.parametrize("command", [["sign"], ["verify"], ["keys"], ["keys", "new"]])
def test_help_has_examples(command, capsys):
    with pytest.raises(SystemExit) as info:
        main([*command, "--help"])
    assert info.value.code == 0
    assert "examples:" in capsys.readouterr().out


def _archive_available() -> bool:
    try:
        import calib.archive  # noqa: F401
    except ImportError:
        return False
    return True


def test_empty_passphrase_typed_on_a_terminal(tmp_path, capsys, monkeypatch):
    import getpass

    monkeypatch.setattr(sys.stdin, "isatty", lambda: True)
    monkeypatch.setattr(getpass, "getpass", lambda prompt: "")
    code, _, err = cli(capsys, "keys", "new", "x", "--out", tmp_path)
    assert code == 3
    assert err == "calib: error: the passphrase must not be empty\n"


def test_signed_record_verifies_in_a_fresh_process(lab, capsys):
    # Another interpreter, another hash seed and a SOURCE_DATE_EPOCH (which reportlab would use
    # for dates and the file id): re-rendering the record read back from the PDF must give the
    # very same bytes.
    code, _, _ = cli(capsys, "sign", lab / "nitrate.pdf", "--role", "reviewed", "--name",
                     REVIEWER, "--key", lab / "private" / "t-overgaard.key.pem",
                     "--out", lab / "v2.pdf")
    assert code == 0
    env = {k: v for k, v in os.environ.items() if k != "CALIB_KEY_PASSPHRASE"}
    env.update(PYTHONPATH=str(REPO), PYTHONHASHSEED="321", SOURCE_DATE_EPOCH="1700000000")
    done = subprocess.run([sys.executable, "-m", "calib", "verify", str(lab / "v2.pdf"),
                           "--keyring", str(lab / "ring")], capture_output=True, text=True,
                          timeout=120, env=env, cwd=lab, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    assert ("  checked: the PDF is byte for byte the rendering of its attached record data"
            in done.stdout.splitlines())
