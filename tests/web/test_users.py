"""calib serve with signed-in people: sign-in, roles, signing with the password again, audit.

Both engines (an SQLite file, a PostgreSQL schema; the PostgreSQL half is skipped without a
server).  The people are invented Fernbrook staff; the reviewer's certified key comes from
tests/record/integrity_helpers.py.
"""

from __future__ import annotations

import re
import shutil
import time
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from calib.archive import Archive
from calib.archive.people import People
from calib.archive.trail import trail_rows, verify_trail
from calib.web import create_app
from calib.web.auth import USER_COOKIE
from calib.web.security import CSRF_FIELD
from tests.archive.conftest import location, postgres_base  # noqa: F401  (fixtures)
from tests.record.integrity_helpers import APPROVER, PASSPHRASE, PREPARER, REVIEWER, person_key
from tests.web.test_routes import FLUORIDE, LOCAL, error_of, token_of

PW = {PREPARER: "analyst-pass-0417", REVIEWER: "reviewer-pass-0417",
      APPROVER: "approver-pass-0417", "Mira Holt": "admin-pass-000417"}


@pytest.fixture
def lab(location, tmp_path):  # noqa: F811
    with Archive(location) as archive:
        people = People(archive.storage)
        people.add("Mira Holt", ["administrator"], PW["Mira Holt"], by="setup")
        people.add(PREPARER, ["analyst"], PW[PREPARER], by="Mira Holt")
        people.add(REVIEWER, ["reviewer"], PW[REVIEWER], by="Mira Holt")
        people.add(APPROVER, ["reviewer", "approver"], PW[APPROVER], by="Mira Holt")
    keys = tmp_path / "keys"
    keys.mkdir(mode=0o700)
    source = Path(person_key(REVIEWER).path)
    shutil.copy(source, keys / source.name)  # tomasz-overgaard.key.json, mode 0600 kept
    return location, keys


def browser(where, keys=None, **options) -> TestClient:
    app = create_app(archive=where, signing_keys=keys, **options)
    c = TestClient(app, base_url=LOCAL, client=("127.0.0.1", 50000))
    c.form_token = token_of(c.get("/signin").text)
    return c


def post(c, url, data=None, files=None, **kw):
    return c.post(url, data={CSRF_FIELD: c.form_token, **(data or {})}, files=files, **kw)


def sign_in(c, name):
    r = post(c, "/signin", {"name": name, "password": PW[name], "next": "/"})
    assert r.status_code == 200 and f"Signed in: {name}" in r.text, error_of(r.text)
    return r


def events(where):
    with Archive(where, create=False) as archive:
        return [(r.event, r.actor) for r in trail_rows(archive.storage)
                if r.event != "user added"]


def test_without_users_the_local_page_stays_as_simple(tmp_path):
    path = tmp_path / "records.sqlite"
    Archive(path).close()
    c = TestClient(create_app(archive=path), base_url=LOCAL)
    assert c.get("/").status_code == 200 and "Sign in" not in c.get("/").text
    assert c.get("/signin").status_code == 404


def test_every_page_needs_sign_in(lab):
    c = browser(lab[0])
    r = c.get("/archive?analyte=Fluoride", follow_redirects=False)
    assert r.status_code == 303
    assert r.headers["location"] == "/signin?next=%2Farchive%3Fanalyte%3DFluoride"
    r = post(c, "/check", {"profile": "default"})
    assert r.status_code == 401 and error_of(r.text) == (
        "You are not signed in (or were signed out after a time without use), so nothing was "
        "done: sign in and send the form again.")
    # Sign-in sends back to the page asked for, never to another site.
    r = post(c, "/signin", {"name": PREPARER, "password": PW[PREPARER],
                            "next": "/archive?analyte=Fluoride"}, follow_redirects=False)
    assert r.headers["location"] == "/archive?analyte=Fluoride"
    cookie = r.cookies[USER_COOKIE]
    assert len(cookie) >= 43 and "httponly" in r.headers["set-cookie"].lower()
    assert "samesite=strict" in r.headers["set-cookie"].lower()
    r = post(c, "/signin", {"name": PREPARER, "password": PW[PREPARER],
                            "next": "//attacker.example/x"}, follow_redirects=False)
    assert r.headers["location"] == "/"


def test_wrong_password_and_lock_out(lab):
    c = browser(lab[0])
    for _ in range(5):
        r = post(c, "/signin", {"name": REVIEWER, "password": "not-the-password"})
        assert r.status_code == 401
        assert error_of(r.text) == "Not signed in: the name or password is not right."
    r = post(c, "/signin", {"name": REVIEWER, "password": PW[REVIEWER]})
    assert r.status_code == 401 and "this account is locked after 5 failed sign-ins until" in (
        error_of(r.text))
    assert events(lab[0])[-2:] == [("lock-out", REVIEWER), ("failed sign-in", REVIEWER)]


