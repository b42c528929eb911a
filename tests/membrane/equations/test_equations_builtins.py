"""The built-in models generated from their descriptions (cable/membrane/equations/<model>.py;
what ``get_model(name)`` returns) against the hand-written kernels they replaced, kept as test
oracles in tests/membrane/oracles/ (issue 12): the same parameters and states, one reaction step
and the kinetics on random states to rounding, a single-cell action potential to 1e-6 and, for
the cardiac models, a short strand (CV, APD90, upstroke velocity to 1e-6).

Hodgkin-Huxley (the last one switched) also has tests of its own in test_equations_compile.py
(the axon strand, the tabulated rates)."""

from importlib import import_module

import numpy as np
import pytest

import cable
from cable.kernels import adaptive, schemes, tables
from cable.kernels.jit import specialise
from conftest import oracle

#: registry name -> description module (``equations:MODULE``)
DESCRIBED = {
    "passive": "passive",
    "fitzhugh-nagumo": "fitzhugh_nagumo",
    "mitchell-schaeffer-2003": "mitchell_schaeffer_2003",
    "luo-rudy-1991": "luo_rudy_1991",
    "ten-tusscher-panfilov-2006": "ten_tusscher_panfilov_2006",
    "hodgkin-huxley-1952": "hodgkin_huxley_1952",
}

#: single-cell stimulus (amplitude in the model's current basis, duration [ms]) and run length [ms]
BEAT = {
    "passive": (10.0, 5.0, 30.0),
    "fitzhugh-nagumo": (40.0, 1.0, 500.0),
    "mitchell-schaeffer-2003": (40.0, 1.0, 450.0),
    "luo-rudy-1991": (40.0, 1.0, 450.0),
    # 52 pA/pF for 1 ms (ten Tusscher et al. 2004 single-cell protocol; from memory); the M cell's
    # APD90 is ~390 ms (measured here)
    "ten-tusscher-panfilov-2006": (52.0, 1.0, 450.0),
    # 40 mV/ms for 1 ms at 6.3 degC (a scenario of our own): one spike and its recovery to rest
    "hodgkin-huxley-1952": (40.0, 1.0, 30.0),
}


def pair(name):
    """(the registered model, generated; the hand-written oracle)."""
    return cable.get_model(name), oracle(name).MODEL


@pytest.mark.parametrize("name", DESCRIBED)
def test_registry_name_is_the_generated_model(name):
    from cable.membrane.equations.cache import GeneratedModel

    gen = cable.get_model(name)
    assert gen.name == name and isinstance(gen, GeneratedModel)
    assert cable.get_model(f"equations:{DESCRIBED[name]}").equations == gen.equations


@pytest.mark.parametrize("name", DESCRIBED)
def test_same_parameters_states_and_currents(name):
    gen, hand = pair(name)
    assert (gen.old_names, gen.temperature_parameter) == (hand.old_names, hand.temperature_parameter)
    assert import_module(f"cable.membrane.equations.{DESCRIBED[name]}").EQUATIONS.name == hand.name
    assert (gen.citation, gen.summary) == (hand.citation, hand.summary)
    assert (gen.resting_potential, gen.current_basis, gen.threshold) == \
        (hand.resting_potential, hand.current_basis, hand.threshold)
    assert gen.parameters == hand.parameters  # names, defaults, units, meanings, kinds, bounds
    assert gen.conductances == hand.conductances  # the scalable ones
    assert gen.states == hand.states  # names, initial values (exactly), units, meanings
    if hand.current_names:  # (fitzhugh-nagumo has no per-current function to compare)
        assert gen.current_names == hand.current_names


def parameter_sets(model, n):
    """The default parameters tiled over n nodes, once per label of each labelled parameter (the
    cell types of TP06, with the defaults that follow the label), else once."""
    base = np.tile(model.default_parameters(), (n, 1))
    out = []
    for j, par in enumerate(model.parameters):
        for k, _ in enumerate(par.choices or ()):
            p = base.copy()
            p[:, j] = k
            out.append(model.fill_labelled_defaults(p))
    return out or [base]


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
    i_stim = rng.uniform(-5.0, 5.0, n)
    for p in parameter_sets(hand, n):  # (TP06: each cell type)
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


