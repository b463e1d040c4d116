"""calib serve against an attacker: DNS rebinding, framing, other users' runs, keys in clear.

Each attack is a request an attacker can make; each test asserts the answer the
page gives (status and sentence), not only that something failed.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from calib.web import create_app
from calib.web.security import CSRF_FIELD, SESSION_COOKIE
from calib.web.state import OpenRun, Sessions, SessionsFull
from tests.web.test_routes import FLUORIDE, LOCAL, error_of, token_of

LAB_HOST = "labpc.fernbrook.example"


def browser(app, *, base_url: str = LOCAL, client=("127.0.0.1", 50000)) -> TestClient:
    c = TestClient(app, base_url=base_url, client=client)
    c.form_token = token_of(c.get("/").text)
    return c


def post(c: TestClient, url: str, data: dict | None = None, files: dict | None = None, **kw):
    return c.post(url, data={CSRF_FIELD: c.form_token, **(data or {})}, files=files, **kw)


def upload(c: TestClient) -> str:
    r = post(c, "/check", {"profile": "default"}, {"run": (FLUORIDE.name, FLUORIDE.read_bytes())})
    assert r.status_code == 200, r.text
    return str(r.url).rsplit("/", 1)[-1]


REFUSED_HOST = ("This server does not answer to that host name, so the request was refused "
                "(start calib serve with --allow-host NAME to add one).")


# ---------------------------------------------------------------------- DNS rebinding

@pytest.mark.parametrize("host", ["attacker.example", "attacker.example:8750",
                                  "127.0.0.1.attacker.example", "localhost.attacker.example"])
def test_a_request_naming_another_host_is_refused(host):
    # DNS rebinding: the attacker's name resolves to 127.0.0.1, the Host header keeps the name
    # (RFC 9110 §7.2; the attack as the common web-security guidance describes it).
    c = TestClient(create_app(), base_url=LOCAL)
    for method, url in (("GET", "/"), ("GET", "/archive"), ("POST", "/sign")):
        r = c.request(method, url, headers={"Host": host})
        assert r.status_code == 400, (method, url)
        assert error_of(r.text) == REFUSED_HOST


def test_a_post_with_the_attackers_origin_is_refused_even_to_an_allowed_host():
    c = browser(create_app())
    r = post(c, "/check", {}, headers={"Origin": "http://attacker.example:8750"})
    assert r.status_code == 403
    assert error_of(r.text) == "This form was sent from another site, so it was refused."
    # The rebinding form: Host and Origin both the attacker's name, consistent with each other.
    r = post(c, "/check", {}, headers={"Host": "attacker.example:8750",
                                       "Origin": "http://attacker.example:8750"})
    assert r.status_code == 400 and error_of(r.text) == REFUSED_HOST


def test_configured_names_are_answered_and_loopback_names_always():
    app = create_app(allowed_hosts=[LAB_HOST])
    assert TestClient(app, base_url=f"http://{LAB_HOST}:8750").get("/").status_code == 200
    for base in ("http://localhost:8750", "http://127.0.0.1:8750", "http://[::1]:8750"):
        assert TestClient(app, base_url=base).get("/").status_code == 200, base
    assert TestClient(app, base_url="http://other.fernbrook.example").get("/").status_code == 400


# ---------------------------------------------------------------------- headers

def test_every_response_forbids_framing_and_foreign_scripts():
    c = browser(create_app())
    for r in (c.get("/"), c.get("/no/such/page"), c.get("/static/calib.css"),
              c.get("/", headers={"Host": "attacker.example"})):
        csp = r.headers["content-security-policy"]
        # CSP Level 3: frame-ancestors 'none' forbids any framing (clickjacking the sign form).
        assert "frame-ancestors 'none'" in csp and "script-src 'self'" in csp
        assert "default-src 'self'" in csp and "'unsafe-inline'" not in csp
        assert r.headers["x-content-type-options"] == "nosniff"
        assert r.headers["x-frame-options"] == "DENY"


def test_the_pages_hold_no_inline_script_or_style_the_policy_would_block():
    c = browser(create_app())
    run_id = upload(c)
    for url in ("/", f"/run/{run_id}", "/sign", "/verify", "/quantify"):
        html = c.get(url).text
        assert not re.search(r"<script(?![^>]*\bsrc=)", html), url
        assert " style=" not in html and "<style" not in html and " on" + "click=" not in html
    # The error page too: its "Go back" link is no javascript: URL (CSP blocks those).
    html = c.get("/no/such/page").text
    assert "javascript:" not in html and '<a href="/" data-back>Go back</a>' in html


# ---------------------------------------------------------------------- other users' runs

def test_another_browsers_run_answers_404_and_cannot_be_changed():
    app = create_app()
    alice, mallory = browser(app), browser(app)
    assert alice.cookies[SESSION_COOKIE] != mallory.cookies[SESSION_COOKIE]
    run_id = upload(alice)
    for url in (f"/run/{run_id}", f"/run/{run_id}/curve/0", f"/run/{run_id}/issue"):
        r = mallory.get(url)
        assert r.status_code == 404, url
        assert error_of(r.text).startswith("This run is not open in this browser")
    r = post(mallory, f"/run/{run_id}/close")
    assert r.status_code == 404
    r = post(alice, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor"})
    assert r.status_code == 200
    assert mallory.get(f"/run/{run_id}/record.pdf").status_code == 404
    assert alice.get(f"/run/{run_id}").status_code == 200


def test_64_uploads_of_one_browser_never_evict_anothers_run(monkeypatch):
    import calib.web.app

    app = create_app()
    alice, bob = browser(app), browser(app)
    run_id = upload(alice)
    kept = app.state.sessions.store(alice.cookies[SESSION_COOKIE]).run(run_id).assessment

    def quick(run):  # Bob's 70 uploads need no statistics to fill his store
        run.assessment = kept

    monkeypatch.setattr(calib.web.app, "_assess", quick)
    bob_runs = [upload(bob) for _ in range(70)]
    assert alice.get(f"/run/{run_id}").status_code == 200
    assert bob.get(f"/run/{bob_runs[-1]}").status_code == 200
    assert bob.get(f"/run/{bob_runs[0]}").status_code == 404  # his own oldest (64 kept)


def test_a_downloaded_file_is_only_for_the_browser_that_made_it(tmp_path):
    app = create_app()
    alice, mallory = browser(app), browser(app)
    run_id = upload(alice)
    post(alice, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor"})
    pdf = alice.get(f"/run/{run_id}/record.pdf").content
    r = post(alice, "/sign", {"role": "reviewed", "name": "T. Overgaard"},
             {"record": ("record.pdf", pdf)})
    link = re.search(r'href="(/download/[^"]+)"', r.text).group(1)
    assert alice.get(link).status_code == 200
    r = mallory.get(link)
    assert r.status_code == 404
    assert error_of(r.text) == "This download is no longer available; make the file again."


def test_a_forged_session_cookie_gets_a_fresh_empty_store():
    app = create_app()
    alice = browser(app)
    run_id = upload(alice)
    forged = TestClient(app, base_url=LOCAL)
    r = forged.get(f"/run/{run_id}", headers={"Cookie": f"{SESSION_COOKIE}=x"})
    assert r.status_code == 404
    assert re.search(rf"{SESSION_COOKIE}=[\w-]{{43}}; HttpOnly; Path=/; SameSite=strict",
                     r.headers["set-cookie"])
    # Someone else's cookie value, guessed or seen: still not a way in without it exactly.
    real = alice.cookies[SESSION_COOKIE]
    guess = real[:-1] + ("A" if real[-1] != "A" else "B")
    assert forged.get(f"/run/{run_id}", headers={"Cookie": f"{SESSION_COOKIE}={guess}"}
                      ).status_code == 404


def test_a_new_browser_is_refused_rather_than_another_users_runs_dropped():
    now = [0.0]
    sessions = Sessions(keep=2, idle=3600, clock=lambda: now[0])
    run_id = sessions.store("a", create=True).add_run(OpenRun("a.csv", b""))
    sessions.store("b", create=True)
    for _ in range(5):  # page views of other browsers make no store
        sessions.store("x")
    assert len(sessions) == 2
    with pytest.raises(SessionsFull):
        sessions.store("c", create=True)
    assert sessions.store("a").run(run_id) is not None
    now[0] = 3000.0
    sessions.store("a")  # "a" used again; "b" idle since 0
    now[0] = 3700.0
    sessions.store("c", create=True)  # "b" idle for over an hour: forgotten
    assert sessions.store("a").run(run_id) is not None and len(sessions) == 2


def test_the_page_says_so_when_too_many_browsers_have_runs_open():
    app = create_app()
    app.state.sessions = Sessions(keep=1)
    alice, bob = browser(app), browser(app)
    upload(alice)
    r = post(bob, "/check", {"profile": "default"},
             {"run": (FLUORIDE.name, FLUORIDE.read_bytes())})
    assert r.status_code == 503
    assert error_of(r.text) == ("Too many browsers have runs open on this server; close a run "
                                "in another browser, or try again later.")


# ---------------------------------------------------------------------- keys over the network

def _keyed_sign(c: TestClient, tmp_path: Path, pdf: bytes):
    from tests.record.integrity_helpers import PASSPHRASE, REVIEWER, person_key

    private = Path(person_key(REVIEWER).path)  # a certified key: it signs only as its holder
    return post(c, "/sign", {"role": "reviewed", "name": REVIEWER,
                             "passphrase": PASSPHRASE.decode()},
                {"record": ("record.pdf", pdf), "key": (private.name, private.read_bytes())})


def _issued_pdf(c: TestClient) -> bytes:
    run_id = upload(c)
    post(c, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor"})
    return c.get(f"/run/{run_id}/record.pdf").content


def test_a_private_key_over_plain_http_from_another_computer_is_refused(tmp_path):
    app = create_app(allowed_hosts=[LAB_HOST], access_token=None)
    remote = browser(app, base_url=f"http://{LAB_HOST}:8750", client=("10.0.0.7", 50000))
    r = _keyed_sign(remote, tmp_path, _issued_pdf(remote))
    assert r.status_code == 403
    assert error_of(r.text) == ("A private key is accepted only over HTTPS or on this computer "
                                "itself: the key and its passphrase were not used (start calib "
                                "serve with --tls-cert and --tls-key, or sign with calib sign).")
    # Over HTTPS from the same computer the key is used.
    secure = browser(app, base_url=f"https://{LAB_HOST}:8750", client=("10.0.0.7", 50000))
    r = _keyed_sign(secure, tmp_path / "again", _issued_pdf(secure))
    assert r.status_code == 200 and "with a key" in r.text


# ---------------------------------------------------------------------- signed page, verify page

def test_the_signed_page_names_version_2_for_the_second_version(tmp_path):
    c = browser(create_app())
    r = post(c, "/sign", {"role": "reviewed", "name": "T. Overgaard"},
             {"record": ("record.pdf", _issued_pdf(c))})
    # Prepared is version 1 (calib verify: "version 1 (prepared)"); reviewed makes version 2.
    assert "version 2</h1>" in r.text and "version 3" not in r.text
    link = re.search(r'href="(/download/[^"]+)"', r.text).group(1)
    assert re.search(r'filename="CR-[0-9A-F]{12}-v2\.pdf"',
                     c.get(link).headers["content-disposition"])


def test_the_verify_page_uses_the_lab_keyring_and_archive(tmp_path):
    from tests.record.integrity_helpers import PASSPHRASE, REVIEWER, keyring, person_key

    ring = tmp_path / "ring"
    keyring(ring)
    private = Path(person_key(REVIEWER).path)  # certified by the lab authority in the ring
    archive = tmp_path / "records.sqlite"
    with_lab = browser(create_app(keyring=ring, archive=archive))
    r = post(with_lab, "/sign", {"role": "reviewed", "name": REVIEWER,
                                 "passphrase": PASSPHRASE.decode(), "file_in_archive": "yes"},
             {"record": ("record.pdf", _issued_pdf(with_lab)),
              "key": (private.name, private.read_bytes())})
    assert r.status_code == 200, error_of(r.text)
    signed = with_lab.get(re.search(r'href="(/download/[^"]+)"', r.text).group(1)).content
    r = post(with_lab, "/verify", {}, {"record": ("signed.pdf", signed)})
    assert "signed.pdf: intact. Every check passed." in r.text
    # The archive was consulted: the issued version and this one are entries 1 and 2.
    assert "this version is entry seq 2 of the archive" in r.text
    # The same genuine record on a server without the lab's keyring cannot be shown intact.
    bare = browser(create_app())
    r = post(bare, "/verify", {}, {"record": ("signed.pdf", signed)})
    assert "signed.pdf: NOT VERIFIED" in r.text and "no keyring was given" in r.text


def test_a_record_issued_with_a_lab_template_verifies_and_signs_on_the_page(tmp_path):
    folder = tmp_path / "templates"
    folder.mkdir()
    (folder / "kestrel.toml").write_text('[lab]\nname = "Kestrel Bioanalytical"\n',
                                         encoding="utf-8")
    c = browser(create_app(templates=folder))
    run_id = upload(c)
    post(c, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor", "template": "kestrel"})
    pdf = c.get(f"/run/{run_id}/record.pdf").content
    r = post(c, "/verify", {}, {"record": ("lab.pdf", pdf)})
    assert "lab.pdf: intact. Every check passed." in r.text
    r = post(c, "/sign", {"role": "reviewed", "name": "T. Overgaard"},
             {"record": ("lab.pdf", pdf)})
    assert r.status_code == 200 and "Signed: reviewed by T. Overgaard" in r.text


# ---------------------------------------------------------------------- calib serve

@pytest.fixture
def served(monkeypatch):
    import uvicorn

    calls = []
    monkeypatch.setattr(uvicorn, "run", lambda app, **kw: calls.append((app, kw)))
    return calls


def test_serve_refuses_the_network_without_tls_or_an_explicit_flag(served, capsys, tmp_path):
    from calib.cli.main import main

    assert main(["serve", "--host", "0.0.0.0"]) == 2
    assert capsys.readouterr().err == (
        "calib serve: error: --host 0.0.0.0 reaches other computers, and plain HTTP would "
        "carry forms, records and passphrases unencrypted: give --tls-cert and --tls-key (or "
        "put an HTTPS proxy in front and add --insecure-http)\n")
    assert served == []
    assert main(["serve", "--host", "0.0.0.0", "--tls-cert", "c.pem"]) == 2
    assert capsys.readouterr().err == ("calib serve: error: --tls-cert and --tls-key go "
                                       "together: give both\n")
    cert, key = tmp_path / "c.pem", tmp_path / "k.pem"
    cert.write_text("cert"), key.write_text("key")
    assert main(["serve", "--host", "10.1.2.3", "--tls-cert", str(cert), "--tls-key", str(key),
                 "--allow-host", LAB_HOST]) == 0
    app, options = served[-1]
    assert options["ssl_certfile"] == str(cert) and options["ssl_keyfile"] == str(key)
    assert app.state.allowed_hosts == (LAB_HOST, "10.1.2.3")
    assert "calib: serving on https://10.1.2.3:8750/?token=" in capsys.readouterr().out
    assert main(["serve", "--host", "0.0.0.0", "--insecure-http"]) == 0
    assert "ssl_certfile" not in served[-1][1]
    assert main(["serve", "--tls-cert", str(cert), "--tls-key", str(tmp_path / "none.pem")]) == 3
    assert capsys.readouterr().err.endswith(f"--tls-key {tmp_path / 'none.pem'}: file not found\n")
