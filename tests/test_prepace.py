"""membrane.prepace.until_change (cable/prepace.py): pace until APD90 changes by less than
the given amount between consecutive beats, with beats as the cap.

The criterion is the key's definition: the test checks that the pacing stopped at the
first beat that met it (the beat before did not), and that stopping there is pacing that
many beats (the same state bit for bit: the APD probe only reads the potential).
"""

import numpy as np
import pytest

import cable
from cable.membrane import get_model
from cable.prepace import _pace_cell, _pace_cell_adaptive
from cable.kernels.loops import loop

#: ten Tusscher & Panfilov (2006) epicardial cell at 600 ms: its APD90 still drifts from the
#: published 1 Hz initial state (measured here: 16 beats to change by < 0.1 ms per beat)
CELL = {"membrane": {"model": "ten-tusscher-panfilov-2006", "prepace": {"beats": 200, "cycle_length": 600}},
        "stimulus": [{"amplitude": 52, "duration": 1}], "run": {"duration": 2}, "numerics": {"dt": 0.02},
        "output": {"every": 1}}
UNTIL = 0.1  # ms


def _apds(beats):
    model = get_model("ten-tusscher-panfilov-2006")
    p = model.default_parameters()
    return _pace_cell(loop(model.name), model, p, model.resting_potential, model.initial_states(), beats,
                      600.0, 52.0, 1.0, 0.02, model.ion_scale(1.0))


def test_pacing_stops_at_the_first_beat_that_changes_apd90_by_less_than_until_change():
    setup = cable.prepare(cable.load_case(CELL, [f"membrane.prepace.until_change={UNTIL}"]))
    beats = setup.prepace["beats"]
    assert 2 < beats < 200
    assert f"{beats} beats" in setup.prepace["summary"] and "until_change" in setup.prepace["summary"]
    v, s, ends, apd = _apds(beats)
    steps = np.abs(np.diff(apd))
    assert steps[-1] < UNTIL and np.all(steps[:-1] >= UNTIL), steps
    assert setup.prepace["last_beat_apd90_change"] == steps[-1]
    # the same state as pacing that many beats by count
    fixed = cable.prepare(cable.load_case(CELL, [f"membrane.prepace.beats={beats}"]))
    assert np.array_equal(fixed.s0, setup.s0) and np.array_equal(fixed.v0, setup.v0)
    assert fixed.prepace["beats"] == beats


def test_a_cap_below_the_beats_needed_says_it_was_not_reached():
    setup = cable.prepare(cable.load_case(CELL, [f"membrane.prepace.until_change={UNTIL}",
                                                 "membrane.prepace.beats=4"]))
    assert setup.prepace["beats"] == 4 and not setup.prepace["settled"]
    assert "not reached within 4 beats" in setup.prepace["summary"]


def test_run_records_the_beats_taken():
    ds = cable.simulate(cable.load_case(CELL, [f"membrane.prepace.until_change={UNTIL} ms"]))
    assert 2 < ds.attrs["prepace_beats"] < 200 and "until_change" in ds.attrs["prepace"]


def test_adaptive_pacing_keeps_the_apd90_of_every_beat_within_the_contract():
    # issue 15's cell contract: APD90 within 0.5 ms of the fixed step (here the fixed 5 us
    # step of the same pacing, every beat); the steps taken are reported
    model = get_model("ten-tusscher-panfilov-2006")
    p = model.default_parameters()
    args = (model, p, model.resting_potential, model.initial_states(), 3, 600.0, 52.0, 1.0, 0.005)
    *_, fixed = _pace_cell(loop(model.name), *args, model.ion_scale(1.0))
    *_, ends, adaptive, counts = _pace_cell_adaptive(*args, 0.5, model.ion_scale(1.0), "tabulated")
    assert len(adaptive) == len(ends) == 3
    assert np.max(np.abs(np.array(adaptive) - np.array(fixed))) <= 0.5
    assert counts.sum() < 0.2 * 3 * 600.0 / 0.005      # the long steps were taken


def test_adaptive_pacing_from_the_case_stops_by_until_change_and_reports_its_steps():
    case = cable.load_case(CELL, [f"membrane.prepace.until_change={UNTIL}", "numerics.dt=0.005",
                                  "numerics.dt_max=0.5"])
    setup = cable.prepare(case)
    beats = setup.prepace["beats"]
    assert 2 < beats < 200 and "adaptive steps 0.005 to 0.5 ms" in setup.prepace["summary"]
    model = get_model("ten-tusscher-panfilov-2006")
    *_, apd, counts = _pace_cell_adaptive(model, model.default_parameters(), model.resting_potential,
                                          model.initial_states(), beats, 600.0, 52.0, 1.0, 0.005, 0.5,
                                          model.ion_scale(1.0), "tabulated")
    steps = np.abs(np.diff(apd))
    assert steps[-1] < UNTIL and np.all(steps[:-1] >= UNTIL), steps
    assert int(setup.prepace["steps_taken"].sum()) == int(counts.sum())


@pytest.mark.parametrize("reaction", ["rush-larsen-2", "heun"])
def test_pacing_uses_the_case_reaction_scheme(reaction):
    # pre-pacing integrates the cell as the run would (numerics.reaction, numerics.gating):
    # two beats of LR1 (Luo & Rudy 1991) paced before the run leave the states that a run of
    # the same two beats with the same scheme ends in; to 1e-9 relative (the two loops place
    # the pulses from different clocks, t = 0 each beat against t = k * 400 ms: rounding only).
    # dt = 5 us: within heun's stability limit on LR1 (12.9 us, cable/kernels/schemes.py)
    beats = {"amplitude": 40, "duration": 1}
    num = {"dt": 0.005, "reaction": reaction}
    paced = cable.prepare(cable.load_case({
        "membrane": {"model": "luo-rudy-1991", "prepace": {"beats": 2, "cycle_length": 400, **beats}},
        "stimulus": [beats], "numerics": num, "run": {"duration": 1}, "output": {"every": 1}}))
    run = cable.simulate({"membrane": {"model": "luo-rudy-1991"}, "stimulus": [{**beats, "count": 2, "cycle_length": 400}],
                          "numerics": num, "run": {"duration": 800}, "output": {"every": 800, "states": ["h", "Ca_i"]}})
    model = get_model("luo-rudy-1991")
    for name in ("h", "Ca_i"):
        j = model.state_names.index(name)
        assert paced.s0[0, j] == pytest.approx(float(run[f"state_{name}"].values.ravel()[-1]), rel=1e-9), name
    assert paced.v0[0] == pytest.approx(float(run.vm.values.ravel()[-1]), rel=1e-9)
    # and not the states of the default scheme (the check can fail)
    default = cable.prepare(cable.load_case({
        "membrane": {"model": "luo-rudy-1991", "prepace": {"beats": 2, "cycle_length": 400, **beats}},
        "stimulus": [beats], "numerics": {"dt": 0.005}, "run": {"duration": 1}, "output": {"every": 1}}))
    assert abs(default.v0[0] - paced.v0[0]) > 1e-9 * abs(paced.v0[0])
