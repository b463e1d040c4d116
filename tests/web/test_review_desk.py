"""The 40-analyte review in a real headless Chromium, end to end, at 1280 and 390 px.

A reviewer opens the invented 40-analyte multi-residue screen of Fernbrook Water
Laboratory, finds the flagged curves from the summary, follows a suggested
outlier from the plot to its table row, excludes it with a reason without
losing their place, issues the record, signs it from the record's own page and
finds it in the archive by part of an analyte name, with that curve's own
verdict.  Every page is screenshotted at both widths (in the test's temporary
folder), must not scroll sideways at 390 px, must draw chart text at 12 px or
more, and is checked with axe-core when it is available.

axe-core comes from the npm registry (``npm install axe-core`` into a cache
folder, as ``.ci/run`` does); ``CALIB_AXE_JS`` may name its ``axe.min.js``.
Without it the accessibility test is skipped, saying so.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

import pytest

from tests.web.test_browser import CHROMIUM, FLAGS, ROOT

sync_api = pytest.importorskip("playwright.sync_api")

SCREEN = ROOT / "sample_runs" / "multiresidue_screen_40_2026-12-10.xlsx"
WIDTHS = (1280, 390)


def axe_script() -> Path | None:
    """axe.min.js from CALIB_AXE_JS or the npm cache folder .ci/run fills."""
    named = os.environ.get("CALIB_AXE_JS")
    cache = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache")
    for candidate in ([Path(named)] if named else []) + [
            cache / "calib-axe" / "node_modules" / "axe-core" / "axe.min.js"]:
        if candidate.is_file():
            return candidate
    return None


@pytest.fixture
def browser(tmp_path: Path):
    with sync_api.sync_playwright() as pw:
        chromium = pw.chromium.launch(executable_path=CHROMIUM, headless=True, args=FLAGS)
        try:
            yield chromium
        finally:
            chromium.close()


def shot(page, tmp_path: Path, name: str) -> None:
    folder = tmp_path / "screenshots"
    folder.mkdir(exist_ok=True)
    width = page.viewport_size["width"]
    path = folder / f"{name}-{width}.png"
    page.screenshot(path=str(path), full_page=True)
    assert path.stat().st_size > 1000


def fits_the_width(page) -> None:
    """No sideways scroll of the page itself (wide tables scroll in their own box)."""
    width = page.viewport_size["width"]
    assert page.evaluate("document.documentElement.scrollWidth") <= width, page.url


def chart_text_sizes(page) -> list[float]:
    """Rendered size, in CSS px, of every text in the page's charts."""
    return page.evaluate("""() => Array.from(document.querySelectorAll('svg.chart text'))
        .map(t => { const m = t.getScreenCTM();
                    return parseFloat(t.getAttribute('font-size')) * Math.hypot(m.a, m.b); })""")


