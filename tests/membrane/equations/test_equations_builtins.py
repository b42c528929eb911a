"""The descriptions of the built-in models (cable/membrane/equations/<model>.py) against the
hand-written kernels (cable/membrane/<model>.py), the test oracles until the built-ins are
generated (issue 12, item 1): the same parameters and states, one reaction step on random states
to rounding, a single-cell action potential to 1e-6 and, for the cardiac models, a short strand.

Hodgkin-Huxley has its own tests in test_equations_compile.py (same pattern)."""

from importlib import import_module

import numpy as np
import pytest

import cable

#: hand-written name -> description module (``equations:MODULE``)
DESCRIBED = {
    "passive": "passive",
    "fitzhugh-nagumo": "fitzhugh_nagumo",
    "mitchell-schaeffer-2003": "mitchell_schaeffer_2003",
    "luo-rudy-1991": "luo_rudy_1991",
}

#: single-cell stimulus (amplitude in the model's current basis, duration [ms]) and run length [ms]
BEAT = {
    "passive": (10.0, 5.0, 30.0),
    "fitzhugh-nagumo": (40.0, 1.0, 500.0),
    "mitchell-schaeffer-2003": (40.0, 1.0, 450.0),
    "luo-rudy-1991": (40.0, 1.0, 450.0),
}


def pair(name):
    return cable.get_model(f"equations:{DESCRIBED[name]}"), cable.get_model(name)


@pytest.mark.parametrize("name", DESCRIBED)
def test_same_parameters_states_and_currents(name):
    gen, hand = pair(name)
    assert import_module(f"cable.membrane.equations.{DESCRIBED[name]}").EQUATIONS.name == hand.name
    assert (gen.citation, gen.summary) == (hand.citation, hand.summary)
    assert (gen.resting_potential, gen.current_basis, gen.threshold) == \
        (hand.resting_potential, hand.current_basis, hand.threshold)
    assert gen.parameters == hand.parameters  # names, defaults, units, meanings, kinds, bounds
    assert gen.conductances == hand.conductances  # the scalable ones
    assert gen.states == hand.states  # names, initial values (exactly), units, meanings
    if hand.current_names:  # (fitzhugh-nagumo has no per-current function to compare)
        assert gen.current_names == hand.current_names


def random_states(model, n, rng):
    """Potentials over the range an action potential visits, gates in [0, 1], other states within a
    factor e of their initial value (a scenario of our own)."""
    v = rng.uniform(-95.0, 45.0, n)
    s = np.empty((n, len(model.states)))
    for k, st in enumerate(model.states):
        s[:, k] = rng.uniform(0.0, 1.0, n) if st.units == "1" else st.initial * np.exp(rng.uniform(-1, 1, n))
    return v, s


@pytest.mark.parametrize("name", DESCRIBED)
def test_one_step_on_random_states_equals_the_hand_written_kernel(name):
    gen, hand = pair(name)
    rng = np.random.default_rng(12)
    n = 200
    v, s = random_states(hand, n, rng)
    p = np.tile(hand.default_parameters(), (n, 1))
    i_stim = rng.uniform(-5.0, 5.0, n)
    for gating in (0, 1):
        for dt in (0.01, 0.1):
            a, b = (v.copy(), s.copy()), (v.copy(), s.copy())
            hand.reaction(*a, p, i_stim, dt, 1.0, gating)
            gen.reaction(*b, p, i_stim, dt, 1.0, gating)
            # the same formulas written differently (the Rush-Larsen update as y + dt f expm1(b dt)/(b dt)
            # rather than y_inf + (y - y_inf) exp(-dt/tau)): rounding only
            np.testing.assert_allclose(b[0], a[0], rtol=1e-12, atol=1e-12)
            np.testing.assert_allclose(b[1], a[1], rtol=1e-12, atol=1e-14)
    if hand.currents is not None:
        out_h, out_g = np.empty((n, len(hand.current_names))), np.empty((n, len(gen.current_names)))
        hand.currents(v, s, p, out_h)
        gen.currents(v, s, p, out_g)
        np.testing.assert_allclose(out_g, out_h, rtol=1e-12, atol=1e-12)


