"""``calib check`` and ``calib demo`` as a user runs them: exit codes, JSON, messages, files."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest
from openpyxl import Workbook

from calib.cli.main import main
from calib.resources import bundled_folder
from tests.conftest import nist_xy

SAMPLES = bundled_folder("sample_runs")
NITRATE = SAMPLES / "fernbrook_nitrate_2026-11-30.xlsx"
FLUORIDE = SAMPLES / "fernbrook_fluoride_2026-11-30.csv"


def write_norris_xlsx(path):
    """NIST StRD Norris as an instrument-style long-layout workbook the importer has not seen."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Ozone"
    ws.append(["Ozone monitor calibration (NIST StRD Norris data)"])
    ws.append([])
    ws.append(["Compound", "Nominal conc.", "Peak Area", "Rep"])
    for i, (x, y) in enumerate(zip(*nist_xy("norris")), start=1):
        ws.append(["Ozone", x, y, i])
    wb.save(path)
    return path


def run_json(capsys, *args):
    code = main(["check", *map(str, args), "--json"])
    out = capsys.readouterr()
    return code, json.loads(out.out), out.err


def test_nitrate_demo_is_accepted(capsys):
    code, doc, err = run_json(capsys, NITRATE)
    assert code == 0 and doc["verdict"] == "accepted"
    assert doc["source"]["sheet"] == "Run"
    assert "caution" in err


def test_fluoride_demo_is_flagged_for_its_intercept(capsys):
    code, doc, _ = run_json(capsys, FLUORIDE)
    assert code == 1 and doc["verdict"] == "needs-review"
    checks = {c["id"]: c for c in doc["curves"][0]["checks"]}
    assert checks["intercept-zero"]["verdict"] == "fail"
    assert checks["intercept-zero"]["value"] < 0.05


def test_unseen_workbook_matches_certified_values(tmp_path, capsys):
    # NIST StRD Norris certified: intercept -0.262323073774029 (SE 0.232818234301152),
    # slope 1.00211681802045 (SE 0.429796848199937E-03), residual SD 0.884796396144373.
    _, doc, _ = run_json(capsys, write_norris_xlsx(tmp_path / "norris.xlsx"))
    curve = doc["curves"][0]
    coef = curve["coefficients"]
    assert coef["intercept"]["estimate"] == pytest.approx(-0.262323073774029, rel=1e-12)
    assert coef["intercept"]["std_error"] == pytest.approx(0.232818234301152, rel=1e-12)
    assert coef["slope"]["estimate"] == pytest.approx(1.00211681802045, rel=1e-12)
    assert coef["slope"]["std_error"] == pytest.approx(0.429796848199937e-03, rel=1e-12)
    assert curve["residual_sd"] == pytest.approx(0.884796396144373, rel=1e-12)
    assert curve["points"][0]["source_cell"] == "Ozone!C4"
    assert curve["analyte"] == "Ozone"
    # Norris has only 1–2 points per concentration but many levels: the intercept passes.
    checks = {c["id"]: c for c in curve["checks"]}
    assert checks["intercept-zero"]["verdict"] == "pass"


def test_text_output_and_pdf(tmp_path, capsys):
    out = tmp_path / "records" / "fluoride.pdf"
    code = main(["check", str(FLUORIDE), "--pdf", str(out), "--prepared-by", "R. Okafor"])
    text = capsys.readouterr().out
    assert code == 1
    assert "Fluoride: NEEDS REVIEW (intercept-zero)" in text
    assert "The intercept differs significantly from zero" in text
    assert "Caution: Results decide whether patient samples" in text
    assert out.read_bytes().startswith(b"%PDF")
    assert [p.name for p in out.parent.iterdir()] == ["fluoride.pdf"]  # no temporary left


def test_missing_file_exits_3_with_one_line(tmp_path, capsys):
    assert main(["check", str(tmp_path / "missing.csv")]) == 3
    err = capsys.readouterr().err
    assert err.startswith("calib: error: ") and err.count("\n") == 1
    assert "missing.csv" in err and "Traceback" not in err


