"""The progress bar: drawn on a terminal's standard error only, never on pipes or with --json."""

from __future__ import annotations

import io
import json

import pytest

from calib.cli import progress as progress_module
from calib.cli.main import main
from calib.cli.progress import ProgressBar, progress_for
from calib.resources import bundled_folder

NITRATE = bundled_folder("sample_runs") / "fernbrook_nitrate_2026-11-30.xlsx"


class Terminal(io.StringIO):
    """A stand-in for a terminal's standard error."""

    def isatty(self) -> bool:
        return True


def test_bar_draws_in_place_and_clears_its_line():
    out = io.StringIO()
    bar = ProgressBar(out, label="checking curves", delay=0, width=4)
    bar(1, 4)
    bar(4, 4)
    assert out.getvalue() == ("\rchecking curves [#---] 1/4"
                              "\rchecking curves [####] 4/4")
    bar.close()
    assert out.getvalue().endswith("\r" + " " * 26 + "\r")
    bar.close()  # a second close writes nothing more
    assert out.getvalue().count("\r") == 4


def test_bar_waits_before_it_first_appears():
    now = [0.0]
    out = io.StringIO()
    bar = ProgressBar(out, delay=1.0, width=2, clock=lambda: now[0])
    bar(1, 10)
    assert out.getvalue() == ""
    bar.close()
    assert out.getvalue() == ""  # nothing drawn, nothing to clear
    now[0] = 1.5
    bar(2, 10)
    assert out.getvalue() == "\r [--] 2/10"


def test_shorter_line_overwrites_a_longer_one():
    out = io.StringIO()
    bar = ProgressBar(out, delay=0, width=1)
    bar(10, 10)
    bar(9, 100)
    assert out.getvalue() == "\r [#] 10/10\r [-] 9/100"
    bar2 = ProgressBar(io.StringIO(), delay=0, width=1)
    bar2(100, 100)
    bar2(1, 100)
    assert bar2._stream.getvalue().endswith("\r [-] 1/100  ")


def test_no_bar_on_a_pipe_or_with_json():
    assert progress_for(stream=io.StringIO()) is None
    assert progress_for(stream=Terminal(), json_output=True) is None
    assert isinstance(progress_for(stream=Terminal()), ProgressBar)


def test_nothing_is_drawn_for_an_empty_run():
    out = io.StringIO()
    ProgressBar(out, delay=0)(0, 0)
    assert out.getvalue() == ""


@pytest.fixture
def instant(monkeypatch):
    """Show the bar from the first curve, as a long run would."""
    monkeypatch.setattr(progress_module, "DELAY", 0.0)


def test_check_draws_the_bar_on_a_terminal(monkeypatch, capsys, instant):
    terminal = Terminal()
    monkeypatch.setattr("sys.stderr", terminal)
    assert main(["check", str(NITRATE)]) == 0
    drawn = terminal.getvalue()
    assert "\rchecking curves [" in drawn and "] 1/1" in drawn
    assert drawn.split("1/1", 1)[1].startswith("\r" + " " * len("checking curves ["))
    assert "checking curves" not in capsys.readouterr().out


def test_check_json_draws_nothing_even_on_a_terminal(monkeypatch, capsys, instant):
    terminal = Terminal()
    monkeypatch.setattr("sys.stderr", terminal)
    assert main(["check", str(NITRATE), "--json"]) == 0
    assert "\r" not in terminal.getvalue() and "[" not in terminal.getvalue()
    json.loads(capsys.readouterr().out)  # stdout is the document alone


def test_check_on_a_pipe_draws_nothing(capsys, instant):
    assert main(["check", str(NITRATE)]) == 0
    assert "\r" not in capsys.readouterr().err


def test_demo_draws_one_bar_per_run_on_a_terminal(monkeypatch, tmp_path, capsys, instant):
    terminal = Terminal()
    monkeypatch.setattr("sys.stderr", terminal)
    assert main(["demo", "--out", str(tmp_path)]) == 0
    drawn = terminal.getvalue()
    assert "checking fernbrook_nitrate_2026-11-30.xlsx [" in drawn
    assert "checking fernbrook_fluoride_2026-11-30.csv [" in drawn
