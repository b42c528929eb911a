"""Passive membrane (``passive``): the RC charging curve in closed form, per area at two C_m."""

import numpy as np
import pytest

import cable

MODEL = cable.get_model("passive")
#: the kernel is explicit in V: its error on exp(-t/tau) is first order, dt/(2 tau) relative
#: at most (Euler's method on a linear decay, derived); dt = 0.001 ms, tau = 10 ms -> 5e-5
DT = 0.001


@pytest.mark.parametrize("c_m", [1.0, 2.0])
def test_step_current_charges_the_membrane_as_an_rc_circuit(c_m):
    # Closed form (RC circuit): V(t) = E_L + (I/g)(1 - exp(-t g / C_m)); currents per area, so
    # tau = C_m / g_L doubles with C_m while the final deflection I/g_L does not change
    g, e_l, amp = 0.1, -65.0, 2.0                # mS/cm^2, mV, uA/cm^2
    ds = cable.simulate({"membrane": {"model": "passive", "capacitance": c_m},
                         "stimulus": [{"amplitude": amp, "duration": 60.0}],
                         "numerics": {"dt": DT}, "run": {"duration": 40.0}, "output": {"every": 1.0}})
    t, v = ds.t.values, ds.vm.values
    expected = e_l + amp / g * (1.0 - np.exp(-t * g / c_m))
    tau = c_m / g
    np.testing.assert_allclose(v, expected, atol=DT / (2 * tau) * amp / g + 1e-9)
    assert MODEL.current_basis == "area"


def test_resting_potential_is_the_leak_reversal():
    # no current: I_ion = g_L (V - E_L) vanishes at E_L (definition)
    _, _, ion = MODEL.reference(np.array([MODEL.resting_potential]), np.zeros((1, 0)),
                                MODEL.default_parameters()[None, :])
    assert ion[0] == 0.0
