"""Ambiguity is an error, not a guess: cases where a reading could silently change a result.

Each case was found reading invented exports (Fernbrook Water Laboratory) as a new user would;
before, each gave a verdict without a word.  Now each refuses with a message naming the cells
and saying what to do, or sets the cells aside with a note.  The rules are common practice in
laboratory data review: an analyst's exclusion and its reason are never reversed or dropped,
summary rows are not injections, independent checks are not calibration points.
"""

from __future__ import annotations

import pytest

from calib.io import read_run

from .conftest import message

_HEAD = "Analyte,Sample,Conc (mg/L),Area,Include,Reason\n"
_BODY = "".join(f"Nitrate-N,Std {i},{c},{round(0.2 * c, 4)},yes,\n"
                for i, c in enumerate((0.5, 1, 2, 5, 10), start=1))


# -- include marks and reasons ---------------------------------------------------------------

def test_include_x_with_a_reason_is_refused(write_csv):
    path = write_csv(_HEAD + _BODY + "Nitrate-N,Std 6,20,4.1,x,bubble in syringe\n")
    assert message(path) == (
        f"{path}, row 7, column E (Include): found the mark 'x', which some labs use for "
        "included and others for excluded; write yes or no in the include column (an empty "
        "cell means included)"
    )


def test_a_reason_beside_an_empty_include_cell_is_refused(write_csv):
    path = write_csv(_HEAD + _BODY + "Nitrate-N,Std 6,20,4.1,,bubble in syringe\n")
    assert message(path) == (
        f"{path}, row 7, column F (Reason): found the exclusion reason 'bubble in syringe' on a "
        "row marked included (its include cell E7 is empty); write no in the include column to "
        "exclude the point, or clear the reason to keep it"
    )


def test_a_reason_beside_yes_is_refused(write_csv):
    path = write_csv(_HEAD + _BODY + "Nitrate-N,Std 6,20,4.1,yes,bubble in syringe\n")
    assert message(path).endswith(
        "row 7, column F (Reason): found the exclusion reason 'bubble in syringe' on a row "
        "marked included (its include cell E7 says 'yes'); write no in the include column to "
        "exclude the point, or clear the reason to keep it"
    )


def test_a_reason_without_an_include_column_is_refused(write_csv):
    text = "Conc (mg/L),Area,Reason\n0.5,0.1,\n1,0.2,\n2,0.4,carry-over\n"
    path = write_csv(text)
    assert message(path) == (
        f"{path}, row 4, column C (Reason): found the exclusion reason 'carry-over' on a row "
        "marked included (the table has no include column, so the row counts as included); "
        "write no in the include column to exclude the point, or clear the reason to keep it"
    )


def test_a_remark_beside_an_explicit_yes_is_kept_as_a_remark(write_csv):
    text = ("Conc (mg/L),Area,Include,Comment\n0.5,0.1,yes,new vial\n1,0.2,yes,\n"
            "2,0.4,no,carry-over\n5,1.0,yes,\n")
    run = read_run(write_csv(text))
    assert [p.included for p in run.points] == [True, True, False, True]
    assert run.points[2].exclusion_reason == "carry-over"
    # The remark on the included row is not lost: the run says it, with its cell.
    assert any("D2: the remark 'new vial' is shown here only; the row is used as it stands" in w
               for w in run.warnings), run.warnings


def test_a_comments_column_without_include_keeps_rows_and_says_each_remark(write_csv):
    # A remark is not an exclusion (the guide: ambiguity is refused or said, data never lost).
    text = "Conc (mg/L),Area,Comment\n0.5,0.1,\n1,0.2,injection failed\n2,0.4,\n5,1.0,\n"
    run = read_run(write_csv(text))
    assert all(p.included for p in run.points)
    (note,) = [w for w in run.warnings if "the remark" in w]
    assert "C3: the remark 'injection failed' is shown here only" in note
    assert "--exclude" in note


