"""Reading standards files (calib.io.standards): materials, levels, and every refusal.

Prepared concentrations are checked against the dilution arithmetic by hand
(closed form: c = certified value / product of the dilution factors along the
chain); refusals assert the message naming file and entry or row.
"""

from __future__ import annotations

import datetime as dt

import pytest

from calib.errors import InputError
from calib.io.standards import parse_standards, read_standards, standards_section

TOML = b"""
[[material]]
id = "FWL-RM-0412"
name = "Multi-element stock"
lot = "L24-118"
value = 1000.0
uncertainty = 2.0
unit = "mg/L"
expires = 2027-03-31
analytes = ["Pb", "Cu"]

[[material]]
id = "FWL-RM-0077"
name = "Arsenic stock"
lot = "AS-9"
value = 100.0
unit = "mg/L"
expires = 2026-06-30

[[level]]
name = "I1"
from = "FWL-RM-0412"
dilution = 100

[[level]]
name = "S3"
from = "I1"
dilution = 40
concentration = 0.25
note = "class A flask 100 mL"
"""


def test_toml_materials_and_levels():
    s = parse_standards(TOML, name="metals.toml")
    a, b = s.materials
    assert (a.id, a.lot, a.value, a.uncertainty, a.unit, a.expires, a.analytes) == (
        "FWL-RM-0412", "L24-118", 1000.0, 2.0, "mg/L", dt.date(2027, 3, 31), ("Pb", "Cu"))
    assert b.uncertainty is None and b.analytes == ()
    # 1000 mg/L / 100 = 10 mg/L; / 40 = 0.25 mg/L (hand arithmetic).
    assert [(lv.name, lv.material) for lv in s.levels] == [("I1", "FWL-RM-0412"),
                                                           ("S3", "FWL-RM-0412")]
    assert s.levels[0].concentration == pytest.approx(10.0)
    assert s.levels[1].concentration == pytest.approx(0.25)
    assert [m.id for m in s.for_analyte("cu")] == ["FWL-RM-0412", "FWL-RM-0077"]
    assert [m.id for m in s.for_analyte("As")] == ["FWL-RM-0077"]
    assert len(s.sha256) == 64
    section = standards_section(s)
    assert section["materials"][1]["expires"] == "2026-06-30"
    assert section["levels"][1]["note"] == "class A flask 100 mL"


CSV = (
    "kind,id,name,lot,value,uncertainty,unit,expires,analytes,from,dilution\n"
    "material,FWL-RM-0412,Multi-element stock,L24-118,1000,2,mg/L,2027-03-31,Pb;Cu,,\n"
    "level,,S1,,,,,,,FWL-RM-0412,2000\n"
)


def test_csv_form_gives_the_same_material(tmp_path):
    path = tmp_path / "metals.csv"
    path.write_text(CSV, encoding="utf-8")
    s = read_standards(path)
    assert s.materials[0].analytes == ("Pb", "Cu") and s.materials[0].value == 1000.0
    assert s.levels[0].concentration == pytest.approx(0.5)  # 1000 / 2000


@pytest.mark.parametrize(("text", "message"), [
    (b'[[material]]\nid = "A"\nname = "n"\nlot = "L"\nvalue = 1.0\nunit = "mg/L"\n',
     "metals.toml: entry 1 of [[material]], key expires: expires is missing"),
    ((b'[[material]]\nid = "A"\nname = "n"\nlot = "L"\nvalue = 1.0\nunit = "mg/L"\n'
     b'expires = "31.03.2027"\n'),
     "metals.toml: entry 1 of [[material]], key expires: must be a date written YYYY-MM-DD"),
    ((b'[[material]]\nid = "A"\nname = "n"\nlot = "L"\nvalue = -1.0\nunit = "mg/L"\n'
     b'expires = 2027-01-01\n'),
     "key value: must be a finite number above zero, not -1"),
    ((b'[[material]]\nid = "A"\nname = "n"\nlot = "L"\nvalue = 1.0\nunit = "mg/L"\n'
     b'expires = 2027-01-01\ncolour = "red"\n'),
     "entry 1 of [[material]]: unknown key 'colour'"),
    (b'[[level]]\nname = "S1"\nfrom = "A"\ndilution = 10\n',
     "no [[material]] entry: name at least one reference material"),
    (b'[standard]\n', "unknown table 'standard'"),
    (b'[[material]\n', "not valid TOML"),
])
def test_toml_refusals(text, message):
    with pytest.raises(InputError) as caught:
        parse_standards(text, name="metals.toml")
    assert message in str(caught.value)


MATERIAL = (b'[[material]]\nid = "A"\nname = "n"\nlot = "L"\nvalue = 1000.0\nunit = "mg/L"\n'
            b'expires = 2027-01-01\n')


