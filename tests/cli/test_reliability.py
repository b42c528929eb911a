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


def interruptible():
    """Start the child with SIGINT at its default disposition, as a foreground command has it.

    A command started in the background by a non-interactive shell (``pytest ... &`` in a
    script) inherits SIGINT as ignored (POSIX), and Python then installs no KeyboardInterrupt
    handler: cable, like any program, keeps an inherited ignore, so without this the
    SIGINT tests would wait for a run that never hears them."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def start(case_path, out, *extra):
    return subprocess.Popen([sys.executable, "-m", "cable", "run", str(case_path), "-o", str(out), *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT,
                            preexec_fn=interruptible)


def wait_for_tmp(folder, proc, timeout=300):
    # until the temporary file has grown past its header: the time loop is running and has
    # streamed samples (with a cold kernel cache the file exists while the loop still
    # compiles, and a signal then would find no sample written yet)
    t0 = time.time()
    first = None
    while time.time() - t0 < timeout:
        tmp = list(folder.glob(".*.tmp"))
        if tmp:
            size = tmp[0].stat().st_size
            first = size if first is None else first
            if size > first:
                time.sleep(0.5)  # let it stream a few more blocks
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
    rc = proc.wait(timeout=300)
    assert rc == 130
    with netCDF4.Dataset(out) as nc:      # opens: not corrupt
        assert nc.getncattr("status") == "partial"
        assert nc.getncattr("partial_reason") == "interrupted"
        done = float(nc.getncattr("completed_until_ms"))
        assert done > 0
        assert nc.variables["vm"].shape[1] == 201
    assert not list(tmp_path.glob(".*.tmp"))


def test_existing_file_without_overwrite_is_refused_and_left_untouched(tmp_path):
    # refused before the run starts (exit 2), so no signal is needed to test it
    case = tmp_path / "long.toml"
    case.write_text(LONG_CASE)
    out = tmp_path / "long.nc"
    out.write_bytes(b"previous result")
    proc = start(case, out)
    rc = proc.wait(timeout=300)
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


#: a run whose measuring is slowed down, so that a second signal lands while the result
#: is completed (the held window of cable.simulate); the CLI as `cable run` calls it
SLOW_FINISH = """
import importlib, sys, time
sim = importlib.import_module("cable.simulate")  # the module, not the function cable.simulate
measure = sim.measurements
def slow(*args, **kwargs):
    print("measuring", file=sys.stderr, flush=True)
    time.sleep(3.0)
    return measure(*args, **kwargs)
