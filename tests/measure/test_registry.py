"""The measurements registry (cable/measure/__init__.py): found by listing, declared once, in order."""

import numpy as np

import cable
from cable import measure
from cable.io import schema

#: what cable.results.measurements itself makes from the probes, before the registered ones
CORE = {"beat_onset", "activation_time", "captured", "blocked", "block_x", "upstroke_velocity",
        "resting_potential", "peak_potential", "apd"}

STRAND = {
    "membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
    "fiber": {"length": 0.5, "dx": 0.01, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
    "stimulus": [{"amplitude": 1000, "duration": 0.2}],
    "numerics": {"dt": 0.005},
    "run": {"duration": 8.0},
    "output": {"every": 0.5},
}


def test_the_package_measurements_are_found_in_order():
    names = [m.name for m in measure.registered()]
    assert {"conduction velocity", "wavelength", "block and conduction", "safety factor",
            "reentry on a ring"} <= set(names)
    orders = [m.order for m in measure.registered()]
    assert orders == sorted(orders)
    # the wavelength reads the CV: it must come after it
    assert names.index("wavelength") > names.index("conduction velocity")


def test_every_output_is_declared_once_in_the_schema_and_claimed_by_one_measurement():
    claimed = [name for m in measure.registered() for name in m.outputs]
    assert len(claimed) == len(set(claimed)), "an output claimed by two measurements"
    for name in claimed + sorted(CORE):
        assert name in schema.VARIABLES, name


def test_a_run_returns_only_core_and_claimed_outputs():
    ds = cable.simulate(STRAND)
    claimed = {name for m in measure.registered() for name in m.outputs}
    made = {v for v in ds.data_vars if v != "vm" and not v.startswith(schema.STATE_PREFIX)}
    assert made <= CORE | claimed, made - CORE - claimed
    assert "conduction_velocity" in made and "wavelength_apd" in made
    assert "revolution_time" not in made          # not a ring
    assert "safety_factor" not in made            # not asked for


def test_a_new_measurement_is_one_module(monkeypatch):
    # a measurement defined elsewhere, registered as a module of cable/measure would be:
    # the run then carries its output, declared in the schema like the others
    def arrival(inputs):
        return {"arrival_at_end": (("beat",), inputs.beats.activation[:, -1])}

    toy = measure.Measurement("arrival at the far end", ("arrival_at_end",), arrival, measure.on_a_strand, order=99)
    found = measure.registered()
    monkeypatch.setattr(measure, "registered", lambda: (*found, toy))
    monkeypatch.setitem(schema.VARIABLES, "arrival_at_end", (("beat",), "ms", "activation time at x = L", None))
    ds = cable.simulate(STRAND)
    np.testing.assert_array_equal(ds["arrival_at_end"].values, ds["activation_time"].values[:, -1])
    assert ds["arrival_at_end"].attrs["units"] == "ms"
