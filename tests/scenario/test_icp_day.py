"""A day at the (invented) Fernbrook Water Laboratory's ICP-OES bench, end to end.

Six elements, 7 levels × 3 replicates, the shipped plasma-spectrometry profile
with the lab's own [[analyte]] entry for lead (quadratic, as its 220.353 nm
line bends), a standards file naming the stock reference materials, a record
with the materials in it, the samples reported to the lab's digits, a folder of
three daily runs, and the recall of a lot.  The figures the test leans on come
from outside calib: significant-figure rounding (common practice), the
dilution arithmetic (closed form), ISO/IEC 17025 §6.5 for what the record must
name; expiry is judged on the run date (common practice).
"""

from __future__ import annotations

import io
import json
import math

import pypdf
import pytest

from calib import service
from calib.checks.profile import shipped_profiles
from calib.cli.main import main
from calib.record.lots import records_with_lot
from tests.scenario.icp_run import ELEMENTS, write_run

PROFILE = shipped_profiles()["plasma-spectrometry"] + """
[[analyte]]
match = "pb*"
model = "quadratic"
digits = 4
note = "Pb 220.353 bends above 50 µg/L (invented validation report FWL-VAL-031)"

[analyte.rules.back-calculation]
tolerance_pct = 15
"""

STANDARDS = """
[[material]]
id = "FWL-RM-0412"
name = "Multi-element stock solution (Pb, Cu, Cd, Zn, Ni)"
lot = "ME-24-118"
value = 100.0
uncertainty = 0.5
unit = "mg/L"
expires = 2027-03-31
analytes = ["Pb 220.353", "Cu 324.754", "Cd 228.802", "Zn 213.857", "Ni 231.604"]

[[material]]
id = "FWL-RM-0077"
name = "Arsenic stock solution"
lot = "AS-25-009"
value = 1000.0
uncertainty = 3.0
unit = "mg/L"
expires = {as_expires}
analytes = ["As 188.980"]

[[level]]
name = "Intermediate ME 1 mg/L"
from = "FWL-RM-0412"
dilution = 100

[[level]]
name = "Cal-7 (100 µg/L)"
from = "Intermediate ME 1 mg/L"
dilution = 10
concentration = 0.1
"""


@pytest.fixture
def bench(tmp_path):
    (tmp_path / "fernbrook-icp.toml").write_text(PROFILE, encoding="utf-8")
    (tmp_path / "metals-standards.toml").write_text(
        STANDARDS.format(as_expires="2027-06-30"), encoding="utf-8")
    write_run(tmp_path / "icp_2026-12-03.csv")
    return tmp_path