def test_bad_value_names_row_and_column_and_writes_nothing(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("Concentration,Response\n1,2\n2,abc\n", encoding="utf-8")
    pdf = tmp_path / "never.pdf"
    assert main(["check", str(bad), "--pdf", str(pdf)]) == 3
    err = capsys.readouterr().err
    assert err.startswith("calib: error: ") and err.count("\n") == 1
    assert "bad.csv" in err and "row 3" in err and "Response" in err
    assert not pdf.exists() and sorted(p.name for p in tmp_path.iterdir()) == ["bad.csv"]


def test_usage_errors_exit_2(capsys):
    with pytest.raises(SystemExit) as info:
        main(["check", str(NITRATE), "--weighting", "1/z"])
    assert info.value.code == 2
    assert "weighting must be one of none, 1/x, 1/x2, 1/y, 1/y2, 1/s2; got '1/z'" in (
        capsys.readouterr().err)
    with pytest.raises(SystemExit) as info:
        main(["check", str(NITRATE), "--confidence", "1.5"])
    assert info.value.code == 2


def test_bad_profile_exits_3(tmp_path, capsys):
    profile = tmp_path / "sop.toml"
    profile.write_text('name = "x"\nversion = "1"\ncolour = 1\n', encoding="utf-8")
    assert main(["check", str(NITRATE), "--profile", str(profile)]) == 3
    assert "line 3: unknown key 'colour'" in capsys.readouterr().err


def test_demo_writes_both_records(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    names = sorted(p.name for p in tmp_path.iterdir())
    assert names == [
        "fernbrook_fluoride_2026-11-30.pdf", "fernbrook_fluoride_2026-11-30.record.json",
        "fernbrook_nitrate_2026-11-30.pdf", "fernbrook_nitrate_2026-11-30.record.json",
    ]
    assert "Nitrate-N: ACCEPTED" in out and "Fluoride: NEEDS REVIEW" in out
    assert str(tmp_path / "fernbrook_nitrate_2026-11-30.pdf") in out


def test_help_runs_in_a_fresh_interpreter_with_examples():
    result = subprocess.run([sys.executable, "-m", "calib", "check", "--help"],
                            capture_output=True, text=True, check=False)
    assert result.returncode == 0
    assert "examples:" in result.stdout and "--prepared-by" in result.stdout


# ---------------------------------------------------------------------- exit codes, templates

def test_the_exit_code_table_is_in_the_help_and_each_code_has_one_meaning():
    from calib.cli import exits

    result = subprocess.run([sys.executable, "-m", "calib", "--help"], capture_output=True,
                            text=True, check=False)
    codes = [code for code, _ in exits.TABLE]
    assert codes == sorted(set(codes)) == list(range(8))  # 0..7, none used twice
    for code, meaning in exits.TABLE:
        assert f"  {code}  {meaning}" in result.stdout


@pytest.mark.parametrize(("error", "code"), [
    ("calib.errors:InputError", 3), ("calib.errors:TemplateError", 3),
    ("calib.errors:ConfigError", 3), ("calib.record.signing:SignOffError", 6),
    ("calib.archive:ArchiveError", 3), ("builtins:ZeroDivisionError", 4),
])
def test_errors_map_to_exit_codes_in_one_place(error, code, capsys, monkeypatch):
    import importlib

    import calib.service

    module, name = error.split(":")
    cls = getattr(importlib.import_module(module), name)

    def fail(*args, **kwargs):
        raise cls("stopped here")

    monkeypatch.setattr(calib.service, "check", fail)
    assert main(["check", str(NITRATE)]) == code
    err = capsys.readouterr().err
    word = {3: "error", 6: "refused", 4: "internal error"}[code]
    assert err.startswith(f"calib: {word}: ") and err.count("\n") == 1
    assert "stopped here" in err


def test_a_record_file_appearing_meanwhile_is_never_replaced(tmp_path, capsys, monkeypatch):
    import calib.service

    pdf = tmp_path / "r.pdf"
    real = calib.service.check

    def racing(*args, **kwargs):  # another process writes the file while we check
        pdf.write_bytes(b"someone else's record")
        return real(*args, **kwargs)

    monkeypatch.setattr(calib.service, "check", racing)
    assert main(["check", str(NITRATE), "--pdf", str(pdf), "--csv", str(tmp_path / "r.csv")]) == 2
    assert capsys.readouterr().err == (f"calib: error: {pdf} exists; records are never "
                                       "overwritten silently: choose another name, or add "
                                       "--force to replace it\n")
    assert pdf.read_bytes() == b"someone else's record" and not (tmp_path / "r.csv").exists()


def test_check_with_a_template_names_it_and_a_broken_one_writes_nothing(tmp_path, capsys):
    template = tmp_path / "kestrel.toml"
    template.write_text('[lab]\nname = "Kestrel Bioanalytical"\n', encoding="utf-8")
    pdf = tmp_path / "r.pdf"
    assert main(["check", str(NITRATE), "--pdf", str(pdf), "--template", str(template)]) == 0
    out = capsys.readouterr().out
    digest = __import__("hashlib").sha256(template.read_bytes()).hexdigest()
    assert f"Report template: kestrel.toml (SHA-256 {digest[:16]}…)" in out
    assert main(["check", str(NITRATE), "--pdf", str(tmp_path / "n.pdf")]) == 0
    assert ('Report template: none set up: the record says "Laboratory not configured" '
            "(calib lab init --template FILE)") in capsys.readouterr().out
    template.write_text('[lab]\nname = "Kestrel"\n[page]\nsize = "A3"\n', encoding="utf-8")
    assert main(["check", str(NITRATE), "--pdf", str(tmp_path / "x.pdf"), "--csv",
                 str(tmp_path / "x.csv"), "--template", str(template)]) == 3
    assert capsys.readouterr().err == ("calib: error: template kestrel.toml: key 'page.size' "
                                       "must be one of A4, Letter; got 'A3'\n")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["kestrel.toml", "n.pdf", "r.pdf"]


def test_quantify_trend_and_demo_take_a_template(capsys):
    for command in ("quantify", "trend", "demo", "check"):
        with pytest.raises(SystemExit):
            main([command, "--help"])
        assert "--template TOML" in capsys.readouterr().out, command