def test_a_remark_beside_an_empty_include_cell_is_refused(write_csv):
    text = "Conc (mg/L),Area,Include,Comment\n0.5,0.1,,bubble\n1,0.2,yes,\n2,0.4,yes,\n"
    path = write_csv(text)
    assert message(path) == (
        f"{path}, row 2, column D (Comment): found the exclusion reason 'bubble' on a row marked "
        "included (its include cell C2 is empty); write no in the include column to exclude "
        "the point, or clear the reason to keep it"
    )


# -- summary rows ------------------------------------------------------------------------------

_PAIRS = "".join(f"Nitrate-N,Std {i},{c:.4f},{r},yes,\n" for i, (c, r) in enumerate(
    [(1, 0.2003), (1, 0.1996), (2, 0.4010), (2, 0.3990), (5, 1.0012), (5, 0.9988), (10, 2.0021),
     (10, 1.9977)], start=1))


@pytest.mark.parametrize("word", ["Mean", "Average", "SD", "%RSD", "RSD%", "Total", "Sum"])
def test_a_summary_row_is_set_aside_with_a_note(write_csv, word):
    # The column means (4.5 mg/L, 0.89998) lie exactly on the line: fitted, they would add a
    # fifth level no residual check can see (issue 17).
    path = write_csv(_HEAD + _PAIRS + f"Nitrate-N,{word},4.5000,0.89998,\n")
    run = read_run(path)
    standards = run.standards("Nitrate-N")
    assert sorted({p.concentration for p in standards}) == [1, 2, 5, 10]
    assert len(standards) == 8
    assert run.warnings == (
        f"run.csv!B10: row 10 is a summary row ({word!r}), not an injection; it was set aside",)


def test_an_unnamed_total_row_is_refused(write_csv):
    path = write_csv(_HEAD + _PAIRS + "Nitrate-N,,36.0000,7.1997,,\n")
    assert message(path) == (
        f"{path}, row 10, column B (Sample): the row has a concentration but no sample name in "
        "run.csv!B10, where the other rows have one (run.csv!B2 to run.csv!B9); it may be a "
        "total or mean row: delete it from the export, or write its sample name (or its sample "
        "type) if it is an injection"
    )


def test_an_average_row_in_a_wide_sheet_is_set_aside(write_xlsx):
    rows = [["Level", "Conc (mg/L)", "Nitrate area", "Sulfate area"]]
    rows += [[i, c, 100.0 * c, 50.0 * c] for i, c in enumerate((1, 2, 5, 10), start=1)]
    rows.append(["Average", 4.5, 450.0, 225.0])
    run = read_run(write_xlsx({"Anions": rows}))
    assert [len(run.standards(a)) for a in run.analytes] == [4, 4]
    assert run.warnings == (
        "Anions!A6: row 6 is a summary row ('Average'), not an injection; it was set aside",)


def test_an_unlabelled_total_row_in_a_wide_sheet_is_refused(write_xlsx):
    rows = [["Level", "Conc (mg/L)", "Nitrate area", "Sulfate area"]]
    rows += [[i, c, 100.0 * c, 50.0 * c] for i, c in enumerate((1, 2, 5, 10), start=1)]
    rows.append([None, 18, 1800.0, 900.0])
    path = write_xlsx({"Anions": rows})
    assert message(path) == (
        f"{path}, sheet Anions, row 6, column A (Level): the row has a concentration but no "
        "level label in Anions!A6, where the other rows have one (Anions!A2 to Anions!A5); it "
        "may be a total or mean row: delete it from the export, or write its level label (or "
        "its sample type) if it is an injection"
    )


# -- names of independent checks ---------------------------------------------------------------

def test_check_samples_without_a_type_column_are_not_fitted(write_csv):
    rows = "".join(f"Std {i},{c},{100 * c}\n" for i, c in enumerate((1, 2, 5, 10), start=1))
    text = ("Sample,Conc (mg/L),Area\n" + rows + "Std QC,5,497\nCheck Std 5,5,503\n"
            "CRM 7,2,199\nVerification 12,10,1004\n")
    run = read_run(write_csv(text))
    assert [p.sample_type.value for p in run.points[4:]] == ["qc"] * 4
    assert len(run.standards("run")) == 4


