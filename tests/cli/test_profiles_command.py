"""``calib profiles`` and the acceptance options of ``calib check`` as a user runs them."""

from __future__ import annotations

import csv
import json

import pytest
from openpyxl import load_workbook

from calib.checks.profile import shipped_profiles
from calib.cli.main import main
from tests.checks.runs import BIO_LEVELS, curve_points, qc_points, spread


def write_run(path, points):
    """A long-layout CSV export of the points (response in column D)."""
    with path.open("w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh)
        out.writerow(["Analyte", "Sample type", "Concentration (ng/mL)", "Response"])
        for p in points:
            out.writerow([p.analyte, p.sample_type.value, p.concentration, repr(p.response)])
    return path


@pytest.fixture
def kx_run(tmp_path):
    # KX-214 (Kestrel scenario, invented): both LLOQ standards 20.1 % high and low.
    return write_run(tmp_path / "kx214.csv",
                     curve_points(BIO_LEVELS, deviations={1: spread(20.1)}) + qc_points())


def run(capsys, *args):
    code = main([*map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


# -- calib profiles -------------------------------------------------------------------------


def test_profiles_lists_the_shipped_profiles(capsys):
    code, out, _ = run(capsys, "profiles")
    assert code == 0
    for name, version in (("default", 2), ("bioanalytical", 1), ("environmental", 1),
                          ("assay-linearity", 1), ("iso-8466", 1), ("plasma-spectrometry", 2)):
        assert f"\n{name} (version {version}, " in "\n" + out
    assert "confirm every limit" in out


def test_profiles_json(capsys):
    code, out, _ = run(capsys, "profiles", "--json")
    entries = {e["name"]: e for e in json.loads(out)}
    assert code == 0 and set(entries) == set(shipped_profiles())
    bio = entries["bioanalytical"]
    assert bio["defaults"]["weighting"] == "1/x2" and bio["proposes_narrowing"] is True
    rules = {r["id"]: r for r in bio["rules"]}
    assert rules["min-levels"]["severity"] == "reject"
    assert "ICH M10" in rules["min-levels"]["source"] and "from memory" in rules["min-levels"]["source"]
    assert len(bio["sha256"]) == 64


def test_profiles_show_prints_the_text_to_copy(capsys, tmp_path):
    code, out, _ = run(capsys, "profiles", "show", "iso-8466")
    assert code == 0 and out == shipped_profiles()["iso-8466"]
    copy = tmp_path / "my-sop.toml"
    copy.write_text(out.replace("min_replicates = 10", "min_replicates = 0"), encoding="utf-8")
    code, _, err = run(capsys, "profiles", "show", copy)
    line = out.splitlines().index('id = "min-replicates"')  # its [[rules]] line, 1-based
    assert code == 3
    assert (f"calib: error: {copy}, line {line}: rule 'min-replicates' parameter 'min_replicates' "
            "must be at least 1, got 0") in err


def test_profiles_show_unknown_name(capsys):
    code, _, err = run(capsys, "profiles", "show", "no-such")
    assert code == 3
    assert "profile 'no-such' is neither a shipped profile (assay-linearity, bioanalytical" in err


# -- calib check: exclusions, ranges, exports -------------------------------------------------


def test_check_proposes_a_range_and_applies_it_only_when_asked(capsys, kx_run):
    code, out, _ = run(capsys, "check", kx_run, "--profile", "bioanalytical")
    assert code == 1
    assert out.startswith("Verdicts under profile bioanalytical version 1:\n  KX-214: REJECTED\n"
                          "    1. Back-calculated standards within tolerance")
    assert "Proposed, not applied: range 2 to 1000 gives ACCEPTED" in out
    assert "\x1b[" not in out  # captured output is not a terminal: no colour
    code, out, _ = run(capsys, "check", kx_run, "--profile", "bioanalytical", "--json",
                       "--range", "KX-214:2..1000")
    curve = json.loads(out)["curves"][0]
    assert code == 0 and curve["verdict"] == "accepted"
    applied = curve["working_range"]["applied"]
    assert applied["low"] == 2 and applied["as_proposed"] is True
    assert applied["reason"].startswith("as calib proposed: Dropping the lowest level (1)")
    assert applied["original"]["verdict"] == "rejected"
    lloq = [p for p in curve["points"] if p["concentration"] == 1]
    assert all(not p["included"] and "outside the working range 2..1000" in p["exclusion_reason"]
               for p in lloq)


def test_check_range_without_reason_is_a_usage_error(capsys, kx_run):
    code, _, err = run(capsys, "check", kx_run, "--profile", "bioanalytical", "--range", "5..1000")
    assert code == 2
    assert ("calib check: error: range 5..1000 for KX-214 needs a reason (calib proposed "
            "2..1000); write --range LOW..HIGH=REASON") in err
    code, out, _ = run(capsys, "check", kx_run, "--profile", "bioanalytical", "--json",
                       "--range", "5..1000=SOP BIO-07 §4.2: validated range 5-1000")
    assert json.loads(out)["curves"][0]["working_range"]["applied"]["reason"] == \
        "SOP BIO-07 §4.2: validated range 5-1000"


@pytest.mark.parametrize(("option", "message"), [
    (["--exclude", "D9"], "argument --exclude: exclusion 'D9' has no reason: write CELL=REASON"),
    (["--range", "2-1000"], "argument --range: range '2-1000' is not of the form LOW..HIGH"),
])
def test_check_option_syntax_errors(capsys, kx_run, option, message):
    with pytest.raises(SystemExit) as info:
        main(["check", str(kx_run), *option])
    assert info.value.code == 2
    assert message in capsys.readouterr().err


def test_check_exclusion_of_an_unknown_cell(capsys, kx_run):
    code, _, err = run(capsys, "check", kx_run, "--exclude", "Q99=typo")
    assert code == 3 and "exclusion 'Q99' matches no point of the run" in err


def test_check_exclusions_and_exports(capsys, kx_run, tmp_path):
    xlsx, table = tmp_path / "out" / "results.xlsx", tmp_path / "out" / "results.csv"
    code, out, err = run(capsys, "check", kx_run, "--profile", "bioanalytical", "--json",
                         "--exclude", "D2=pipetting error", "--exclude", "D3=pipetting error",
                         "--xlsx", xlsx, "--csv", table)
    document = json.loads(out)
    assert code == 0  # the LLOQ pair left out: 14 of 16 standards count, the LLOQ is now 2
    assert document["exclusions"][0]["reason"] == "pipetting error"
    assert document["curves"][0]["working_range"]["lloq"] == 2
    assert f"Results workbook written to {xlsx}" in err and f"Results CSV written to {table}" in err
    wb = load_workbook(xlsx)
    assert wb.sheetnames == ["Summary", "KX-214"]
    with table.open(encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert rows[0]["verdict"] == "accepted" and float(rows[0]["lloq"]) == 2


class _Terminal:
    def __init__(self, tty: bool) -> None:
        self.tty = tty

    def isatty(self) -> bool:
        return self.tty


@pytest.mark.parametrize(("tty", "env", "colour"), [
    (True, {}, True), (False, {}, False), (True, {"NO_COLOR": "1"}, False),
    (True, {"TERM": "dumb"}, False),
])
def test_colour_only_on_a_terminal(monkeypatch, tty, env, colour):
    from calib.cli import check

    monkeypatch.delenv("NO_COLOR", raising=False)
    monkeypatch.setenv("TERM", "xterm")
    for key, value in env.items():
        monkeypatch.setenv(key, value)
    monkeypatch.setattr("sys.stdout", _Terminal(tty))
    assert check._colour() is colour


# -- slope drift against the archive --------------------------------------------------------------


def test_slope_drift_against_the_archive(capsys, tmp_path):
    archive = tmp_path / "records.sqlite"
    for i, slope in enumerate((0.0120, 0.0122, 0.0121)):
        path = write_run(tmp_path / f"day{i}.csv", curve_points(BIO_LEVELS, b=slope) + qc_points(
            b=slope))
        code, _, _ = run(capsys, "check", path, "--profile", "bioanalytical", "--archive",
                         archive, "--prepared-by", "R. Okafor", "--json")
        assert code == 0
    profile = tmp_path / "drift.toml"
    profile.write_text(shipped_profiles()["bioanalytical"].replace(
        'id = "slope-reference"\nseverity = "info"\n',
        'id = "slope-reference"\nseverity = "review"\nrecent_curves = 3\ntolerance_pct = 5\n'),
        encoding="utf-8")
    drifted = write_run(tmp_path / "today.csv",
                        curve_points(BIO_LEVELS, b=0.0130) + qc_points(b=0.0130))
    code, out, _ = run(capsys, "check", drifted, "--profile", profile, "--archive", archive,
                       "--json")
    check = {c["id"]: c for c in json.loads(out)["curves"][0]["checks"]}["slope-reference"]
    assert check["verdict"] == "fail" and code == 1
    assert check["value"] == pytest.approx(100 * (0.0130 - 0.0121) / 0.0121, rel=1e-6)
    assert "the 3 most recent accepted curves in records.sqlite" in check["detail"]
    code, out, _ = run(capsys, "check", drifted, "--profile", profile, "--json")
    check = {c["id"]: c for c in json.loads(out)["curves"][0]["checks"]}["slope-reference"]
    assert check["verdict"] == "not-evaluated" and "no archive was searched" in check["detail"]