def test_roles_decide_what_each_person_may_do(lab):
    c = browser(lab[0])
    sign_in(c, REVIEWER)
    r = post(c, "/check", {"profile": "default"})
    assert r.status_code == 403 and error_of(r.text) == (
        f"This needs the role analyst; {REVIEWER} has reviewer. Ask an administrator if that "
        "is wrong.")
    r = c.get("/users")
    assert r.status_code == 403 and "This needs the role administrator" in error_of(r.text)
    c = browser(lab[0])
    sign_in(c, PREPARER)
    r = post(c, "/sign", {"role": "reviewed", "password": PW[PREPARER]},
             {"record": ("record.pdf", b"%PDF-1.7")})
    assert r.status_code == 403 and "This needs the role reviewer or approver" in (
        error_of(r.text))
    c = browser(lab[0])
    sign_in(c, "Mira Holt")
    r = c.get("/users")
    assert r.status_code == 200
    assert re.search(rf"<td>{REVIEWER}</td><td>reviewer</td><td>enabled</td>", r.text)


def _issue(c) -> tuple[bytes, str]:
    r = post(c, "/check", {"profile": "default"}, {"run": (FLUORIDE.name, FLUORIDE.read_bytes())})
    assert r.status_code == 200
    run_id = str(r.url).rsplit("/", 1)[-1]
    r = post(c, f"/run/{run_id}/exclude", {"target": "'fernbrook_fluoride_2026-11-30.csv'!D9",
                                           "reason": "bubble in the cell"})
    assert r.status_code == 200, error_of(r.text)
    # The form names someone else: the record is prepared by the signed-in analyst.
    r = post(c, f"/run/{run_id}/issue", {"prepared_by": "Somebody Else"})
    assert r.status_code == 200, error_of(r.text)
    return c.get(f"/run/{run_id}/record.pdf").content, run_id


def test_signing_needs_the_password_again_and_binds_the_signed_in_person(lab):
    where, keys = lab
    analyst = browser(where, keys)
    sign_in(analyst, PREPARER)
    pdf, _ = _issue(analyst)
    reviewer = browser(where, keys)
    sign_in(reviewer, REVIEWER)
    page = reviewer.get("/sign").text
    assert f"You sign as <strong>{REVIEWER}</strong>" in page and 'name="name"' not in page
    record = {"record": ("record.pdf", pdf)}
    # 21 CFR 11.200(a): no password, no signature.
    r = post(reviewer, "/sign", {"role": "reviewed"}, record)
    assert r.status_code == 403 and error_of(r.text) == (
        "Type your password again to sign: a signature needs both your signed-in name and your "
        "password at the moment of signing (21 CFR 11.200(a)). Nothing was signed.")
    r = post(reviewer, "/sign", {"role": "reviewed", "password": "not-the-password"}, record)
    assert r.status_code == 403 and error_of(r.text) == (
        "The signature was not made: the name or password is not right.")
    r = post(reviewer, "/sign", {"role": "approved", "password": PW[REVIEWER]}, record)
    assert r.status_code == 403 and error_of(r.text).startswith(
        f"A signature meaning approved needs the role approver; {REVIEWER} has reviewer.")
    r = post(reviewer, "/sign", {"role": "reviewed", "password": PW[REVIEWER]}, record)
    assert r.status_code == 403 and error_of(r.text) == (
        f"{REVIEWER} has a key on this server: type its passphrase to sign with it. Nothing "
        "was signed.")
    # Someone with no key on the server signs with the printed name only, and is told so.
    approver = browser(where, keys)
    sign_in(approver, APPROVER)
    r = post(approver, "/sign", {"role": "reviewed", "password": PW[APPROVER]}, record)
    assert r.status_code == 200, error_of(r.text)
    assert f"Signed: reviewed by {APPROVER}" in r.text and "without a key" in r.text
    assert (f"This signature is the printed name only: no key for {APPROVER} in the keys "
            "folder of this server.") in r.text
    from calib.record.recordfile import record_from_pdf

    plain = approver.get(re.search(r'href="(/download/[^"]+)"', r.text).group(1)).content
    assert [(s["role"], s["name"]) for s in record_from_pdf(plain).body["signatures"]] == [
        ("prepared", PREPARER), ("reviewed", APPROVER)]
    # The key kept for the signed-in reviewer, unlocked by the passphrase typed; the name in
    # the form is not used.
    r = post(reviewer, "/sign", {"role": "reviewed", "password": PW[REVIEWER],
                                 "passphrase": PASSPHRASE.decode(), "name": "Somebody Else"},
             record)
    assert r.status_code == 200, error_of(r.text)
    shown = re.search(r"Signed: reviewed by (.+?) at (\S+?), with a key\.", r.text)
    assert shown and shown.group(1) == REVIEWER
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?(Z|\+00:00)", shown.group(2))
    assert "Meaning:" in r.text
    keyed = reviewer.get(re.search(r'href="(/download/[^"]+)"', r.text).group(1)).content
    assert [(s["role"], s["name"]) for s in record_from_pdf(keyed).body["signatures"]] == [
        ("prepared", PREPARER), ("reviewed", REVIEWER)]
    # After a key signature the library refuses a printed-name-only one (it would break it).
    r = post(approver, "/sign", {"role": "approved", "password": PW[APPROVER]},
             {"record": ("record-v2.pdf", keyed)})
    assert r.status_code == 400 and "a printed-name-only signature cannot be added" in (
        error_of(r.text))
    trail = events(where)
    assert [e for e in trail if e[0] in ("issue", "exclusion", "signature",
                                         "refused signature")] == [
        ("exclusion", PREPARER), ("issue", PREPARER), ("refused signature", REVIEWER),
        ("signature", APPROVER), ("signature", REVIEWER)]
    assert ("failed sign-in", REVIEWER) in trail
    with Archive(where, create=False) as archive:
        assert verify_trail(archive.storage).ok


