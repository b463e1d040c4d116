"""Standards traceability end to end: --standards in the check document, the record, the PDF,
the standards-expiry check, and finding records by lot.

Rules of the trade: ISO/IEC 17025 §6.5 (metrological traceability: the reference
material behind a calibration is named) and §7.5 (technical records); a
material is valid up to and including its expiry date (common practice); an
expired material sends the curve to a reviewer, it does not reject it (common
practice: a reviewer decides whether the result stands).
"""

from __future__ import annotations

import io
import json

import pypdf
import pytest

from calib import service
from calib.cli.main import main
from calib.errors import InputError
from calib.record.lots import records_with_lot
from calib.resources import bundled_folder

NITRATE = bundled_folder("sample_runs") / "fernbrook_nitrate_2026-11-30.xlsx"  # run date 2026-11-30


def standards_file(tmp_path, expires: str, analytes: str = '["Nitrate-N"]'):
    path = tmp_path / "nitrate-standards.toml"
    path.write_text(f"""
[[material]]
id = "FWL-RM-0031"
name = "Nitrate-N stock solution"
lot = "NO3-2611"
value = 1000.0
uncertainty = 5.0
unit = "mg/L"
expires = {expires}
analytes = {analytes}

[[level]]
name = "Intermediate 100 mg/L"
from = "FWL-RM-0031"
dilution = 10

[[level]]
name = "S5 10 mg/L"
from = "Intermediate 100 mg/L"
dilution = 10
""", encoding="utf-8")
    return path


def check_json(capsys, *args):
    code = main(["check", str(NITRATE), "--json", *map(str, args)])
    return code, json.loads(capsys.readouterr().out)


def expiry(doc):
    (curve,) = doc["curves"]
    return next(c for c in curve["checks"] if c["id"] == "standards-expiry")


def test_material_valid_on_its_expiry_date_passes(tmp_path, capsys):
    code, doc = check_json(capsys, "--standards", standards_file(tmp_path, "2026-11-30"))
    assert code == 0 and doc["verdict"] == "accepted"
    check = expiry(doc)
    assert check["verdict"] == "pass" and check["severity"] == "review"
    assert check["detail"] == ("Within expiry on the run date 2026-11-30: FWL-RM-0031 lot "
                               "NO3-2611 to 2026-11-30.")
    assert doc["standards"]["materials"][0]["lot"] == "NO3-2611"
    assert [lv["concentration"] for lv in doc["standards"]["levels"]] == [100.0, 10.0]


def test_expired_material_sends_the_curve_to_review(tmp_path, capsys):
    code, doc = check_json(capsys, "--standards", standards_file(tmp_path, "2026-11-29"))
    assert code == 1 and doc["verdict"] == "needs-review"
    check = expiry(doc)
    assert check["verdict"] == "fail"
    assert check["detail"] == ("Expired on the run date 2026-11-30: FWL-RM-0031 lot NO3-2611 "
                               "(expired 2026-11-29).")
    assert any("Reference materials within their expiry date" in r
               for r in doc["curves"][0]["reasons"])


def test_material_for_another_analyte_is_not_evaluated(tmp_path, capsys):
    code, doc = check_json(capsys, "--standards",
                           standards_file(tmp_path, "2020-01-01", '["Pb"]'))
    assert code == 0  # the expired Pb stock says nothing about nitrate
    assert expiry(doc)["verdict"] == "not-evaluated"
    assert expiry(doc)["detail"] == ("The standards file nitrate-standards.toml names no "
                                     "material for Nitrate-N.")


def test_without_standards_no_section_and_no_check(capsys):
    _, doc = check_json(capsys)
    assert "standards" not in doc
    assert all(c["id"] != "standards-expiry" for c in doc["curves"][0]["checks"])