@pytest.mark.parametrize("name", DESCRIBED)
def test_kinetics_on_random_states_equal_the_hand_written_ones(name):
    # dy/dt = a - b y and I_ion (the right-hand side of numerics.reaction other than rush-larsen and
    # of the adaptive stepper): b exactly where the hand-written b is 0 (forward-Euler states), else
    # to rounding; a is computed as f + b y, so it carries the rounding of the larger of f and b y
    gen, hand = pair(name)
    rng = np.random.default_rng(13)
    n = 200
    v, s = random_states(hand, n, rng)
    p = parameter_sets(hand, n)[-1]  # (TP06: the M cell)
    m = len(hand.states)
    stim = rng.uniform(-60.0, 60.0, n)  # [mV/ms]: TP06's K_i carries it
    for i in range(n):
        a1, b1, a2, b2 = (np.empty(m) for _ in range(4))
        ion1 = hand.kinetics(v[i], s[i], p, i, stim[i], a1, b1)
        ion2 = gen.kinetics(v[i], s[i], p, i, stim[i], a2, b2)
        assert ion2 == pytest.approx(ion1, rel=1e-12, abs=1e-12)
        np.testing.assert_array_equal(b2 == 0.0, b1 == 0.0)
        np.testing.assert_allclose(b2, b1, rtol=1e-12, atol=0.0)
        scale = np.abs(a1) + np.abs(b1 * s[i])
        assert np.all(np.abs(a2 - a1) <= 1e-12 * scale + 1e-300), (v[i], a1, a2)
    # the adaptive stepper's forward-Euler states (b = 0): Ca_i of LR1, the concentrations of TP06
    # (the buffered calcium, Na_i, K_i), none of the others
    fe = adaptive.euler_states(gen, gen.resting_potential, gen.initial_states(), gen.default_parameters()[None, :], 0)
    expected = {"luo-rudy-1991": ["Ca_i"], "ten-tusscher-panfilov-2006": ["Ca_i", "Ca_SR", "Ca_ss", "Na_i", "K_i"]}
    assert [st.name for st, k in zip(gen.states, fe) if k] == expected.get(name, [])


@pytest.mark.parametrize("scheme", ["rush-larsen-2", "rk4"])
def test_reaction_schemes_on_the_generated_lr1_equal_the_hand_written(scheme):
    # the loop's other reaction schemes applied to each model's kinetics (cable/kernels/schemes.py):
    # one cell through the upstroke and early plateau, dt 0.01 ms (within rk4's stability limit of
    # 18 us, DEVELOPERS "Reaction schemes"): the potential trace within 1e-6 of its swing
    gen, hand = pair("luo-rudy-1991")
    traces = []
    for model, tag in ((gen, "gen"), (hand, "oracle")):
        step = specialise(schemes._TEMPLATES[scheme], f"test_{tag}", kinetics=model.kinetics)
        traces.append(beat(model, "luo-rudy-1991", step=step, t_end=60.0))
    assert np.ptp(traces[1]) > 80.0
    assert np.max(np.abs(traces[0] - traces[1])) <= 1e-6 * np.ptp(traces[1])


def beat(model, name, dt=0.01, tabulated=False, step=None, t_end=None, p=None):
    """The potential of one cell driven by the model's reaction kernel (Rush-Larsen, default
    parameters or ``p`` (1, nparam), from the initial state, stimulated at t = 0), by its fast
    kernel with a table, or by ``step`` (a kernel of the reaction signature)."""
    amplitude, duration, length = BEAT[name]
    t_end = t_end or length
    step = step or model.reaction
    v = np.array([model.resting_potential])
    s = model.initial_states()[None, :].copy()
    p = model.default_parameters()[None, :] if p is None else p
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
            fp.kernel(v, s, p, i_stim, dt, 1.0, 0, table[None], fp.v_lo, 1.0 / fp.dv, tables.one_group())
        else:
            step(v, s, p, i_stim, dt, 1.0, 0)
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
    for p in parameter_sets(hand, 1):  # (TP06: each cell type)
        a, b = beat(gen, name, p=p), beat(hand, name, p=p)
        swing = np.ptp(b)
        # the stimulus did something: the passive charging, or an action potential of the usual amplitude
        assert swing > (5.0 if name == "passive" else 80.0)
        # the bound (1e-6 relative), on the whole potential trace relative to its swing
        assert np.max(np.abs(a - b)) <= 1e-6 * swing


def strand(model, membrane=None, length=1.0, duration=450.0, **numerics):
    ds = cable.simulate({
        "membrane": {"model": model, **(membrane or {})},
        "fiber": {"length": length, "dx": 0.01, "conductivity": 1000.0 / 162.0, "surface_to_volume": 4000.0},
        "stimulus": [{"amplitude": 100.0, "duration": 1.0, "width": 0.1}],
        "numerics": {"dt": 0.01, **numerics}, "run": {"duration": duration}, "output": {"every": 0.5}})
    return (float(ds.conduction_velocity[0]), float(np.nanmax(ds.upstroke_velocity.values)),
            float(np.nanmean(ds.apd.values)))


