"""``calib users`` and ``calib audit`` on both engines (invented Fernbrook staff)."""

from __future__ import annotations

import sqlite3

import pytest

from calib.cli.main import main

PW = "river-sample-0417"


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def admin(location, monkeypatch, capsys):
    monkeypatch.setenv("CALIB_USER_PASSWORD", PW)
    code, out, _ = run(capsys, "users", "add", "Mira Holt", "--role", "administrator",
                       "--archive", location, "--by", "Setup Script")
    assert code == 0 and "added Mira Holt (administrator)" in out
    assert "21 CFR 11, EU GMP Annex 11, GAMP 5" in out  # the caution on every change
    return location


def test_add_list_disable_enable_roles_reset(admin, capsys):
    loc = admin
    assert run(capsys, "users", "add", "Osric Venn", "--role", "analyst", "--archive", loc,
               "--by", "Mira Holt")[0] == 0
    code, out, _ = run(capsys, "users", "roles", "osric venn", "--role", "analyst", "--role",
                       "reviewer", "--archive", loc, "--by", "Mira Holt")
    assert code == 0 and "Osric Venn now has the roles analyst, reviewer" in out
    assert run(capsys, "users", "disable", "Osric Venn", "--archive", loc, "--by",
               "Mira Holt")[1].startswith("calib: Osric Venn is disabled")
    code, out, _ = run(capsys, "users", "list", "--archive", loc)
    lines = out.splitlines()
    assert lines[0].split() == ["name", "roles", "state", "changed"]
    assert "Mira Holt" in lines[1] and "administrator" in lines[1] and "enabled" in lines[1]
    assert "Osric Venn" in lines[2] and "analyst, reviewer" in lines[2] and "disabled" in lines[2]
    assert run(capsys, "users", "enable", "Osric Venn", "--archive", loc, "--by",
               "Mira Holt")[0] == 0
    code, out, _ = run(capsys, "users", "reset-password", "Osric Venn", "--archive", loc,
                       "--by", "Mira Holt")
    assert code == 0 and "new password set for Osric Venn" in out
    code, out, _ = run(capsys, "audit", "list", "--archive", loc)
    events = [[p for p in line.split("  ") if p][2].strip() for line in out.splitlines()]
    assert events == ["user added", "user added", "roles changed", "user disabled",
                      "user enabled", "password reset"]
    assert "Mira Holt → Osric Venn" in out.splitlines()[3]
    code, out, _ = run(capsys, "audit", "list", "--archive", loc, "--event", "user added",
                       "--limit", "1")
    assert code == 0 and len(out.splitlines()) == 1 and "Osric Venn" in out
    code, out, _ = run(capsys, "audit", "verify", "--archive", loc)
    assert code == 0 and "audit trail intact: 6 rows" in out


def test_refusals_and_usage_errors(admin, capsys, monkeypatch):
    loc = admin
    code, _, err = run(capsys, "users", "add", "Holt, Mira", "--role", "analyst", "--archive",
                       loc)
    assert code == 6 and "'Holt, Mira' is already a user (as 'Mira Holt')" in err
    code, _, err = run(capsys, "users", "disable", "Mira Holt", "--archive", loc)
    assert code == 6 and "Mira Holt is the last enabled administrator" in err
    code, _, err = run(capsys, "users", "enable", "Ines Carrow", "--archive", loc)
    assert code == 6 and "no user named 'Ines Carrow'" in err
    monkeypatch.setenv("CALIB_USER_PASSWORD", "too-short")
    code, _, err = run(capsys, "users", "add", "Ines Carrow", "--role", "analyst", "--archive",
                       loc)
    assert code == 2 and "a password needs at least 12 characters (this one has 9)" in err
    monkeypatch.delenv("CALIB_USER_PASSWORD")
    code, _, err = run(capsys, "users", "add", "Ines Carrow", "--role", "analyst", "--archive",
                       loc)
    assert code == 2 and "no password: set CALIB_USER_PASSWORD" in err
    with pytest.raises(SystemExit) as stop:
        main(["users", "add", "Ines Carrow", "--role", "chemist", "--archive", loc])
    assert stop.value.code == 2 and "invalid choice: 'chemist'" in capsys.readouterr().err
    code, _, err = run(capsys, "audit", "list", "--archive", loc, "--event", "coffee")
    assert code == 2 and "unknown --event 'coffee'" in err
    code, _, err = run(capsys, "audit", "list", "--archive", loc, "--limit", "0")
    assert code == 2 and "--limit must be at least 1, got 0" in err


def test_missing_archive_and_none_named(tmp_path, capsys, monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE", raising=False)
    code, _, err = run(capsys, "users", "list")
    assert code == 2 and "no archive given" in err
    code, _, err = run(capsys, "audit", "verify", "--archive", str(tmp_path / "none.sqlite"))
    assert code == 3 and "no archive at this path" in err


def test_audit_verify_reports_an_edited_row(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("CALIB_USER_PASSWORD", PW)
    path = str(tmp_path / "records.sqlite")
    run(capsys, "users", "add", "Mira Holt", "--role", "administrator", "--archive", path,
        "--by", "Setup Script")
    con = sqlite3.connect(path)
    con.execute("DROP TRIGGER audit_trail_no_update")
    con.execute("UPDATE audit_trail SET actor = 'Someone Else'")
    con.commit()
    con.close()
    code, _, err = run(capsys, "audit", "verify", "--archive", path)
    assert code == 5
    assert "audit trail NOT intact (1 rows)" in err
    assert "append-only triggers of the audit trail are missing (audit_trail_no_update)" in err
    assert "its content does not match its hash (the row was changed)" in err


def test_serve_with_users_refuses_what_cannot_work(tmp_path, capsys, monkeypatch):
    # Each refusal comes before the server would start (nothing listens).
    monkeypatch.setenv("CALIB_USER_PASSWORD", PW)
    empty = str(tmp_path / "empty.sqlite")
    from calib.archive import Archive

    Archive(empty).close()
    code, _, err = run(capsys, "serve", "--users", "--archive", empty)
    assert code == 2 and "the archive has no users yet, so nobody could sign in" in err
    code, _, err = run(capsys, "serve", "--users")
    assert code == 2 and "sign-in needs the archive database that holds the users" in err
    with_users = str(tmp_path / "records.sqlite")
    run(capsys, "users", "add", "Mira Holt", "--role", "administrator", "--archive", with_users)
    code, _, err = run(capsys, "serve", "--archive", with_users, "--idle-minutes", "0")
    assert code == 2 and "idle sign-out must be 1 to 1440 minutes; got 0" in err
    code, _, err = run(capsys, "serve", "--archive", with_users, "--signing-keys",
                       str(tmp_path / "none"))
    assert code == 3 and "--signing-keys" in err and "is not a folder" in err
