"""Shared test settings: a non-interactive matplotlib backend and a seeded generator."""

import importlib.util
import os
import sys
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("MPLBACKEND", "Agg")


@pytest.fixture(autouse=True)
def _floating_point_faults_fail():
    """Every floating-point fault in numpy (overflow, invalid operation, division by zero) raises.

    Underflow is the one exception: a result below the smallest normal number rounds to a
    subnormal or zero, which is the correctly rounded answer (IEEE 754), and scipy's own
    solve_ivp underflows at t = 0 (``np.nextafter(0, inf)``) in every BDF run.
    """
    with np.errstate(all="raise", under="ignore"):
        yield


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def hh_axon_case(length=3.0, dx=0.01, dt=0.005, duration=None, **extra):
    """The Hodgkin & Huxley (1952) axon: radius 238 um, R_i 35.4 ohm*cm, 18.5 degC."""
    case = {
        "membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
        "fiber": {"length": length, "dx": dx, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 1000.0, "duration": 0.2, "width": 0.1}],
        "numerics": {"dt": dt},
        "run": {"duration": duration or (3.0 + 0.6 * length)},
        "output": {"every": 0.5},
    }
    for key, value in extra.items():
        case.setdefault(key, {}).update(value)
    return case


def hh_axon_toml(**kw) -> str:
    """:func:`hh_axon_case` written as a case file's TOML text."""
    from cable.case.load import dumps_toml

    return dumps_toml(hh_axon_case(**kw))


def ms_strand(count, cycle_length=None):
    """A 0.5 cm Mitchell & Schaeffer (2003) strand in the ten Tusscher et al. (2004) tissue form."""
    stim = {"amplitude": 100.0, "duration": 1.0, "width": 0.1, "count": count}
    if cycle_length:
        stim["cycle_length"] = cycle_length
    return {"membrane": {"model": "mitchell-schaeffer-2003"},
            "fiber": {"length": 0.5, "dx": 0.025, "conductivity": 1000.0 / 162.0, "surface_to_volume": 2000.0,
                      "capacitance": 2.0},
            "stimulus": [stim], "numerics": {"dt": 0.02}, "run": {"duration": 400.0}, "output": {"every": 1.0}}


def oracle(name: str):
    """The hand-written module of the built-in model ``name``, kept as a test oracle.

    ``tests/membrane/oracles/<name with _>.py`` (passive, fitzhugh-nagumo, mitchell-schaeffer-2003,
    luo-rudy-1991, ten-tusscher-panfilov-2006, hodgkin-huxley-1952: the models the package now
    generates from their descriptions).
    """
    stem = name.replace("-", "_")
    full = f"cable_oracle_{stem}"
    if full not in sys.modules:
        spec = importlib.util.spec_from_file_location(full, Path(__file__).parent / "membrane" / "oracles" / f"{stem}.py")
        module = importlib.util.module_from_spec(spec)
        sys.modules[full] = module  # before running it: numba looks its functions' module up by name
        try:
            spec.loader.exec_module(module)
        except BaseException:
            del sys.modules[full]
            raise
    return sys.modules[full]


@pytest.fixture
def oracles_registered(monkeypatch):
    """The hand-written oracles reachable by the registry as ``oracle-NAME`` (so that a strand
    runs them through cable.simulate), each one object per process."""
    import sys
    from dataclasses import replace

    import cable
    import cable.membrane

    real = cable.membrane.get_model
    made = {}

    def get_model(name):
        name = str(name)
        if name.startswith("oracle-"):
            if name not in made:
                made[name] = replace(oracle(name[len("oracle-"):]).MODEL, name=name)
            return made[name]
        return real(name)

    for module in (cable.membrane, sys.modules["cable.preparation"], sys.modules["cable.kernels.loops"], cable):
        monkeypatch.setattr(module, "get_model", get_model)


def assert_stored_alike(mine, stored):
    """``mine`` equals a Dataset read from a file in values, dtypes and attribute types.

    ``xarray.testing.assert_identical`` compares values and attributes, not the dtype of a
    variable nor the type of an attribute (``np.int64(1) == 1``, ``[1] == np.array([1])``).
    """
    import xarray as xr

    xr.testing.assert_identical(mine, stored)

    def kind(value):
        return (type(value), value.dtype, value.shape) if isinstance(value, np.ndarray) else type(value)

    assert {k: kind(v) for k, v in mine.attrs.items()} == {k: kind(v) for k, v in stored.attrs.items()}
    for name, var in mine.variables.items():
        assert var.dtype == stored[name].dtype, (name, var.dtype, stored[name].dtype)
        assert {k: kind(v) for k, v in var.attrs.items()} == {k: kind(v) for k, v in stored[name].attrs.items()}, name