def test_a_spike_without_a_type_column_is_refused(write_csv):
    rows = "".join(f"Std {i},{c},{100 * c}\n" for i, c in enumerate((1, 2, 5, 10), start=1))
    path = write_csv("Sample,Conc (mg/L),Area\n" + rows + "Spike 1,5,480\n")
    assert message(path) == (
        f"{path}, row 6, column A (Sample): found the sample name 'Spike 1', which names a "
        "spike, which may be a QC or a sample; calib does not guess whether it is a calibration "
        "point: add a sample type column (standard, blank, qc, unknown), or an import map with "
        "[sample_types] patterns such as qc = ['Spike 1']"
    )


def test_a_spike_with_a_type_column_is_read(write_csv):
    rows = "".join(f"Std {i},Standard,{c},{100 * c}\n"
                   for i, c in enumerate((1, 2, 5, 10), start=1))
    run = read_run(write_csv("Sample,Type,Conc (mg/L),Area\n" + rows + "Spike 1,QC,5,480\n"))
    assert run.points[-1].sample_type.value == "qc"


# -- decimal marks -----------------------------------------------------------------------------

def test_a_thousands_shaped_number_beside_whole_numbers_is_refused(write_csv):
    # Issue 17: in a semicolon file whose concentrations show decimal commas (0,5), '1,006'
    # between the whole numbers 995 and 4999 was read as 1.006, a thousandfold error.
    path = write_csv("Probe;Konz (mg/L);Fläche\nKal 1;0,5;497\nKal 2;1;995\nKal 3;2;1,006\n"
                     "Kal 4;5;4999\n")
    assert message(path) == (
        f"{path}, row 4, column C (Fläche): found '1,006' (row 4) beside the whole number '497' "
        "(row 2) in one column: read with a decimal comma, '1,006' is a thousand times smaller "
        "than it looks if the comma separates thousands; expected one way of writing numbers in "
        "a column: write 1006 if the comma separates thousands, or give an import map with "
        "decimal = \",\" if 1,006 means 1.006"
    )


def test_an_import_map_naming_the_decimal_comma_settles_it(write_csv, tmp_path):
    path = write_csv("Probe;Konz (mg/L);Fläche\nKal 1;0,5;497\nKal 2;1;995\nKal 3;2;1,006\n"
                     "Kal 4;5;4999\n")
    imap = tmp_path / "map.toml"
    imap.write_text('decimal = ","\n', encoding="utf-8")
    run = read_run(path, map=imap)
    assert [p.response for p in run.points] == pytest.approx([497, 995, 1.006, 4999])


# -- levels ------------------------------------------------------------------------------------

def test_a_level_label_at_two_concentrations_is_refused(write_csv):
    text = ("Level,Conc (mg/L),Area\n1,1,100\n2,2,200\n3,4,400\n4,5,500\n4,8,800\n")
    path = write_csv(text)
    assert message(path) == (
        f"{path}: run: the level label '4' is given at 2 concentrations (5 in the row of "
        "run.csv!C5, 8 in the row of run.csv!C6); expected one concentration per level: correct "
        "the level label or the concentration in the file"
    )


def test_concentrations_equal_but_for_rounding_are_one_level(write_csv):
    # 999.9999999999999 is what a formula such as =10*100 rounded in binary may store; the
    # relative difference, 1.1e-16, is far under 1e-9.
    text = ("Conc (mg/L),Area\n10,100\n100,1000\n999.9999999999999,10001\n1000.0,9998\n")
    run = read_run(write_csv(text))
    assert sorted({p.concentration for p in run.points}) == [10, 100, 1000]
    assert run.warnings == (
        "run: the concentrations 999.9999999999999 (run.csv!B4) and 1000 (run.csv!B5) differ by "
        "less than 1e-09 relative and were read as one level, 1000",)


# -- analyte names -----------------------------------------------------------------------------

