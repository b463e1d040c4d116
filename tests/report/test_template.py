"""Report templates: the bundled one, a lab's own, and every way a template can be wrong."""

from __future__ import annotations

import pytest

from calib.errors import TemplateError
from calib.report import ReportTemplate, load_template


def _write(tmp_path, text: str):
    path = tmp_path / "lab.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_bundled_template_is_complete():
    t = load_template()
    assert isinstance(t, ReportTemplate)
    # Until the lab sets up its own template, records say so instead of naming a lab.
    assert t.lab.name == "Laboratory not configured" and t.lab.address == ()
    assert t.page_size == "A4"
    assert t.show.summary and t.show.residual_plot
    assert t.verdicts.word("needs-review") == "Needs review"
    assert t.meanings.approved.startswith("Approved:")
    # The cautions of SPEC §12, in our words: each point is there.
    for phrase in ("patient samples", "drinking water", "not, for that reason alone",
                   "examples only", "ISO/IEC 17025", "local regulations",
                   "qualified person must review and approve"):
        assert phrase in t.cautions


def test_lab_template_takes_the_rest_from_the_bundled_one(tmp_path):
    t = load_template(_write(tmp_path, '[lab]\nname = "Kestrel Bioanalytical"\n'
                                       '[titles]\nsignoff = "Signatures"\n'))
    assert t.lab.name == "Kestrel Bioanalytical"
    assert t.lab.address == () and t.lab.accreditation == ""  # never our demo lab's
    assert t.titles.signoff == "Signatures"
    assert t.titles.fit == load_template().titles.fit
    assert t.cautions == load_template().cautions
    assert t.source == "lab.toml"


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ('[lab]\nname = "X"\ncolour = "red"\n', "template lab.toml: unknown key 'lab.colour'"),
        ('[lab]\nname = "X"\n[logo]\nfile = "a.png"\n', "template lab.toml: unknown key 'logo'"),
        ('[lab]\nname = "X"\n[show]\nappendix = true\n',
         "template lab.toml: unknown key 'show.appendix'"),
        ('[lab]\nname = "X"\n[page]\nsize = "A5"\n',
         "template lab.toml: key 'page.size' must be one of A4, Letter; got 'A5'"),
        ('[lab]\nname = "X"\n[page]\nmargin = 20\n',
         "template lab.toml: unknown key 'page.margin'"),
        ('[lab]\nname = "X"\n[show]\nfit = "yes"\n',
         "template lab.toml: key 'show.fit' must be true or false; got 'yes'"),
        ('[lab]\nname = "X"\naddress = "1 Road"\n',
         "template lab.toml: key 'lab.address' must be a list of strings; got '1 Road'"),
        ('[lab]\nname = 5\n', "template lab.toml: key 'lab.name' must be a string; got 5"),
        ('[lab]\naddress = ["1 Road"]\n', "template lab.toml: missing key 'lab.name'"),
        ('[cautions]\ntext = "Take care."\n', "template lab.toml: missing key 'lab.name'"),
        ('lab = "X"\n', "template lab.toml: key 'lab' must be a table"),
        ('[lab]\nname = "X"\n[cautions]\nwords = "x"\n',
         "template lab.toml: unknown key 'cautions.words'"),
        ('[verdicts]\naccepted = \n', "template lab.toml: not valid TOML"),
    ],
)
def test_bad_templates_name_the_key(tmp_path, text, message):
    with pytest.raises(TemplateError) as info:
        load_template(_write(tmp_path, text))
    assert str(info.value).startswith(message)


def test_missing_template_file(tmp_path):
    with pytest.raises(TemplateError, match="template nowhere.toml: file not found"):
        load_template(tmp_path / "nowhere.toml")
