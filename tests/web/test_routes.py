"""Route tests of calib serve's pages with Starlette's test client.

Every page, every error path, the form token on every POST, the origin check,
the upload limit and the access token.  The figures on the pages are the
library's (tested elsewhere); here we check that each page shows them, and
says what went wrong in one sentence.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from calib.web import create_app
from calib.web.security import CSRF_FIELD, safe_filename
from tests.archive.helpers import make_record, pdf_for, variant

ROOT = Path(__file__).resolve().parents[2]
RUNS = ROOT / "sample_runs"
FLUORIDE = RUNS / "fernbrook_fluoride_2026-11-30.csv"
ANIONS = RUNS / "fernbrook_anions_wide_2026-12-01.xlsx"
PHOSPHATE = RUNS / "fernbrook_phosphate_2026-12-06.tsv"
FIRST_CELL = "'fernbrook_fluoride_2026-11-30.csv'!D9"
LOCAL = "http://127.0.0.1:8750"


def token_of(html: str) -> str:
    found = re.search(rf'name="{CSRF_FIELD}" value="([^"]+)"', html)
    assert found, "the page has no form token"
    return found.group(1)


def error_of(html: str) -> str:
    found = re.search(r'<p class="error" role="alert">(.*?)</p>', html, re.DOTALL)
    assert found, "the page shows no error sentence"
    return " ".join(found.group(1).split())


@pytest.fixture
def archive(tmp_path: Path) -> Path:
    return tmp_path / "records.sqlite"


@pytest.fixture
def client(archive: Path) -> TestClient:
    with TestClient(create_app(archive=archive), base_url=LOCAL,
                    client=("127.0.0.1", 50000)) as c:
        c.form_token = token_of(c.get("/").text)
        yield c


def post(client: TestClient, url: str, data: dict | None = None, files: dict | None = None,
         **kw):
    return client.post(url, data={CSRF_FIELD: client.form_token, **(data or {})}, files=files,
                       **kw)


def upload(client: TestClient, path: Path = FLUORIDE, **data) -> str:
    with path.open("rb") as f:
        r = post(client, "/check", {"profile": "default", **data}, {"run": (path.name, f)})
    assert r.status_code == 200, r.text
    return str(r.url).rsplit("/", 1)[-1]


def fill_archive(path: Path, n: int = 4) -> None:
    from calib.archive import Archive

    with Archive(path) as store:
        for i in range(n):
            record = variant(make_record(seed=i, run=i), i)
            store.append(record, pdf_for(record), kind="issued")


# ---------------------------------------------------------------------- check a run

def test_home_page_has_the_upload_form_and_sets_the_form_token_cookie(client):
    r = client.get("/")
    assert r.status_code == 200
    assert 'type="file"' in r.text and 'action="/check"' in r.text
    assert client.cookies.get("calib_form") == client.form_token
    assert 'href="/static/calib.css"' in r.text
    assert client.get("/static/calib.css").status_code == 200
    assert client.get("/static/calib.js").status_code == 200


def test_fluoride_run_shows_the_verdict_in_words_plots_fit_checks_and_standards(client):
    run_id = upload(client)
    html = client.get(f"/run/{run_id}").text
    assert "! Needs review" in html
    assert "The intercept differs significantly from zero" in html
    assert html.count("<svg") == 2 and 'aria-label="Fluoride: residuals' in html
    assert "prediction limits" in html  # the calibration plot's legend
    assert "Intercept against zero (t-test)" in html and "Pass" in html
    assert FIRST_CELL.replace("'", "&#39;") in html
    assert html.index("Needs review") < html.index("<svg")  # the verdict first


def test_multi_analyte_summary_filters_by_verdict_and_links_each_curve(client):
    from calib.workflow import check_file

    expected = check_file(ANIONS)
    run_id = upload(client, ANIONS)
    html = client.get(f"/run/{run_id}").text
    for i, curve in enumerate(expected.curves):
        assert f'href="/run/{run_id}/curve/{i}"' in html
    accepted = [c.analyte for c in expected.curves if c.verdict.value == "accepted"]
    others = [c.analyte for c in expected.curves if c.verdict.value != "accepted"]
    shown = client.get(f"/run/{run_id}?show=accepted").text
    for name in accepted:
        assert f">{name}</a>" in shown
    for name in others:
        assert f">{name}</a>" not in shown
    detail = client.get(f"/run/{run_id}/curve/0")
    assert detail.status_code == 200 and expected.curves[0].analyte in detail.text
    r = client.get(f"/run/{run_id}/curve/99")
    assert r.status_code == 404 and "This run has no curve number 100." in r.text


def test_settings_recompute_with_another_weighting(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/settings", {"profile": "default", "weighting": "1/x"})
    assert r.status_code == 200 and "weighting 1/x." in r.text
    r = post(client, f"/run/{run_id}/settings", {"profile": "nonsense"})
    assert r.status_code == 400
    assert "Unknown profile &#39;nonsense&#39;: choose one from the list." in r.text


@pytest.mark.parametrize(("data", "message"), [
    ({"profile": "nonsense"}, "Unknown profile &#39;nonsense&#39;: choose one from the list."),
    ({"model": "cubic"}, "Unknown model &#39;cubic&#39;: choose one from the list."),
    ({"weighting": "1/z"}, "Unknown weighting &#39;1/z&#39;: choose one from the list."),
])
def test_check_refuses_unknown_choices(client, data, message):
    with FLUORIDE.open("rb") as f:
        r = post(client, "/check", data, {"run": (FLUORIDE.name, f)})
    assert r.status_code == 400 and error_of(r.text) == message


def test_check_without_a_file_asks_for_one(client):
    r = post(client, "/check", {"profile": "default"})
    assert r.status_code == 400
    assert error_of(r.text) == "Choose the run file (the instrument export) to upload."


def test_unreadable_run_file_is_one_sentence_naming_the_upload_not_a_temp_folder(client):
    r = post(client, "/check", {}, {"run": ("notes.csv", b"nothing,here\n1,2\n")})
    assert r.status_code == 400
    sentence = error_of(r.text)
    assert sentence.startswith("notes.csv")
    assert "calib-web-" not in r.text and "Traceback" not in r.text


def test_exclude_a_point_with_a_reason_recomputes_and_put_it_back(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/exclude", {"target": FIRST_CELL, "reason": "vial cap loose"})
    assert r.status_code == 200
    assert "Excluded " in r.text and "vial cap loose" in r.text
    assert "17 standards in the fit" in r.text
    r = post(client, f"/run/{run_id}/include", {"target": FIRST_CELL, "reason": ""})
    assert r.status_code == 400
    assert error_of(r.text) == (f"Putting {FIRST_CELL} back needs a reason: type it in the box "
                                "beside the point.").replace("'", "&#39;")
    r = post(client, f"/run/{run_id}/include",
             {"target": FIRST_CELL, "reason": "cap was fine on inspection"})
    assert r.status_code == 200 and "18 standards in the fit" in r.text
    assert "Put back " in r.text and "cap was fine on inspection" in r.text


@pytest.mark.parametrize("reason", ["", " ", "   \t  "])
def test_exclude_with_a_reason_of_only_spaces_is_refused_in_a_plain_sentence(client, reason):
    # Rule of the trade (data integrity): every exclusion carries a reason in words.
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/exclude", {"target": FIRST_CELL, "reason": reason})
    assert r.status_code == 400
    assert error_of(r.text) == (
        f"Excluding {FIRST_CELL} needs a reason in words: type why in the box beside the point "
        "(spaces alone are not a reason).").replace("'", "&#39;")
    assert "18 standards in the fit" in r.text


def test_the_reason_box_refuses_spaces_before_sending(client):
    # The browser checks the pattern first: a reason must hold a character that is not a space.
    run_id = upload(client)
    html = client.get(f"/run/{run_id}").text
    boxes = re.findall(r'<input name="reason"[^>]*>', html)
    assert boxes and all('required' in b and 'pattern=".*\\S.*"' in b for b in boxes)
    pattern = re.search(r'pattern="([^"]+)"', boxes[0]).group(1)
    assert re.fullmatch(pattern, "   ") is None and re.fullmatch(pattern, " air bubble ")


def test_exclude_of_an_unknown_cell_is_refused_and_leaves_the_run_as_it_was(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/exclude", {"target": "Z99", "reason": "typo"})
    assert r.status_code == 400
    assert error_of(r.text).startswith(
        "fernbrook_fluoride_2026-11-30.csv: exclusion &#39;Z99&#39; matches no point of the run")
    assert "Your exclusions" not in r.text


def test_put_back_of_a_point_not_excluded_here(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/include", {"target": "Z99", "reason": "x"})
    assert r.status_code == 400
    assert error_of(r.text) == ("Z99 was not excluded on this page, so it cannot be put back "
                                "here (a point the run file excludes stays out).")


def test_unknown_run_and_unknown_page(client):
    r = client.get("/run/nope")
    assert r.status_code == 404
    assert error_of(r.text) == ("This run is not open in this browser (it was closed, the server "
                                "was restarted, or many runs were opened since); upload the "
                                "file again.")
    r = client.get("/no/such/page")
    assert r.status_code == 404 and error_of(r.text) == "There is no such page."
    r = client.put("/")
    assert r.status_code == 405 and error_of(r.text) == "That request is not allowed here."


def test_close_forgets_the_run(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/close")
    assert r.status_code == 200 and str(r.url).endswith("/")
    assert client.get(f"/run/{run_id}").status_code == 404


# ---------------------------------------------------------------------- issue

def test_issue_files_the_record_and_offers_the_pdf(client, archive):
    from calib.archive import Archive

    run_id = upload(client)
    assert client.get(f"/run/{run_id}/issued").url.path == f"/run/{run_id}/issue"
    r = client.get(f"/run/{run_id}/record.pdf")
    assert r.status_code == 404
    assert error_of(r.text) == "No record has been issued for this run yet."
    page = client.get(f"/run/{run_id}/issue")
    assert 'name="prepared_by"' in page.text and 'name="file_in_archive"' in page.text
    r = post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                              "file_in_archive": "yes"})
    assert r.status_code == 200 and "filed in the archive as entry seq 1" in r.text
    pdf = client.get(f"/run/{run_id}/record.pdf")
    assert pdf.content.startswith(b"%PDF") and "attachment" in pdf.headers["content-disposition"]
    with Archive(archive, create=False) as store:
        (entry,) = store.entries()
    assert entry.pdf == pdf.content and entry.record_id in r.text


def test_issue_needs_a_name(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/issue", {"prepared_by": ""})
    assert r.status_code == 400
    assert error_of(r.text) == "Type the printed name of the analyst issuing the record."


def test_issue_with_an_unknown_template_name(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                              "template": "../../etc/passwd"})
    assert r.status_code == 400
    assert error_of(r.text) == ("Unknown report template &#39;../../etc/passwd&#39;: choose one "
                                "from the list.")


def test_report_templates_are_offered_by_name_from_the_folder(tmp_path):
    folder = tmp_path / "templates"
    folder.mkdir()
    (folder / "fernbrook.toml").write_text(
        '[lab]\nname = "Fernbrook Water Laboratory (fictional)"\n', encoding="utf-8")
    with TestClient(create_app(templates=folder), base_url=LOCAL) as c:
        c.form_token = token_of(c.get("/").text)
        run_id = upload(c)
        page = c.get(f"/run/{run_id}/issue").text
        assert '<option value="fernbrook">fernbrook</option>' in page
        r = post(c, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                             "template": "fernbrook"})
        assert r.status_code == 200 and "issued" in r.text


def test_without_an_archive_filing_and_archive_pages_say_how_to_open_one():
    with TestClient(create_app(), base_url=LOCAL) as c:
        c.form_token = token_of(c.get("/").text)
        message = "No archive is open: start the server with calib serve --archive DB."
        for url in ("/archive", "/archive/trend", "/archive/chain", "/archive/record/CR-1"):
            r = c.get(url)
            assert r.status_code == 409 and error_of(r.text) == message
        run_id = upload(c)
        r = post(c, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                             "file_in_archive": "yes"})
        assert r.status_code == 409 and error_of(r.text) == message


# ---------------------------------------------------------------------- sign and verify

def issued_pdf(client: TestClient, preparer: str = "R. Okafor") -> bytes:
    run_id = upload(client)
    post(client, f"/run/{run_id}/issue", {"prepared_by": preparer})
    return client.get(f"/run/{run_id}/record.pdf").content


def test_sign_as_reviewed_then_the_preparer_cannot_approve(client):
    pdf = issued_pdf(client)
    assert 'name="role"' in client.get("/sign").text
    r = post(client, "/sign", {"role": "reviewed", "name": "T. Overgaard"},
             {"record": ("record.pdf", pdf)})
    assert r.status_code == 200 and "Signed: reviewed by T. Overgaard" in r.text
    link = re.search(r'href="(/download/[^"]+)"', r.text).group(1)
    signed = client.get(link).content
    assert signed.startswith(b"%PDF") and signed != pdf
    r = post(client, "/sign", {"role": "approved", "name": "R. Okafor"},
             {"record": ("record-v2.pdf", signed)})
    assert r.status_code == 400
    assert "R. Okafor prepared this record" in error_of(r.text) or "preparer" in error_of(r.text)


@pytest.mark.parametrize(("data", "message"), [
    ({"role": "", "name": "T. Overgaard"},
     "Choose what the signature means: reviewed, approved or rejected."),
    ({"role": "reviewed", "name": ""}, "Type the printed name of the signer."),
])
def test_sign_form_errors(client, data, message):
    r = post(client, "/sign", data, {"record": ("record.pdf", b"%PDF-1.7")})
    assert r.status_code == 400 and error_of(r.text) == message


def test_sign_without_a_record_and_key_without_passphrase(client):
    r = post(client, "/sign", {"role": "reviewed", "name": "T. Overgaard"})
    assert error_of(r.text) == "Choose the record (its PDF or JSON) to upload."
    r = post(client, "/sign", {"role": "reviewed", "name": "T. Overgaard"},
             {"record": ("record.pdf", b"%PDF"), "key": ("t.key.pem", b"key")})
    assert error_of(r.text) == "A key file needs its passphrase: type it in the passphrase box."


def test_sign_with_a_key_file_and_its_passphrase(client, tmp_path):
    from tests.record.integrity_helpers import PASSPHRASE, REVIEWER, person_key

    private = person_key(REVIEWER).path  # a certified key: it signs only as its holder
    pdf = issued_pdf(client)
    r = post(client, "/sign", {"role": "reviewed", "name": REVIEWER,
                               "passphrase": PASSPHRASE.decode()},
             {"record": ("record.pdf", pdf), "key": (Path(private).name,
                                                     Path(private).read_bytes())})
    assert r.status_code == 200 and "with a key" in r.text
    r = post(client, "/sign", {"role": "reviewed", "name": REVIEWER,
                               "passphrase": "wrong"},
             {"record": ("record.pdf", pdf), "key": (Path(private).name,
                                                     Path(private).read_bytes())})
    assert r.status_code == 400 and "Traceback" not in r.text and error_of(r.text)


def test_verify_an_intact_record_and_an_altered_one(client):
    pdf = issued_pdf(client)
    r = post(client, "/verify", {}, {"record": ("CR.pdf", pdf)})
    assert r.status_code == 200 and "CR.pdf: intact. Every check passed." in r.text
    # Change the version digest the PDF states: verification must say so.
    digest = re.search(rb"/Keywords \(CR-[0-9A-F]+, ([0-9a-f]{64})", pdf).group(1)
    altered = pdf.replace(digest, (b"1" if digest[:1] == b"0" else b"0") + digest[1:])
    r = post(client, "/verify", {}, {"record": ("CR.pdf", altered)})
    # Drawing the pages again is only a note now, so the stated digest is the one problem.
    assert r.status_code == 200 and "CR.pdf: NOT VERIFIED, 1 problem found." in r.text
    assert "Problem: the PDF states version digest" in r.text
    r = post(client, "/verify", {}, {"record": ("notes.txt", b"hello")})
    assert r.status_code == 400 and "calib-web-" not in r.text and error_of(r.text)


def test_download_that_is_gone(client):
    r = client.get("/download/nothing")
    assert r.status_code == 404
    assert error_of(r.text) == "This download is no longer available; make the file again."


# ---------------------------------------------------------------------- archive and trend

def test_archive_search_open_verify_and_chain(client, archive):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                              "file_in_archive": "yes"})
    record_id = re.search(r"Record (CR-[0-9A-F]+) issued", r.text).group(1)
    listing = client.get("/archive", params={"analyte": "fluoride",
                                             "verdict": "needs-review"}).text
    assert f'href="/archive/record/{record_id}"' in listing
    none = client.get("/archive", params={"analyte": "Nitrate-N"}).text
    assert "No entries match." in none
    page = client.get(f"/archive/record/{record_id}").text
    assert "Fluoride" in page and "issued" in page
    verified = client.get(f"/archive/record/{record_id}/verify").text
    assert f"{record_id} (latest version): intact. Every check passed." in verified
    pdf = client.get(f"/archive/record/{record_id}/1.pdf")
    assert pdf.content.startswith(b"%PDF")
    chain = client.get("/archive/chain").text
    assert "Intact." in chain and "1 entries" in chain
    r = client.get(f"/archive/record/{record_id}/9.pdf")
    assert r.status_code == 404
    assert error_of(r.text) == f"No entry seq 9 of record {record_id} in the archive."
    r = client.get("/archive/record/CR-000000000000")
    assert error_of(r.text) == "No record CR-000000000000 in the archive."


def test_archive_search_errors(client, archive):
    fill_archive(archive, 1)
    r = client.get("/archive", params={"from": "30/11/2026"})
    assert r.status_code == 400
    assert error_of(r.text) == ("The From date must be written YYYY-MM-DD, e.g. 2026-11-30; "
                                "got &#39;30/11/2026&#39;.")
    r = client.get("/archive", params={"verdict": "great"})
    assert error_of(r.text) == "Unknown verdict &#39;great&#39;: choose one from the list."


def test_archive_that_does_not_exist_is_not_created(client, archive):
    r = client.get("/archive")
    assert r.status_code == 400 and error_of(r.text)
    assert not archive.exists()


def test_trend_page_draws_control_charts(client, archive):
    fill_archive(archive, 4)
    r = client.get("/archive/trend")
    assert '<option value="Nitrate-N"' in r.text
    r = client.get("/archive/trend", params={"analyte": "nitrate-n"})
    assert r.status_code == 200
    assert r.text.count("<svg") == 3 and "control chart of slope b" in r.text
    assert "Limits from the first 4 accepted curves" in r.text
    # Against run dates (make_record dates run i at T0 + i days): the axis names the first and
    # last, and the legend says what is drawn: 4 baseline curves, as the limits used.
    from datetime import timedelta

    from tests.archive.helpers import T0

    first, last = T0.date().isoformat(), (T0 + timedelta(days=3)).date()
    charts = re.findall(r'<svg class="chart".*?</svg>', r.text, re.DOTALL)
    assert len(charts) == 3
    for svg in charts:
        assert f">{first}</text>" in svg and f">{last.isoformat()}</text>" in svg
        assert ">Run date</text>" in svg and ">Baseline: first 4 curves</text>" in svg
        assert "first 10" not in svg
    r = client.get("/archive/trend", params={"analyte": "Arsenic"})
    assert r.status_code == 404
    assert error_of(r.text) == ("No curve of &#39;Arsenic&#39; in the archive; analytes "
                                "archived: Nitrate-N.")


def test_trend_with_too_few_curves_says_so(client, archive):
    fill_archive(archive, 2)
    r = client.get("/archive/trend", params={"analyte": "Nitrate-N"})
    assert "Not evaluated: 2 accepted curves (0 not accepted)" in r.text


# ---------------------------------------------------------------------- quantify

def test_quantify_the_runs_own_samples_and_download_the_workbook(client):
    assert 'name="samples"' in client.get("/quantify").text
    with PHOSPHATE.open("rb") as f:
        r = post(client, "/quantify", {}, {"curve": (PHOSPHATE.name, f)})
    assert r.status_code == 200 and "Batch verdict" in r.text and "✓ Accepted" in r.text
    links = {name: link for link, name in re.findall(
        r'href="(/download/[^"]+)" download>Download the results ([^<]+)</a>', r.text)}
    xlsx = client.get(links["workbook (XLSX)"])
    assert xlsx.content[:2] == b"PK" and "fernbrook_phosphate_2026-12-06-results.xlsx" in \
        xlsx.headers["content-disposition"]
    pdf = client.get(links["(PDF)"])
    assert pdf.content.startswith(b"%PDF") and pdf.headers["content-disposition"].endswith(
        '-results.pdf"')


def test_quantify_shows_units_source_range_detection_limit_and_qc_deviation(client):
    import numpy as np
    import statsmodels.api as sm

    from calib.workflow import check_file

    curve = check_file(PHOSPHATE).curves[0]
    used = [s for s in curve.standards if s.used]
    x = np.array([s.point.concentration for s in used])
    y = np.array([s.point.response for s in used])
    fit = sm.OLS(y, sm.add_constant(x)).fit()  # reference: statsmodels, same standards
    lod = 3.3 * np.sqrt(fit.scale) / fit.params[1]  # ICH Q2(R2): 3.3·σ/S
    found = (0.2756 - fit.params[0]) / fit.params[1]  # the QC's response, read from the file
    with PHOSPHATE.open("rb") as f:
        html = post(client, "/quantify", {}, {"curve": (PHOSPHATE.name, f)}).text
    assert f"run file <strong>{PHOSPHATE.name}</strong>, checked now" in html
    assert "with profile default (version 2)" in html
    row = html[html.index('<th scope="row">Orthophosphate-P</th>'):]
    row = row[:row.index("</tr>")]
    assert "0.05 to 0.8" in row and "mg/L" in row
    assert re.search(rf">{lod:.4g}<", row), (lod, row)
    qc = html[html.index('aria-label="QC samples"'):]
    qc = qc[qc.index("<tbody>"):]
    qc = qc[:qc.index("</tr>")]
    deviation = 100 * (found - 0.3) / 0.3
    assert ">0.3<" in qc and f">{found:.4g}<" in qc and f">{deviation:+.1f}<" in qc
    assert ">yes<" in qc
    samples = html[html.index('aria-label="Samples"'):]
    assert "<td>mg/L</td>" in samples[:samples.index("</table>")]


def test_quantify_errors_are_one_sentence(client):
    r = post(client, "/quantify")
    assert error_of(r.text) == "Choose the curve (an issued record, or a run file) to upload."
    with FLUORIDE.open("rb") as f:
        r = post(client, "/quantify", {}, {"curve": (FLUORIDE.name, f)})
    assert r.status_code == 400
    assert error_of(r.text).startswith("fernbrook_fluoride_2026-11-30.csv: no unknown or QC "
                                       "samples found to quantify")


# ---------------------------------------------------------------------- safety

POSTS = ["/check", "/run/x/settings", "/run/x/exclude", "/run/x/include", "/run/x/close",
         "/run/x/issue", "/sign", "/verify", "/quantify"]


@pytest.mark.parametrize("url", POSTS)
def test_every_post_needs_the_form_token(client, url):
    r = client.post(url, data={"profile": "default"})
    assert r.status_code == 403
    assert error_of(r.text) == ("The form had no valid page token (the page may be old, or the "
                                "form came from another site); reload the page and send it "
                                "again.")
    r = client.post(url, data={CSRF_FIELD: "forged"})
    assert r.status_code == 403


def test_a_post_from_another_site_is_refused(client):
    r = post(client, "/check", {}, headers={"Origin": "https://elsewhere.example"})
    assert r.status_code == 403
    assert error_of(r.text) == "This form was sent from another site, so it was refused."


def test_uploads_above_the_limit_are_refused(tmp_path):
    with TestClient(create_app(max_upload=1000), base_url=LOCAL) as c:
        c.form_token = token_of(c.get("/").text)
        r = post(c, "/check", {}, {"run": ("big.csv", b"x" * 5000)})
    assert r.status_code == 413
    assert error_of(r.text) == "The file is too large: at most 1 kB can be uploaded."


def test_access_token_is_needed_beyond_loopback():
    with TestClient(create_app(access_token="s3cret"), base_url=LOCAL) as c:
        r = c.get("/")
        assert r.status_code == 403
        assert error_of(r.text) == ("This page needs the access token printed when calib "
                                    "serve started: open the address it printed, with "
                                    "?token=… at the end.")
        assert c.get("/", params={"token": "wrong"}).status_code == 403
        r = c.get("/archive/chain", params={"token": "s3cret"}, follow_redirects=False)
        assert r.status_code == 303 and r.headers["location"].endswith("/archive/chain")
        assert c.get("/").status_code == 200  # the cookie now carries it
        c.cookies.clear()
        assert c.post("/check").status_code == 403


def test_internal_errors_show_a_sentence_and_no_traceback(client, monkeypatch):
    import calib.workflow

    def broken(*args, **kwargs):
        raise ZeroDivisionError("float division by zero")

    monkeypatch.setattr(calib.workflow, "check_file", broken)
    with TestClient(client.app, raise_server_exceptions=False, base_url=LOCAL) as c:
        token = token_of(c.get("/").text)
        r = c.post("/check", data={CSRF_FIELD: token},
                   files={"run": ("run.csv", b"a")})
    assert r.status_code == 500
    assert error_of(r.text) == ("Internal error: ZeroDivisionError: float division by zero (a "
                                "bug in calib: please report it with the file you used).")
    assert "Traceback" not in r.text


def test_file_names_are_escaped_on_the_page(client):
    name = "<script>alert(1)</script>.csv"
    r = post(client, "/check", {}, {"run": (name, FLUORIDE.read_bytes())})
    assert "<script>alert" not in r.text


def test_safe_filename_never_keeps_a_folder():
    assert safe_filename("/etc/passwd") == "passwd"
    assert safe_filename("a\\b\\..\\c.csv") == "c.csv"
    assert safe_filename("") == "upload"


def test_the_private_folder_is_gone_after_each_check(client, monkeypatch):
    import calib.workflow

    seen = []
    real = calib.workflow.check_file

    def spy(path, **kwargs):
        seen.append(Path(path))
        assert Path(path).parent.stat().st_mode & 0o077 == 0  # private to us
        return real(path, **kwargs)

    monkeypatch.setattr(calib.workflow, "check_file", spy)
    upload(client)
    assert seen and not seen[0].exists() and not seen[0].parent.exists()


def test_serve_command_prints_the_url_and_needs_a_token_beyond_loopback(monkeypatch, capsys):
    import uvicorn

    from calib.cli.main import main

    calls = []
    monkeypatch.setattr(uvicorn, "run", lambda app, **kw: calls.append((app, kw)))
    assert main(["serve", "--port", "8799"]) == 0
    out = capsys.readouterr().out
    assert "calib: serving on http://127.0.0.1:8799/\n" in out
    assert calls[-1][1]["host"] == "127.0.0.1" and calls[-1][0].state.access_token is None
    assert main(["serve", "--host", "0.0.0.0", "--insecure-http"]) == 0
    out = capsys.readouterr().out
    token = calls[-1][0].state.access_token
    assert token and f"http://0.0.0.0:8750/?token={token}" in out
    assert main(["serve", "--port", "0"]) == 2
    assert "--port must be from 1 to 65535, got 0" in capsys.readouterr().err
    assert main(["serve", "--templates", "no-such-folder"]) == 3
    assert "--templates no-such-folder is not a folder" in capsys.readouterr().err


def test_the_issue_page_says_which_letterhead_the_record_gets(client, tmp_path):
    run_id = upload(client)
    page = client.get(f"/run/{run_id}/issue").text
    assert ("Letterhead unless another template is chosen: none set up, so the record says "
            "“Laboratory not configured”") in page
    from calib.report.template import set_lab_template

    lab = tmp_path / "kestrel.toml"
    lab.write_text('[lab]\nname = "Kestrel Bioanalytical"\n', encoding="utf-8")
    set_lab_template(lab)
    page = client.get(f"/run/{run_id}/issue").text
    assert "the lab&#39;s, kestrel.toml (Kestrel Bioanalytical)" in page
    post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor"})
    pdf = client.get(f"/run/{run_id}/record.pdf").content
    import io

    from pypdf import PdfReader

    assert PdfReader(io.BytesIO(pdf)).metadata["/Author"] == "Kestrel Bioanalytical"


def test_a_full_disk_while_filing_is_one_sentence(client, monkeypatch):
    import errno
    import os

    import calib.service

    def full(*args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), "records.sqlite")

    monkeypatch.setattr(calib.service, "file", full)
    run_id = upload(client)
    with TestClient(client.app, raise_server_exceptions=False, base_url=LOCAL) as c:
        c.cookies = client.cookies
        r = c.post(f"/run/{run_id}/issue", data={CSRF_FIELD: client.form_token,
                                                 "prepared_by": "R. Okafor",
                                                 "file_in_archive": "yes"})
    assert r.status_code == 507
    assert error_of(r.text) == ("Cannot write records.sqlite: the disk is full (No space left "
                                "on device); nothing was written.")


# ---------------------------------------------------------------------- the review desk

SCREEN = RUNS / "multiresidue_screen_40_2026-12-10.xlsx"


@pytest.fixture(scope="module")
def screen():
    from calib.workflow import check_file

    return check_file(SCREEN)


def test_summary_lists_the_worst_curves_first_with_short_check_names(client, screen):
    run_id = upload(client, SCREEN)
    html = client.get(f"/run/{run_id}").text
    shown = re.findall(r'<a href="/run/[^/]+/curve/(\d+)">', html)
    verdicts = [screen.curves[int(i)].verdict.value for i in shown]
    rank = {"rejected": 0, "needs-review": 1, "accepted": 2}  # common practice: worst first
    assert len(shown) == 40 and verdicts == sorted(verdicts, key=rank.get)
    rejected = [i for i, c in enumerate(screen.curves) if c.verdict.value == "rejected"]
    assert [int(i) for i in shown[:len(rejected)]] == rejected  # file order within a verdict
    row = html[html.index(f'/curve/{rejected[0]}"'):]
    row = row[:row.index("</tr>")]
    # The short name, not the check's sentence (the method in brackets is dropped).
    assert "<li>Back-calculated standards within tolerance</li>" in row
    assert "(F-test)" not in row and "standards within ±" not in row


def test_summary_names_the_worst_deviation_and_the_suggested_outlier(client, screen):
    import numpy as np
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import OLSInfluence

    index = next(i for i, c in enumerate(screen.curves) if c.analyte == "MRS-104")
    curve = screen.curves[index]
    assert curve.model.value == "linear" and curve.weighting.value == "none"
    used = [s for s in curve.standards if s.used]
    x = np.array([s.point.concentration for s in used])
    y = np.array([s.point.response for s in used])
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    # Reference: statsmodels on the same standards. Back-calculated x = (y - a) / b.
    back = (y - fit.params[0]) / fit.params[1]
    dev = 100 * (back - x) / x
    worst = int(np.argmax(np.abs(dev)))
    outlier = int(np.argmax(np.abs(OLSInfluence(fit).resid_studentized_external)))

    run_id = upload(client, SCREEN)
    html = client.get(f"/run/{run_id}").text
    row = html[html.index(f'/curve/{index}"'):]
    row = row[:row.index("</tr>")]
    assert f"{dev[worst]:+.1f} %" in row and used[worst].point.source_cell in row
    assert f"{used[outlier].point.source_cell} <span class=\"small\">(suggested outlier)" in row


def test_curve_page_has_a_heading_flagged_rows_and_links_to_the_neighbours(client, screen):
    from calib.web.pages import summary_order

    run_id = upload(client, SCREEN)
    order = [i for i in summary_order(screen) if screen.curves[i].verdict.value != "accepted"]
    middle = order[1]
    html = client.get(f"/run/{run_id}/curve/{middle}").text
    h1 = re.findall(r"<h1[^>]*>(.*?)</h1>", html, re.DOTALL)
    assert len(h1) == 1 and screen.curves[middle].analyte in h1[0]
    assert f'href="/run/{run_id}/curve/{order[0]}" rel="prev">Previous flagged curve' in html
    assert f'href="/run/{run_id}/curve/{order[2]}" rel="next">Next flagged curve' in html
    first = client.get(f"/run/{run_id}/curve/{order[0]}").text
    assert "Previous flagged curve" not in first and "Next flagged curve" in first
    # MRS-104's suggested outlier (see the statsmodels check above) is a highlighted row.
    index = next(i for i, c in enumerate(screen.curves) if c.analyte == "MRS-104")
    html = client.get(f"/run/{run_id}/curve/{index}").text
    flagged = re.findall(r'<tr id="std-\d+-\d+" tabindex="-1" class="flagged">\s*<td>([^<]+)<br>'
                         r'<strong class="flag">⚑ flagged: ([^<]+)</strong>', html)
    assert flagged and all("suggested outlier" in why for _, why in flagged)


def test_exclude_on_a_curve_page_returns_to_the_same_curve_and_row(client, screen):
    run_id = upload(client, SCREEN)
    index = next(i for i, c in enumerate(screen.curves) if c.analyte == "MRS-101")
    cell = screen.curves[index].standards[4].point.source_cell
    r = post(client, f"/run/{run_id}/exclude",
             {"target": cell, "reason": "split peak", "back": str(index), "row": "5"},
             follow_redirects=False)
    assert r.status_code == 303
    assert r.headers["location"] == f"/run/{run_id}/curve/{index}#std-{index}-5"
    page = client.get(r.headers["location"]).text
    row = page[page.index(f'id="std-{index}-5"'):]
    row = row[:row.index("</tr>")]
    assert cell.replace("'", "&#39;") in row and "no: split peak" in row and "Put back" in row
    r = post(client, f"/run/{run_id}/include",
             {"target": cell, "reason": "peak fine on reintegration", "back": str(index),
              "row": "5"}, follow_redirects=False)
    assert r.headers["location"] == f"/run/{run_id}/curve/{index}#std-{index}-5"
    # A refusal stays on the curve page too, with the sentence.
    r = post(client, f"/run/{run_id}/exclude",
             {"target": cell, "reason": "  ", "back": str(index), "row": "5"})
    assert r.status_code == 400 and "<h1" in r.text
    assert screen.curves[index].analyte in re.search(r"<h1[^>]*>(.*?)</h1>", r.text).group(1)
    # A "back" that is not a curve of the run goes to the run's page, never elsewhere.
    r = post(client, f"/run/{run_id}/exclude",
             {"target": cell, "reason": "again", "back": "//evil.example", "row": "x"},
             follow_redirects=False)
    assert r.headers["location"] == f"/run/{run_id}"


def test_nav_offers_archive_and_trend_only_with_an_archive():
    with TestClient(create_app(), base_url=LOCAL, client=("127.0.0.1", 50000)) as bare:
        html = bare.get("/").text
    assert 'href="/archive"' not in html and 'href="/archive/trend"' not in html
    with TestClient(create_app(archive="unused.sqlite"), base_url=LOCAL,
                    client=("127.0.0.1", 50000)) as full:
        html = full.get("/").text
    assert 'href="/archive"' in html and 'href="/archive/trend"' in html


def test_sign_from_the_issued_page_after_seeing_verdict_reasons_and_plots(client, archive,
                                                                          tmp_path):
    from calib import service

    run_id = upload(client)
    post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                         "file_in_archive": "yes"})
    page = client.get(f"/run/{run_id}/issued").text
    # What the signer sees first: the verdict, the reasons in words and both plots.
    assert page.index("Needs review") < page.index('action="/run/')
    assert "Intercept against zero" in page and page.count('<svg class="chart"') == 2
    assert "You sign version 1 as shown above; your signature makes version 2." in page
    r = post(client, f"/run/{run_id}/sign", {"role": "reviewed", "name": "T. Overgaard",
                                            "file_in_archive": "yes"})
    assert r.status_code == 200 and "Signed: reviewed by T. Overgaard" in r.text
    # SPEC: version N holds N signatures (prepared is 1): one review makes version 2.
    assert "Record " in r.text and ": version 2</h1>" in r.text
    assert "Filed in the archive as entry seq 2 (signed)." in r.text
    link = re.search(r'href="(/download/[^"]+)"', r.text).group(1)
    got = client.get(link)
    assert got.headers["content-disposition"].endswith('-v2.pdf"')
    signed = tmp_path / "signed.pdf"
    signed.write_bytes(got.content)
    report = service.verify(signed, archive=archive)  # the library's own verification
    assert report.ok, [p.message for p in report.problems]
    # The run's page now offers the next signature on version 2.
    page = client.get(f"/run/{run_id}/issued").text
    assert "You sign version 2 as shown above; your signature makes version 3." in page


def test_sign_from_the_archive_record_page_files_the_next_version(client, archive):
    run_id = upload(client)
    post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                         "file_in_archive": "yes"})
    post(client, f"/run/{run_id}/sign", {"role": "reviewed", "name": "T. Overgaard",
                                        "file_in_archive": "yes"})
    from calib.archive import Archive

    with Archive(archive, create=False) as store:
        record_id = store.entries()[-1].record_id
    page = client.get(f"/archive/record/{record_id}").text
    assert "Intercept against zero" in page and '<svg class="chart"' in page
    assert "You sign version 2 as shown above; your signature makes version 3." in page
    r = post(client, f"/archive/record/{record_id}/sign",
             {"role": "approved", "name": "M. Lindqvist"})
    assert r.status_code == 200 and "Signed: approved by M. Lindqvist" in r.text
    assert ": version 3</h1>" in r.text and "entry seq 3 (signed)" in r.text
    with Archive(archive, create=False) as store:
        assert [e.roles for e in store.entries(record_id=record_id)][-1] == (
            "prepared", "reviewed", "approved")
    # The preparer may not approve (default sign-off rules): refused in one sentence.
    r = post(client, f"/archive/record/{record_id}/sign",
             {"role": "approved", "name": "R. Okafor"})
    assert r.status_code == 400 and error_of(r.text)
    r = post(client, "/archive/record/CR-NOPE/sign", {"role": "reviewed", "name": "A. B"})
    assert r.status_code == 404 and error_of(r.text) == "No record CR-NOPE in the archive."


def test_sign_on_the_run_page_needs_an_issued_record(client):
    run_id = upload(client)
    r = post(client, f"/run/{run_id}/sign", {"role": "reviewed", "name": "T. Overgaard"})
    assert r.status_code == 404
    assert error_of(r.text) == "No record has been issued for this run yet."


def test_archive_search_by_part_of_an_analyte_shows_each_curves_own_verdict(client, archive):
    run_id = upload(client, ANIONS)  # run verdict: needs review (Chloride); Sulfate: accepted
    r = post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor",
                                              "file_in_archive": "yes"})
    record_id = re.search(r"Record (CR-[0-9A-F]+) issued", r.text).group(1)
    page = client.get("/archive", params={"analyte": "sulf"}).text  # part, lower case
    rows = re.findall(r'<tr><th scope="row">([^<]+)</th><td><span class="verdict v-([a-z-]+)"',
                      page)
    assert rows == [("Sulfate", "accepted")]
    assert f'href="/archive/record/{record_id}"' in page
    page = client.get("/archive", params={"analyte": "NITRATE"}).text
    rows = re.findall(r'<tr><th scope="row">([^<]+)</th><td><span class="verdict v-([a-z-]+)"',
                      page)
    assert rows == [("Nitrate-N", "accepted")]
    page = client.get("/archive", params={"analyte": "ride"}).text  # Fluoride and Chloride
    assert "2 curves of Chloride, Fluoride" in page
    rows = re.findall(r'<tr><th scope="row">([^<]+)</th><td><span class="verdict v-([a-z-]+)"',
                      page)
    assert sorted(rows) == [("Chloride", "needs-review"), ("Fluoride", "accepted")]
    only = client.get("/archive", params={"analyte": "e", "verdict": "needs-review"}).text
    assert re.findall(r'<tr><th scope="row">([^<]+)</th>', only) == ["Chloride"]
    none = client.get("/archive", params={"analyte": "arsenic"}).text
    assert "no analyte whose name holds “arsenic”" in none and "No entries match." in none


def test_archive_listing_is_paged_and_a_long_entry_does_not_list_every_analyte(client, archive):
    from calib.archive import Archive
    from calib.web.archive_pages import PAGE_ROWS

    fill_archive(archive, PAGE_ROWS + 3)
    first = client.get("/archive").text
    assert f"{PAGE_ROWS + 3} entries. Showing 1–{PAGE_ROWS}." in first
    assert "Page 1 of 2" in first and 'rel="next"' in first and 'rel="prev"' not in first
    second = client.get("/archive", params={"page": "2"}).text
    assert f"Showing {PAGE_ROWS + 1}–{PAGE_ROWS + 3}." in second and "Page 2 of 2" in second
    r = client.get("/archive", params={"page": "3"})
    assert r.status_code == 404 and error_of(r.text) == (
        f"There is no page 3: the search found {PAGE_ROWS + 3} rows (2 pages).")
    r = client.get("/archive", params={"page": "two"})
    assert r.status_code == 400 and error_of(r.text) == (
        "The page number must be a whole number from 1; got &#39;two&#39;.")
    # A 40-analyte screen: the cell gives the count and a few names, not all forty.
    run_id = upload(client, SCREEN)
    post(client, f"/run/{run_id}/issue", {"prepared_by": "R. Okafor", "file_in_archive": "yes"})
    last = client.get("/archive", params={"page": "2"}).text
    table = last[last.index("<table>"):last.index("</table>")]
    assert "40 analytes: MRS-101, MRS-102 … MRS-140" in table and "MRS-120" not in table
    with Archive(archive, create=False) as store:
        assert len(store.entries(data=False)) == PAGE_ROWS + 4
    # Its record page: worst first, each curve with the checks behind its own verdict.
    record_id = re.search(r'href="/archive/record/(CR-[0-9A-F]+)">[^<]+</a></td><td>issued'
                          r'</td><td>[^<]*</td><td><span class="verdict v-rejected"', last)
    assert record_id, "the 40-analyte entry is listed with its run verdict"
    page = client.get(f"/archive/record/{record_id.group(1)}").text
    table = page[page.index('aria-label="Curves in the record"'):]
    names = re.findall(r'<tr><th scope="row">(MRS-\d+)</th>', table[:table.index("</table>")])
    assert len(names) == 40 and names[0] == "MRS-105"  # the first rejected curve in file order
    row = table[table.index(">MRS-104<"):]
    assert "<li>Suggested outliers</li>" in row[:row.index("</tr>")]
    found = client.get("/archive", params={"analyte": "mrs-1"}).text
    assert ("40 curves of 40 analytes whose name holds “mrs-1” (MRS-101, MRS-102, MRS-103 …)"
            in found) and "Page 1 of 2" in found