def test_record_and_pdf_carry_the_materials_and_lot_search_finds_them(tmp_path):
    outcome = service.check(NITRATE, standards=standards_file(tmp_path, "2026-11-29"))
    issued = service.issue(outcome, prepared_by="R. Okafor", pdf=tmp_path / "r.pdf")
    body = issued.record.body
    assert body["standards"]["materials"][0]["id"] == "FWL-RM-0031"
    assert body["check"]["standards"] == body["standards"]
    reader = pypdf.PdfReader(io.BytesIO(issued.pdf))
    text = " ".join(" ".join(p.extract_text().split()) for p in reader.pages)
    assert "Reference materials and prepared standards (ISO/IEC 17025 §6.5)" in text
    assert "FWL-RM-0031" in text and "NO3-2611" in text and "1000 ± 5 mg/L" in text
    assert "2026-11-29" in text and "Intermediate 100 mg/L" in text and "10-fold" in text
    assert "standards-expiry" in text or "Reference materials within their expiry date" in text
    # Recall of the lot: found in this record, not in one without standards.
    plain = service.issue(service.check(NITRATE)).record
    found = records_with_lot([(issued.record.record_id, body), (plain.record_id, plain.body)],
                             "no3-2611")
    assert [(u.key, u.material, u.analytes) for u in found] == [
        (issued.record.record_id, "FWL-RM-0031", ("Nitrate-N",))]
    assert records_with_lot([("x", body)], "NO3-261") == []


def test_bad_standards_file_is_unusable_input_before_the_run(tmp_path, capsys):
    path = tmp_path / "s.toml"
    path.write_text("[[material]]\nid = \"A\"\n", encoding="utf-8")
    code = main(["check", str(NITRATE), "--standards", str(path)])
    err = capsys.readouterr().err
    assert code == 3
    assert "s.toml: entry 1 of [[material]], key name: name is missing" in err


def test_check_document_with_standards_validates_against_its_schema(tmp_path):
    from importlib import resources

    import jsonschema

    schema = json.loads(resources.files("calib.record").joinpath("schemas/check-1.json")
                        .read_text("utf-8"))
    doc = service.check(NITRATE, standards=standards_file(tmp_path, "2027-01-01")).document
    jsonschema.Draft202012Validator(schema).validate(json.loads(json.dumps(doc)))
    doc["standards"]["materials"][0]["colour"] = "red"
    assert not jsonschema.Draft202012Validator(schema).is_valid(doc)


def run_naming(tmp_path, line: str):
    """The fluoride demo run with one more metadata line (the run date is 2026-11-30)."""
    source = bundled_folder("sample_runs") / "fernbrook_fluoride_2026-11-30.csv"
    text = source.read_text(encoding="utf-8").replace("Operator: R. Okafor",
                                                      f"Operator: R. Okafor\n{line}", 1)
    run = tmp_path / "fluoride.csv"
    run.write_text(text, encoding="utf-8")
    return run


def test_the_run_file_may_name_its_standards_file(tmp_path):
    standards_file(tmp_path, "2027-01-01", '["Fluoride"]')
    outcome = service.check(run_naming(tmp_path, "Standards file: nitrate-standards.toml"))
    assert outcome.document["standards"]["file"] == "nitrate-standards.toml"
    checks = outcome.document["curves"][0]["checks"]
    assert next(c for c in checks if c["id"] == "standards-expiry")["verdict"] == "pass"


def test_a_run_file_may_not_point_elsewhere_or_disagree(tmp_path):
    standards_file(tmp_path, "2027-01-01", '["Fluoride"]')
    with pytest.raises(InputError) as caught:
        service.check(run_naming(tmp_path, "Standards file: ../elsewhere/s.toml"))
    assert ("fluoride.csv: line 'Standards file': '../elsewhere/s.toml' must be a file name in "
            "the run file's folder (no folders); or pass --standards FILE") == str(caught.value)
    other = tmp_path / "other.toml"
    other.write_text((tmp_path / "nitrate-standards.toml").read_text(encoding="utf-8"),
                     encoding="utf-8")
    with pytest.raises(InputError) as caught:
        service.check(run_naming(tmp_path, "Standards file: nitrate-standards.toml"),
                      standards=other)
    assert ("the run names standards file 'nitrate-standards.toml' but --standards gives "
            "'other.toml': give one of them") in str(caught.value)
