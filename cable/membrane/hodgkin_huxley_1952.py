"""Hodgkin & Huxley (1952) squid giant axon, modern sign convention.

Hodgkin AL, Huxley AF (1952) A quantitative description of membrane current and its
application to conduction and excitation in nerve. J Physiol 117:500-544.

Potentials are absolute (rest near -65 mV): the paper's reversal potentials relative to
rest (+115, -12, +10.613 mV, Table 3, sign-flipped to the modern convention) become
E_Na = 50, E_K = -77, E_L = -54.387 mV. Rates are the paper's at 6.3 degC, multiplied by
phi = 3^((T - 6.3)/10) (Q10 = 3).
"""

import numpy as np

from cable.kernels.jit import jit
from cable.membrane.base import MembraneModel, Parameter, State

# parameter indices (order of PARAMETERS)
G_NA, G_K, G_L, E_NA, E_K, E_L, TEMPERATURE = range(7)

PARAMETERS = (
    Parameter("g_Na", 120.0, "mS/cm^2", "maximal sodium conductance", "conductance", minimum=0.0),
    Parameter("g_K", 36.0, "mS/cm^2", "maximal potassium conductance", "conductance", minimum=0.0),
    Parameter("g_L", 0.3, "mS/cm^2", "leak conductance", "conductance", minimum=0.0),
    Parameter("E_Na", 50.0, "mV", "sodium reversal potential", "potential"),
    Parameter("E_K", -77.0, "mV", "potassium reversal potential", "potential"),
    Parameter("E_L", -54.387, "mV", "leak reversal potential", "potential"),
    Parameter("temperature", 6.3, "degC", "temperature; rates scale with Q10 = 3 from 6.3 degC",
              "temperature", minimum=-5.0, maximum=45.0),
)


@jit
def _vtrap(x, y):
    # x / (exp(x/y) - 1) with its limit y near x = 0 (removable singularity of the rates)
    u = x / y
    if abs(u) < 1e-6:
        return y * (1.0 - 0.5 * u)
    return x / (np.exp(u) - 1.0)


@jit
def _rates(V, phi):
    am = phi * 0.1 * _vtrap(-(V + 40.0), 10.0)
    bm = phi * 4.0 * np.exp(-(V + 65.0) / 18.0)
    ah = phi * 0.07 * np.exp(-(V + 65.0) / 20.0)
    bh = phi / (1.0 + np.exp(-(V + 35.0) / 10.0))
    an = phi * 0.01 * _vtrap(-(V + 55.0), 10.0)
    bn = phi * 0.125 * np.exp(-(V + 65.0) / 80.0)
    return am, bm, ah, bh, an, bn


def _steady(V):
    am, bm, ah, bh, an, bn = _rates(V, 1.0)
    return am / (am + bm), ah / (ah + bh), an / (an + bn)


@jit
def _gate(y, a, b, dt, gating):
    if gating == 0:
        tau = 1.0 / (a + b)
        yinf = a * tau
        return yinf + (y - yinf) * np.exp(-dt / tau)
    return y + dt * (a * (1.0 - y) - b * y)


@jit
def reaction(v, s, p, i_stim, dt, ion_scale, gating):
    for i in range(v.shape[0]):
        V = v[i]
        phi = 3.0 ** ((p[i, TEMPERATURE] - 6.3) / 10.0)
        am, bm, ah, bh, an, bn = _rates(V, phi)
        m = _gate(s[i, 0], am, bm, dt, gating)
        h = _gate(s[i, 1], ah, bh, dt, gating)
        n = _gate(s[i, 2], an, bn, dt, gating)
        s[i, 0] = m
        s[i, 1] = h
        s[i, 2] = n
        n2 = n * n
        ion = (p[i, G_NA] * m * m * m * h * (V - p[i, E_NA])
               + p[i, G_K] * n2 * n2 * (V - p[i, E_K])
               + p[i, G_L] * (V - p[i, E_L]))
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


@jit
def currents(v, s, p, out):
    for i in range(v.shape[0]):
        V = v[i]
        m, h, n = s[i, 0], s[i, 1], s[i, 2]
        out[i, 0] = p[i, G_NA] * m * m * m * h * (V - p[i, E_NA])
        out[i, 1] = p[i, G_K] * n ** 4 * (V - p[i, E_K])
        out[i, 2] = p[i, G_L] * (V - p[i, E_L])


def reference(v, s, p):
    """Plain-numpy derivatives: (None, ds/dt [1/ms], I_ion [uA/cm^2])."""
    v = np.asarray(v, dtype=float)
    phi = 3.0 ** ((p[:, TEMPERATURE] - 6.3) / 10.0)
    x = -(v + 40.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        am = phi * 0.1 * np.where(np.abs(x) < 1e-5, 10.0, x / np.expm1(x / 10.0))
    bm = phi * 4.0 * np.exp(-(v + 65.0) / 18.0)
    ah = phi * 0.07 * np.exp(-(v + 65.0) / 20.0)
    bh = phi / (1.0 + np.exp(-(v + 35.0) / 10.0))
    x = -(v + 55.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        an = phi * 0.01 * np.where(np.abs(x) < 1e-5, 10.0, x / np.expm1(x / 10.0))
    bn = phi * 0.125 * np.exp(-(v + 65.0) / 80.0)
    m, h, n = s[:, 0], s[:, 1], s[:, 2]
    ds = np.stack([am * (1 - m) - bm * m, ah * (1 - h) - bh * h, an * (1 - n) - bn * n], axis=1)
    ion = (p[:, G_NA] * m**3 * h * (v - p[:, E_NA]) + p[:, G_K] * n**4 * (v - p[:, E_K])
           + p[:, G_L] * (v - p[:, E_L]))
    return None, ds, ion


_M0, _H0, _N0 = _steady(-65.0)

MODEL = MembraneModel(
    name="hodgkin-huxley-1952",
    citation="Hodgkin AL, Huxley AF (1952) J Physiol 117:500-544",
    summary="squid giant axon: Na, K and leak channels, gates m, h, n",
    resting_potential=-65.0,
    states=(
        State("m", _M0, "1", "sodium activation gate"),
        State("h", _H0, "1", "sodium inactivation gate"),
        State("n", _N0, "1", "potassium activation gate"),
    ),
    parameters=PARAMETERS,
    conductances=("g_Na", "g_K", "g_L"),
    current_basis="area",
    threshold=-20.0,
    reaction=reaction,
    reference=reference,
    currents=currents,
    current_names=("I_Na", "I_K", "I_L"),
    temperature_parameter="temperature",
)
