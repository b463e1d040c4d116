"""Per-analyte ``[[analyte]]`` settings in profiles: parsing, refusals, ambiguity, and the fit.

The overridden lead curve is compared with statsmodels WLS on the same points
(quadratic, weights 1/x as the plasma profile sets); the untouched copper curve
with statsmodels WLS linear.  Refusals assert the message (file, line, both
entries named).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from calib.checks.overrides import override_for
from calib.checks.profile import load_profile, parse_profile, shipped_profiles
from calib.errors import ProfileError
from calib.workflow import check_file
from tests.scenario.icp_run import write_run

PLASMA = shipped_profiles()["plasma-spectrometry"]

PB_QUADRATIC = """
[[analyte]]
match = "pb*"
model = "quadratic"
digits = 4
note = "Pb 220.353 bends above 50 µg/L (invented validation)"

[analyte.rules.back-calculation]
tolerance_pct = 15
"""


def profile_file(tmp_path, extra: str):
    path = tmp_path / "fernbrook-icp.toml"
    path.write_text(PLASMA + extra, encoding="utf-8")
    return path


def wls(curve, quadratic: bool):
    used = [p for p in curve.standards if p.used]
    x = np.array([p.point.concentration for p in used])
    y = np.array([p.point.response for p in used])
    design = np.column_stack([np.ones_like(x), x, x * x] if quadratic else [np.ones_like(x), x])
    return sm.WLS(y, design, weights=1 / x).fit()


def test_lead_quadratic_the_rest_linear(tmp_path):
    run = write_run(tmp_path / "icp.csv")
    assessment = check_file(run, profile=profile_file(tmp_path, PB_QUADRATIC))
    curves = {c.analyte: c for c in assessment.curves}
    pb, cu = curves["Pb 220.353"], curves["Cu 324.754"]
    assert (pb.model.value, cu.model.value) == ("quadratic", "linear")
    ref = wls(pb, quadratic=True)  # statsmodels on the same points
    assert pb.fit.coefficients["quadratic"] == pytest.approx(ref.params[2], rel=1e-9)
    assert pb.fit.coefficients["slope"] == pytest.approx(ref.params[1], rel=1e-9)
    assert cu.fit.coefficients["slope"] == pytest.approx(wls(cu, quadratic=False).params[1],
                                                         rel=1e-9)
    settings = [c for c in pb.checks if c.id == "analyte-settings"]
    assert [c.detail for c in settings] == [
        ('Judged with [[analyte]] 1 (match "pb*"): model quadratic; back-calculation '
        "tolerance_pct = 15; 4 significant figures reported. Note: Pb 220.353 bends above "
        "50 µg/L (invented validation)")]
    assert all(c.id != "analyte-settings" for c in cu.checks)
    back = next(c for c in pb.checks if c.id == "back-calculation")
    assert "±15 %" in back.detail  # the entry's limit, not the profile's ±10 %
    assert "±10 %" in next(c for c in cu.checks if c.id == "back-calculation").detail
    # The record keeps the profile as written, entries included.
    assert assessment.profile.name == "plasma-spectrometry"
    assert "[[analyte]]" in assessment.profile.text


def test_command_line_model_wins_for_every_curve(tmp_path):
    run = write_run(tmp_path / "icp.csv")
    assessment = check_file(run, profile=profile_file(tmp_path, PB_QUADRATIC), model="linear")
    assert {c.model.value for c in assessment.curves} == {"linear"}


def test_two_patterns_that_can_match_one_analyte_are_refused_at_load(tmp_path):
    extra = PB_QUADRATIC + '\n[[analyte]]\nmatch = "*220*"\nweighting = "1/x2"\n'
    with pytest.raises(ProfileError) as caught:
        load_profile(profile_file(tmp_path, extra))
    message = str(caught.value)
    assert '[[analyte]] 1 (match "pb*") and [[analyte]] 2 (match "*220*") can both match one ' \
           "analyte (e.g. 'pb220')" in message
    line = (PLASMA + extra).splitlines().index('match = "*220*"')  # the header above it
    assert message.startswith(f"{tmp_path / 'fernbrook-icp.toml'}, line {line}: ")


def test_patterns_that_cannot_overlap_load(tmp_path):
    extra = ('\n[[analyte]]\nmatch = "Pb*"\ndigits = 4\n[[analyte]]\nmatch = "Cu*"\n'
             'digits = 4\n[[analyte]]\nmatch = "[!pc]*"\ndigits = 2\n')
    prof = load_profile(profile_file(tmp_path, extra))
    assert [override_for(a, prof.overrides).index for a in ("Pb 220.353", "cu 324.754",
                                                            "Zn 213.857")] == [1, 2, 3]


def test_runtime_guard_names_both_patterns():
    from calib.checks.overrides import AnalyteOverride

    a, b = AnalyteOverride(1, pattern="Pb*"), AnalyteOverride(2, pattern="*220*")
    with pytest.raises(ProfileError) as caught:
        override_for("Pb 220.353", [a, b])
    assert str(caught.value) == (
        "analyte 'Pb 220.353' is matched by [[analyte]] 1 (match \"Pb*\") and [[analyte]] 2 "
        "(match \"*220*\"): the profile is ambiguous; add a name entry for it or narrow a pattern")


def test_a_name_entry_is_more_specific_than_a_pattern():
    prof = parse_profile(PLASMA + PB_QUADRATIC + '\n[[analyte]]\nname = "PB 220.353"\n'
                         'model = "linear"\n', origin="p")
    assert override_for("Pb 220.353", prof.overrides).index == 2
    assert override_for("Pb 217.000", prof.overrides).index == 1


@pytest.mark.parametrize(("extra", "message"), [
    ('[[analyte]]\nmatch = "Pb*"\n[[analyte]]\nmatch = "PB*"\n',
     ('[[analyte]] 1 (match "Pb*") and [[analyte]] 2 (match "PB*") can both match one analyte '
     "(e.g. 'pb')")),
    ('[[analyte]]\nname = "Cu 324.754"\n[[analyte]]\nname = "cu 324.754"\n',
     ('[[analyte]] 1 (name "Cu 324.754") and [[analyte]] 2 (name "cu 324.754") name the same '
     "analyte; merge them into one entry")),
    ('[[analyte]]\nmatch = "Pb*"\nname = "Pb"\n',
     ("an [[analyte]] entry gives match (a pattern such as \"Pb*\") or name (one analyte), "
     "exactly one of them")),
    ('[[analyte]]\nweighting = "1/x"\n', "exactly one of them"),
    ('[[analyte]]\nmatch = "Pb*"\nmodel = "cubic"\n', "'cubic' is not a valid Model"),
    ('[[analyte]]\nmatch = "Pb*"\ndigits = 0\n', "digits must be a whole number from 1 to 8, got 0"),
    ('[[analyte]]\nmatch = "Pb*"\ncolour = "red"\n', "unknown key 'colour' in [[analyte]]"),
    ('[[analyte]]\nmatch = "Pb*"\n[analyte.rules.mandel]\nalpha = 0.01\n',
     "rule 'mandel' is not one of this profile's rules"),
    ('[[analyte]]\nmatch = "Pb*"\n[analyte.rules.back-calculation]\nwidth = 3\n',
     "rule 'back-calculation' has no parameter 'width'"),
    ('[[analyte]]\nmatch = "Pb*"\n[analyte.rules.back-calculation]\ntolerance_pct = -5\n',
     "rule 'back-calculation' parameter 'tolerance_pct' must be"),
])
def test_refusals_at_load(extra, message):
    with pytest.raises(ProfileError) as caught:
        parse_profile(PLASMA + "\n" + extra, origin="fernbrook-icp.toml")
    assert message in str(caught.value)
    assert str(caught.value).startswith("fernbrook-icp.toml, line ")


def test_refusal_names_the_line_of_the_entry():
    text = PLASMA + '\n[[analyte]]\nmatch = "Pb*"\ndigits = 99\n'
    line = text.splitlines().index("[[analyte]]") + 1
    with pytest.raises(ProfileError, match=f"^p.toml, line {line}: digits must be"):
        parse_profile(text, origin="p.toml")


def test_evaluate_run_applies_the_entries_in_one_pass(tmp_path):
    """Called directly, evaluate_run judges each analyte under its own entry, once.

    The lead curve is checked against statsmodels WLS (quadratic, weights 1/x) on the
    same points; the progress callback sees every analyte once, in one pass.
    """
    from calib.checks.evaluate import evaluate_run
    from calib.io import read_run

    run = read_run(write_run(tmp_path / "icp.csv"))
    calls: list[tuple[int, int]] = []
    assessment = evaluate_run(run, profile=load_profile(profile_file(tmp_path, PB_QUADRATIC)),
                              progress=lambda done, total: calls.append((done, total)))
    n = len(run.analytes)
    assert calls == [(i, n) for i in range(1, n + 1)]
    curves = {c.analyte: c for c in assessment.curves}
    pb = curves["Pb 220.353"]
    assert pb.model.value == "quadratic"
    assert pb.fit.coefficients["quadratic"] == pytest.approx(
        wls(pb, quadratic=True).params[2], rel=1e-9)
    assert [c.id for c in pb.checks].count("analyte-settings") == 1
    others = [c for a, c in curves.items() if a != "Pb 220.353"]
    assert others and all(c.model.value == "linear" for c in others)
    assert all("analyte-settings" not in [k.id for k in c.checks] for c in others)
    # The run keeps the profile as written and its own model.
    assert assessment.model.value == "linear"
    assert "[[analyte]]" in assessment.profile.text