def test_forty_analyte_review_from_summary_to_signed_record_in_the_archive(
        server, browser, tmp_path):
    base, _ = server
    blocked: list[str] = []
    page = browser.new_page(viewport={"width": 1280, "height": 900}, accept_downloads=True)
    page.on("console", lambda m: blocked.append(m.text)
            if "Content Security Policy" in m.text else None)
    page.goto(base + "/")
    page.set_input_files("#run", str(SCREEN))
    page.get_by_role("button", name="Check the run").click()
    page.wait_for_url("**/run/*")
    run_url = page.url
    shot(page, tmp_path, "1-summary")

    # The summary: worst first, with short check names and the flagged cells.
    verdicts = page.eval_on_selector_all(
        "table.summary tbody tr td:nth-child(2) .verdict",
        "els => els.map(e => e.className.replace('verdict v-', ''))")
    assert len(verdicts) == 40
    rank = {"rejected": 0, "needs-review": 1, "accepted": 2}  # common practice: worst first
    assert verdicts == sorted(verdicts, key=rank.get) and verdicts[0] == "rejected"
    row = page.locator("table.summary tbody tr", has_text="MRS-104")
    assert "Suggested outliers" in row.inner_text() and "suggested outlier" in row.inner_text()
    flagged_cell = re.search(r"(Screen!\w+) \(suggested outlier\)", row.inner_text()).group(1)

    # Open the curve from the summary; its <h1> names it.
    row.get_by_role("link", name="MRS-104").click()
    page.wait_for_url("**/curve/*")
    curve_url = page.url.split("#")[0]
    assert "MRS-104" in page.locator("h1").inner_text()
    assert min(chart_text_sizes(page)) >= 12
    shot(page, tmp_path, "2-curve")

    # The plot point of the suggested outlier leads to its highlighted row.
    point = page.locator(f"svg.chart a[aria-label^='{flagged_cell}:']").first
    assert flagged_cell in point.locator("title").text_content()  # the tooltip names the cell
    point.dispatch_event("click")  # this very point: a neighbour may be drawn over it
    target = page.evaluate("location.hash").lstrip("#")
    flagged_row = page.locator(f"tr#{target}")
    assert "flagged" in (flagged_row.get_attribute("class") or "")
    assert flagged_cell in flagged_row.inner_text()

    # A reason of spaces is refused by the form itself; then a real reason is taken.
    box = flagged_row.get_by_label(f"Reason to exclude {flagged_cell}")
    box.fill("   ")
    flagged_row.get_by_role("button", name="Exclude").click()
    assert page.url.split("#")[0] == curve_url
    assert "spaces alone are not a reason" in box.evaluate("b => b.validationMessage")
    box.fill("split peak on the chromatogram")
    flagged_row.get_by_role("button", name="Exclude").click()
    page.wait_for_load_state()
    # Back on the same curve, at the same row, with keyboard focus in that row.
    assert page.url == f"{curve_url}#{target}"
    assert page.evaluate("document.activeElement.closest('tr') && "
                         "document.activeElement.closest('tr').id") == target
    assert "no: split peak on the chromatogram" in page.locator(f"tr#{target}").inner_text()
    own_verdict = page.locator("main .lead .verdict").first.get_attribute("class")
    own_verdict = own_verdict.replace("verdict v-", "")
    shot(page, tmp_path, "3-excluded")

    # Next flagged curve from here, and back to the summary.
    page.get_by_role("link", name="Next flagged curve").click()
    assert page.locator("h1").count() == 1
    page.goto(run_url)

    page.get_by_role("link", name="Issue the record…").click()
    page.get_by_label("Prepared by (printed name)").fill("R. Okafor")
    page.get_by_role("button", name="Issue the record").click()
    page.wait_for_url("**/issued")
    assert "filed in the archive as entry seq 1" in page.inner_text("main")
    # The signer sees the verdicts, reasons and plots on this page, then signs here.
    assert page.locator("details.review").count() == 40
    page.locator("details.review summary", has_text="MRS-104").click()
    assert page.locator("details.review[open] svg.chart").count() == 2
    shot(page, tmp_path, "4-issued")
    # Sign-off rule: a rejected run's record can be signed only as rejected; the form says so.
    assert "it can be signed only as rejected" in page.inner_text("main")
    page.get_by_label("rejected", exact=True).check()
    page.get_by_label("Printed name").fill("T. Overgaard")
    page.get_by_role("button", name="Sign version 1").click()
    text = page.inner_text("main")
    assert "Signed: rejected by T. Overgaard" in text and ": version 2" in text
    assert "Filed in the archive as entry seq 2 (signed)." in text
    shot(page, tmp_path, "5-signed")

    # The archive finds it by part of the analyte name, with the curve's own verdict.
    page.goto(base + "/archive")
    page.get_by_label("Analyte (part of the name is enough)").fill("rs-104")
    page.get_by_role("button", name="Search").click()
    rows = page.locator("main table tbody tr")
    assert rows.count() == 1 and "MRS-104" in rows.first.inner_text()
    shown = rows.first.locator(".verdict").get_attribute("class").replace("verdict v-", "")
    assert shown == own_verdict != "rejected"  # the run itself was rejected
    shot(page, tmp_path, "6-archive")
    rows.first.get_by_role("link").click()
    assert "prepared, rejected" in page.inner_text("main")
    shot(page, tmp_path, "7-record")

    # Quantify: results with units and QC, and the PDF report as a download.
    page.goto(base + "/quantify")
    page.set_input_files("#curve", str(ROOT / "sample_runs" / "fernbrook_phosphate_2026-12-06.tsv"))
    page.get_by_role("button", name="Quantify").click()
    page.wait_for_selector("text=Batch verdict")
    assert "mg/L" in page.inner_text("main") and page.locator("[aria-label='QC samples']").count()
    with page.expect_download() as info:
        page.get_by_role("link", name="Download the results (PDF)").click()
    saved = tmp_path / "quantify.pdf"
    info.value.save_as(str(saved))
    assert saved.read_bytes().startswith(b"%PDF")
    assert info.value.suggested_filename == "fernbrook_phosphate_2026-12-06-results.pdf"
    shot(page, tmp_path, "8-quantify")
    assert blocked == []