def _two_names(first: str, second: str) -> str:
    rows = [f"{a},{c},{k * c}" for a, k in ((first, 10), (second, 12)) for c in (1, 2, 5, 10)]
    return "Analyte,Conc (mg/L),Area\n" + "\n".join(rows) + "\n"


def test_names_differing_only_in_a_cyrillic_letter_are_refused(write_csv):
    path = write_csv(_two_names("Sulfate", "Sulf\u0430te"))
    assert message(path) == (
        f"{path}: the analyte name 'Sulf\u0430te' in run.csv!A6 mixes Latin letters with U+0430 "
        "CYRILLIC SMALL LETTER A, which looks like the Latin 'a'; expected one spelling: retype "
        "the name in the file"
    )


def test_names_differing_only_in_case_are_refused(write_csv):
    path = write_csv(_two_names("Sulfate", "sulfate"))
    assert message(path) == (
        f"{path}: the analyte names 'Sulfate' (in run.csv!A2) and 'sulfate' (in run.csv!A6) "
        "differ only in case or in look-alike characters; expected one spelling per analyte: "
        "correct one of them in the file"
    )


def test_a_zero_width_space_in_a_name_is_refused(write_csv):
    path = write_csv(_two_names("Sulfate", "Sul\u200bfate"))
    assert message(path) == (
        f"{path}: the analyte name 'Sul\\u200bfate' in run.csv!A6 holds the invisible character "
        "U+200B ZERO WIDTH SPACE; expected a name of visible characters: delete it in the file"
    )


def test_a_full_width_name_is_normalised_with_a_note(write_csv):
    full = "\uff33\uff55\uff4c\uff46\uff41\uff54\uff45"  # Ｓｕｌｆａｔｅ
    run = read_run(write_csv(_two_names("Sulfate", full)))
    assert run.analytes == ("Sulfate",)
    assert len(run.standards("Sulfate")) == 8
    assert run.warnings[0] == (
        f"run.csv!A6: the analyte name {full!r} was read as 'Sulfate' (Unicode compatibility "
        "form)")


def test_an_unlabelled_mean_row_without_any_name_column_is_refused(write_csv):
    # The last row is the column means of the 8 rows above (4.5 mg/L; mean absorbance 0.899963,
    # written rounded to 0.89996): it lies on the line, so only its values betray it.
    rows = "".join(f"{c},{r}\n" for c, r in ((1, 0.2003), (1, 0.1996), (2, 0.4010),
                                             (2, 0.3990), (5, 1.0012), (5, 0.9988),
                                             (10, 2.0021), (10, 1.9977)))
    path = write_csv("Conc (mg/L),Absorbance\n" + rows + "4.5,0.89996\n")
    assert message(path) == (
        f"{path}: run: the row of run.csv!B10 holds the mean of the standards above it "
        "(concentration 4.5, response 0.89996): a summary row, not an injection; delete it from "
        "the export"
    )


# -- one curve, two populations ----------------------------------------------------------------

def _two_populations(*, ordered: bool):
    from calib.run import Point

    points = []
    for c in (5.0, 10.0, 25.0, 50.0):
        for k, sensitivity in enumerate((1000.0, 1060.0)):
            for rep in range(3):
                order = (100 * k + 10 * c + rep) if ordered else None
                points.append(Point("Pb", c, sensitivity * c * (1 + 0.001 * (rep - 1)),
                                    f"r.csv!C{len(points) + 2}", injection_order=order))
    return points


def test_two_populations_at_every_level_are_refused():
    # Two emission lines 6 % apart (sensitivities 1000 and 1060), three replicates each at
    # 0.1 % spread: at each level the gap is tens of pooled SDs and the ratio is 1.06.
    from calib.errors import InputError
    from calib.io.ambiguity import check_populations

    with pytest.raises(InputError) as err:
        check_populations(_two_populations(ordered=False), file="r.csv", sheet=None,
                          min_levels=3)
    assert str(err.value) == (
        "r.csv: Pb: at each of its 4 levels the standards' responses fall into two separate "
        "groups whose means differ by a factor of 1.06 (at 5: r.csv!C2, r.csv!C3, r.csv!C4, "
        "r.csv!C5, r.csv!C6, r.csv!C7), so the curve may hold two analytes or lines; give the "
        "file an analyte column (or name the column that tells them apart in an import map: "
        "[columns] analyte = ...) and pass it with --map")


