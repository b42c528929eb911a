"""Cases and process helpers shared by the hostile tests (issue 19).

The cases are tiny Hodgkin & Huxley (1952) axons (radius 238 um, R_i 35.4 ohm*cm,
18.5 degC: their paper's axon) that run in well under a second; what the tests check
is what happens around the run (files, processes, signals), not its numbers.
"""

import os
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

#: a short run (51 nodes, 4 ms)
SMALL = """
[membrane]
model = "hodgkin-huxley-1952"
temperature = 18.5
[fiber]
length = 0.5
dx = 0.01
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"
[[stimulus]]
amplitude = 1000
duration = 0.2
width = 0.05
[numerics]
dt = 0.01
[run]
duration = {duration}
[output]
every = {every}
"""


def small_case(duration=4.0, every=0.1) -> str:
    return SMALL.format(duration=duration, every=every)


def env() -> dict:
    out = dict(os.environ)
    out["PYTHONPATH"] = str(ROOT) + os.pathsep + out.get("PYTHONPATH", "")
    return out


def cable_cmd(*args) -> list[str]:
    return [sys.executable, "-m", "cable", *map(str, args)]


def start(*args, **kw) -> subprocess.Popen:
    """``cable ARGS`` as a separate process (stdout and stderr piped, text)."""
    return subprocess.Popen(cable_cmd(*args), stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            cwd=ROOT, env=env(), **kw)


def wait_for(predicate, proc=None, timeout=120.0, what="the condition"):
    """Poll ``predicate`` every 20 ms; fail if ``proc`` ends first or after ``timeout`` s."""
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout:
        if predicate():
            return
        if proc is not None and proc.poll() is not None:
            said = proc.stderr.read() if proc.stderr else ""
            raise AssertionError(f"the process ended (rc {proc.returncode}) before {what}: {said}")
        time.sleep(0.02)
    raise AssertionError(f"timed out waiting for {what}")