def beat(model, name, dt=0.01, tabulated=False):
    """The potential of one cell driven by the model's reaction kernel (Rush-Larsen, default
    parameters, from the initial state, stimulated at t = 0), or by its fast kernel with a table."""
    amplitude, duration, t_end = BEAT[name]
    v = np.array([model.resting_potential])
    s = model.initial_states()[None, :].copy()
    p = model.default_parameters()[None, :]
    steps = int(round(t_end / dt))
    on = int(round(duration / dt))
    trace = np.empty(steps)
    if tabulated:
        fp = model.fast
        table = fp.build_table(p[0], dt, 0, fp.v_lo, fp.v_hi, fp.dv)
        if fp.by_state:  # states by state, parameters by parameter (FastPath contract)
            s, p = np.ascontiguousarray(s.T), np.ascontiguousarray(p.T)
    for k in range(steps):
        i_stim = np.array([amplitude if k < on else 0.0])
        if tabulated:
            fp.kernel(v, s, p, i_stim, dt, 1.0, 0, table, fp.v_lo, 1.0 / fp.dv)
        else:
            model.reaction(v, s, p, i_stim, dt, 1.0, 0)
        trace[k] = v[0]
    return trace


def apd90(trace, dt):
    """Time [ms] from the upstroke's crossing of the midpoint to the last crossing of 90%
    repolarisation (linear interpolation between steps; common practice)."""
    lo, hi = trace[0], trace.max()
    def crossing(level, rising):
        above = trace >= level
        k = np.flatnonzero(above[1:] & ~above[:-1]) if rising else np.flatnonzero(above[:-1] & ~above[1:])
        k = k[0] if rising else k[-1]
        return (k + (level - trace[k]) / (trace[k + 1] - trace[k])) * dt
    return crossing(hi - 0.9 * (hi - lo), False) - crossing(0.5 * (hi + lo), True)


@pytest.mark.parametrize("name", DESCRIBED)
def test_single_cell_trace_equals_the_hand_written_one(name):
    gen, hand = pair(name)
    a, b = beat(gen, name), beat(hand, name)
    swing = np.ptp(b)
    # the stimulus did something: the passive charging, or an action potential of the usual amplitude
    assert swing > (5.0 if name == "passive" else 80.0)
    # the bound (1e-6 relative), on the whole potential trace relative to its swing
    assert np.max(np.abs(a - b)) <= 1e-6 * swing


def strand(model, **numerics):
    ds = cable.simulate({
        "membrane": {"model": model},
        "fiber": {"length": 1.0, "dx": 0.01, "conductivity": 1000.0 / 162.0, "surface_to_volume": 4000.0},
        "stimulus": [{"amplitude": 100.0, "duration": 1.0, "width": 0.1}],
        "numerics": {"dt": 0.01, **numerics}, "run": {"duration": 30.0}, "output": {"every": 0.5}})
    return float(ds.conduction_velocity[0]), float(np.nanmax(ds.upstroke_velocity.values))


@pytest.mark.slow
@pytest.mark.parametrize("name", ["mitchell-schaeffer-2003", "luo-rudy-1991"])
def test_strand_equals_the_hand_written_one(name):
    # same scheme (Rush-Larsen, Strang, Crank-Nicolson); the generated model with exact rates, whose
    # fast kernel without a table is its reaction kernel: CV and upstroke velocity to 1e-6
    hand = strand(name, rates="reference")
    gen = strand(f"equations:{DESCRIBED[name]}", rates="exact")
    assert np.isfinite(hand).all() and hand[0] > 0.0
    for x, y in zip(gen, hand):
        assert x == pytest.approx(y, rel=1e-6)


@pytest.mark.parametrize("name", ["fitzhugh-nagumo", "mitchell-schaeffer-2003", "luo-rudy-1991"])
def test_tabulated_rates_within_the_bound(name):
    # the bound for every fast path: APD90 within 0.1% of the exact rates (single cell;
    # the hand-written models have no fast path, so this is the generated one's own check)
    gen = cable.get_model(f"equations:{DESCRIBED[name]}")
    exact, tab = apd90(beat(gen, name), 0.01), apd90(beat(gen, name, tabulated=True), 0.01)
    assert exact > 30.0  # a whole action potential (45 ms FitzHugh-Nagumo, ~290-370 ms the cardiac models)
    assert tab == pytest.approx(exact, rel=1e-3)
