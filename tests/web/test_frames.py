"""Notebook API: results convert to pandas DataFrames and show as tables in Jupyter."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

import calib
from calib.quantify.workflow import quantify_files
from calib.workflow import check_file

RUNS = Path(__file__).resolve().parents[2] / "sample_runs"


def test_fit_frame_matches_the_coefficient_table():
    # y = 2x with small noise; estimates are compared with the fit's own table.
    fit = calib.fit_curve([1, 2, 3, 4, 5], [2.1, 3.9, 6.2, 8.1, 9.8])
    frame = fit.to_frame()
    assert list(frame.index) == list(fit.names)
    for row in fit.coefficient_table():
        assert frame.loc[row.name, "estimate"] == row.estimate
        assert frame.loc[row.name, "ci_high"] == row.ci_high
    assert "<table" in fit._repr_html_()


def test_run_and_curve_frames():
    assessment = check_file(RUNS / "fernbrook_anions_wide_2026-12-01.xlsx")
    runs = assessment.to_frame()
    assert isinstance(runs, pd.DataFrame)
    assert list(runs.index) == [c.analyte for c in assessment.curves]
    assert list(runs["verdict"]) == [c.verdict.value for c in assessment.curves]
    curve = assessment.curves[0]
    standards = curve.to_frame()
    assert len(standards) == len(curve.standards)
    assert standards["used"].sum() == curve.fit.n_points
    assert "<table" in assessment._repr_html_() and "<table" in curve._repr_html_()


def test_batch_frame():
    report = quantify_files(RUNS / "fernbrook_phosphate_2026-12-06.tsv")
    frame = report.batch.to_frame()
    assert len(frame) == len(report.batch.samples)
    assert list(frame["reported"]) == [r.reported for r in report.batch.samples]


def test_the_readme_worked_example_runs(tmp_path, monkeypatch, capsys):
    readme = (RUNS.parent / "README.md").read_text(encoding="utf-8")
    start = readme.index("```python", readme.index("## Python API")) + len("```python")
    code = readme[start:readme.index("```", start)]
    monkeypatch.chdir(tmp_path)
    # The README block itself is the code under test.
    exec(compile(code.replace('"sample_runs/', f'"{RUNS.as_posix()}/'), "README", "exec"), {})  # noqa: S102
    assert [p.name for p in tmp_path.iterdir()] == ["phosphate-record.pdf"]
    assert (tmp_path / "phosphate-record.pdf").read_bytes().startswith(b"%PDF")
    out = capsys.readouterr().out
    assert "Orthophosphate-P  accepted" in out
    # The example issues with no lab template set up, and the record it wrote verifies.
    assert out.endswith(" default.toml\nTrue\n")
