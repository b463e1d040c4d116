"""Profile files: validation errors name the line and say what is wrong."""

from __future__ import annotations

import pytest

from calib.checks import load_profile, parse_profile
from calib.errors import ProfileError

GOOD = """\
name = "lab-sop-12"
version = "3"

[defaults]
model = "linear"

[[rules]]
id = "min-levels"
severity = "reject"
min_levels = 6
"""


def test_shipped_default_profile_loads():
    profile = load_profile("default")
    assert profile.name == "default" and profile.confidence == 0.95
    assert [r.id for r in profile.rules] == [
        "min-levels", "intercept-zero", "slope-reference", "back-calculation", "lack-of-fit",
        "quadratic-term", "mandel", "residual-runs", "drift", "outliers", "variance-ends",
        "variance-levels", "weighting-advice", "rf-rsd", "method-sd"]
    assert len(profile.sha256) == 64


def test_file_profile_and_defaults_filled(tmp_path):
    path = tmp_path / "sop.toml"
    path.write_text(GOOD, encoding="utf-8")
    profile = load_profile(path)
    assert profile.rules[0].params == {"min_levels": 6}
    assert profile.weighting.value == "none"


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        ("colour = 'red'\n" + GOOD, "line 1: unknown key 'colour'"),
        (GOOD.replace('model = "linear"', 'model = "cubic"'), "line 5: model must be one of linear, origin, quadratic, mean-rf; got 'cubic'"),
        (GOOD + "colour = 'red'\n", "line 7: rule 'min-levels' has no parameter 'colour'"),
        (GOOD.replace("min_levels = 6", "min_levels = 1"),
         "line 7: rule 'min-levels' parameter 'min_levels' must be at least 2, got 1"),
        (GOOD.replace("min_levels = 6", "min_level = 6"),
         ("line 7: rule 'min-levels' has no parameter 'min_level' (known: min_levels, "
         "quadratic_min_levels)")),
        (GOOD.replace('"reject"', '"fatal"'),
         "line 7: rule 'min-levels' needs severity reject, review or info; got 'fatal'"),
        (GOOD.replace('"min-levels"', '"r-squared"'), "line 7: unknown rule id 'r-squared'"),
        (GOOD.replace('version = "3"', ""), "'version' must be given as a non-empty text"),
    ],
)
def test_profile_errors_name_the_line(edit, message):
    with pytest.raises(ProfileError) as info:
        parse_profile(edit, origin="sop.toml")
    assert message in str(info.value)
    assert str(info.value).startswith("sop.toml")


def test_unknown_profile_name():
    with pytest.raises(ProfileError, match="neither a shipped profile"):
        load_profile("no-such-profile")