PAGES = ("/", "/sign", "/verify", "/quantify", "/archive", "/archive/chain", "{run}",
         "{curve}", "{issued}", "{record}", "/archive?analyte=mrs-1", "/archive/trend",
         "/archive/trend?analyte=MRS-101",
         "{quantified}", "/no/such/page")


@pytest.mark.parametrize("width", WIDTHS)
def test_every_page_has_no_axe_violations_and_no_sideways_scroll(server, browser, tmp_path,
                                                               width):
    script = axe_script()
    if script is None:
        pytest.skip("axe-core is not installed: npm install axe-core into "
                    "~/.cache/calib-axe (as .ci/run does) or set CALIB_AXE_JS")
    base, _ = server
    page = browser.new_page(viewport={"width": width, "height": 900})
    page.goto(base + "/")
    page.set_input_files("#run", str(SCREEN))
    page.get_by_role("button", name="Check the run").click()
    page.wait_for_url("**/run/*")
    places = {"run": page.url, "curve": page.url + "/curve/0"}
    page.goto(page.url + "/issue")
    page.get_by_label("Prepared by (printed name)").fill("R. Okafor")
    page.get_by_role("button", name="Issue the record").click()
    page.wait_for_url("**/issued")
    places["issued"] = page.url
    record_id = re.search(r"Record (CR-[0-9A-F]+)", page.inner_text("h1")).group(1)
    places["record"] = f"{base}/archive/record/{record_id}"
    source = script.read_text(encoding="utf-8")
    failures = []
    for path in PAGES:
        if path == "{quantified}":
            page.goto(base + "/quantify")
            page.set_input_files("#curve", str(ROOT / "sample_runs" /
                                                "fernbrook_phosphate_2026-12-06.tsv"))
            page.get_by_role("button", name="Quantify").click()
            page.wait_for_selector("text=Batch verdict")
        else:
            page.goto(path.format(**places) if path.startswith("{") else base + path)
        for details in page.locator("details").all():
            details.evaluate("d => d.open = true")  # check what is folded away too
        fits_the_width(page)
        sizes = chart_text_sizes(page)
        assert not sizes or min(sizes) >= 12, (path, min(sizes))
        # Evaluated through the browser's debugging channel: the page's own CSP still holds.
        page.evaluate(source + "\n;0")
        result = page.evaluate("""async () => {
            const r = await axe.run(document, {resultTypes: ['violations']});
            return r.violations.map(v => ({id: v.id, help: v.help,
                nodes: v.nodes.slice(0, 3).map(n => n.target.join(' '))}));
        }""")
        if result:
            failures.append(f"{path} at {width} px: {json.dumps(result)}")
        shot(page, tmp_path, re.sub(r"\W+", "_", path).strip("_") or "home")
    assert failures == [], "\n".join(failures)
