"""Small strands for the protocol tests (kept short: cardiac strands are expensive)."""

import copy

# ten Tusscher et al. 2004 (Am J Physiol 286:H1573) tissue settings: rho 162 ohm*cm,
# S 0.2 /um, C_m 2 uF/cm^2 -> D 0.00154 cm^2/ms
SIGMA = 1000.0 / 162.0     # mS/cm
CHI = 2000.0               # 1/cm
CM = 2.0                   # uF/cm^2


def cardiac_strand(model, *, scale=None, length=1.0, dx=0.025, dt=0.02, sigma=SIGMA, amplitude=100.0,
                   count=2, cycle_length=1000.0, duration=1000.0, width=0.1):
    """A 1 cm strand paced ``count`` times at ``cycle_length`` from its left end (1 Hz by default).

    Per-area models (LR1: currents per area at C_m = 1 uF/cm^2, Luo & Rudy 1991) run at
    C_m = 1 with chi doubled (the same D) and the stimulus halved (the same amplitude/C_m).
    """
    from cable.membrane import get_model

    cm, chi, stim = (1.0, CHI * CM, 1.0 / CM) if get_model(model).current_basis == "area" else (CM, CHI, 1.0)
    case = {
        "membrane": {"model": model},
        "fiber": {"length": length, "dx": dx, "conductivity": sigma, "surface_to_volume": chi, "capacitance": cm},
        "stimulus": [{"amplitude": amplitude * stim, "duration": 1.0, "width": width, "count": count,
                      "cycle_length": cycle_length}],
        "numerics": {"dt": dt},
        "run": {"duration": duration},
        "output": {"every": 1.0},
    }
    if scale:
        case["membrane"]["scale"] = dict(scale)
    return copy.deepcopy(case)


def hh_axon(length=2.0, dx=0.01, dt=0.005, duration=8.0, width=0.1):
    """The Hodgkin & Huxley (1952) axon: radius 238 um, R_i 35.4 ohm*cm, 18.5 degC."""
    return {
        "membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
        "fiber": {"length": length, "dx": dx, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 1000.0, "duration": 0.2, "width": width}],
        "numerics": {"dt": dt},
        "run": {"duration": duration},
        "output": {"every": 0.1},
    }


def write_case(tmp_path, case, name="case.toml"):
    """Write ``case`` as a TOML file for the CLI tests."""
    from cable.case.load import dumps_toml

    path = tmp_path / name
    path.write_text(dumps_toml(case))
    return path


def cable_cli(*args, cwd=None):
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[2]
    return subprocess.run([sys.executable, "-m", "cable", *args], capture_output=True, text=True,
                          cwd=cwd or root, timeout=600)