@pytest.mark.parametrize(("levels", "message"), [
    (b'[[level]]\nname = "S1"\nfrom = "B"\ndilution = 10\n',
     "entry 1 of [[level]]: from = 'B' names no material or level"),
    ((b'[[level]]\nname = "S1"\nfrom = "S2"\ndilution = 10\n'
     b'[[level]]\nname = "S2"\nfrom = "S1"\ndilution = 10\n'),
     "levels made from each other in a loop (s1 → s2 → s1)"),
    ((b'[[level]]\nname = "S1"\nfrom = "A"\ndilution = 10\n'
     b'[[level]]\nname = "s1"\nfrom = "A"\ndilution = 20\n'),
     "entry 2 of [[level]]: name 's1' is used twice"),
    (b'[[level]]\nname = "S1"\nfrom = "A"\ndilution = 0.5\n',
     "key dilution: must be 1 or more (final volume / aliquot volume), not 0.5"),
    (b'[[level]]\nname = "S1"\nfrom = "A"\ndilution = 100\nconcentration = 1.0\n',
     ("concentration 1 mg/L differs from the preparation (1000 mg/L diluted 100-fold = 10) by "
     "more than 1 %")),
])
def test_level_refusals(levels, message):
    with pytest.raises(InputError) as caught:
        parse_standards(MATERIAL + levels, name="metals.toml")
    assert message in str(caught.value)


def test_duplicate_material_ids_refused():
    with pytest.raises(InputError, match="entry 2 of \\[\\[material\\]\\]: material id 'a' is "
                                         "used twice"):
        parse_standards(MATERIAL + MATERIAL.replace(b'"A"', b'"a"'), name="m.toml")


@pytest.mark.parametrize(("text", "message"), [
    ("kind,id\nstock,A\n", "m.csv, row 2, column kind: kind must be material or level"),
    ("id,name\nA,n\n", "m.csv, row 1: no 'kind' column"),
    ("kind,id,colour\n", "m.csv, row 1, column colour: unknown column 'colour'"),
    ("kind,id,name,lot,value,unit,expires\nmaterial,A,n,L,lots,mg/L,2027-01-01\n",
     "m.csv, row 2, column value: not a number: 'lots'"),
    ("kind,id,name,lot,value,unit,expires\nmaterial,A,n,L,1,mg/L,01/02/2027\n",
     "m.csv, row 2, column expires: expiry date '01/02/2027' is not written YYYY-MM-DD"),
])
def test_csv_refusals(tmp_path, text, message):
    path = tmp_path / "m.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as caught:
        read_standards(path)
    assert message in str(caught.value)


def test_hostile_files_refused_quickly(tmp_path):
    big = tmp_path / "big.toml"
    big.write_bytes(b"#" * 1_000_001)
    with pytest.raises(InputError, match="standards file larger than 1000000 bytes"):
        read_standards(big)
    with pytest.raises(InputError, match="a standards file ends in .toml or .csv, not .json"):
        parse_standards(b"{}", name="s.json")
    with pytest.raises(InputError, match="not UTF-8"):
        parse_standards(b"\xff\xfe\x00", name="s.toml")
    with pytest.raises(InputError, match="cannot read the standards file"):
        read_standards(tmp_path / "missing.toml")


def test_the_readme_examples_parse(tmp_path):
    """The TOML and CSV examples of README "Standards traceability" read as documented."""
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    section = readme[readme.index("### Standards traceability"):readme.index("## JSON output")]
    toml = section.split("```toml\n")[1].split("```")[0]
    csv_text = section.split("```csv\n")[1].split("```")[0]
    a = parse_standards(toml.encode(), name="metals.toml")
    b = parse_standards(csv_text.encode(), name="metals.csv")
    assert [lv.concentration for lv in a.levels] == pytest.approx([1.0, 0.1])  # 100/100, /10
    assert b.materials[0].analytes == ("Pb 220.353", "Cu 324.754")
    assert b.levels[0].concentration == pytest.approx(1.0)


def test_the_readme_profile_example_parses():
    """The [[analyte]] example of README "Per-analyte settings" loads beside a shipped profile."""
    from pathlib import Path

    from calib.checks.profile import parse_profile, shipped_profiles

    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    section = readme[readme.index("### Per-analyte settings"):]
    example = section.split("```toml\n")[1].split("```")[0]
    prof = parse_profile(shipped_profiles()["plasma-spectrometry"] + example, origin="p.toml")
    (entry,) = prof.overrides
    assert (entry.pattern, entry.model.value, entry.digits) == ("Pb*", "quadratic", 4)
