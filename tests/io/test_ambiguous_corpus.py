"""The corpus of once-silent cases (tests/data/ambiguous): each now refuses, flags or splits.

Before issue 17 every file here was read without a word, and several gave an accepted curve
(exit 0) that was wrong: two lead emission lines 6 % apart merged into one curve, a mean row
fitted as a fifth level, an analyst's exclusion reversed.  Each refusal is asserted through the
command line: exit 3, one line on stderr naming the file and cells, no traceback, no output
file written.  The expected readings come from the scenario the generator writes (levels,
lines, rows), not from calib.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

from calib.cli.main import main
from calib.io import describe_import, read_run
from calib.options import SampleType

FOLDER = Path(__file__).resolve().parents[1] / "data" / "ambiguous"


def _generator():
    spec = importlib.util.spec_from_file_location("make_ambiguous", FOLDER / "make_ambiguous.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


corpus = _generator()

REFUSED = {
    "icp_lead_two_lines_emission.csv": "row 3, column B (Emission): the column holds 2 values "
    "('Pb 220.353', 'Pb 217.000') that each recur at 3 or more concentrations",
    "icp_lead_two_lines_no_line_column.csv": "replicate 1 of the standard at 0 (sample 'Std 0') "
    "appears 2 times (icp_lead_two_lines_no_line_column.csv!C4, "
    "icp_lead_two_lines_no_line_column.csv!C7)",
    "icp_lead_two_lines_no_replicates.csv": "at each of its 5 levels the standards' responses "
    "fall into two separate groups whose means differ by a factor of 1.06",
    "icp_metals_unrecognised_column.csv": "column B (Element / lamp): the column holds 4 values "
    "('Cd', 'Cu', 'Pb', 'Zn')",
    "nitrate_unnamed_total_row.csv": "row 10, column B (Sample): the row has a concentration but "
    "no sample name",
    "anions_wide_unlabelled_total_row.csv": "row 7, column A (Level): the row has a "
    "concentration but no level label",
    "nitrate_include_x_with_reason.csv": "row 10, column F (Include): found the mark 'x'",
    "nitrate_reason_with_empty_include.csv": "row 10, column G (Reason): found the exclusion "
    "reason 'bubble in syringe' on a row marked included",
    "chloride_spike_without_type.csv": "row 7, column A (Sample): found the sample name "
    "'Spike 1', which names a spike",
    "chloride_cal_blank_without_type.csv": "row 7, column A (Sample): found the sample name "
    "'Cal Blank', which names both a calibration standard and a blank",
    "copper_level_label_at_two_concentrations.csv": "the level label '4' is given at 2 "
    "concentrations",
    "nitrat_semicolon_mixed_thousands.csv": "row 4, column C (Fläche): found '1,006' (row 4) "
    "beside the whole number '497' (row 2)",
    "nitrat_semicolon_assumed_decimal_comma.csv": "row 2, column C (Fläche): found the text "
    "'1,006', where the comma may be a decimal comma or a thousands separator",
    "sulfate_cyrillic_letter.csv": "U+0430 CYRILLIC SMALL LETTER A",
    "sulfate_zero_width_space.csv": "U+200B ZERO WIDTH SPACE",
    "sulfate_differing_case.csv": "the analyte names 'Sulfate' (in sulfate_differing_case.csv!A2) "
    "and 'SULFATE' (in sulfate_differing_case.csv!A6) differ only in case",
}


def test_committed_files_are_what_the_script_writes(tmp_path):
    written = corpus.write(tmp_path)
    assert sorted(p.name for p in written) == sorted(
        p.name for p in FOLDER.iterdir() if p.suffix != ".py")
    for path in written:
        assert path.read_bytes() == (FOLDER / path.name).read_bytes(), path.name


def test_committed_files_are_small():
    assert all(p.stat().st_size <= 50_000 for p in FOLDER.iterdir())


def test_every_file_is_classified():
    assert set(REFUSED) | set(_READ) == set(corpus.files())


@pytest.mark.parametrize("name", sorted(REFUSED))
def test_refused_with_one_line_exit_3_and_nothing_written(name, tmp_path, capsys, monkeypatch):
    monkeypatch.delenv("CALIB_ARCHIVE", raising=False)
    out = tmp_path / "out.csv"
    code = main(["check", str(FOLDER / name), "--csv", str(out)])
    captured = capsys.readouterr()
    assert code == 3
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in captured.err
    assert lines[0].startswith(f"calib: error: {FOLDER / name}")
    assert REFUSED[name] in lines[0]
    assert not out.exists()


def _lines_split(run):
    # The generator's scenario: two lines, six levels (0 to 100 ug/L), three replicates each.
    assert run.analytes == ("Pb 220.353", "Pb 217.000")
    for analyte in run.analytes:
        standards = run.standards(analyte)
        assert len(standards) == 18
        assert sorted({p.concentration for p in standards}) == [0, 5, 10, 25, 50, 100]
    # Sensitivities of 1000 and 1060 counts per ug/L: the top standards' mean ratio is 1.06.
    top = [sum(p.response for p in run.standards(a) if p.concentration == 100) for a in
           run.analytes]
    assert top[1] / top[0] == pytest.approx(1.06, rel=0.01)


def _element_wavelength(run):
    _lines_split(run)
    assert "'Element / wavelength (nm)' -> analyte" in describe_import(run)


def _promoted(heading):
    def check(run):
        _lines_split(run)
        assert run.warnings[-1].endswith(
            f"column B ({heading}) was read as the analyte column, since its values split the "
            "standards into 2 curves (Pb 220.353, Pb 217.000)")
    return check


def _summary(*words):
    def check(run):
        standards = run.standards("Nitrate-N")
        assert len(standards) == 8  # 4 levels x 2 replicates, the summary rows left out
        assert sorted({p.concentration for p in standards}) == [1, 2, 5, 10]
        assert [w.split("(")[1].split(")")[0] for w in run.warnings] == [repr(w) for w in words]
    return check


def _wide_average(run):
    assert [len(run.standards(a)) for a in run.analytes] == [5, 5]
    assert run.warnings == ("anions_wide_average_row.csv!A7: row 7 is a summary row "
                            "('Average'), not an injection; it was set aside",)


def _checks_are_qcs(run):
    assert [p.sample_type for p in run.points[5:]] == [SampleType.QC] * 4
    assert run.analytes == ("Chloride",) and len(run.standards("Chloride")) == 5


def _rounding(run):
    standards = run.standards(run.analytes[0])
    assert sorted({p.concentration for p in standards}) == [10, 100, 1000]


def _full_width(run):
    assert run.analytes == ("Sulfate",) and len(run.standards("Sulfate")) == 8


_READ = {
    "icp_lead_two_lines_element_wavelength.csv": _element_wavelength,
    "icp_lead_two_lines_line.csv": _promoted("Line"),
    "icp_lead_two_lines_label.csv": _promoted("Label"),
    "nitrate_mean_row.csv": _summary("Mean"),
    "nitrate_rsd_and_total_rows.csv": _summary("RSD%", "Total"),
    "anions_wide_average_row.csv": _wide_average,
    "chloride_check_names_without_type.csv": _checks_are_qcs,
    "copper_levels_equal_but_for_rounding.csv": _rounding,
    "sulfate_full_width.csv": _full_width,
}


@pytest.mark.parametrize("name", sorted(_READ))
def test_read_correctly_or_flagged(name):
    _READ[name](read_run(FOLDER / name))


def test_show_import_lists_every_ignored_column(write_csv):
    text = ("Sample,Vial,RT (min),Notes on prep,Conc (mg/L),Area\n"
            + "".join(f"Std {i},{i},3.1{i},ok,{c},{100 * c}\n"
                      for i, c in enumerate((1, 2, 5), start=1)))
    shown = describe_import(read_run(write_csv(text)))
    assert shown.split("Ignored:\n")[1].split("Units:")[0] == (
        "  run.csv!B1 'Vial': known not to be calibration data\n"
        "  run.csv!C1 'RT (min)': known not to be calibration data\n"
        "  run.csv!D1 'Notes on prep': heading not recognised\n")
