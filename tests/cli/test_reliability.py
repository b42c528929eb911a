"""Nothing lost: interrupts, numerical failure and partial files, with real processes and signals."""

import signal
import subprocess
import sys
import time
from pathlib import Path

import netCDF4
import pytest

ROOT = Path(__file__).resolve().parents[2]

LONG_CASE = """
[membrane]
model = "hodgkin-huxley-1952"
temperature = 18.5
[fiber]
length = 2.0
dx = 0.01
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"
[[stimulus]]
amplitude = 1000
duration = 0.2
count = 1000
cycle_length = 20
[numerics]
dt = 0.005
[run]
duration = 1000000
[output]
every = 0.05
"""


def start(case_path, out, *extra):
    return subprocess.Popen([sys.executable, "-m", "cable", "run", str(case_path), "-o", str(out), *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)


def wait_for_tmp(folder, proc, timeout=120):
    t0 = time.time()
    while time.time() - t0 < timeout:
        if list(folder.glob(".*.tmp")):
            time.sleep(1.0)  # let it stream a few blocks
            return
        if proc.poll() is not None:
            raise AssertionError(proc.stderr.read())
        time.sleep(0.1)
    raise AssertionError("the run never started writing")


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT])
def test_interrupt_leaves_a_complete_file_marked_partial(tmp_path, sig):
    case = tmp_path / "long.toml"
    case.write_text(LONG_CASE)
    out = tmp_path / "long.nc"
    proc = start(case, out)
    wait_for_tmp(tmp_path, proc)
    proc.send_signal(sig)
    rc = proc.wait(timeout=120)
    assert rc == 130
    with netCDF4.Dataset(out) as nc:      # opens: not corrupt
        assert nc.getncattr("status") == "partial"
        assert nc.getncattr("partial_reason") == "interrupted"
        done = float(nc.getncattr("completed_until_ms"))
        assert done > 0
        assert nc.variables["vm"].shape[1] == 201
    assert not list(tmp_path.glob(".*.tmp"))


def test_interrupt_with_existing_file_and_no_overwrite_leaves_it_untouched(tmp_path):
    case = tmp_path / "long.toml"
    case.write_text(LONG_CASE)
    out = tmp_path / "long.nc"
    out.write_bytes(b"previous result")
    proc = start(case, out)
    rc = proc.wait(timeout=120)
    assert rc == 2
    assert out.read_bytes() == b"previous result"


def test_numerical_failure_exits_3_with_partial_file(tmp_path):
    # forward-Euler gates at dt = 0.1 ms are unstable for HH at 18.5 degC (rates ~ 30 /ms)
    case = tmp_path / "bad.toml"
    case.write_text(LONG_CASE.replace("duration = 1000000", "duration = 50")
                    .replace("dt = 0.005", "dt = 0.1\ngating = \"forward-euler\"\ndiffusion = \"backward-euler\"")
                    .replace("every = 0.05", "every = 0.1"))
    out = tmp_path / "bad.nc"
    res = subprocess.run([sys.executable, "-m", "cable", "run", str(case), "-o", str(out)],
                         capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert res.returncode == 3, res.stderr
    assert "near t =" in res.stderr and "x =" in res.stderr
    assert "forward-euler" in res.stderr
    assert "Traceback" not in res.stderr
    with netCDF4.Dataset(out) as nc:
        assert nc.getncattr("status") == "partial"
