"""Output files follow the umask; baselines and lab settings stay owner-only.

Rule of the trade (POSIX, common practice): a program creates files with mode
0666 less the process umask, so with umask 022 a report is 0644 (readable by a
reviewer on a shared drive) and with umask 077 it is 0600.
"""

from __future__ import annotations

import os
import stat

import pytest

from calib import output
from calib.cli.main import main
from calib.resources import bundled_folder

NITRATE = bundled_folder("sample_runs") / "fernbrook_nitrate_2026-11-30.xlsx"


@pytest.fixture
def umask():
    """Set a umask for the test and put the old one back."""
    old = os.umask(0o022)
    yield lambda mask: os.umask(mask)
    os.umask(old)


def mode(path) -> int:
    return stat.S_IMODE(os.stat(path).st_mode)


def test_reports_follow_umask_022(tmp_path, umask, capsys):
    umask(0o022)
    pdf, xlsx, csv = tmp_path / "r.pdf", tmp_path / "r.xlsx", tmp_path / "r.csv"
    code = main(["check", str(NITRATE), "--pdf", str(pdf), "--xlsx", str(xlsx), "--csv", str(csv)])
    capsys.readouterr()
    assert code == 0
    assert [mode(p) for p in (pdf, xlsx, csv)] == [0o644] * 3


def test_reports_follow_umask_077(tmp_path, umask, capsys):
    umask(0o077)
    csv = tmp_path / "r.csv"
    assert main(["check", str(NITRATE), "--csv", str(csv)]) == 0
    capsys.readouterr()
    assert mode(csv) == 0o600


def test_private_files_stay_0600_under_umask_022(tmp_path, umask):
    umask(0o022)
    public = output.write_atomic(tmp_path / "a.txt", b"1")
    private = output.write_atomic(tmp_path / "b.txt", b"2", private=True)
    assert (mode(public), mode(private)) == (0o644, 0o600)


def test_no_leftover_temporary_files_and_umask_unchanged(tmp_path, umask):
    umask(0o027)
    output.write_all([output.Output(tmp_path / "x.csv", b"1")])
    assert mode(tmp_path / "x.csv") == 0o640
    assert sorted(p.name for p in tmp_path.iterdir()) == ["x.csv"]
    assert os.umask(0o027) == 0o027  # file_mode() put the umask back


def test_lab_settings_stay_private(tmp_path, umask):
    umask(0o022)
    from calib.report.template import set_lab_template

    lab = tmp_path / "fernbrook.toml"
    lab.write_text('[lab]\nname = "Fernbrook Water Laboratory"\n', encoding="utf-8")
    settings = set_lab_template(lab, path=tmp_path / "settings.toml")
    assert mode(settings.source) == 0o600


def test_trend_pdf_follows_umask_and_frozen_baseline_stays_private(tmp_path, umask, capsys,
                                                                     monkeypatch):
    from calib.archive import Archive
    from tests.archive.cu_series import ANALYTE, INSTRUMENT, fill_cu_archive

    monkeypatch.delenv("CALIB_ARCHIVE", raising=False)
    umask(0o022)
    db = tmp_path / "a.sqlite"
    fill_cu_archive(db)
    with Archive(db) as archive:
        bad = next(c.record_id for c in archive.curve_history(ANALYTE)
                   if c.run_date == "2026-09-07")
    code = main(["trend", ANALYTE, "--archive", str(db), "--instrument", INSTRUMENT,
                 "--freeze", "--baseline", "8", "--reviewed-by", "M. Castellanos",
                 "--exclude", f"{bad}=nebuliser partly blocked",
                 "--pdf", str(tmp_path / "cu-trend.pdf")])
    capsys.readouterr()
    assert code in (0, 7)
    baseline = tmp_path / "a.sqlite.baselines" / "Cu 324.754@ICP-OES-2.v1.json"
    assert mode(baseline) == 0o600
    assert mode(tmp_path / "cu-trend.pdf") == 0o644
