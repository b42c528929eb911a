"""Case loading and preparation: messages and limits found wanting in review, pinned here."""

import math

import numpy as np
import pytest

import cable
from cable.case import CaseError, load_case
from cable.preparation import check_case_size

AXON = """
[membrane]
model = "hodgkin-huxley-1952"
temperature = 18.5
[fiber]
length = 1.0
dx = 0.02
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"
[[stimulus]]
amplitude = 1000
duration = 0.2
width = 0.1
[numerics]
dt = 0.01
[run]
duration = 8
[output]
every = 0.5
"""


@pytest.mark.parametrize("key", ["fiber.length.x", "membrane.model.h", "stimulus.0.amplitude.x", "numerics.dt.0",
                                 "run.duration.x.y"])
def test_set_below_a_value_is_a_case_error_naming_the_key(key):
    # these once raised TypeError (a traceback on the command line)
    with pytest.raises(CaseError, match="is a value, not a table"):
        load_case(AXON, [f"{key}=1"])


def test_set_beyond_a_list_says_how_to_address_an_entry():
    with pytest.raises(CaseError, match=r"index 1 is out of range; the case has 1 stimulus entry \(S1\)\. "
                                        r"Address an entry by its name, e.g\. stimulus\.S1\.amplitude"):
        load_case(AXON, ["stimulus.1.amplitude=100"])


def test_apd_levels_given_twice_are_refused_and_90_is_always_measured():
    with pytest.raises(CaseError, match=r"measure.apd_levels = \[90.0, 90.0\]: a level is given twice"):
        load_case(AXON, ["measure.apd_levels=[90, 90]"])
    case = load_case(AXON, ["measure.apd_levels=[50]"])
    assert case.apd_levels == (50.0, 90.0)
    ds = cable.simulate(case)
    # both levels measured, APD50 shorter than APD90 (definition); the wavelength is checked
    # against the excited region in tests/test_cardiac_strand.py
    centre = float(ds.x.sel(x=0.5, method="nearest"))
    apd50 = float(ds.apd.sel(level=50.0, beat=0, x=centre))
    assert 0.0 < apd50 < float(ds.apd.sel(level=90.0, beat=0, x=centre))


def test_temperature_message_shows_the_value_as_given():
    with pytest.raises(CaseError, match=r"membrane.temperature = '400 K': must be at most"):
        load_case(AXON, ["membrane.temperature='400 K'"])


def test_absurd_pulse_counts_and_prepacing_are_refused_before_running():
    # a count of 1e11 once built a list of 1e11 onsets (the process was killed for memory)
    with pytest.raises(CaseError, match=r"stimulus.S1.count = 100000000000: must be at most 100000"):
        load_case(AXON, ["stimulus.0.count=100000000000", "stimulus.0.cycle_length=20"])
    # 1e5 beats of 1e9 ms at dt 0.01 ms is 1e16 steps: once an endless pre-pacing
    with pytest.raises(CaseError, match="membrane.prepace: beats = 100000 .* at most 1e\\+09"):
        load_case(AXON, ["membrane.prepace.beats=100000", "membrane.prepace.cycle_length=1e9"])


def test_pulses_after_the_end_of_the_run_are_not_applied():
    case = load_case(AXON, ["stimulus.0.count=100000", "stimulus.0.cycle_length=5"])
    setup = cable.prepare(case)
    # onsets 0 and 5 ms fall inside the 8 ms run; the other 99998 change nothing
    np.testing.assert_array_equal(setup.pulses[:, 0], [0.0, 5.0])


def test_safety_factor_control_volume_must_be_shorter_than_the_fibre():
    with pytest.raises(CaseError, match="measure.safety_factor_length = 100: the control volume"):
        cable.prepare(load_case(AXON, ["measure.safety_factor=true", "measure.safety_factor_length=100"]))


def test_probe_memory_is_checked_before_running(monkeypatch):
    # 5 million nodes x (2 x 50 pulses + 8) stored crossings x 5 float64 arrays: 21.6 GB of probes,
    # against 16 GiB of free memory (the check reads it from os.sysconf)
    free = {"SC_AVPHYS_PAGES": 4 * 2 ** 20, "SC_PAGE_SIZE": 4096}
    monkeypatch.setattr("os.sysconf", lambda name: free[name])
    case = load_case(AXON, ["fiber.length=50", "fiber.dx=1e-5", "run.duration=0.1", "output.every=0.1",
                            "stimulus.0.duration=0.001", "stimulus.0.count=50", "stimulus.0.cycle_length=0.002"])
    with pytest.raises(CaseError, match="activation probes of 5000001 nodes"):
        check_case_size(case, output="result.nc")


# --------------------------------------------------------------------------- capacitance of a single cell
PASSIVE_CELL = {"membrane": {"model": "passive"}, "stimulus": [{"amplitude": 1.0, "duration": 200.0}],
                "numerics": {"dt": 0.01}, "run": {"duration": 60.0}, "output": {"every": 0.01}}
#: forward-Euler decay over tau/dt steps errs by about dt/(2 tau) = 5e-4 relative (tau >= 10 ms)
RC_TOLERANCE = 2e-3


@pytest.mark.parametrize("c_m", [1.0, 2.0])
def test_single_cell_capacitance_sets_the_membrane_time_constant(c_m):
    # RC membrane (cable theory, e.g. Jack, Noble & Tsien 1975): under a current step I,
    # V - E_L = I R_m (1 - exp(-t / tau)) with tau = R_m C_m; the amplitude does not depend on C_m
    case = dict(PASSIVE_CELL, membrane={"model": "passive", "capacitance": f"{c_m} uF/cm^2"})
    ds = cable.simulate(case)
    g_l, e_l = 0.1, -65.0                    # the model's defaults [mS/cm^2], [mV]
    tau = c_m / g_l                          # [ms]
    v = float(ds.vm.sel(t=tau, method="nearest"))
    assert v - e_l == pytest.approx(1.0 / g_l * (1.0 - math.exp(-1.0)), rel=RC_TOLERANCE)
    assert cable.load_case(case).capacitance == c_m


def test_capacitance_given_in_both_sections_must_agree():
    with pytest.raises(CaseError, match="membrane.capacitance = 2 and fiber.capacitance = 1 differ"):
        load_case(AXON, ["membrane.capacitance=2", "fiber.capacitance=1"])
    case = load_case(AXON, ["membrane.capacitance=2"])
    assert case.fiber.capacitance == 2.0
    # D = a / (2 R_i C_m) (cable theory): halved by twice the capacitance
    assert case.fiber.diffusivity == pytest.approx(load_case(AXON).fiber.diffusivity / 2.0, rel=1e-12)
