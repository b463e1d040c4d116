"""Fit options (model, weighting, confidence) are read once where they come in, alike everywhere.

Each edge (command line, web form, profile TOML and its [[analyte]] entries, library
call) refuses the same invalid options the same way, before anything is fitted; the
record states the weighting the fit used once.  The mean-rf rule: the mean of the
response factors yᵢ/xᵢ is the least-squares slope of y = RF·x with weights 1/xᵢ²
(closed form: minimising Σ (yᵢ − b·xᵢ)²/xᵢ² gives b = Σ (yᵢ/xᵢ)/n).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest

from calib.checks.profile import parse_profile, shipped_profiles
from calib.cli.main import main
from calib.errors import CalibError, OptionError, ProfileError
from calib.options import FitOptions, Model, Weighting
from tests.web.test_routes import archive, client, error_of, post  # noqa: F401 (fixtures)

ROOT = Path(__file__).resolve().parents[1]
FLUORIDE = ROOT / "sample_runs" / "fernbrook_fluoride_2026-11-30.csv"
GOLDEN = ROOT / "tests" / "data" / "golden"
MEAN_RF_PAIR = "model mean-rf is fitted with weighting 1/x2"
PERCENT = "got 95 (a fraction: write 0.95, not a percentage)"

#: (model, weighting) pairs fit/design.py refuses: mean-rf takes only its own 1/x2.
INVALID = [("mean-rf", w.value) for w in Weighting if w is not Weighting.INV_X2]


def _profile_text(defaults: str = "", analyte: str = "") -> str:
    text = shipped_profiles()["default"]
    start = text.index("[defaults]")
    end = text.index("zero_standards")
    return text[:start] + "[defaults]\n" + defaults + "\n" + text[end:] + analyte


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "sop.toml"
    path.write_text(text, encoding="utf-8")
    return path


# ------------------------------------------------------------------------ command line

@pytest.mark.parametrize(("model", "weighting"), INVALID)
def test_cli_refuses_a_pair_as_a_usage_error(capsys, model, weighting):
    code = main(["check", str(FLUORIDE), "--model", model, "--weighting", weighting])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1
    assert err[0].startswith(f"calib check: error: {MEAN_RF_PAIR}")
    assert f"got weighting {weighting}" in err[0]


def test_cli_refuses_a_weighting_the_profile_model_cannot_take(tmp_path, capsys):
    profile = _write(tmp_path, _profile_text('model = "mean-rf"\n'))
    assert main(["check", str(FLUORIDE), "--profile", str(profile), "--weighting", "1/x"]) == 2
    assert MEAN_RF_PAIR in capsys.readouterr().err
    # quantify, and several run files at once, refuse it the same way (not exit 3)
    assert main(["quantify", str(FLUORIDE), "--model", "mean-rf", "--weighting", "1/y"]) == 2
    assert capsys.readouterr().err.startswith(f"calib quantify: error: {MEAN_RF_PAIR}")
    assert main(["check", str(FLUORIDE), str(FLUORIDE.with_name("fernbrook_metals_stacked_"
                                                                  "2026-12-03.csv")),
                 "--model", "mean-rf", "--weighting", "none"]) == 2


def test_cli_refuses_a_weighting_an_analyte_entry_cannot_take(tmp_path, capsys):
    entry = '\n[[analyte]]\nname = "Fluoride"\nmodel = "mean-rf"\n'
    profile = _write(tmp_path, _profile_text('model = "linear"\n', entry))
    assert main(["check", str(FLUORIDE), "--profile", str(profile), "--weighting", "1/x"]) == 2
    err = capsys.readouterr().err
    assert MEAN_RF_PAIR in err and "[[analyte]] 1" in err


@pytest.mark.parametrize("command", ["check", "quantify"])
def test_cli_confidence_is_a_fraction(capsys, command):
    with pytest.raises(SystemExit) as info:
        main([command, str(FLUORIDE), "--confidence", "95"])
    assert info.value.code == 2
    assert PERCENT in capsys.readouterr().err


def test_cli_takes_mean_rf_alone_and_a_fractional_confidence(capsys):
    code = main(["check", str(FLUORIDE), "--model", "mean-rf", "--confidence", "0.99", "--json"])
    document = json.loads(capsys.readouterr().out)
    assert code in (0, 1)
    curve = document["curves"][0]
    assert (curve["model"], curve["weighting"], curve["confidence"]) == ("mean-rf", "1/x2", 0.99)


@pytest.mark.parametrize("command", ["check", "quantify"])
def test_help_shows_examples_of_the_options(capsys, command):
    with pytest.raises(SystemExit):
        main([command, "--help"])
    out = " ".join(capsys.readouterr().out.split())
    assert "e.g. --model quadratic" in out and "e.g. --weighting 1/x2" in out
    assert "e.g. --confidence 0.99 (95 is refused: write 0.95" in out
    assert "--model mean-rf" in out


# ------------------------------------------------------------------------ web form

@pytest.mark.parametrize(("data", "message"), [
    ({"model": "mean-rf", "weighting": "1/x"}, MEAN_RF_PAIR),
    ({"model": "mean-rf", "weighting": "none"}, MEAN_RF_PAIR),
    ({"confidence": "95"}, PERCENT),
    ({"confidence": "ninety"}, "such as 0.95; got 'ninety'"),
])
def test_web_form_refuses_the_same(client, data, message):  # noqa: F811
    with FLUORIDE.open("rb") as f:
        r = post(client, "/check", {"profile": "default", **data}, {"run": (FLUORIDE.name, f)})
    assert r.status_code == 400
    assert message.replace("'", "&#39;").lower() in error_of(r.text).lower()


def test_web_form_takes_mean_rf_and_a_confidence(client):  # noqa: F811
    with FLUORIDE.open("rb") as f:
        r = post(client, "/check", {"profile": "default", "model": "mean-rf",
                                    "confidence": "0.99"}, {"run": (FLUORIDE.name, f)})
    assert r.status_code == 200
    assert "model mean-rf, weighting 1/x2" in r.text and "99 % confidence" in r.text


# ------------------------------------------------------------------------ profile TOML

@pytest.mark.parametrize(("model", "weighting"), INVALID)
def test_profile_refuses_a_pair_at_load(model, weighting):
    text = _profile_text(f'model = "{model}"\nweighting = "{weighting}"\n')
    with pytest.raises(ProfileError, match=f"line \\d+: {MEAN_RF_PAIR}"):
        parse_profile(text, origin="sop.toml")


def test_profile_refuses_a_percentage_confidence():
    with pytest.raises(ProfileError, match=f"sop.toml, line \\d+: .*{re.escape(PERCENT)}"):
        parse_profile(_profile_text("confidence = 95\n"), origin="sop.toml")


def test_profile_mean_rf_takes_its_own_weighting():
    profile = parse_profile(_profile_text('model = "mean-rf"\n'))
    assert (profile.model, profile.weighting) == (Model.MEAN_RF, Weighting.INV_X2)


def test_analyte_entry_refuses_a_pair_at_load():
    entry = '\n[[analyte]]\nmatch = "F*"\nmodel = "mean-rf"\nweighting = "1/x"\n'
    with pytest.raises(ProfileError, match=f"sop.toml, line \\d+: {MEAN_RF_PAIR}"):
        parse_profile(_profile_text('model = "linear"\n', entry), origin="sop.toml")
    # an entry naming only its weighting over a mean-rf profile is refused too
    entry = '\n[[analyte]]\nmatch = "F*"\nweighting = "1/y"\n'
    with pytest.raises(ProfileError, match=MEAN_RF_PAIR):
        parse_profile(_profile_text('model = "mean-rf"\n', entry), origin="sop.toml")


# ------------------------------------------------------------------------ library

@pytest.mark.parametrize(("model", "weighting"), INVALID)
def test_library_refuses_the_pair_before_fitting(model, weighting):
    from calib import evaluate_run, read_run

    run = read_run(FLUORIDE)
    with pytest.raises(OptionError, match=MEAN_RF_PAIR) as info:
        evaluate_run(run, model=model, weighting=weighting)
    assert isinstance(info.value, CalibError) and isinstance(info.value, ValueError)


def test_library_confidence_rule_is_the_command_lines():
    from calib import evaluate_run, read_run

    with pytest.raises(OptionError, match=re.escape(PERCENT)):
        evaluate_run(read_run(FLUORIDE), confidence=95)
    assert evaluate_run(read_run(FLUORIDE), confidence=0.99).confidence == 0.99


def test_fit_options_given_over_defaults():
    base = FitOptions(Model.LINEAR, Weighting.INV_X, 0.95)
    assert base.given() == base
    assert base.given(weighting="1/y2").weighting is Weighting.INV_Y2
    mean_rf = base.given(model=Model.MEAN_RF)
    assert mean_rf.weighting is Weighting.INV_X2
    # leaving mean-rf for another model starts from no weighting, not mean-rf's 1/x2
    assert mean_rf.given(model="origin").weighting is Weighting.NONE
    with pytest.raises(OptionError, match="model must be one of"):
        base.given(model="cubic")
    with pytest.raises(OptionError, match=r"confidence must be a number from 0\.5 to below 1"):
        base.given(confidence=1.0)


# ------------------------------------------------------------------------ record

def _keys(value, found, path=""):
    if isinstance(value, dict):
        for key, item in value.items():
            if key in ("weighting", "weight_function"):
                found.append(f"{path}/{key}")
            _keys(item, found, f"{path}/{key}")
    elif isinstance(value, list):
        for i, item in enumerate(value):
            _keys(item, found, f"{path}/{i}")


def test_record_states_the_fit_weighting_once():
    from calib import build_record, read_run
    from calib.record import Record
    from calib.workflow import check_file

    assessment = check_file(FLUORIDE, model="mean-rf")
    record = build_record(assessment)
    body = json.loads(record.canonical)
    assert body["schema"] == "calib.record/2"
    found: list[str] = []
    _keys(body, found)
    assert found == ["/check/curves/0/weighting"]
    curve = body["check"]["curves"][0]
    assert curve["weighting"] == "1/x2"
    # what the fit used: the slope is the mean response factor (closed form, module docstring)
    points = [p for p in curve["points"] if p["included"]]
    x = np.array([p["concentration"] for p in points])
    y = np.array([p["response"] for p in points])
    assert curve["coefficients"]["slope"]["estimate"] == pytest.approx(np.mean(y / x), rel=1e-12)
    assert Record.from_json(record.canonical).body == body
    # the run's own read, with the profile's linear model, says its weighting the same way
    linear = build_record(check_file(FLUORIDE)).body
    assert linear["check"]["curves"][0]["weighting"] == "none"
    assert "weighting" not in linear["settings"] and read_run(FLUORIDE).analytes == ("Fluoride",)


def test_new_mean_rf_record_quantifies_with_its_weights():
    from calib import build_record
    from calib.quantify.curve import curves_from_record
    from calib.workflow import check_file

    body = build_record(check_file(FLUORIDE, model="mean-rf")).body
    curves, _ = curves_from_record(body)
    assert curves["Fluoride"].weight_function is Weighting.INV_X2


@pytest.mark.parametrize("folder", sorted(p.name for p in GOLDEN.iterdir() if p.is_dir()))
def test_old_records_still_read_and_render(folder):
    from calib.record import Record
    from calib.report import write_pdf

    data = (GOLDEN / folder / "nitrate.issued.json").read_bytes()
    record = Record.from_json(data)
    # Releases up to 0.2.0 wrote calib.record/1; 0.3.0 on, calib.record/2.
    before_format_2 = ("0.1.0", "2026-12-02", "0.2.0")
    assert record.body["schema"] == ("calib.record/1" if folder in before_format_2
                                     else "calib.record/2")
    pdf = write_pdf(record.body, digest=record.digest, record_id=record.record_id,
                    attachment=data)
    assert pdf[:5] == b"%PDF-"


def test_pdf_labels_cover_every_model_and_weighting():
    from calib.report.wording import MODELS, WEIGHTINGS, weighting_words

    assert set(WEIGHTINGS) == {w.value for w in Weighting}
    assert set(MODELS) == {m.value for m in Model}
    # a calib.record/1 mean-rf curve said "none"; its fit was weighted 1/x² all the same
    assert weighting_words("mean-rf", "none") == weighting_words("mean-rf", "1/x2")


def test_slope_history_joins_mean_rf_curves_of_both_record_versions():
    from types import SimpleNamespace as NS

    from calib.checks.history import slope_history

    def curve(seq, weighting, model="mean-rf"):
        figures = NS(model=model, weighting=weighting, slope=1.0 + seq / 100)
        return NS(record_id=f"CR-{seq}", seq=seq, run_date=f"2026-01-0{seq}", accepted=True,
                  figures=figures)

    curves = [curve(1, "none"), curve(2, "1/x2"), curve(3, "none", model="linear")]
    history = slope_history(curves, model=Model.MEAN_RF, weighting=Weighting.INV_X2, source="a")
    assert history.records == ("CR-1", "CR-2")
    linear = slope_history(curves, model=Model.LINEAR, weighting=Weighting.INV_X2, source="a")
    assert linear.records == ()
