"""The JSON Schema of ``calib.check/1`` (calib/record/schemas/check-1.json) against real documents."""

from __future__ import annotations

import copy
import json
from importlib import resources

import pytest

from calib.checks import evaluate_run, load_profile
from calib.checks.exclusions import Exclusion
from calib.checks.narrowing import WorkingRange
from calib.checks.profile import shipped_profiles
from calib.record import check_document
from calib.resources import bundled_folder
from calib.workflow import check_file
from tests.checks.runs import BIO_LEVELS, curve_points, make_run, qc_points, spread
from tests.conftest import make_run as make_simple_run

jsonschema = pytest.importorskip("jsonschema")

# SPEC §7: the keys of calib.check/1, copied here so the schema is checked against the spec.
SPEC_TOP = {"schema", "tool_version", "source", "profile", "curves", "verdict"}
SPEC_CURVE = {"analyte", "model", "weighting", "confidence", "n_points", "n_levels", "residual_df",
              "coefficients", "residual_sd", "r_squared", "r", "lod", "loq", "points", "checks",
              "verdict"}
SPEC_POINT = {"source_cell", "level", "concentration", "response", "fitted", "back_calculated",
              "deviation_pct", "included", "exclusion_reason"}
SPEC_CHECK = {"id", "title", "verdict", "severity", "value", "limit", "detail"}
SAMPLES = bundled_folder("sample_runs")


@pytest.fixture(scope="module")
def schema():
    text = resources.files("calib.record").joinpath("schemas/check-1.json").read_text("utf-8")
    loaded = json.loads(text)
    jsonschema.Draft202012Validator.check_schema(loaded)
    return loaded


def validate(document, schema):
    # Through JSON text, as a consumer of calib check --json sees it.
    jsonschema.Draft202012Validator(schema).validate(json.loads(json.dumps(document,
                                                                           allow_nan=False)))


def test_schema_requires_exactly_the_spec_keys(schema):
    assert set(schema["required"]) == SPEC_TOP
    defs = schema["$defs"]
    assert set(defs["curve"]["required"]) == SPEC_CURVE
    assert set(defs["point"]["required"]) == SPEC_POINT
    assert set(defs["check"]["required"]) == SPEC_CHECK
    assert set(schema["properties"]) - SPEC_TOP == {"exclusions", "standards"}
    assert set(defs["curve"]["properties"]) - SPEC_CURVE == {"reasons", "working_range", "refit",
                                                             "response_basis"}
    assert "working_range" in schema["description"] and "exclusions" in schema["description"]


@pytest.mark.parametrize("profile", sorted(shipped_profiles()))
@pytest.mark.parametrize("run", ["fernbrook_nitrate_2026-11-30.xlsx",
                                 "fernbrook_fluoride_2026-11-30.csv"])
def test_demo_runs_under_every_profile_validate(schema, profile, run):
    validate(check_document(check_file(SAMPLES / run, profile=profile)), schema)


def test_exclusions_ranges_and_proposals_validate(schema):
    points = curve_points(BIO_LEVELS, deviations={1: spread(20.1)}) + qc_points()
    profile = load_profile("bioanalytical")
    proposed = check_document(evaluate_run(make_run(points), profile=profile,
                                           exclusions=[Exclusion("Run!D9", "bubble")]))
    validate(proposed, schema)
    assert proposed["exclusions"] == [{"target": "Run!D9", "reason": "bubble",
                                       "cells": ["Run!D9"], "analytes": ["KX-214"]}]
    span = proposed["curves"][0]["working_range"]
    assert span["applied"] is None and span["proposed"]["lloq"] == 2
    assert span["proposed"]["verdict"] == "accepted"
    applied = check_document(evaluate_run(make_run(points), profile=profile,
                                          ranges=[WorkingRange(2, 1000)]))
    validate(applied, schema)
    span = applied["curves"][0]["working_range"]
    assert span["applied"]["as_proposed"] and span["lloq"] == 2
    assert span["applied"]["original"]["verdict"] == "rejected"
    assert applied["curves"][0]["verdict"] == "accepted"


def test_unfitted_curve_and_unreadable_standard_validate(schema):
    run = make_simple_run([1, 1, 1], [1.0, float("nan"), 0.9], excluded={1: "response not given"})
    document = check_document(evaluate_run(run))
    validate(document, schema)
    assert document["curves"][0]["points"][1]["response"] is None
    assert document["curves"][0]["reasons"][0].startswith("The curve could not be fitted")


@pytest.mark.parametrize("damage", [
    lambda d: d.pop("verdict"),
    lambda d: d["curves"][0].pop("coefficients"),
    lambda d: d["curves"][0]["checks"][0].update(verdict="ok"),
    lambda d: d["curves"][0].update(colour="green"),
    lambda d: d["source"].update(sha256="not-a-digest"),
    lambda d: d["curves"][0]["coefficients"].update(cubic={}),
])
def test_schema_rejects_damaged_documents(schema, damage):
    document = check_document(check_file(SAMPLES / "fernbrook_nitrate_2026-11-30.xlsx"))
    broken = copy.deepcopy(document)
    damage(broken)
    with pytest.raises(jsonschema.ValidationError):
        validate(broken, schema)
