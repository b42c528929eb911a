"""The progress line of `cable run` (issue 16, item 2): drawn on a terminal only, cleared after."""

import io

import numba
import pytest

from cable.cli import _progress, main
from cable.cli._progress import RunProgress
from cable.kernels.jit import compile_timer
from tests.cli.test_check_cli import CASE


class Terminal(io.StringIO):
    def isatty(self):
        return True


class Clock:
    def __init__(self):
        self.now = 0.0

    def __call__(self):
        return self.now


def test_line_gives_simulated_time_rate_and_time_left():
    stream, clock = Terminal(), Clock()
    bar = RunProgress(stream, clock=clock)
    clock.now = 1.0
    bar(10.0, 100.0)           # the first interval (compiling happens in it): no rate yet
    clock.now = 3.0
    bar(30.0, 100.0)           # 20 ms simulated in 2 s since the first interval: 10 ms/s, 70 ms left = 7 s
    text = stream.getvalue()
    assert "simulated 10 of 100 ms (10%)" in text
    assert "simulated 30 of 100 ms (30%), 10 ms/s, 0:00:07 left" in text
    bar.clear()
    assert stream.getvalue().endswith("\r" + " " * len("simulated 30 of 100 ms (30%), 10 ms/s, 0:00:07 left") + "\r")


def test_silent_when_not_a_terminal():
    stream, clock = io.StringIO(), Clock()
    bar = RunProgress(stream, clock=clock)
    for k in range(1, 20):
        clock.now = float(k)
        bar(k, 20.0)
    bar.clear()
    assert stream.getvalue() == ""


@pytest.fixture
def case_file(tmp_path):
    path = tmp_path / "case.toml"
    path.write_text(CASE)
    return path


def test_run_draws_on_a_terminal_and_clears(case_file, capsys, monkeypatch):
    monkeypatch.setattr(_progress, "FIRST_S", 0.0)
    monkeypatch.setattr(_progress, "REDRAW_S", 0.0)
    terminal = Terminal()
    monkeypatch.setattr("sys.stderr", terminal)
    assert main(["run", str(case_file)]) == 0
    drawn = terminal.getvalue()
    assert "simulated 4 of 4 ms (100%)" in drawn
    note = drawn.find("compiling the kernels took")
    if note >= 0:   # a cold kernel cache: the compile note is said after the line is cleared
        drawn = drawn[:note]
    last = drawn.rsplit("\r", 3)
    assert last[-1] == "" and last[-2].strip() == "" and len(last[-2]) >= len(last[-3].rstrip())  # blanked
    assert "simulated" not in capsys.readouterr().out


@pytest.mark.parametrize("quiet", [[], ["-q"]])
def test_run_is_silent_in_a_pipe_or_quiet(case_file, capsys, monkeypatch, quiet):
    monkeypatch.setattr(_progress, "FIRST_S", 0.0)
    monkeypatch.setattr(_progress, "REDRAW_S", 0.0)
    if quiet:
        monkeypatch.setattr("sys.stderr", Terminal())
    import sys

    assert main(["run", str(case_file), *quiet]) == 0
    err = sys.stderr.getvalue() if quiet else capsys.readouterr().err
    assert "simulated" not in err


def test_compile_timer_counts_compilation_only():
    fresh = numba.njit(lambda x: x + 1.5)      # not cached: compiled on first call
    with compile_timer() as first:
        fresh(1.0)
    with compile_timer() as again:
        fresh(2.0)
    assert first.seconds is not None and first.seconds > 0
    assert again.seconds is None


def test_run_says_how_long_compiling_took(case_file, capsys, monkeypatch):
    # what numba's compile events measured is said after the run; nothing when nothing compiled
    import contextlib

    import cable.kernels.jit as jit

    class Timed:
        seconds = 12.3

    monkeypatch.setattr(jit, "compile_timer", lambda: contextlib.nullcontext(Timed()))
    assert main(["run", str(case_file)]) == 0
    assert "compiling the kernels took 12.3 s of this run's time" in capsys.readouterr().err
    Timed.seconds = None
    assert main(["run", str(case_file)]) == 0
    assert "compiling the kernels took" not in capsys.readouterr().err
