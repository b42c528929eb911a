"""Mitchell & Schaeffer (2003) two-current model of the cardiac membrane.

Mitchell CC, Schaeffer DG (2003) A two-current model for the dynamics of cardiac
membrane. Bull Math Biol 65:767-793.

The paper's variables are a dimensionless potential v (0 at rest, about 1 when
excited) and a gate h::

    J_in  = g_in h v^2 (1 - v) / tau_in        inward current (v-units per ms)
    J_out = -v / tau_out                       outward current
    dv/dt = J_in + J_out + J_stim
    dh/dt = (1 - h) / tau_open    if v < v_gate
          = -h / tau_close        if v >= v_gate

``g_in`` (default 1, the published model) is this package's addition: a dimensionless
factor on J_in, equivalent to dividing tau_in by it, so that a ``[membrane.scale]``
factor scales excitability the way a sodium-conductance scale does in an ionic model.

The potential in mV is the affine map V = V_rest + (V_peak - V_rest) v, so v = 0 is
V_rest and v = 1 is V_peak. The ionic current per capacitance [uA/uF = mV/ms] is
I_ion = -(V_peak - V_rest) (J_in + J_out), so that dV/dt = -I_ion + i_stim, with
i_stim = (V_peak - V_rest) J_stim.

Numerics: with gating 0 the h update is exact for the old potential (the relaxation
is linear in h on either side of v_gate: a Rush-Larsen step); with gating 1 it is
forward Euler.

Analysis used by the tests (with h frozen): for v > 0, dv/dt = 0 needs
h v (1 - v) = tau_in/(g_in tau_out), which has solutions only if
h > h_min = 4 tau_in/(g_in tau_out) (the maximum of v(1 - v) is 1/4, at v = 1/2), so
the cell is excitable only for h > h_min. During the plateau h decays as
exp(-t/tau_close) from its value at the upstroke, and the plateau ends near
h = h_min, so a cell that starts from h = 1 has APD close to
tau_close ln(g_in tau_out/(4 tau_in)).
"""

import math
from dataclasses import replace

import numpy as np

from cable.kernels.jit import jit, jit_inline
from cable.membrane.base import MembraneModel, Parameter, State

# parameter indices (order of PARAMETERS)
V_REST, V_PEAK, TAU_IN, TAU_OUT, TAU_OPEN, TAU_CLOSE, V_GATE, G_IN = range(8)

PARAMETERS = (
    Parameter("V_rest", -80.0, "mV", "potential at v = 0", "potential"),
    Parameter("V_peak", 20.0, "mV", "potential at v = 1", "potential"),
    Parameter("tau_in", 0.3, "ms", "time constant of the inward current", "time", minimum=0.0),
    Parameter("tau_out", 6.0, "ms", "time constant of the outward current", "time",
              minimum=0.0),
    Parameter("tau_open", 120.0, "ms", "time constant of gate opening (recovery)", "time",
              minimum=0.0),
    Parameter("tau_close", 150.0, "ms", "time constant of gate closing", "time", minimum=0.0),
    Parameter("v_gate", 0.13, "1", "gate switching level of v", minimum=0.0, maximum=1.0),
    Parameter("g_in", 1.0, "1", "factor on the inward current (1 = published model)",
              minimum=0.0),
)


@jit
def _fluxes(v, h, p, i):
    j_in = p[i, G_IN] * h * v * v * (1.0 - v) / p[i, TAU_IN]
    j_out = -v / p[i, TAU_OUT]
    return j_in, j_out


@jit
def reaction(v, s, p, i_stim, dt, ion_scale, gating):
    for i in range(v.shape[0]):
        V = v[i]
        span = p[i, V_PEAK] - p[i, V_REST]
        u = (V - p[i, V_REST]) / span
        h = s[i, 0]
        if u < p[i, V_GATE]:
            if gating == 0:
                h = 1.0 - (1.0 - h) * math.exp(-dt / p[i, TAU_OPEN])
            else:
                h = h + dt * (1.0 - h) / p[i, TAU_OPEN]
        else:
            if gating == 0:
                h = h * math.exp(-dt / p[i, TAU_CLOSE])
            else:
                h = h - dt * h / p[i, TAU_CLOSE]
        s[i, 0] = h
        j_in, j_out = _fluxes(u, h, p, i)
        ion = -span * (j_in + j_out)
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


@jit
def currents(v, s, p, out):
    for i in range(v.shape[0]):
        span = p[i, V_PEAK] - p[i, V_REST]
        j_in, j_out = _fluxes((v[i] - p[i, V_REST]) / span, s[i, 0], p, i)
        out[i, 0] = -span * j_in
        out[i, 1] = -span * j_out


def reference(v, s, p):
    """Plain-numpy derivatives: (None, dh/dt [1/ms], I_ion [uA/uF])."""
    v = np.asarray(v, dtype=float)
    span = p[:, V_PEAK] - p[:, V_REST]
    u = (v - p[:, V_REST]) / span
    h = s[:, 0]
    dh = np.where(u < p[:, V_GATE], (1.0 - h) / p[:, TAU_OPEN], -h / p[:, TAU_CLOSE])
    j_in = p[:, G_IN] * h * u**2 * (1.0 - u) / p[:, TAU_IN]
    j_out = -u / p[:, TAU_OUT]
    return None, dh[:, None], -span * (j_in + j_out)


MODEL = MembraneModel(
    name="mitchell-schaeffer-2003",
    citation="Mitchell CC, Schaeffer DG (2003) Bull Math Biol 65:767-793",
    summary="two-current phenomenological cardiac membrane (v, gate h), mapped to mV",
    resting_potential=-80.0,
    states=(State("h", 1.0, "1", "inward-current gate (1 = fully recovered)"),),
    parameters=PARAMETERS,
    conductances=("g_in",),
    current_basis="capacitance",
    threshold=-30.0,
    reaction=reaction,
    reference=reference,
    currents=currents,
    current_names=("I_in", "I_out"),
)


@jit_inline
def kinetics(V, y, p, i, istim, a, b):
    """Right-hand side of node i for the loop's reaction schemes (contract: cable.membrane.base)."""
    span = p[i, V_PEAK] - p[i, V_REST]
    u = (V - p[i, V_REST]) / span
    if u < p[i, V_GATE]:
        a[0] = 1.0 / p[i, TAU_OPEN]
        b[0] = a[0]
    else:
        a[0] = 0.0
        b[0] = 1.0 / p[i, TAU_CLOSE]
    j_in, j_out = _fluxes(u, y[0], p, i)
    return -span * (j_in + j_out)


MODEL = replace(MODEL, kinetics=kinetics)