def test_groups_injected_one_after_the_other_are_drift_not_two_analytes():
    from calib.io.ambiguity import check_populations

    check_populations(_two_populations(ordered=True), file="r.csv", sheet=None, min_levels=3)


def test_replicates_with_ordinary_noise_are_never_taken_for_two_populations():
    # Normal noise of 2 % (a common repeatability) on 4 to 8 replicates at 5 levels: 300 seeded
    # runs, none refused (the rule needs a wide gap at every level and a constant ratio).
    import random

    from calib.io.ambiguity import check_populations
    from calib.run import Point

    for seed in range(300):
        rng = random.Random(seed)
        points = [Point("A", c, 100 * c * (1 + rng.gauss(0, 0.02)), "r.csv!C2")
                  for c in (1, 2, 5, 10, 20) for _ in range(rng.choice((4, 5, 6, 8)))]
        check_populations(points, file="r.csv", sheet=None, min_levels=3)


def test_a_column_splitting_a_wide_table_is_refused(write_csv):
    rows = "".join(f"{b},{c},{100 * c + k},{50 * c + k}\n" for k, b in enumerate(("Day A", "Day B"))
                   for c in (1, 2, 5, 10))
    path = write_csv("Batch label,Conc (mg/L),Nitrate area,Sulfate area\n" + rows)
    assert message(path) == (
        f"{path}, row 1, column A (Batch label): the column holds 2 values ('Day A', 'Day B') "
        "that each recur at 3 or more concentrations of what would be one curve of Nitrate; "
        "calib does not merge them: if they are different analytes or lines, name the column as "
        "the analyte column in an import map ([columns] analyte = 'Batch label') and pass it "
        "with --map; if they are one curve, list it in the map (ignore = ['Batch label'])"
    )


def test_a_column_the_map_ignores_does_not_split(write_csv, tmp_path):
    rows = "".join(f"{b},{c},{100 * c + k},{50 * c + k}\n" for k, b in enumerate(("Day A", "Day B"))
                   for c in (1, 2, 5, 10))
    path = write_csv("Batch label,Conc (mg/L),Nitrate area,Sulfate area\n" + rows)
    imap = tmp_path / "map.toml"
    imap.write_text('ignore = ["Batch label"]\n', encoding="utf-8")
    run = read_run(path, map=imap)
    assert [len(run.standards(a)) for a in run.analytes] == [8, 8]
    assert run.source.ignored_columns == (
        "run.csv!A1 'Batch label': listed under ignore in the import map",)


def test_an_unlabelled_blank_at_zero_is_not_taken_for_a_total(write_xlsx):
    rows = [["Level", "Conc (mg/L)", "Nitrate area", "Sulfate area"], [None, 0, 0.4, 0.2]]
    rows += [[i, c, 100.0 * c, 50.0 * c] for i, c in enumerate((1, 2, 5, 10), start=1)]
    run = read_run(write_xlsx({"Anions": rows}))
    assert [len(run.standards(a)) for a in run.analytes] == [5, 5]


def test_a_replicate_number_repeated_within_a_level_is_refused(write_csv):
    # Two lines of one element without a column telling them apart: replicate numbers 1-3
    # repeat within each level of each sample.
    rows = "".join(f"Std {i},{c},{k * c + r},{r}\n" for i, c in enumerate((1, 2, 5, 10), start=1)
                   for k in (100, 106) for r in (1, 2, 3))
    path = write_csv("Sample,Conc (ug/L),Counts,Replicate\n" + rows)
    assert message(path) == (
        f"{path}: run: replicate 1 of the standard at 1 (sample 'Std 1') appears 2 times "
        "(run.csv!C2, run.csv!C5), so the rows may hold more than one analyte or line in one "
        "curve; if the rows hold different analytes or lines, give the file an analyte column; "
        "if they are re-injections, number the replicates 1, 2, 3... within each level or add "
        "an injection order column"
    )


