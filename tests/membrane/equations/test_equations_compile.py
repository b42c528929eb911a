"""Models from equations: the generated kernels against the hand-written Hodgkin-Huxley model
(tests/membrane/oracles/hodgkin_huxley_1952.py, the test oracle), the linearity analysis that chooses Rush-Larsen, and the contract of cable/membrane/base.py."""

import numpy as np
import pytest

import cable
from cable.kernels import tables
from cable.membrane.equations import EqParameter, EqState, EquationError, Equations
from cable.membrane.equations.compile import build_model
from conftest import oracle

GENERATED_HH = "equations:hodgkin_huxley_1952"


def toy(**changes):
    base = dict(
        name="toy", citation="a scenario of our own", summary="two states", resting_potential=-80.0,
        states=(EqState("w", 0.1, "1", "a gate"), EqState("c", 1.0, "mM", "a concentration"),
                EqState("q", 0.0, "1", "a nonlinear state")),
        parameters=(EqParameter("g", 1.0, "mS/cm^2", "conductance", "conductance", scalable=True),),
        intermediates=(("w_inf", "1/(1 + exp(-(V + 40)/5))"), ("tau", "2 + 8*exp(-((V + 60)/20)**2)"),
                       ("I_w", "g*w*(V + 80)")),
        derivatives=(("w", "(w_inf - w)/tau"), ("c", "-0.01*I_w"), ("q", "w - q**2")),
        currents=(("I_total", "I_w"),),
    )
    base.update(changes)
    return Equations(**base)


def test_rush_larsen_where_the_derivative_is_linear_in_the_state(tmp_path, monkeypatch):
    monkeypatch.setenv("CABLE_CACHE_DIR", str(tmp_path))
    m = build_model(toy())
    # w: (w_inf - w)/tau is linear in w; c: its derivative does not contain c; q: quadratic
    assert m.integration == ("rush-larsen", "forward-euler", "forward-euler")
    # one Rush-Larsen step at fixed V is exact: w_inf + (w - w_inf) exp(-dt/tau) (Rush & Larsen 1978)
    v, s, p = np.array([-30.0]), m.initial_states()[None, :].copy(), m.default_parameters()[None, :]
    dt = 0.5
    w_inf, tau = 1 / (1 + np.exp(-(-30.0 + 40) / 5)), 2 + 8 * np.exp(-((-30.0 + 60) / 20) ** 2)
    m.reaction(v, s, p, np.zeros(1), dt, 1.0, 0)
    assert s[0, 0] == pytest.approx(w_inf + (0.1 - w_inf) * np.exp(-dt / tau), rel=1e-14)
    assert s[0, 2] == pytest.approx(0.0 + dt * (0.1 - 0.0), rel=1e-14)  # forward Euler with the old w


@pytest.mark.parametrize("bad, message", [
    (dict(currents=(("I", "g*zz"),)), "unknown names zz"),
    (dict(intermediates=(("a", "b + 1"), ("b", "a*2"), ("w_inf", "1"), ("tau", "1"), ("I_w", "1"))), "depends on itself"),
    (dict(derivatives=(("w", "0"),)), "no derivative for states c, q"),
    (dict(current_states="new"), "current_states = 'new'; allowed: gates, all"),
])
def test_bad_descriptions_are_refused(bad, message):
    with pytest.raises(EquationError, match=message):
        build_model(toy(**bad))


