"""Integrators of the reaction step (``numerics.reaction``), applied by the time loop.

The reaction step advances every node's membrane equations over one step dt with the
stimulus held at its mean over the step (see :mod:`cable.kernels.integrate`)::

    dV/dt  = i_stim - ion_scale * I_ion(V, y)
    dy_k/dt = a_k(V, y) - b_k(V, y) y_k          (b_k >= 0; b_k = 0 for non-gates)

The model supplies the right-hand side through its ``kinetics`` kernel (contract in
:mod:`cable.membrane.base`); the scheme is chosen here:

* ``"rush-larsen"`` (default): the model's own ``reaction`` kernel: gates by Rush &
  Larsen (1978, IEEE Trans Biomed Eng 25:389), the potential and the other states by
  forward Euler: first order in dt.
* ``"rush-larsen-2"``: second-order Rush-Larsen, explicit-midpoint form (Sundnes,
  Artebrant, Skavhaug & Tveito 2009, IEEE TBME 56:2546; the order-2 generalisation of
  Perego & Veneziani 2009, Electron Trans Numer Anal 35:234): a first-order step to
  t + dt/2 gives the midpoint state; the rates a, b and the potential's right-hand side
  evaluated there advance the step from t, each y_k by the exact solution of the frozen
  linear equation (exponential for gates, Euler for b_k = 0).
* ``"heun"``: explicit trapezoid, Runge-Kutta of order 2 for all states (Heun 1900;
  from memory).
* ``"rk4"``: the classical Runge-Kutta method of order 4 (Runge 1895, Kutta 1901).

With Strang splitting and Crank-Nicolson diffusion a second-order reaction step makes
the whole scheme second order in dt (rk4 too: the splitting limits it to 2 in a strand;
a single cell has no diffusion, so rk4 shows its own order 4). Godunov splitting, or
backward-Euler diffusion, stays first order whatever the reaction scheme.

The templates below are compiled once per model by :func:`kernel` (``specialise``
binds ``kinetics``) and take the arguments of the model's ``reaction`` (``gating`` is
ignored: it selects the gate update of ``"rush-larsen"`` only).
"""

from __future__ import annotations

import functools
import math

import numpy as np

from cable.kernels.jit import jit_inline

SCHEMES = ("rush-larsen", "rush-larsen-2", "heun", "rk4")
DEFAULT = "rush-larsen"
#: order in dt of each scheme on a single cell (smooth right-hand side)
ORDER = {"rush-larsen": 1, "rush-larsen-2": 2, "heun": 2, "rk4": 4}

#: largest dt [ms] at which a single cell and a strand still give a regular action potential,
#: measured here by bisection (``python tools/bench/reaction_schemes.py --stability``; HH at
#: 6.3 and 18.5 degC, the smaller kept; TP06 epi, LR1 and the others at their defaults).
#: Beyond it a run is warned (see :func:`stability_note`).
STABLE_DT: dict = {}


def kinetics(V, y, p, i, a, b):  # bound by specialise()
    raise NotImplementedError


@jit_inline
def _flow(y, a, b, h):
    """y advanced over h by dy/dt = a - b y with a, b frozen (exact; Euler when b = 0)."""
    z = b * h
    f = h if z == 0.0 else -math.expm1(-z) / b
    return y + (a - b * y) * f


def rush_larsen_2(v, s, p, i_stim, dt, ion_scale, gating):
    """Second-order Rush-Larsen step of every node (explicit midpoint, see the module docstring)."""
    m = s.shape[1]
    a = np.empty(m)
    b = np.empty(m)
    y = np.empty(m)
    h = 0.5 * dt
    for i in range(v.shape[0]):
        V = v[i]
        si = s[i]
        ion = kinetics(V, si, p, i, a, b)
        for k in range(m):
            y[k] = _flow(si[k], a[k], b[k], h)
        ion = kinetics(V + h * (i_stim[i] - ion_scale * ion), y, p, i, a, b)
        for k in range(m):
            si[k] = _flow(si[k], a[k], b[k], dt)
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


