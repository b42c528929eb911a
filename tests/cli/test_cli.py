"""The command line: exit codes, messages, the caution, and a real run."""

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def cable_cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "cable", *args], capture_output=True, text=True,
                          cwd=cwd or ROOT, timeout=300)


def test_help_carries_the_caution():
    out = cable_cli("--help")
    assert out.returncode == 0
    assert "not for clinical" in out.stdout


def test_run_example_case_writes_result(tmp_path):
    out = tmp_path / "axon.nc"
    res = cable_cli("run", "cases/squid_axon.toml", "-o", str(out))
    assert res.returncode == 0, res.stderr
    assert out.exists()
    assert "CV" in res.stdout


@pytest.mark.parametrize("args, key", [
    (["--set", "fiber.lenght=2"], "fiber.lenght"),
    (["--set", "fiber.dx='2 mV'"], "fiber.dx"),
    (["--set", "membrane.model='squid'"], "membrane.model"),
    (["--set", "membrane.scale.g_Nax=0.5"], "g_Nax"),
    (["--set", "nonsense"], "KEY=VALUE"),
])
def test_bad_input_exits_2_without_traceback(args, key):
    res = cable_cli("run", "cases/squid_axon.toml", *args)
    assert res.returncode == 2
    assert key in res.stderr
    assert "Traceback" not in res.stderr


def test_missing_case_file_exits_2():
    res = cable_cli("run", "no/such/case.toml")
    assert res.returncode == 2 and "not found" in res.stderr


def test_existing_output_not_overwritten(tmp_path):
    out = tmp_path / "x.nc"
    out.write_text("keep me")
    res = cable_cli("run", "cases/squid_axon.toml", "-o", str(out))
    assert res.returncode == 2 and "--overwrite" in res.stderr
    assert out.read_text() == "keep me"


def test_models_lists_and_shows():
    res = cable_cli("models")
    assert res.returncode == 0 and "hodgkin-huxley-1952" in res.stdout
    res = cable_cli("models", "passive")
    assert res.returncode == 0 and "g_L" in res.stdout
    res = cable_cli("models", "pasive")
    assert res.returncode == 2 and "Did you mean 'passive'" in res.stderr


def test_keys_lists_every_section():
    res = cable_cli("keys")
    assert res.returncode == 0
    for header in ("[membrane]", "[fiber]", "[stimulus.NAME]", "[numerics]", "[region.NAME]", "[measure]"):
        assert header in res.stdout
    assert "ohm*cm" in res.stdout
    res = cable_cli("keys", "fibr")
    assert res.returncode == 2 and "Did you mean 'fiber'" in res.stderr
    res = cable_cli("keys", "fibre")                      # the other spelling of [fiber] (issue 16)
    assert res.returncode == 0 and res.stdout.startswith("[fiber]")
