"""`cable check CASE` and `cable run --dry-run` (issue 16, item 1): print what a run implies, run nothing."""

import pytest

from cable.cli import main
from tests.conftest import hh_axon_toml

CASE = hh_axon_toml(length=1.0, dx=0.01, dt=0.005, duration=4.0)


@pytest.fixture
def case_file(tmp_path):
    path = tmp_path / "case.toml"
    path.write_text(CASE)
    return path


def test_check_prints_the_derived_quantities(case_file, capsys):
    assert main(["check", str(case_file), "--timed-steps", "100"]) == 0
    out = capsys.readouterr().out
    # 1 cm at 0.01 cm: 101 nodes; the stimulus zone [0, 0.1] cm: nodes 0-10 (closed form of the grid)
    for text in ("101 nodes", "800 steps", "dx 100 um", "space constant", "upstroke extent", "stability:",
                 "stimulus S1: nodes 0-10", "CV window: 0.25-0.75 cm, nodes 25-75", "memory:", "time: about",
                 "warnings: none"):
        assert text in out, text


def test_dry_run_writes_nothing(case_file, tmp_path, capsys):
    result = tmp_path / "out.nc"
    assert main(["run", str(case_file), "-o", str(result), "--dry-run", "-q"]) == 0
    out = capsys.readouterr().out
    assert "disk: up to" in out and "stimulus S1" in out
    assert not result.exists() and list(tmp_path.iterdir()) == [case_file]


def test_dry_run_refuses_an_existing_result_as_the_run_does(case_file, tmp_path, capsys):
    result = tmp_path / "out.nc"
    result.write_text("keep me")
    assert main(["run", str(case_file), "-o", str(result), "--dry-run"]) == 2
    assert "--overwrite" in capsys.readouterr().err and result.read_text() == "keep me"


@pytest.mark.parametrize("command", [["check"], ["run", "--dry-run"]])
def test_what_the_run_refuses_exits_2(case_file, command, capsys):
    # forward-Euler diffusion at dt 0.005 ms: its limit here is dx^2/(2D) = 1.5e-4 ms
    args = [*command, str(case_file), "--set", "numerics.diffusion='forward-euler'"]
    assert main(args) == 2
    captured = capsys.readouterr()
    assert "stability limit" in captured.err and "nodes" not in captured.out