def heun(v, s, p, i_stim, dt, ion_scale, gating):
    """Heun's method (explicit trapezoid) for the potential and every state of every node."""
    m = s.shape[1]
    a = np.empty(m)
    b = np.empty(m)
    y = np.empty(m)
    k0 = np.empty(m)
    for i in range(v.shape[0]):
        V = v[i]
        si = s[i]
        dv0 = i_stim[i] - ion_scale * kinetics(V, si, p, i, a, b)
        for k in range(m):
            k0[k] = a[k] - b[k] * si[k]
            y[k] = si[k] + dt * k0[k]
        dv1 = i_stim[i] - ion_scale * kinetics(V + dt * dv0, y, p, i, a, b)
        for k in range(m):
            si[k] = si[k] + 0.5 * dt * (k0[k] + (a[k] - b[k] * y[k]))
        v[i] = V + 0.5 * dt * (dv0 + dv1)


def rk4(v, s, p, i_stim, dt, ion_scale, gating):
    """The classical fourth-order Runge-Kutta step for the potential and every state."""
    m = s.shape[1]
    a = np.empty(m)
    b = np.empty(m)
    y = np.empty(m)
    acc = np.empty(m)
    h = 0.5 * dt
    for i in range(v.shape[0]):
        V = v[i]
        si = s[i]
        # stage 1
        dv = i_stim[i] - ion_scale * kinetics(V, si, p, i, a, b)
        dv_sum = dv
        for k in range(m):
            d = a[k] - b[k] * si[k]
            acc[k] = d
            y[k] = si[k] + h * d
        # stage 2
        dv = i_stim[i] - ion_scale * kinetics(V + h * dv, y, p, i, a, b)
        dv_sum += 2.0 * dv
        for k in range(m):
            d = a[k] - b[k] * y[k]
            acc[k] += 2.0 * d
            y[k] = si[k] + h * d
        # stage 3
        dv = i_stim[i] - ion_scale * kinetics(V + h * dv, y, p, i, a, b)
        dv_sum += 2.0 * dv
        for k in range(m):
            d = a[k] - b[k] * y[k]
            acc[k] += 2.0 * d
            y[k] = si[k] + dt * d
        # stage 4
        dv = i_stim[i] - ion_scale * kinetics(V + dt * dv, y, p, i, a, b)
        dv_sum += dv
        for k in range(m):
            si[k] = si[k] + dt / 6.0 * (acc[k] + (a[k] - b[k] * y[k]))
        v[i] = V + dt / 6.0 * dv_sum


_TEMPLATES = {"rush-larsen-2": rush_larsen_2, "heun": heun, "rk4": rk4}


@functools.lru_cache(maxsize=None)
def kernel(model_name: str, scheme: str):
    """The reaction kernel of ``scheme`` for model ``model_name`` (signature of ``reaction``).

    ``"rush-larsen"`` is the model's own ``reaction``; the others are the templates of this
    module compiled with the model's ``kinetics``.
    """
    from cable.kernels.jit import specialise
    from cable.membrane import get_model

    model = get_model(model_name)
    if scheme == DEFAULT:
        return model.reaction
    if model.kinetics is None:
        raise ValueError(f"model {model_name} supplies no kinetics kernel; only 'rush-larsen' applies")
    return specialise(_TEMPLATES[scheme], model.name, kinetics=model.kinetics)


def stability_note(model_name: str, scheme: str, dt: float) -> str | None:
    """A warning when ``dt`` [ms] exceeds the measured stability limit of the scheme on the model."""
    limit = STABLE_DT.get((model_name, scheme))
    if limit is None or dt <= limit:
        return None
    return (f"numerics.dt = {dt:g} ms exceeds the largest stable step measured for numerics.reaction = "
            f"\"{scheme}\" on {model_name}, {limit:g} ms (see cable/kernels/schemes.py); the run may blow up "
            f"or give a wrong action potential: reduce dt.")