sim.measurements = slow
from cable.cli import main
sys.exit(main(sys.argv[1:]))
"""


def test_second_signal_while_the_result_is_completed_still_leaves_a_partial_file(tmp_path):
    case = tmp_path / "long.toml"
    case.write_text(LONG_CASE)
    out = tmp_path / "long.nc"
    proc = subprocess.Popen([sys.executable, "-c", SLOW_FINISH, "run", str(case), "-o", str(out)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT,
                            preexec_fn=interruptible)
    wait_for_tmp(tmp_path, proc)
    proc.send_signal(signal.SIGTERM)
    line = ""
    while "measuring" not in line:           # the first signal stopped the loop
        line = proc.stderr.readline()
        assert line or proc.poll() is None, "the run ended before measuring"
    proc.send_signal(signal.SIGTERM)         # the second lands inside the held window
    proc.send_signal(signal.SIGINT)
    rc = proc.wait(timeout=300)
    assert rc == 130
    with netCDF4.Dataset(out) as nc:
        assert nc.getncattr("status") == "partial"
        assert float(nc.getncattr("completed_until_ms")) > 0
    assert not list(tmp_path.glob(".*.tmp"))


SWEEP_CASE = """
[membrane]
model = "hodgkin-huxley-1952"
temperature = 18.5
[fiber]
length = 1.0
dx = 0.01
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"
[[stimulus]]
amplitude = 1000
duration = 0.2
width = 0.1
[numerics]
dt = 0.0002
[run]
duration = 10
[output]
every = 0.5
[sweep]
"membrane.scale.g_Na" = {start = 1.0, stop = 0.3, num = 24}
"""


@pytest.mark.slow
def test_sweep_stopped_by_sigterm_resumes_to_the_uninterrupted_result(tmp_path):
    import numpy as np
    import xarray as xr

    case = tmp_path / "sweep.toml"
    case.write_text(SWEEP_CASE)
    out = tmp_path / "sweep.nc"
    points = tmp_path / "sweep.nc.points"
    proc = subprocess.Popen([sys.executable, "-m", "cable", "sweep", str(case), "-o", str(out), "-q"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    t0 = time.time()
    while not list(points.glob("point-*.nc")):
        assert proc.poll() is None, proc.stderr.read()
        assert time.time() - t0 < 180, "no point was stored"
        time.sleep(0.05)
    proc.send_signal(signal.SIGTERM)
    assert proc.wait(timeout=300) == 130
    assert not out.exists()                   # no result file until every point is in
    stored = len(list(points.glob("point-*.nc")))
    assert 0 < stored < 24, stored            # some points kept, some left for the resume
    res = subprocess.run([sys.executable, "-m", "cable", "sweep", str(case), "-o", str(out)],
                         capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert res.returncode == 0, res.stderr
    assert f"{stored} of 24 points already in" in res.stderr
    whole = tmp_path / "whole.nc"
    res = subprocess.run([sys.executable, "-m", "cable", "sweep", str(case), "-o", str(whole), "-q"],
                         capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert res.returncode == 0, res.stderr
    with xr.open_dataset(out) as a, xr.open_dataset(whole) as b:
        for name in ("conduction_velocity", "activation_time", "status"):
            np.testing.assert_array_equal(a[name].values, b[name].values)  # exact: same code, same machine


#: `cable run` with the writer failing at sample K, by an interrupt (before the time
#: loop's own handler is in place) or an unexpected error (which no handler catches)
FAILING_WRITER = """
import sys
from cable.io import netcdf
K, ERROR = int(sys.argv[1]), sys.argv[2]
write = netcdf.StreamWriter.write
def failing(self, k, values):
    if k == K:
        raise KeyboardInterrupt if ERROR == "interrupt" else RuntimeError("disk on fire")
    return write(self, k, values)
netcdf.StreamWriter.write = failing
from cable.cli import main
sys.exit(main(sys.argv[3:]))
"""


@pytest.mark.parametrize("k, error, rc", [(0, "interrupt", 130), (3, "error", 1)])
def test_no_temporary_file_survives_a_run_stopped_outside_the_loop_handlers(tmp_path, k, error, rc):
    case = tmp_path / "short.toml"
    case.write_text(LONG_CASE.replace("duration = 1000000", "duration = 5"))
    out = tmp_path / "short.nc"
    res = subprocess.run([sys.executable, "-c", FAILING_WRITER, str(k), error, "run", str(case), "-o", str(out)],
                         capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert res.returncode == rc, res.stderr
    assert not out.exists()
    assert not list(tmp_path.glob(".*.tmp"))


def test_rerun_of_a_numerical_failure_reproduces_it(tmp_path):
    # the partial file keeps every sample time (NaN past the failure); the rerun, failing at
    # the same step, holds only the samples computed: they must compare as identical
    case = tmp_path / "bad.toml"
    case.write_text(LONG_CASE.replace("duration = 1000000", "duration = 50")
                    .replace("dt = 0.005", "dt = 0.1\ngating = \"forward-euler\"\ndiffusion = \"backward-euler\"")
                    .replace("every = 0.05", "every = 0.1"))
    out = tmp_path / "bad.nc"
    res = subprocess.run([sys.executable, "-m", "cable", "run", str(case), "-o", str(out), "-q"],
                         capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert res.returncode == 3, res.stderr
    res = subprocess.run([sys.executable, "-m", "cable", "rerun", str(out), "-q"],
                         capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert res.returncode == 0, res.stdout + res.stderr
    assert "vm: identical" in res.stdout