@pytest.mark.slow
@pytest.mark.parametrize("name", ["mitchell-schaeffer-2003", "luo-rudy-1991"])
def test_strand_equals_the_hand_written_one(name, oracles_registered):
    # same scheme (Rush-Larsen, Strang, Crank-Nicolson); the generated model with exact rates, whose
    # fast kernel without a table is its reaction kernel: CV, upstroke velocity and APD90 (mean over
    # the nodes that repolarised within the run) to 1e-6, the bound
    hand = strand(f"oracle-{name}", rates="reference")
    gen = strand(name, rates="exact")
    assert np.isfinite(hand).all() and hand[0] > 0.0
    for x, y in zip(gen, hand):
        assert x == pytest.approx(y, rel=1e-6)


def transmural(model, rates):
    """A 0.6 cm strand of TP06, endocardial, M and epicardial thirds (a scenario of our own), paced
    from the endocardial end: CV, upstroke velocity and APD90 of every node."""
    ds = cable.simulate({
        "membrane": {"model": model, "parameters": {"cell_type": "endo"}},
        "fiber": {"length": 0.6, "dx": 0.01, "conductivity": 1000.0 / 162.0, "surface_to_volume": 4000.0},
        "region": {"mid": {"start": 0.2, "end": 0.4, "parameters": {"cell_type": "mid"}},
                   "epi": {"start": 0.4, "end": 0.6, "parameters": {"cell_type": "epi"}}},
        "stimulus": [{"amplitude": 100.0, "duration": 1.0, "width": 0.1}],
        "numerics": {"dt": 0.01, "rates": rates}, "run": {"duration": 460.0}, "output": {"every": 0.5}})
    return (float(ds.conduction_velocity[0]), ds.upstroke_velocity.values.ravel(), ds.apd.values.ravel())


@pytest.mark.slow
def test_tp06_transmural_strand_equals_the_hand_written_one(oracles_registered):
    # as above for the three cell types of TP06 at once (the s gate and the defaults of G_to, G_Ks
    # follow the label; the regions' labels are tested in tests/test_regions.py): CV, and the upstroke
    # velocity and APD90 of every node to 1e-6; the M cell's APD90 is ~390 ms alone (measured here),
    # hence 460 ms (coupled, the strand's APD90 spans 318-324 ms, measured here)
    name = "ten-tusscher-panfilov-2006"
    hand, gen = transmural(f"oracle-{name}", "reference"), transmural(name, "exact")
    apd = hand[2]
    assert hand[0] > 0.0 and np.isfinite(apd).sum() > 50
    assert gen[0] == pytest.approx(hand[0], rel=1e-6)
    for x, y in zip(gen[1:], hand[1:]):
        np.testing.assert_array_equal(np.isnan(x), np.isnan(y))
        np.testing.assert_allclose(x[~np.isnan(y)], y[~np.isnan(y)], rtol=1e-6)


@pytest.mark.parametrize("name", ["fitzhugh-nagumo", "mitchell-schaeffer-2003", "luo-rudy-1991",
                                  "ten-tusscher-panfilov-2006"])
def test_tabulated_rates_within_the_bound(name):
    # the bound for every fast path: APD90 within 0.1% of the exact rates (single cell;
    # the hand-written models had no fast path, so this is the generated one's own check)
    gen = cable.get_model(name)
    exact, tab = apd90(beat(gen, name), 0.01), apd90(beat(gen, name, tabulated=True), 0.01)
    assert exact > 30.0  # a whole action potential (45 ms FitzHugh-Nagumo, ~290-370 ms the cardiac models)
    assert tab == pytest.approx(exact, rel=1e-3)


@pytest.mark.parametrize("name", DESCRIBED)
def test_listing_keeps_every_line_of_the_hand_written_model(name, capsys):
    # `cable models NAME` lists at least what it listed for the hand-written model (states,
    # parameters with their units and meanings, currents), and says how the kernel integrates;
    # fitzhugh-nagumo now reports its two currents (the hand-written model reported none)
    from cable.cli import main
    from cable.cli.models import describe

    assert main(["models", name]) == 0
    shown = capsys.readouterr().out.splitlines()
    for line in describe(oracle(name).MODEL):
        if "does not report its currents" not in line:
            assert line in shown, line
    if name != "passive":  # (no states)
        assert any(line.startswith("  Rush-Larsen") for line in shown)
