"""Block against a run that ended too early (``timed_out``), from the wave's own history."""

import numpy as np

import cable
from tests.conftest import hh_axon_case


def test_wave_still_travelling_at_the_end_is_timed_out_not_blocked():
    # The HH axon conducts at ~19 m/s (Hodgkin & Huxley 1952 computed 18.8 m/s): after
    # 0.8 ms the wave is mid-fibre, still travelling; a healthy axon does not block.
    short = cable.simulate(hh_axon_case(length=2.0, dx=0.01, duration=0.8))
    assert not bool(short.blocked[0]) and bool(short.timed_out[0])
    assert int(short.outcome[0]) == 3          # timed_out
    assert 0.5 < float(short.front_x[0]) < 1.9
    assert np.isnan(float(short.block_x[0]))
    full = cable.simulate(hh_axon_case(length=2.0, dx=0.01, duration=2.5))
    assert bool(full.conducted[0]) and not bool(full.timed_out[0]) and int(full.outcome[0]) == 1


def test_a_wave_that_stopped_is_blocked():
    # an inexcitable region (g_Na = 0) from 1 cm: the wave stops at its edge (passive
    # spread over about one space constant, ~0.25 cm for this axon), and the run goes on
    # long after, so the stop is seen: block, not timed out
    case = hh_axon_case(length=2.0, dx=0.01, duration=4.0)
    case["region"] = [{"start": 1.0, "end": 2.0, "scale": {"g_Na": 0.0}}]
    ds = cable.simulate(case)
    assert bool(ds.blocked[0]) and not bool(ds.timed_out[0]) and int(ds.outcome[0]) == 2
    assert 0.9 < float(ds.block_x[0]) < 1.4
