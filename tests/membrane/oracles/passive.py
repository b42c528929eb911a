"""Passive membrane: a leak conductance only, for checks against linear cable theory.

I_L = g_L (V - E_L). The length constant of a cylinder of radius a is
lambda = sqrt(a R_m / (2 R_i)) with R_m = 1/g_L (Jack, Noble & Tsien 1975,
Electric Current Flow in Excitable Cells; Koch 1999, Biophysics of Computation, ch. 2).
"""

from dataclasses import replace

import numpy as np

from cable.kernels.jit import jit, jit_inline
from cable.membrane.base import MembraneModel, Parameter

G_L, E_L = range(2)


@jit
def reaction(v, s, p, i_stim, dt, ion_scale, gating):
    for i in range(v.shape[0]):
        V = v[i]
        v[i] = V + dt * (i_stim[i] - ion_scale * p[i, G_L] * (V - p[i, E_L]))


@jit
def currents(v, s, p, out):
    for i in range(v.shape[0]):
        out[i, 0] = p[i, G_L] * (v[i] - p[i, E_L])


def reference(v, s, p):
    """Plain-numpy derivatives: (None, ds/dt (empty), I_ion [uA/cm^2])."""
    v = np.asarray(v, dtype=float)
    return None, np.zeros((v.shape[0], 0)), p[:, G_L] * (v - p[:, E_L])


MODEL = MembraneModel(
    name="passive",
    citation="linear membrane of cable theory (Jack, Noble & Tsien 1975)",
    summary="leak conductance only",
    resting_potential=-65.0,
    states=(),
    parameters=(
        Parameter("g_L", 0.1, "mS/cm^2", "leak conductance (1/R_m)", "conductance", minimum=0.0),
        Parameter("E_L", -65.0, "mV", "leak reversal (resting) potential", "potential"),
    ),
    conductances=("g_L",),
    current_basis="area",
    threshold=-55.0,
    reaction=reaction,
    reference=reference,
    currents=currents,
    current_names=("I_L",),
)


@jit_inline
def kinetics(V, y, p, i, istim, a, b):
    """I_L of node i (no states; contract: cable.membrane.base)."""
    return p[i, G_L] * (V - p[i, E_L])


MODEL = replace(MODEL, kinetics=kinetics)