def test_sign_out_idle_sign_out_and_two_instances_share_sessions(lab):
    where, _ = lab
    first, second = browser(where), browser(where)
    sign_in(first, PREPARER)
    # A second calib serve on the same database knows the session (behind one proxy).
    second.cookies.set(USER_COOKIE, first.cookies[USER_COOKIE])
    assert f"Signed in: {PREPARER}" in second.get("/").text
    post(first, "/signout")
    assert second.get("/", follow_redirects=False).status_code == 303
    sign_in(first, PREPARER)
    with Archive(where, create=False) as archive:  # 31 minutes pass without use
        archive.storage.execute("UPDATE sessions SET last_seen = ?", (time.time() - 31 * 60,))
    r = first.get("/", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")
    assert events(where)[-4:] == [("sign-in", PREPARER), ("sign-out", PREPARER),
                                     ("sign-in", PREPARER), ("idle sign-out", PREPARER)]


def test_users_mode_needs_an_archive_with_users(tmp_path):
    empty = tmp_path / "records.sqlite"
    Archive(empty).close()
    with pytest.raises(ValueError, match="the archive has no users yet, so nobody could sign "
                                         "in: add an administrator first"):
        create_app(archive=empty, users=True)
    with pytest.raises(ValueError, match="sign-in needs the archive database that holds the "
                                         "users"):
        create_app(users=True)
    with pytest.raises(ValueError, match="idle sign-out must be 1 to 1440 minutes; got 0"):
        create_app(archive=empty, users=False, idle_minutes=0)


def test_signing_from_the_archived_record_page_asks_for_the_password(lab):
    where, keys = lab
    analyst = browser(where, keys)
    sign_in(analyst, PREPARER)
    r = post(analyst, "/check", {"profile": "default"},
             {"run": (FLUORIDE.name, FLUORIDE.read_bytes())})
    run_id = str(r.url).rsplit("/", 1)[-1]
    r = post(analyst, f"/run/{run_id}/issue", {"file_in_archive": "yes"})
    assert r.status_code == 200, error_of(r.text)
    record_id = re.search(r"Record (CR-[0-9A-F]+) issued", r.text).group(1)
    approver = browser(where, keys)
    sign_in(approver, APPROVER)
    page = approver.get(f"/archive/record/{record_id}").text
    # The record page's form is the signed-in person's: no printed-name box, a password box.
    assert f"You sign as <strong>{APPROVER}</strong>" in page
    assert 'name="password"' in page and 'name="name"' not in page
    r = post(approver, f"/archive/record/{record_id}/sign", {"role": "reviewed"})
    assert r.status_code == 403 and error_of(r.text).startswith("Type your password again to sign")
    r = post(approver, f"/archive/record/{record_id}/sign",
             {"role": "reviewed", "password": PW[APPROVER], "file_in_archive": "yes"})
    assert r.status_code == 200, error_of(r.text)
    assert f"Signed: reviewed by {APPROVER}" in r.text
