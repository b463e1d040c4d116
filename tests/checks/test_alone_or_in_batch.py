"""A curve's record does not depend on the other analytes of its run (issue 18, item 1).

``calib check`` fits the curves of a run together (``fit_batch``) when two or more can be
fitted, and a curve alone by itself (``fit_curve``); both go through the one engine in
``calib.fit.batch_block``, whose per-curve arithmetic is the same whatever the batch.  Here
the same invented standards are checked alone in a one-analyte run file and first in a
500-analyte run file (other analytes with more points, so the batch is padded and cut into
several blocks) through ``calib.service.check``; the analyte's check JSON and its record (the
canonical JSON whose SHA-256 is the record digest, issue time fixed) must be the same bytes.
The reference is the requirement itself: the same data gives the same record digest.
"""

from __future__ import annotations

import dataclasses
import json
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from calib import service
from calib.record.record import canonical_json
from calib.report.template import demo_template
from calib.workflow import build_issued_record

HEADER = [
    '"Zinc calibration, invented for a test"',
    "Laboratory: Fernbrook Water Laboratory (fictional)",
    "Run date: 2026-11-30",
    "",
    "Analyte,Sample,Concentration (mg/L),Response,Replicate,Include,Exclusion reason",
]
LEVELS = (0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0)
OTHERS = 499
WHEN = datetime(2026, 11, 30, 12, 0, tzinfo=UTC)


def _rows(analyte: str, levels, replicates: int, y) -> list[str]:
    rows = []
    for i, level in enumerate(levels):
        for r in range(replicates):
            rows.append(f"{analyte},Cal-{i + 1},{level!r},{float(y[i, r])!r},{r + 1},yes,")
    return rows


def _zinc() -> list[str]:
    rng = np.random.default_rng(20261130)
    x = np.array(LEVELS)[:, None]
    y = (0.013 + 0.82 * x - 0.0009 * x**2) * (1 + 0.01 * rng.standard_normal((x.size, 3)))
    return _rows("Zinc", LEVELS, 3, y)


def _others() -> list[str]:
    """499 invented analytes: 6–10 levels, 3 or 4 replicates, ranges over six decades."""
    rng = np.random.default_rng(5)
    rows = []
    for k in range(OTHERS):
        n_levels = int(rng.integers(6, 11))
        replicates = int(rng.integers(3, 5))
        scale = 10.0 ** rng.uniform(-3, 3)
        levels = np.round(np.geomspace(1, 200, n_levels) * scale, 6)
        slope = rng.uniform(0.1, 10)
        y = slope * levels[:, None] * (1 + 0.02 * rng.standard_normal((n_levels, replicates)))
        rows += _rows(f"Analyte {k:03d}", levels.tolist(), replicates, y + 0.001 * slope)
    return rows


@pytest.fixture(scope="module")
def run_files(tmp_path_factory) -> tuple[Path, Path]:
    # One file name in two folders: the check cites cells as file!cell.
    alone = tmp_path_factory.mktemp("alone") / "run.csv"
    many = tmp_path_factory.mktemp("many") / "run.csv"
    zinc = _zinc()
    alone.write_text("\n".join([*HEADER, *zinc]) + "\n", encoding="utf-8")
    many.write_text("\n".join([*HEADER, *zinc, *_others()]) + "\n", encoding="utf-8")
    return alone, many


@pytest.mark.parametrize(("model", "weighting"), [("linear", "1/x2"), ("quadratic", "none")])
def test_same_analyte_alone_and_among_500_gives_the_same_bytes(run_files, model, weighting):
    alone_file, many_file = run_files
    alone = service.check(alone_file, model=model, weighting=weighting)
    many = service.check(many_file, model=model, weighting=weighting)
    assert len(many.assessment.curves) == OTHERS + 1
    zinc = many.assessment.curves[0]
    assert zinc.analyte == "Zinc" and zinc.fit is not None
    # The batch really is padded: other curves have more points than zinc's 24.
    assert max(len(c.standards) for c in many.assessment.curves) > len(zinc.standards)

    # The check JSON of the analyte.
    assert alone.document["curves"][0]["analyte"] == "Zinc"
    assert (json.dumps(many.document["curves"][0], sort_keys=True).encode()
            == json.dumps(alone.document["curves"][0], sort_keys=True).encode())

    # The record: the run's one curve against the same curve taken from the big run (the
    # run section is the alone file's in both, since the files differ by design).
    template = demo_template()
    from_alone = build_issued_record(alone.assessment, prepared_by=None, created_at=WHEN,
                                     template=template)
    picked = dataclasses.replace(many.assessment, run=alone.assessment.run, curves=(zinc,))
    from_many = build_issued_record(picked, prepared_by=None, created_at=WHEN, template=template)
    assert from_many.canonical == from_alone.canonical
    assert canonical_json(from_many.body) == canonical_json(from_alone.body)
    assert from_many.record_id == from_alone.record_id
