"""The check document and the canonical record."""

from __future__ import annotations

import hashlib
import json
from datetime import UTC, datetime

import pytest
import rfc8785

from calib.checks import evaluate_run
from calib.record import Record, build_record, canonical_json, check_document
from tests.conftest import make_run, nist_xy

CURVE_KEYS = {
    "analyte", "model", "weighting", "confidence", "n_points", "n_levels", "residual_df",
    "coefficients", "residual_sd", "r_squared", "r", "lod", "loq", "points", "checks", "verdict",
}
POINT_KEYS = {"source_cell", "level", "concentration", "response", "fitted", "back_calculated",
              "deviation_pct", "included", "exclusion_reason"}
CHECK_KEYS = {"id", "title", "verdict", "severity", "value", "limit", "detail"}
COEF_KEYS = {"estimate", "std_error", "t_value", "p_value", "ci_low", "ci_high"}
# Added beside the SPEC §7 keys, documented in calib/record/schemas/check-1.json.
EXTENSION_KEYS = {"exclusions"}
CURVE_EXTENSION_KEYS = {"reasons", "working_range", "refit", "response_basis"}


def test_check_document_has_exactly_the_spec_keys(norris_run):
    # SPEC §7: the calib.check/1 key names, plus only the documented extensions.
    doc = check_document(evaluate_run(norris_run))
    assert set(doc) == {"schema", "tool_version", "source", "profile", "curves", "verdict",
                        *EXTENSION_KEYS}
    assert doc["schema"] == "calib.check/1"
    # SPEC §7 names file, sha256 and sheet; the importer issue adds the layout read.
    assert set(doc["source"]) == {"file", "sha256", "sheet", "layout"}
    assert set(doc["profile"]) == {"name", "version", "sha256"}
    curve = doc["curves"][0]
    assert set(curve) == CURVE_KEYS | CURVE_EXTENSION_KEYS
    assert set(curve["coefficients"]) == {"intercept", "slope"}
    assert all(set(c) == COEF_KEYS for c in curve["coefficients"].values())
    assert all(set(p) == POINT_KEYS for p in curve["points"])
    # A statistical check adds the documented extension `test` (issue 15: the test named).
    assert all(set(c) - {"test"} == CHECK_KEYS for c in curve["checks"])
    assert any("test" in c for c in curve["checks"])


def test_check_document_keeps_full_precision(norris_run):
    # NIST StRD Norris certified slope 1.00211681802045: the JSON text round-trips the double.
    doc = check_document(evaluate_run(norris_run))
    slope = doc["curves"][0]["coefficients"]["slope"]["estimate"]
    assert json.loads(json.dumps(doc))["curves"][0]["coefficients"]["slope"]["estimate"] == slope
    assert slope == pytest.approx(1.00211681802045, rel=1e-12)


def test_unfittable_curve_serialises_with_nulls():
    doc = check_document(evaluate_run(make_run([1, 1, 1], [1.0, 1.1, 0.9])))
    curve = doc["curves"][0]
    assert curve["coefficients"] == {} and curve["residual_sd"] is None and curve["lod"] is None
    canonical_json(doc)  # no NaN anywhere: allow_nan=False would raise


def test_canonical_json_is_sorted_compact_utf8():
    assert canonical_json({"b": [1.5, None], "a": "µg/L"}) == '{"a":"µg/L","b":[1.5,null]}'.encode()
    with pytest.raises(ValueError):
        canonical_json({"x": float("nan")})


def test_record_digest_and_id_derive_from_canonical_bytes():
    run = make_run(*nist_xy("norris"))
    when = datetime(2026, 12, 1, 9, 30, tzinfo=UTC)
    record = build_record(evaluate_run(run), prepared_by="Zoë Łukasiewicz-Ng", created_at=when)
    assert record.digest == hashlib.sha256(record.canonical).hexdigest()
    # The id derives from the content (the body without signatures), so signing keeps it.
    content = {k: v for k, v in record.body.items() if k != "signatures"}
    # RFC 8785 canonical form, recomputed with the rfc8785 library.
    assert record.content_digest == hashlib.sha256(rfc8785.dumps(content)).hexdigest()
    assert record.record_id == "CR-" + record.content_digest[:12].upper()
    again = build_record(evaluate_run(run), prepared_by="Zoë Łukasiewicz-Ng", created_at=when)
    assert again.canonical == record.canonical
    assert Record.from_json(record.canonical).digest == record.digest
    body = record.body
    assert body["created_at"] == "2026-12-01T09:30:00Z"
    assert body["signatures"][0]["role"] == "prepared"
    assert body["signatures"][0]["name"] == "Zoë Łukasiewicz-Ng"
    assert body["profile"]["text"].startswith("# calib default acceptance profile")
    assert "qualified person must review and approve" in body["cautions"]
    detail = body["fit_details"][0]
    assert detail["coefficient_names"] == ["intercept", "slope"]
    assert detail["covariance"][0][0] == pytest.approx(0.232818234301152**2, rel=1e-11)


def test_any_edit_changes_the_digest():
    record = build_record(evaluate_run(make_run(*nist_xy("norris"))))
    edited = json.loads(record.canonical)
    edited["check"]["curves"][0]["points"][0]["response"] += 1e-9
    assert Record(edited).digest != record.digest


def test_from_json_refuses_other_documents():
    with pytest.raises(ValueError, match="not a calib.record/1 or calib.record/2 document"):
        Record.from_json(b'{"schema": "calib.check/1"}')
