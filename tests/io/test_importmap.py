"""Import maps: loading and refusing TOML, and reading exports detection alone cannot."""

from __future__ import annotations

import pytest

from calib.errors import InputError
from calib.io import ImportMap, describe_import, load_map, read_run
from calib.options import SampleType
from tests.io.conftest import message

# An export whose headings calib does not know, with a unit-less heading and house sample names.
ODD = (
    "IC-2 export\n"
    "Probe;Vorgabe;Fl. Leitf.\n"
    "RB-1;;0,0004\n"
    "KAL-1;0,5;0,0421\n"
    "KAL-2;1,0;0,0843\n"
    "KAL-3;2,5;0,2112\n"
    "KS-1;2,0;0,1688\n"
)
MAP = """\
# Import map for IC-2 anion exports (Fernbrook Water Laboratory, fictional)
name = "IC-2 anions"
analyte = "Nitrate-N"
[columns]
concentration = "Vorgabe"
response = "Fl. Leitf."
[units]
concentration = "mg/L"
[sample_types]
blank = ["RB-*"]
qc = ["KS-?"]
"""


def _map(tmp_path, text, name="ic2.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_map_reads_an_export_detection_cannot(write_csv, tmp_path):
    path = write_csv(ODD, name="ic2.csv")
    assert message(path).startswith(f"{path}: no header row naming both")
    run = read_run(path, map=_map(tmp_path, MAP))
    assert [p.sample_type for p in run.points] == [
        SampleType.BLANK, SampleType.STANDARD, SampleType.STANDARD, SampleType.STANDARD,
        SampleType.QC,
    ]
    assert run.analytes == ("Nitrate-N",)
    assert run.units == {"concentration": "mg/L"}
    assert run.source.import_map == "ic2.toml"
    assert [p.response for p in run.points] == [0.0004, 0.0421, 0.0843, 0.2112, 0.1688]


def test_map_header_row_and_sheet(write_xlsx, tmp_path):
    rows = [["Conc", "Area"], ["these are not the data"], ["Std", "Konz", "Signal"],
            ["S1", 1, 10], ["S2", 2, 20], ["S3", 5, 50]]
    path = write_xlsx({"Other": [["nothing"]], "Data": rows})
    text = 'sheet = "Data"\nheader_row = 3\n[columns]\nconcentration = "Konz"\nresponse = "Signal"\n'
    run = read_run(path, map=load_map(_map(tmp_path, text)))
    assert run.source.sheet == "Data"
    assert [p.source_cell for p in run.points] == ["Data!C4", "Data!C5", "Data!C6"]


def test_map_names_wide_columns(write_csv, tmp_path):
    path = write_csv("Level;Soll;NO3 Fl.;F Fl.;F Soll\nL1;1;10;2;0,5\nL2;2;20;4;1\nL3;5;50;10;2,5\n")
    text = ('[columns]\nconcentration = "Soll"\n[analytes]\nNitrate = "NO3 Fl."\n'
            'Fluoride = { response = "F Fl.", concentration = "F Soll" }\n')
    run = read_run(path, map=_map(tmp_path, text))
    assert run.source.layout == "wide"
    assert [p.concentration for p in run.standards("Fluoride")] == [0.5, 1.0, 2.5]
    assert [p.concentration for p in run.standards("Nitrate")] == [1.0, 2.0, 5.0]


def test_mapped_heading_missing_from_the_header_row(write_csv, tmp_path):
    path = write_csv("Conc,Area\n1,10\n")
    imap = ImportMap(header_row=0, columns={"response": "Fläche"})
    assert message(path, map=imap) == (
        f"{path}, row 1: the import map names the heading 'Fläche', which the header row does "
        f"not have (it has: 'Conc', 'Area'); expected the heading as written in the file"
    )


@pytest.mark.parametrize(
    ("text", "problem"),
    [
        ('colums = {}\n', ("unknown key 'colums'; expected one of name, description, sheet, "
                          "header_row, layout, analyte, decimal, delimiter, encoding, columns, "
                          "units, sample_types, analytes, ignore")),
        ('header_row = 0\n', ("header_row is 0; expected a row number from 1 (as the "
                             "spreadsheet shows it)")),
        ('layout = "tall"\n', "layout is 'tall'; expected \"long\" or \"wide\""),
        ('decimal = ";"\n', "decimal is ';'; expected \".\" or \",\""),
        ('encoding = "klingon"\n', ("encoding is 'klingon'; expected an encoding name such as "
                                   "\"utf-8\" or \"cp1252\"")),
        ('[columns]\nresponce = "Area"\n', ("unknown key 'columns.responce'; expected one of "
                                           "analyte, sample_type, level, concentration, "
                                           "response, is_response, replicate, injection_order, "
                                           "include, exclusion_reason, sample_id")),
        ('[sample_types]\nstandard = "KAL*"\nspike = ["SP*"]\n',
         "unknown key 'sample_types.spike'; expected one of standard, blank, zero, qc, unknown"),
        ('[sample_types]\nqc = [1]\n', ("sample_types.qc is [1]; expected a list of patterns in "
                                       "quotes")),
        ('[analytes]\nLead = { concentration = "Pb conc" }\n',
         'analytes.Lead names no response heading; expected response = "..."'),
        ('ignore = [3]\n', "ignore is [3]; expected a list of headings in quotes"),
        ('ignore = ""\n', "ignore is ''; expected a list of headings in quotes"),
    ],
)
def test_bad_maps_are_refused_naming_the_key(tmp_path, text, problem):
    path = _map(tmp_path, text)
    with pytest.raises(InputError) as err:
        load_map(path)
    assert str(err.value) == f"{path}: {problem}"


def test_map_that_is_not_toml(tmp_path):
    path = _map(tmp_path, "[columns\nresponse = 'Area'\n")
    with pytest.raises(InputError) as err:
        load_map(path)
    assert str(err.value) == (
        f"{path}: the import map is not valid TOML (Expected ']' at the end of a table "
        f"declaration (at line 1, column 9))"
    )


def test_missing_map(tmp_path):
    with pytest.raises(InputError) as err:
        load_map(tmp_path / "none.toml")
    assert str(err.value) == (
        f"{tmp_path / 'none.toml'}: cannot read the import map (No such file or directory); "
        f"expected a TOML file"
    )


def test_show_import_says_what_was_recognised(write_csv, tmp_path):
    run = read_run(write_csv(ODD, name="ic2.csv"), map=_map(tmp_path, MAP))
    assert describe_import(run) == (
        f"File:      ic2.csv (SHA-256 {run.source.sha256[:12]}...)\n"
        "Layout:    long (one row per injection)\n"
        "Text:      UTF-8, semicolon-separated, decimal comma\n"
        "Map:       ic2.toml\n"
        "Tables:    ic2.csv!A2:C7\n"
        "Columns:\n"
        "  ic2.csv!A2 'Probe' -> sample_id\n"
        "  ic2.csv!B2 'Vorgabe' -> concentration [mg/L]\n"
        "  ic2.csv!C2 'Fl. Leitf.' -> response\n"
        "Metadata:  title: IC-2 export\n"
        "Units:     concentration mg/L\n"
        "Analytes:  1\n"
        "  Nitrate-N: 3 standards at 3 concentrations (0.5 to 2.5 mg/L), 1 blank, 1 QC"
    )


def test_command_line_map_and_show_import(write_csv, tmp_path, capsys):
    from calib.cli.main import main

    path = write_csv(ODD, name="ic2.csv")
    toml = _map(tmp_path, MAP)
    assert main(["check", str(path), "--map", str(toml), "--show-import"]) == 0
    out = capsys.readouterr().out
    assert "  ic2.csv!B2 'Vorgabe' -> concentration [mg/L]\n" in out
    assert main(["check", str(path), "--show-import"]) == 3
    assert capsys.readouterr().err.startswith(f"calib: error: {path}: no header row naming")
    code = main(["check", str(path), "--map", str(toml), "--json"])
    assert code in (0, 1)
    assert '"analyte": "Nitrate-N"' in capsys.readouterr().out


def test_ignore_takes_one_heading_or_a_list(tmp_path):
    assert load_map(_map(tmp_path, 'ignore = "Operator"\n')).ignore == ("Operator",)
    assert load_map(_map(tmp_path, 'ignore = ["Line", "Batch"]\n')).ignore == ("Line", "Batch")
