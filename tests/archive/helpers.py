"""Records for the archive tests, built in code from invented runs (Fernbrook, fictional).

The runs are judged with a small profile of their own, so that the archive
tests do not move when the shipped default profile gains rules.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import numpy as np

from calib.checks import evaluate_run
from calib.checks.profile import parse_profile
from calib.record import Record, build_record
from calib.run import Point, Run, SourceInfo

LEVELS = (0.5, 1.0, 2.0, 5.0, 8.0, 10.0)
FAKE_PDF = b"%PDF-1.7\n% stand-in bytes: the archive stores a PDF, it does not render one\n"
T0 = datetime(2026, 9, 1, 8, 0, tzinfo=UTC)

TEST_PROFILE = parse_profile("""\
name = "archive-tests"
version = "1"
description = "Levels, intercept and back-calculated standards only."
sources = ["calib test suite"]

[[rules]]
id = "min-levels"
severity = "reject"
min_levels = 5

[[rules]]
id = "intercept-zero"
severity = "review"
alpha = 0.05

[[rules]]
id = "back-calculation"
severity = "reject"
tolerance_pct = 15
""", origin="archive test profile")


def make_record(slope: float = 0.25, intercept: float = 0.0, *, seed: int = 0,
                noise: float = 0.002, analyte: str = "Nitrate-N", run: int = 0,
                instrument: str | None = "IC-2 (conductivity detector)",
                prepared_by: str | None = "R. Okafor", profile=None) -> Record:
    """A record of one invented nitrate run: 6 levels × 3 replicates, dated ``run`` days on."""
    rng = np.random.default_rng(seed)
    points = tuple(
        Point(analyte=analyte, concentration=x,
              response=float(intercept + slope * x + rng.normal(0, noise)),
              source_cell=f"run.csv!D{row + 9}", replicate=row % 3 + 1, level=f"Cal-{row // 3 + 1}")
        for row, x in enumerate(x for x in LEVELS for _ in range(3))
    )
    when = T0 + timedelta(days=run)
    metadata = {"Laboratory": "Fernbrook Water Laboratory (fictional)",
                "Run date": when.date().isoformat(), "Operator": "R. Okafor"}
    if instrument:
        metadata["Instrument"] = instrument
    source = SourceInfo(file=f"nitrate_{when.date()}.csv", sha256=f"{seed:064x}")
    the_run = Run(source, points, metadata=metadata,
                  units={"concentration": "mg/L", "response": "µS·min"})
    assessment = evaluate_run(the_run, profile=profile or TEST_PROFILE)
    return build_record(assessment, prepared_by=prepared_by,
                        created_at=when + timedelta(hours=2))


def variant(record: Record, minutes: int) -> Record:
    """The same curve issued ``minutes`` later: a distinct record, built without refitting."""
    when = (T0 + timedelta(minutes=minutes)).strftime("%Y-%m-%dT%H:%M:%SZ")
    signatures = [{**s, "signed_at": when} for s in record.body["signatures"]]
    return Record({**record.body, "created_at": when, "signatures": signatures})


def pdf_for(record: Record) -> bytes:
    """A one-page PDF carrying ``record``'s JSON as its attached record data, as every calib
    record PDF does (a stand-in for the rendered record: the archive checks the attachment)."""
    import io

    from reportlab.pdfgen.canvas import Canvas

    from calib.report.embed import embed_file

    out = io.BytesIO()
    canvas = Canvas(out, invariant=1)
    canvas.drawString(72, 720, f"Stand-in page for {record.record_id}")
    embed_file(canvas, name="calib-record.json", data=record.canonical,
               mime_type="application/json")
    canvas.save()
    return out.getvalue()
