"""Quantify reads samples as check read the standards: same reader, same response basis.

And what a soil or food laboratory needs beside: sample weight and final volume turned
into a content (C·V/m), a dilution factor below 1 questioned, an import map for the
samples file.  Expected values come from numpy.polyfit on the same standards (an
ordinary least-squares line, independent of calib's fit) and from the closed form
x₀ = (ȳ₀ − a)/b; contents from C·V/m worked by hand.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest

from calib.cli.main import main
from calib.errors import InputError
from calib.quantify.curve import curves_from_record
from calib.quantify.workflow import quantify_files
from calib.workflow import check_file, issue_record
from tests.quantify.helpers import LEVELS, standards, write_run_csv
from tests.robustness.test_corpus import BAD

IS_AREA = 2000.0  # the internal standard's area in every injection (invented)


def _write(path: Path, header: list[str], rows: list[list[object]]) -> Path:
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        writer.writerows(rows)
    return path


def _ratio_run(path: Path) -> Path:
    """KX-214 in plasma (Kestrel Bioanalytical, invented): analyte and IS areas per standard."""
    rows = [["KX-214", f"Cal-{LEVELS.index(x) + 1}", "standard", x, round(y * IS_AREA, 3),
             IS_AREA, i % 3 + 1] for i, (x, y) in enumerate(standards())]
    return _write(path, ["Analyte", "Sample", "Sample type", "Concentration (ng/mL)", "Area",
                         "IS area", "Replicate"], rows)


def _line(points: list[tuple[float, float]]) -> tuple[float, float]:
    slope, intercept = np.polyfit([x for x, _ in points], [y for _, y in points], 1)
    return float(intercept), float(slope)


A, B = _line(standards())  # the ordinary least-squares line of the standards (numpy)


def _one(report, sample_id: str):
    return next(s for s in report.batch.samples if s.sample_id == sample_id)


# ------------------------------------------------------------------ response basis

def test_the_check_document_states_each_curves_response_basis(tmp_path):
    ratio = check_file(_ratio_run(tmp_path / "kx214.csv"))
    raw = check_file(write_run_csv(tmp_path / "nitrate.csv", samples=False))
    record, _ = issue_record(ratio, prepared_by="T. Varga")
    body = json.loads(record.canonical)
    assert [c["response_basis"] for c in body["check"]["curves"]] == ["ratio"]
    raw_record, _ = issue_record(raw, prepared_by="T. Varga")
    assert json.loads(raw_record.canonical)["check"]["curves"][0]["response_basis"] == "raw"


def test_a_ratio_curve_refuses_samples_without_the_internal_standard(tmp_path):
    # The issue's case: raw 0.4 read as a ratio gave 2.00 ng/mL.
    run = _ratio_run(tmp_path / "kx214.csv")
    samples = _write(tmp_path / "plasma.csv", ["Sample ID", "Area"], [["P-01", 0.4]])
    with pytest.raises(InputError) as caught:
        quantify_files(run, samples)
    assert str(caught.value) == (
        f"{samples}: the KX-214 curve was fitted on ratios of its response to an internal "
        f"standard, but the samples file has no internal-standard response column; expected "
        f"that column (IS response, IS area...) so the samples are read on the same basis")


def test_a_ratio_curve_quantifies_ratios(tmp_path):
    run = _ratio_run(tmp_path / "kx214.csv")
    ratio = A + B * 2.5
    samples = _write(tmp_path / "plasma.csv", ["Sample ID", "Area", "IS area"],
                     [["P-01", ratio * 1800.0, 1800.0]])
    result = _one(quantify_files(run, samples), "P-01")
    # Closed form x0 = (y0 - a)/b on numpy's line; calib's unweighted fit is the same line.
    assert result.concentration == pytest.approx((ratio - A) / B, rel=1e-9)


def test_a_raw_curve_refuses_samples_with_an_internal_standard(tmp_path):
    # The issue's case: the IS column divided anyway, 4.99 mg/L for a response far above ULOQ.
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    samples = _write(tmp_path / "batch.csv", ["Sample ID", "Analyte", "Peak area", "IS area"],
                     [["FB-201", "Nitrate-N", 5.0, 1.0]])
    with pytest.raises(InputError) as caught:
        quantify_files(run, samples)
    assert str(caught.value) == (
        f"{samples}: the Nitrate-N curve is fitted on raw responses, but the samples file has "
        f"an internal-standard response (column D (IS area)), which would turn the samples' "
        f"responses into ratios; expected samples on the curve's basis: remove that column, "
        f"or give --ignore-internal-standard to quantify the raw responses")


def test_ignoring_the_internal_standard_quantifies_the_raw_response(tmp_path):
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    y = A + B * 3.0
    samples = _write(tmp_path / "batch.csv", ["Sample ID", "Analyte", "Peak area", "IS area"],
                     [["FB-201", "Nitrate-N", y, 0.5]])
    report = quantify_files(run, samples, ignore_internal_standard=True)
    assert _one(report, "FB-201").concentration == pytest.approx(3.0, rel=1e-9)
    assert any("internal-standard column was left aside" in n for n in report.notes)


def test_ignoring_the_internal_standard_is_refused_for_a_ratio_curve(tmp_path):
    run = _ratio_run(tmp_path / "kx214.csv")
    samples = _write(tmp_path / "plasma.csv", ["Sample ID", "Area", "IS area"],
                     [["P-01", 800.0, 1800.0]])
    with pytest.raises(InputError, match="--ignore-internal-standard would read raw responses"):
        quantify_files(run, samples, ignore_internal_standard=True)


def test_a_record_that_does_not_state_its_basis(tmp_path):
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    record, _ = issue_record(check_file(run), prepared_by="T. Varga")
    body = json.loads(record.canonical)
    for curve in body["check"]["curves"]:
        del curve["response_basis"]  # as in records issued before the field existed
    curves, _ = curves_from_record(body)
    assert curves["Nitrate-N"].response_basis is None
    body["check"]["curves"][0]["response_basis"] = "area"
    with pytest.raises(InputError, match="the stored response basis 'area' is neither"):
        curves_from_record(body)


# ------------------------------------------------------------------ weight and final volume

def _soil_run(path: Path) -> Path:
    """Cadmium in soil digests at the Fernbrook Water Laboratory (invented): raw areas, µg/L."""
    rows = [["Cd", f"Cal-{LEVELS.index(x) + 1}", "standard", x, y, i % 3 + 1]
            for i, (x, y) in enumerate(standards())]
    return _write(path, ["Analyte", "Sample", "Sample type", "Concentration (µg/L)", "Response",
                         "Replicate"], rows)


def test_equal_responses_at_different_weights_give_different_contents(tmp_path):
    # The issue's case: 0.5 g and 2.0 g made up to 50 mL both reported 5.00 mg/L.
    run = _soil_run(tmp_path / "cd.csv")
    y = A + B * 5.0
    samples = _write(tmp_path / "soils.csv",
                     ["Sample ID", "Response", "Sample weight (g)", "Final volume (mL)"],
                     [["SO-1", y, 0.5, 50], ["SO-2", y, 2.0, 50]])
    report = quantify_files(run, samples)
    one, two = _one(report, "SO-1"), _one(report, "SO-2")
    # By hand: 5 µg/L × 0.050 L / 0.0005 kg = 500 µg/kg; / 0.0020 kg = 125 µg/kg.
    assert one.concentration == pytest.approx(5.0, rel=1e-9)
    assert one.content == pytest.approx(500.0, rel=1e-9)
    assert two.content == pytest.approx(125.0, rel=1e-9)
    assert one.content_unit == two.content_unit == "µg/kg"
    assert one.reported == "500 µg/kg" and two.reported == "125 µg/kg"
    assert any("contents in µg/kg (C × V / m)" in n for n in report.notes)


def test_a_weight_without_a_final_volume_is_refused(tmp_path):
    run = _soil_run(tmp_path / "cd.csv")
    samples = _write(tmp_path / "soils.csv", ["Sample ID", "Response", "Sample weight (g)"],
                     [["SO-1", 1.0, 0.5]])
    with pytest.raises(InputError) as caught:
        quantify_files(run, samples)
    assert str(caught.value) == (
        f"{samples}, row 1: the samples table gives the sample weight (column C, Sample weight "
        f"(g)) but no final volume; the content C × V / m needs both: add the final volume "
        f"column, or remove the sample weight column to report concentrations")


def test_a_weight_without_a_unit_is_refused(tmp_path):
    run = _soil_run(tmp_path / "cd.csv")
    samples = _write(tmp_path / "soils.csv",
                     ["Sample ID", "Response", "Sample weight", "Final volume (mL)"],
                     [["SO-1", 1.0, 0.5, 50]])
    with pytest.raises(InputError, match="found no unit in the heading 'Sample weight'; "
                                         "expected a mass unit in the heading, such as "
                                         "'Sample weight \\(g\\)'"):
        quantify_files(run, samples)


def test_a_curve_not_in_mass_per_volume_cannot_give_a_content(tmp_path):
    rows = [["Cd", x, y] for x, y in standards()]
    run = _write(tmp_path / "cd.csv", ["Analyte", "Concentration (ppm)", "Response"], rows)
    samples = _write(tmp_path / "soils.csv",
                     ["Sample ID", "Response", "Sample weight (g)", "Final volume (mL)"],
                     [["SO-1", 1.0, 0.5, 50]])
    with pytest.raises(InputError, match="the concentration unit 'ppm' is not a mass per volume"):
        quantify_files(run, samples)


# ------------------------------------------------------------------ dilution below 1

def test_a_dilution_factor_below_one_is_questioned(tmp_path):
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    y = A + B * 4.0
    samples = _write(tmp_path / "batch.csv", ["Sample ID", "Analyte", "Peak area", "Dilution"],
                     [["FB-301", "Nitrate-N", y, 0.1]])
    with pytest.raises(InputError) as caught:
        quantify_files(run, samples)
    assert str(caught.value) == (
        f"{samples}, row 2, column D (Dilution): found the dilution factor 0.1, below 1: the "
        f"result would be multiplied by 0.1, as for a sample concentrated before measuring; "
        f"expected a factor of 1 or more (a 1 + 9 dilution is 10); if the sample was "
        f"concentrated, confirm with --dilution-below-one")
    report = quantify_files(run, samples, dilution_below_one=True)
    assert _one(report, "FB-301").concentration == pytest.approx(0.1 * 4.0, rel=1e-9)
    assert any(n.startswith("Dilution factors below 1 (0.1) were applied as confirmed")
               for n in report.notes)


# ------------------------------------------------------------------ import map, hostile files

def test_the_samples_file_read_through_an_import_map(tmp_path, capsys):
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    y = A + B * 2.0
    samples = _write(tmp_path / "lims.csv", ["Probe", "Stoff", "Fläche FLD", "Vf"],
                     [["FB-401", "Nitrate-N", y, 2]])
    imap = tmp_path / "lims.toml"
    imap.write_text('[columns]\nsample_id = "Probe"\nanalyte = "Stoff"\n'
                    'response = "Fläche FLD"\ndilution_factor = "Vf"\n', encoding="utf-8")
    code = main(["quantify", str(run), str(samples), "--map", str(imap)])
    out = capsys.readouterr().out
    assert code in (0, 1) and "FB-401" in out
    report = quantify_files(run, samples, samples_map=imap)
    assert _one(report, "FB-401").concentration == pytest.approx(2 * 2.0, rel=1e-9)


def test_an_import_map_heading_missing_from_the_samples_file(tmp_path):
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    samples = _write(tmp_path / "lims.csv", ["Probe", "Fläche"], [["FB-401", 1.0]])
    imap = tmp_path / "lims.toml"
    imap.write_text('[columns]\nresponse = "Peak area"\n', encoding="utf-8")
    with pytest.raises(InputError, match="no header row names every heading of the import map "
                                         "\\('Peak area'\\)"):
        quantify_files(run, samples, samples_map=imap)


@pytest.mark.parametrize(("name", "expected"), [
    ("stray_cell_attributes_in_another_order.xlsx", "calib reads at most 40,000,000 cells"),
    ("ods_table_never_closed.ods", "the XML is not well formed"),
    ("truncated_xls_where_the_reader_panics.xls", "sector allocation table is missing"),
])
def test_a_hostile_samples_workbook_is_refused_like_a_run_file(tmp_path, name, expected):
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    with pytest.raises(InputError, match=expected):
        quantify_files(run, BAD / name)


def test_an_overflowing_sample_response_is_refused(tmp_path):
    run = write_run_csv(tmp_path / "nitrate.csv", samples=False)
    samples = _write(tmp_path / "batch.csv", ["Sample ID", "Analyte", "Peak area"],
                     [["FB-501", "Nitrate-N", "1e308"]])
    with pytest.raises(InputError, match="found the response 1e\\+308 in batch.csv!C2; "
                                         "expected a finite value of magnitude"):
        quantify_files(run, samples)


def test_an_unknown_without_its_weight_is_refused_a_qc_may_leave_both_empty(tmp_path):
    run = _soil_run(tmp_path / "cd.csv")
    header = ["Sample ID", "Sample type", "Response", "Sample weight (g)", "Final volume (mL)",
              "Nominal (µg/L)"]
    fine = _write(tmp_path / "fine.csv", header, [["SO-1", "unknown", 1.0, 0.5, 50, ""],
                                                  ["QC-M", "QC", A + B * 4.0, "", "", 4.0]])
    assert _one(quantify_files(run, fine), "QC-M").found == pytest.approx(4.0, rel=1e-9)
    missing = _write(tmp_path / "missing.csv", header, [["SO-1", "unknown", 1.0, "", 50, ""]])
    with pytest.raises(InputError) as caught:
        quantify_files(run, missing)
    assert str(caught.value) == (
        f"{missing}, row 2, column D (Sample weight (g)): found an empty cell; expected the "
        f"sample weight (a number above 0; only a QC may leave the weight and the volume both "
        f"empty)")


README = Path(__file__).resolve().parents[2] / "README.md"


def test_the_readme_examples_of_a_samples_file_and_an_import_map_are_read(tmp_path):
    from calib.io.importmap import load_map
    from calib.quantify.samples import load_samples_map, read_samples

    text = README.read_text(encoding="utf-8")
    block = text.split("A complete samples file:\n\n```csv\n")[1].split("```")[0]
    sheet = read_samples(_write_text(tmp_path / "soils.csv", block))
    # By hand from the README's rows: 0.502 g = 0.000502 kg, 50 mL = 0.050 L, D = 5 for SO-119.
    assert [(r.point.sample_id, r.dilution_factor) for r in sheet.readings] == [
        ("SO-118", 1.0), ("SO-118", 1.0), ("SO-119", 5.0), ("QC-M", 1.0)]
    assert sheet.readings[0].mass_kg == pytest.approx(0.000502, rel=1e-12)
    assert sheet.readings[0].volume_l == pytest.approx(0.050, rel=1e-12)
    toml = text.split("### Import maps")[1].split("```toml\n")[1].split("```")[0]
    path = _write_text(tmp_path / "ic2.toml", toml)
    assert load_map(path).header_row == 6 and load_map(path).sheet == "Results"
    assert load_samples_map(path).columns["response"] == "Fl. Leitf."


def _write_text(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def test_a_samples_map_with_an_unknown_key_is_refused(tmp_path):
    from calib.quantify.samples import load_samples_map

    path = _write_text(tmp_path / "lims.toml", '[columns]\nweight = "Einwaage"\n')
    with pytest.raises(InputError) as caught:
        load_samples_map(path)
    message = str(caught.value)  # the run-file columns first, in calib.io.columns' order
    assert message.startswith("lims.toml: unknown key 'columns.weight'; expected one of analyte, ")
    assert message.endswith(", sample_id, dilution_factor, sample_weight, final_volume")


def test_without_a_samples_file_the_map_is_the_run_files(tmp_path):
    # The run's own unknowns are quantified, so the map reads the run file.
    rows = [["Nitrate-N", "Cal", x, y] for x, y in standards()]
    rows.append(["Nitrate-N", "FB-601", "", round(A + B * 6.0, 6)])
    run = _write(tmp_path / "ic2.csv", ["Stoff", "Probe", "Sollwert (mg/L)", "Fl. Leitf."], rows)
    imap = _write_text(tmp_path / "ic2.toml", '[columns]\nanalyte = "Stoff"\nsample_id = "Probe"\n'
                       'concentration = "Sollwert"\nresponse = "Fl. Leitf."\n')
    report = quantify_files(run, samples_map=imap)
    assert _one(report, "FB-601").concentration == pytest.approx(6.0, rel=1e-6)