def check(capsys, bench, *args):
    code = main(["check", str(bench / "icp_2026-12-03.csv"), "--profile",
                 str(bench / "fernbrook-icp.toml"), "--standards",
                 str(bench / "metals-standards.toml"), *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_the_morning_check_reads_in_a_few_lines(bench, capsys):
    code, out, _ = check(capsys, bench, "--brief")
    assert code == 0
    lines = out.splitlines()
    assert [line.split("  ")[1].strip() for line in lines[1:7]] == [e for e in ELEMENTS]
    assert all("ACCEPTED" in line for line in lines[1:7])
    assert lines[7] == "Run verdict: ACCEPTED (6 curves: accepted 6)"
    assert len(lines) <= 15
    code, out, _ = check(capsys, bench)
    assert code == 0 and len(out.splitlines()) <= 30  # the default: 412 lines before
    assert ("Reference materials: FWL-RM-0412 lot ME-24-118 (100 ± 0.5 mg/L, expires "
            "2027-03-31); FWL-RM-0077 lot AS-25-009") in out


def test_the_record_names_materials_and_the_lead_entry(bench, capsys):
    code, out, _ = check(capsys, bench, "--pdf", bench / "icp.pdf", "--prepared-by", "R. Okafor")
    assert code == 0 and "written to" in out
    pdf = (bench / "icp.pdf").read_bytes()
    text = " ".join(" ".join(p.extract_text().split()) for p in pypdf.PdfReader(io.BytesIO(pdf)).pages)
    assert text.count("Reference materials and prepared standards (ISO/IEC 17025 §6.5)") == 6
    assert "ME-24-118" in text and "AS-25-009" in text and "1000 ± 3 mg/L" in text
    # 100 mg/L diluted 100-fold then 10-fold: 0.1 mg/L (closed form).
    assert "Cal-7 (100 µg/L)" in text and "0.1 mg/L" in text
    assert 'Judged with [[analyte]] 1 (match "pb*")' in text
    from calib.record.recordfile import read_record_file  # the attached record JSON

    body = json.loads(read_record_file(bench / "icp.pdf").attachment)
    assert [m["lot"] for m in body["standards"]["materials"]] == ["ME-24-118", "AS-25-009"]
    pb = body["check"]["curves"][0]
    assert pb["model"] == "quadratic"
    assert any(c["id"] == "analyte-settings" for c in pb["checks"])


def sig_figs(text: str) -> int:
    digits = text.replace("-", "").replace(".", "").lstrip("0")
    return len(digits)


def test_samples_are_reported_to_the_profiles_digits(bench):
    outcome = service.quantify(bench / "icp_2026-12-03.csv",
                               profile=bench / "fernbrook-icp.toml")
    rows = [r for r in outcome.document["samples"] if r["sample_type"] == "unknown"]
    for r in rows:
        want = 4 if r["analyte"].startswith("Pb") else 3
        value = r["concentration"]
        # Significant-figure rounding (common practice).
        decimals = want - 1 - math.floor(math.log10(abs(value)))
        assert float(r["reported"]) == pytest.approx(round(value, decimals), abs=1e-12)
        assert sig_figs(r["reported"]) == want


def test_an_expired_arsenic_stock_sends_arsenic_to_review(bench, capsys):
    (bench / "metals-standards.toml").write_text(
        STANDARDS.format(as_expires="2026-12-02"), encoding="utf-8")
    code, out, _ = check(capsys, bench, "--brief")
    assert code == 1
    assert [line for line in out.splitlines() if line.startswith("  As")] == [
        "  As 188.980  NEEDS REVIEW  standards-expiry"]
    assert "  Pb 220.353  ACCEPTED" in out


def test_a_folder_of_three_days_and_the_recall_of_a_lot(bench, capsys):
    days = bench / "runs"
    days.mkdir()
    for day, seed in (("2026-12-01", 1), ("2026-12-02", 2), ("2026-12-03", 3)):
        write_run(days / f"icp_{day}.csv", seed=seed, run_date=day)
    archive = bench / "records.sqlite"
    code = main(["check", str(days), "--profile", str(bench / "fernbrook-icp.toml"),
                 "--standards", str(bench / "metals-standards.toml"), "--brief",
                 "--pdf", str(bench / "records"), "--archive", str(archive)])
    out = capsys.readouterr().out
    assert "Summary of 3 run files:" in out
    assert code == (0 if "Worst verdict: ACCEPTED" in out else 1)
    assert len(list((bench / "records").glob("*.pdf"))) == 3
    from calib.record.recordfile import read_record_file

    bodies = [(p.name, json.loads(read_record_file(p).attachment))
              for p in sorted((bench / "records").glob("*.pdf"))]
    found = records_with_lot(bodies, "as-25-009")
    assert [(u.key, u.analytes) for u in found] == [
        (f"icp_{d}.pdf", ("As 188.980",)) for d in ("2026-12-01", "2026-12-02", "2026-12-03")]
    assert records_with_lot(bodies, "ME-24-11") == []
    # The same recall from the archive the three runs were filed in: calib archive lot.
    code = main(["archive", "lot", "AS-25-009", "--archive", str(archive), "--json"])
    listed = json.loads(capsys.readouterr().out)
    assert code == 0
    assert [(u["run_date"], u["material"], u["analytes"]) for u in listed] == [
        (d, "FWL-RM-0077", ["As 188.980"]) for d in ("2026-12-01", "2026-12-02", "2026-12-03")]
    code = main(["archive", "lot", "me-24-118", "--archive", str(archive)])
    out = capsys.readouterr().out
    assert code == 0 and out.startswith(f"3 records in {archive} used lot ME-24-118:")
    code = main(["archive", "lot", "ME-24-11", "--archive", str(archive)])
    assert code == 0 and capsys.readouterr().out == (
        f"No record in {archive} names lot 'ME-24-11'.\n")
