"""FitzHugh-Nagumo excitable membrane in dimensional form.

u = (V - V_rest)/(V_peak - V_rest);  du/dt = k u (u - a)(1 - u) - c w;
dw/dt = epsilon (u - gamma w).  The ionic current per capacitance is
I_ion = -(V_peak - V_rest) [k u (u - a)(1 - u) - c w]  [uA/uF]
(per area: C_m times this), so that with the cable term u obeys
u_t = D u_xx + k u (u - a)(1 - u) - c w.

FitzHugh R (1961) Biophys J 1:445; Nagumo J, Arimoto S, Yoshizawa S (1962) Proc IRE
50:2061. With c = 0 it is the bistable (Nagumo) equation whose front speed is
sqrt(D k / 2) (1 - 2a) (McKean 1970, Adv Math 4:209; Keener & Sneyd, Mathematical
Physiology, ch. 6).
"""

from dataclasses import replace

import numpy as np

from cable.kernels.jit import jit, jit_inline
from cable.membrane.base import MembraneModel, Parameter, State

V_REST, V_PEAK, A, K, C, EPSILON, GAMMA = range(7)


@jit
def reaction(v, s, p, i_stim, dt, ion_scale, gating):
    # w is linear in u: its update is exact for fixed u whatever `gating` says, but the
    # forward-Euler option is kept for comparisons of the splitting error.
    for i in range(v.shape[0]):
        V = v[i]
        span = p[i, V_PEAK] - p[i, V_REST]
        u = (V - p[i, V_REST]) / span
        w = s[i, 0]
        eps = p[i, EPSILON]
        g = p[i, GAMMA]
        if gating == 0 and eps * g > 0.0:
            winf = u / g
            w_new = winf + (w - winf) * np.exp(-dt * eps * g)
        else:
            w_new = w + dt * eps * (u - g * w)
        s[i, 0] = w_new
        ion = -span * (p[i, K] * u * (u - p[i, A]) * (1.0 - u) - p[i, C] * w_new)
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


def reference(v, s, p):
    """Plain-numpy derivatives: (None, dw/dt [1/ms], I_ion [uA/uF])."""
    v = np.asarray(v, dtype=float)
    span = p[:, V_PEAK] - p[:, V_REST]
    u = (v - p[:, V_REST]) / span
    w = s[:, 0]
    dw = p[:, EPSILON] * (u - p[:, GAMMA] * w)
    ion = -span * (p[:, K] * u * (u - p[:, A]) * (1.0 - u) - p[:, C] * w)
    return None, dw[:, None], ion


MODEL = MembraneModel(
    name="fitzhugh-nagumo",
    citation="FitzHugh 1961, Biophys J 1:445; Nagumo, Arimoto & Yoshizawa 1962, Proc IRE 50:2061",
    summary="two-variable excitable membrane (cubic + linear recovery), dimensional form",
    resting_potential=-80.0,
    states=(State("w", 0.0, "1", "recovery variable"),),
    parameters=(
        Parameter("V_rest", -80.0, "mV", "resting potential (u = 0)", "potential"),
        Parameter("V_peak", 20.0, "mV", "excited potential (u = 1)", "potential"),
        Parameter("a", 0.13, "1", "excitation threshold on the u scale", minimum=0.0, maximum=1.0),
        Parameter("k", 1.0, "1/ms", "rate of the cubic source", "rate", minimum=0.0),
        Parameter("c", 1.0, "1/ms", "coupling of recovery into u", "rate", minimum=0.0),
        Parameter("epsilon", 0.005, "1/ms", "recovery rate", "rate", minimum=0.0),
        Parameter("gamma", 1.0, "1", "recovery decay factor", minimum=0.0),
    ),
    conductances=("k",),
    current_basis="capacitance",
    threshold=-30.0,
    reaction=reaction,
    reference=reference,
)


@jit_inline
def kinetics(V, y, p, i, istim, a, b):
    """Right-hand side of node i for the loop's reaction schemes (contract: cable.membrane.base)."""
    span = p[i, V_PEAK] - p[i, V_REST]
    u = (V - p[i, V_REST]) / span
    eps = p[i, EPSILON]
    a[0] = eps * u
    b[0] = eps * p[i, GAMMA]
    return -span * (p[i, K] * u * (u - p[i, A]) * (1.0 - u) - p[i, C] * y[0])


MODEL = replace(MODEL, kinetics=kinetics)