def test_a_repeated_replicate_names_the_column_that_tells_the_rows_apart(write_csv):
    # A free-text tag written per injection (line and level in it) does not split the curve
    # by itself, but it tells the repeated rows apart, so the message points at it.
    rows = "".join(f"Std {i},{line}/{i}/{r},{c},{k * c + r},{r}\n"
                   for i, c in enumerate((1, 2, 5, 10), start=1)
                   for line, k in (("Pb220", 100), ("Pb217", 106)) for r in (1, 2, 3))
    path = write_csv("Sample,Tag,Conc (ug/L),Counts,Replicate\n" + rows)
    assert message(path) == (
        f"{path}: run: replicate 1 of the standard at 1 (sample 'Std 1') appears 2 times "
        "(run.csv!D2, run.csv!D5), so the rows may hold more than one analyte or line in one "
        "curve; column B (Tag) tells them apart: if it names the analyte or line, name it as "
        "the analyte column in an import map ([columns] analyte = ...) and pass it with --map; "
        "if they are re-injections, number the replicates 1, 2, 3... within each level or add "
        "an injection order column"
    )


def test_re_injections_with_an_injection_order_are_not_repeats(write_csv):
    rows = "".join(f"Std {i},{c},{100 * c + r + o},{r},{o * 50 + 3 * i + r}\n"
                   for o in (0, 1) for i, c in enumerate((1, 2, 5, 10), start=1) for r in (1, 2))
    run = read_run(write_csv("Sample,Conc (ug/L),Counts,Replicate,Injection order\n" + rows))
    assert len(run.standards("run")) == 16


def test_a_line_that_changes_inside_one_curve_is_refused(write_csv):
    # A less sensitive line for the high standards is common in emission spectrometry; read as
    # one curve, the two lines' sensitivities (1000 and 1060 counts per ug/L) would merge.
    rows = "".join(f"Std {i},{line},{c},{k * c}\n" for i, (c, line, k) in enumerate(
        [(1, "Pb 220.353", 1000), (5, "Pb 220.353", 1000), (10, "Pb 217.000", 1060),
         (50, "Pb 217.000", 1060)], start=1) for _ in range(2))
    path = write_csv("Sample,Line,Conc (ug/L),Counts\n" + rows)
    assert message(path) == (
        f"{path}, row 1, column B (Line): the column holds 2 values ('Pb 220.353' at 1 to 5, "
        "'Pb 217.000' at 10 to 50) that change from level to level of what would be one curve "
        "of run; calib does not merge them: if they are different analytes or lines, name the "
        "column as the analyte column in an import map ([columns] analyte = 'Line') and pass it "
        "with --map; if they are one curve, list it in the map (ignore = ['Line'])"
    )


def test_a_label_per_level_is_not_taken_for_an_analyte(write_csv):
    rows = "".join(f"Cal {i},{c},{100 * c + r}\n" for i, c in enumerate((1, 2, 5, 10), start=1)
                   for r in (0, 1))
    run = read_run(write_csv("Label,Conc (mg/L),Area\n" + rows))
    assert run.analytes == ("run",) and len(run.standards("run")) == 8


def test_a_summary_word_in_the_concentration_column_is_a_summary_row(tmp_path):
    # Spreadsheets often write the label where the concentration stands ("Mittelwert" is
    # German for mean); the row is set aside with its cell named, never read as a standard.
    from calib.io import read_run

    path = tmp_path / "n.csv"
    path.write_text("Analyt;Konz. (mg/l);Fläche\n"
                    + "".join(f"Nitrit-N;{c};{0.085 * c:.4f}\n".replace(".", ",")
                              for c in (0.5, 1, 2, 5, 10))
                    + "Nitrit-N;Mittelwert;0,3146\n", encoding="utf-8")
    run = read_run(path)
    assert len(run.points) == 5
    assert any("n.csv!B7: row 7 is a summary row ('Mittelwert'), not an injection; it was set "
               "aside" in w for w in run.warnings)
