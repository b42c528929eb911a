"""Hodgkin & Huxley (1952) membrane (``hodgkin-huxley-1952``): temperature law, rest, scipy."""

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import cable

MODEL = cable.get_model("hodgkin-huxley-1952")
TEMPERATURE = MODEL.parameter_names.index("temperature")


def _params(t_c):
    p = MODEL.default_parameters()[None, :].copy()
    p[0, TEMPERATURE] = t_c
    return p


def test_rates_scale_with_q10_of_three():
    # Hodgkin & Huxley 1952 (J Physiol 117:500, eq. 27 region; from memory): every rate is
    # multiplied by phi = 3^((T - 6.3)/10); at 16.3 degC each gate moves three times as fast
    # from the same state at the same potential, and the ionic current does not change
    v = np.array([-40.0, 0.0])
    s = np.tile([0.3, 0.4, 0.5], (2, 1))
    _, ds_cold, ion_cold = MODEL.reference(v, s, np.repeat(_params(6.3), 2, axis=0))
    _, ds_warm, ion_warm = MODEL.reference(v, s, np.repeat(_params(16.3), 2, axis=0))
    np.testing.assert_allclose(ds_warm, 3.0 * ds_cold, rtol=1e-12)
    np.testing.assert_allclose(ion_warm, ion_cold, rtol=1e-12)


def test_resting_state_is_the_steady_state_of_the_gates():
    # HH 1952 rest at -65 mV (modern sign convention, 0 = -65 mV in the paper): the declared
    # initial gates are the steady states alpha/(alpha + beta) there, to the 1e-4 they are
    # given to (from memory: m 0.053, h 0.596, n 0.318)
    _, ds, _ = MODEL.reference(np.array([MODEL.resting_potential]), MODEL.initial_states()[None, :], _params(6.3))
    assert np.all(np.abs(ds) < 1e-3)
    np.testing.assert_allclose(MODEL.initial_states(), [0.053, 0.596, 0.318], atol=1e-3)


def test_membrane_action_potential_against_solve_ivp():
    # scipy's solve_ivp (Radau, rtol 1e-9) on the reference derivatives from V = -50 mV (above
    # threshold) at 6.3 degC: the kernel (Rush-Larsen gates, explicit V) is first order in dt,
    # so its peak and the time of the peak converge at first order; at dt = 0.5 us the peak
    # is within 0.5 mV (the first-order error dt/2 x |dV/dt| over the ~0.2 ms around the peak)
    p = _params(6.3)
    s0 = MODEL.initial_states()

    def rhs(t, y):
        _, ds, ion = MODEL.reference(np.array([y[0]]), np.array([y[1:]]), p)
        return np.concatenate([-ion, ds[0]])

    sol = solve_ivp(rhs, (0.0, 10.0), np.concatenate([[-50.0], s0]), method="Radau", rtol=1e-9, atol=1e-9,
                    dense_output=True)
    t = np.linspace(0.0, 10.0, 20001)
    v_ref = sol.sol(t)[0]
    dt = 0.0005
    v, s = np.array([-50.0]), s0[None, :].copy()
    trace = [v[0]]
    for _ in range(20000):
        MODEL.reaction(v, s, p, np.zeros(1), dt, 1.0, 0)
        trace.append(v[0])
    trace = np.array(trace)
    assert trace.max() == pytest.approx(v_ref.max(), abs=0.5)
    assert t[np.argmax(trace)] == pytest.approx(t[np.argmax(v_ref)], abs=0.05)
