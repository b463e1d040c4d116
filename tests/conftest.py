"""Shared fixtures: small runs built in code."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from hypothesis import settings

from calib.run import Point, Run, SourceInfo

DATA = Path(__file__).parent / "data"

# The suite is a gate: the same examples on every machine and every run, so a pass or a
# failure can be reproduced.  `pytest --hypothesis-profile=explore` draws fresh examples.
settings.register_profile("gate", derandomize=True)
settings.register_profile("explore", derandomize=False)
settings.load_profile("gate")


def nist_xy(name: str) -> tuple[list[float], list[float]]:
    """x and y of a NIST StRD dataset copied into tests/data/nist_strd."""
    with (DATA / "nist_strd" / f"{name}.csv").open() as fh:
        rows = list(csv.DictReader(fh))
    return [float(r["x"]) for r in rows], [float(r["y"]) for r in rows]


def make_run(xs, ys, *, analyte="A", excluded=None) -> Run:
    """A Run of standards at concentrations xs with responses ys (rows from 2, column C)."""
    excluded = excluded or {}
    points = tuple(
        Point(
            analyte=analyte, concentration=float(x), response=float(y),
            source_cell=f"Run!C{i + 2}", included=i not in excluded,
            exclusion_reason=excluded.get(i),
        )
        for i, (x, y) in enumerate(zip(xs, ys))
    )
    return Run(SourceInfo(file="test.csv", sha256="0" * 64, sheet="Run"), points)


@pytest.fixture
def norris_run() -> Run:
    return make_run(*nist_xy("norris"), analyte="Norris")


@pytest.fixture(autouse=True)
def _no_lab_settings(tmp_path_factory, monkeypatch):
    """Every test starts with no lab template set up, whatever the developer's own settings."""
    monkeypatch.setenv("CALIB_CONFIG", str(tmp_path_factory.mktemp("config") / "calib.toml"))