def test_generated_kernels_follow_the_contract():
    # the checks of tests/membrane/test_contract.py on a generated model: one forward-Euler step of
    # the kernel equals the reference derivatives, the fast path without a table equals the kernel
    m = cable.get_model(GENERATED_HH)
    n = 3
    v = np.array([-65.0, -40.0001, 10.0])
    s = np.tile(m.initial_states(), (n, 1))
    p = np.tile(m.default_parameters(), (n, 1))
    _, ds_ref, ion = m.reference(v, s, p)
    dt = 1e-8
    v1, s1 = v.copy(), s.copy()
    m.reaction(v1, s1, p, np.zeros(n), dt, 1.0, 1)
    # (tolerances of tests/membrane/test_contract.py: the round-off of v + dt*dv is ~1e-6 at dt 1e-8)
    np.testing.assert_allclose((v1 - v) / dt, -ion, rtol=1e-5, atol=1e-6)
    np.testing.assert_allclose((s1 - s) / dt, ds_ref, rtol=1e-4, atol=1e-6)
    out = np.zeros((n, len(m.current_names)))
    m.currents(v, s, p, out)
    np.testing.assert_allclose(out.sum(axis=1), ion, rtol=1e-12)
    assert m.fast.by_state
    for gating in (0, 1):
        a = (v.copy(), s.copy())
        b = (v.copy(), np.ascontiguousarray(s.T))
        m.reaction(*a, p, np.zeros(n), 0.01, 1.0, gating)
        m.fast.kernel(*b, tables.by_parameter(p), np.zeros(n), 0.01, 1.0, gating, tables.no_table(), 0.0, 1.0,
                      tables.one_group())
        # the same formulas with the vectorisable exp and log (1 ulp, cable.kernels.elementary and
        # tests/membrane/equations/test_vecmath.py) and gates as y <- A + B y: rounding only; the
        # one looser place is -40.0001 mV, 1e-4 mV from alpha_m's 0/0, where the plain formula
        # itself loses ~ulp/(0.1 * 1e-4) ~ 2e-11 to cancellation
        np.testing.assert_allclose(b[0], a[0], rtol=1e-10)
        np.testing.assert_allclose(b[1].T, a[1], rtol=1e-10, atol=1e-15)


def test_generated_step_equals_the_hand_written_kernel():
    gen, hand = cable.get_model(GENERATED_HH), oracle("hodgkin-huxley-1952").MODEL
    assert gen.parameter_names == hand.parameter_names and gen.state_names == hand.state_names
    v = np.linspace(-100.0, 60.0, 33) + 0.013  # off the removable singularities at -40 and -55 mV
    s = np.tile(hand.initial_states(), (v.size, 1))
    p = np.tile(hand.default_parameters(), (v.size, 1))
    p[:, -1] = 18.5
    for gating in (0, 1):
        a, b = (v.copy(), s.copy()), (v.copy(), s.copy())
        hand.reaction(*a, p, np.zeros(v.size), 0.01, 1.0, gating)
        gen.reaction(*b, p, np.zeros(v.size), 0.01, 1.0, gating)
        # the same formulas, written differently: rounding only (1e-12 relative)
        np.testing.assert_allclose(b[0], a[0], rtol=1e-12)
        np.testing.assert_allclose(b[1], a[1], rtol=1e-12, atol=1e-15)


def axon(model, **numerics):
    ds = cable.simulate({
        "membrane": {"model": model, "temperature": 18.5},
        "fiber": {"length": 2.0, "dx": 0.01, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 1000.0, "duration": 0.2, "width": 0.1}],
        "numerics": {"dt": 0.005, **numerics}, "run": {"duration": 5.0}, "output": {"every": 0.05}})
    return (float(ds.conduction_velocity[0]), float(ds.apd.values.ravel()[0]),
            float(np.nanmax(ds.upstroke_velocity.values)))


@pytest.mark.slow
def test_generated_hh_strand_equals_the_hand_written_one(oracles_registered):
    # same scheme (Rush-Larsen, exact rates, Strang, Crank-Nicolson): CV, APD90, upstroke to 1e-6
    # (the generated fast path without a table: the reaction kernel to rounding, tested above)
    hand = axon("oracle-hodgkin-huxley-1952", rates="reference")
    gen = axon(GENERATED_HH, rates="exact")
    for a, b in zip(gen, hand):
        assert a == pytest.approx(b, rel=1e-6)


@pytest.mark.slow
def test_tabulated_rates_within_the_bound():
    # the bound for every fast path: 0.1% on CV and APD90 against the exact rates
    exact, tab = axon(GENERATED_HH, rates="exact"), axon(GENERATED_HH, rates="tabulated")
    assert tab[0] == pytest.approx(exact[0], rel=1e-3)
    assert tab[1] == pytest.approx(exact[1], rel=1e-3)
