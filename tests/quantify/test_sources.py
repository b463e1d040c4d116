"""The curve from a run file or from an issued record (JSON or PDF): the same results either way."""

from __future__ import annotations

import json
from datetime import UTC, datetime

import numpy as np
import pytest

from calib.errors import InputError
from calib.quantify.document import QUANTIFY_SCHEMA, quantify_document
from calib.quantify.source import load_curves
from calib.quantify.workflow import quantify_files
from calib.workflow import check_file, issue_record
from tests.quantify.helpers import write_run_csv, write_samples_csv

WHEN = datetime(2026, 12, 1, 9, 30, tzinfo=UTC)


@pytest.fixture
def files(tmp_path):
    run = write_run_csv(tmp_path / "nitrate_run.csv")
    record, pdf = issue_record(check_file(run), prepared_by="R. Okafor", created_at=WHEN)
    (tmp_path / "record.json").write_bytes(record.canonical)
    (tmp_path / "record.pdf").write_bytes(pdf)
    return {"run": run, "json": tmp_path / "record.json", "pdf": tmp_path / "record.pdf",
            "samples": write_samples_csv(tmp_path / "batch.csv"), "record": record}


def test_record_curves_are_the_run_curves(files):
    live = load_curves(files["run"]).curves["Nitrate-N"]
    for kind in ("json", "pdf"):
        source = load_curves(files[kind])
        stored = source.curves["Nitrate-N"]
        assert source.kind == "record" and source.record_id == files["record"].record_id
        assert stored.coefficients == live.coefficients
        np.testing.assert_array_equal(stored.covariance, live.covariance)
        assert (stored.residual_sd, stored.residual_df, stored.lloq, stored.uloq) == (
            live.residual_sd, live.residual_df, live.lloq, live.uloq)
        assert stored.verdict == "accepted" and stored.unit == "mg/L"
        assert stored.lod == live.lod


def test_a_batch_quantified_against_the_record_matches_the_run(files):
    from_run = quantify_document(quantify_files(files["run"], files["samples"], created_at=WHEN))
    from_pdf = quantify_document(quantify_files(files["pdf"], files["samples"], created_at=WHEN))
    assert from_pdf["schema"] == QUANTIFY_SCHEMA
    assert from_pdf["curve"]["record_id"] == files["record"].record_id
    assert from_run["curve"]["record_id"] is None and from_run["curve"]["kind"] == "run"
    for a, b in zip(from_run["samples"], from_pdf["samples"]):
        assert a["reported"] == b["reported"] and a["flags"] == b["flags"]
        for key in ("concentration", "std_error", "ci_low", "ci_high"):
            if a[key] is None:
                assert b[key] is None
            else:
                assert b[key] == pytest.approx(a[key], rel=1e-12)


def test_the_json_document_lists_what_the_issue_asks(files):
    doc = quantify_document(quantify_files(files["json"], files["samples"], created_at=WHEN))
    json.dumps(doc, allow_nan=False)
    assert {"schema", "curve", "samples", "qc"} <= set(doc)
    keys = {"sample_id", "analyte", "n_replicates", "mean_response", "concentration",
            "std_error", "ci_low", "ci_high", "dilution_factor", "flags", "reported"}
    by_id = {s["sample_id"]: s for s in doc["samples"]}
    assert all(keys <= set(s) for s in doc["samples"])
    assert by_id["FB-103"]["reported"] == "> ULOQ" and by_id["FB-103"]["concentration"] is None
    assert by_id["FB-102"]["dilution_factor"] == 5.0
    assert by_id["FB-102"]["concentration"] == pytest.approx(30.0, rel=2e-3)
    assert by_id["FB-104"]["flags"] == ["no-reading"]
    assert doc["qc"]["analytes"][0]["verdict"] == "pass"
    assert doc["created_at"] == "2026-12-01T09:30:00Z" and doc["forced"] is False


def test_an_edited_record_is_refused(files, tmp_path):
    body = json.loads(files["json"].read_text(encoding="utf-8"))
    body["check"]["curves"][0]["coefficients"]["slope"]["estimate"] *= 1.01
    edited = tmp_path / "edited.json"
    edited.write_text(json.dumps(body, indent=1), encoding="utf-8")
    with pytest.raises(InputError, match="edited.json: the file is not in calib's canonical form: "
                                         "it was edited or written by other software; run calib "
                                         "verify on it"):
        load_curves(edited)


def test_a_record_has_no_samples_and_a_fixed_model(files):
    with pytest.raises(InputError, match="an issued record holds no samples; give the samples "
                                         "file after the record"):
        quantify_files(files["json"])
    with pytest.raises(ValueError, match="model apply to a run file; the curve of an issued "
                                         "record is fixed"):
        load_curves(files["json"], model="quadratic")


def test_a_json_file_that_is_not_a_record_is_refused(tmp_path):
    other = tmp_path / "other.json"
    other.write_text('{"schema": "calib.check/1"}', encoding="utf-8")
    with pytest.raises(InputError, match="other.json: the file is not a calibration record "
                                         r"\(not a calib.record/1 or calib.record/2 document\)"):
        load_curves(other)


def test_the_record_profile_supplies_the_qc_rule(files, tmp_path):
    profile = tmp_path / "lab.toml"
    profile.write_text('name = "lab"\nversion = "2"\n\n[[rules]]\nid = "qc"\nseverity = '
                       '"reject"\ntolerance_pct = 10\n', encoding="utf-8")
    default = load_curves(files["json"])
    assert default.qc_rule.severity == "review" and "names no qc rule" in default.notes[0]
    named = load_curves(files["json"], profile=profile)
    assert (named.qc_rule.tolerance_pct, named.qc_rule.severity) == (10.0, "reject")
    assert named.qc_rule.source == "rule qc of profile lab v2"
