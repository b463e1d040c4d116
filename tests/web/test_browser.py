"""End to end in a real headless Chromium: check, exclude, issue, download, verify, sign.

The browser is Debian's ``chromium`` (``.ci/run`` installs it when missing),
driven by Playwright for Python through ``executable_path``; Playwright's own
browser download is never used (the machines have no internet).  The server
is the real one, uvicorn on a free loopback port.  A screenshot of each page is
saved in the test's temporary folder.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

CHROMIUM = "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run"]
ROOT = Path(__file__).resolve().parents[2]
FLUORIDE = ROOT / "sample_runs" / "fernbrook_fluoride_2026-11-30.csv"
PHOSPHATE = ROOT / "sample_runs" / "fernbrook_phosphate_2026-12-06.tsv"
FIRST_CELL = "'fernbrook_fluoride_2026-11-30.csv'!D9"

if not (os.path.exists(CHROMIUM) and os.access(CHROMIUM, os.X_OK)):
    if os.environ.get("CI"):
        raise RuntimeError(f"{CHROMIUM} is missing: .ci/run installs Debian's chromium")
    pytest.skip(f"{CHROMIUM} is not installed (apt-get install chromium)",
                allow_module_level=True)
sync_api = pytest.importorskip("playwright.sync_api")


@pytest.fixture
def page(tmp_path: Path):
    with sync_api.sync_playwright() as pw:
        context = pw.chromium.launch_persistent_context(
            str(tmp_path / "chromium-profile"), executable_path=CHROMIUM, headless=True,
            args=FLAGS, accept_downloads=True, viewport={"width": 1280, "height": 900})
        try:
            yield context.pages[0] if context.pages else context.new_page()
        finally:
            context.close()


def shot(page, tmp_path: Path, name: str) -> None:
    folder = tmp_path / "screenshots"
    folder.mkdir(exist_ok=True)
    page.screenshot(path=str(folder / f"{name}.png"), full_page=True)
    assert (folder / f"{name}.png").stat().st_size > 1000


def calib(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "calib", *args], check=False, capture_output=True,
                          text=True, cwd=ROOT, timeout=120)


def test_a_reviewer_checks_excludes_issues_downloads_verifies_and_signs(server, page, tmp_path):
    base, archive = server
    # The pages must work under their own Content-Security-Policy: Chromium reports every
    # blocked inline script or style on the console.
    blocked = []
    page.on("console", lambda m: blocked.append(m.text) if "Content Security Policy" in m.text
            else None)
    page.goto(base + "/")
    shot(page, tmp_path, "1-home")
    # Keyboard first: the first Tab reaches the skip link.
    page.keyboard.press("Tab")
    assert page.evaluate("document.activeElement.textContent") == "Skip to the page content"

    page.set_input_files("#run", str(FLUORIDE))
    page.get_by_role("button", name="Check the run").click()
    page.wait_for_url("**/run/*")
    text = page.inner_text("main")
    assert "intercept differs significantly from zero" in text.lower()
    assert "Needs review" in text and "18 standards in the fit" in text
    shot(page, tmp_path, "2-run")

    page.get_by_label(f"Reason to exclude {FIRST_CELL}").fill("air bubble seen in the loop")
    page.locator(f'form:has(input[value="{FIRST_CELL}"]) button').click()
    page.wait_for_load_state()
    text = page.inner_text("main")
    assert "17 standards in the fit" in text
    assert f"Excluded {FIRST_CELL}: air bubble seen in the loop" in text
    shot(page, tmp_path, "3-excluded")

    page.get_by_role("link", name="Issue the record…").click()
    page.get_by_label("Prepared by (printed name)").fill("R. Okafor")
    shot(page, tmp_path, "4-issue")
    page.get_by_role("button", name="Issue the record").click()
    page.wait_for_url("**/issued")
    assert "filed in the archive as entry seq 1" in page.inner_text("main")
    shot(page, tmp_path, "5-issued")
    with page.expect_download() as info:
        page.get_by_role("link", name="Download the PDF record").click()
    record = tmp_path / "record.pdf"
    info.value.save_as(str(record))

    done = calib("verify", str(record), "--archive", str(archive))
    assert done.returncode == 0, done.stdout + done.stderr
    assert f"{record}: intact" in done.stdout
    assert info.value.suggested_filename.startswith("CR-")

    page.goto(base + "/sign")
    page.set_input_files("#record", str(record))
    page.get_by_label("reviewed").check()
    page.get_by_label("Printed name").fill("T. Overgaard")
    shot(page, tmp_path, "6-sign")
    page.get_by_role("button", name="Sign").click()
    assert "Signed: reviewed by T. Overgaard" in page.inner_text("main")
    shot(page, tmp_path, "7-signed")

    page.goto(base + "/archive")
    page.get_by_label("Analyte").fill("Fluoride")
    page.get_by_role("button", name="Search").click()
    shot(page, tmp_path, "8-archive")
    page.locator("a[href^='/archive/record/']").first.click()
    page.get_by_role("link", name="Verify the latest version").click()
    assert "intact. Every check passed." in page.inner_text("main")
    shot(page, tmp_path, "9-record")

    page.goto(base + "/archive/trend?analyte=Fluoride")
    assert "Fluoride" in page.inner_text("main")
    shot(page, tmp_path, "10-trend")

    page.goto(base + "/quantify")
    page.set_input_files("#curve", str(PHOSPHATE))
    page.get_by_role("button", name="Quantify").click()
    assert "Batch verdict" in page.inner_text("main")
    shot(page, tmp_path, "11-quantify")

    page.goto(base + "/no/such/page")
    page.get_by_role("link", name="Go back").click()
    page.wait_for_url("**/quantify")
    assert blocked == []
