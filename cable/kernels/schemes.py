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

from cable.kernels.elementary import exp_nonpositive
from cable.kernels.jit import jit_inline

SCHEMES = ("rush-larsen", "rush-larsen-2", "heun", "rk4")
DEFAULT = "rush-larsen"
#: order in dt of each scheme on a single cell (smooth right-hand side)
ORDER = {"rush-larsen": 1, "rush-larsen-2": 2, "heun": 2, "rk4": 4}

#: largest dt [ms] at which a single cell paced once still gives a regular action potential
#: (no blow-up, APD90 within 5% of the scheme's own at a fine dt), measured here by bisection
#: to 2% (``python tools/bench/reaction_schemes.py --stability``): HH at 6.3 and 18.5 degC, the
#: smaller kept; LR1 and TP06 (epi) at their defaults. The explicit Runge-Kutta schemes are
#: held back by the fastest gate (LR1's m at rest, a + b ~ 180/ms; TP06's, faster still).
#: Beyond it a run is warned (:func:`stability_note`). "rush-larsen", the default, is not
#: listed, so that its runs say what they said before (measured: HH 0.0445, LR1 0.464,
#: TP06 0.470 ms). Models not listed were not measured.
STABLE_DT: dict = {
    ("hodgkin-huxley-1952", "rush-larsen-2"): 0.0671,
    ("hodgkin-huxley-1952", "heun"): 0.0664,
    ("hodgkin-huxley-1952", "rk4"): 0.0919,
    ("luo-rudy-1991", "rush-larsen-2"): 0.475,
    ("luo-rudy-1991", "heun"): 0.0129,
    ("luo-rudy-1991", "rk4"): 0.0176,
    ("ten-tusscher-panfilov-2006", "rush-larsen-2"): 0.629,
    ("ten-tusscher-panfilov-2006", "heun"): 0.00209,
    ("ten-tusscher-panfilov-2006", "rk4"): 0.00286,
}


def kinetics(V, y, p, i, istim, a, b):  # bound by specialise()
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
        ion = kinetics(V, si, p, i, i_stim[i], a, b)
        for k in range(m):
            y[k] = _flow(si[k], a[k], b[k], h)
        ion = kinetics(V + h * (i_stim[i] - ion_scale * ion), y, p, i, i_stim[i], a, b)
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
        dv0 = i_stim[i] - ion_scale * kinetics(V, si, p, i, i_stim[i], a, b)
        for k in range(m):
            k0[k] = a[k] - b[k] * si[k]
            y[k] = si[k] + dt * k0[k]
        dv1 = i_stim[i] - ion_scale * kinetics(V + dt * dv0, y, p, i, i_stim[i], a, b)
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
        dv = i_stim[i] - ion_scale * kinetics(V, si, p, i, i_stim[i], a, b)
        dv_sum = dv
        for k in range(m):
            d = a[k] - b[k] * si[k]
            acc[k] = d
            y[k] = si[k] + h * d
        # stages 2 and 3 (the midpoint twice; the third's result reaches the end of the step)
        for stage in range(2):
            dv = i_stim[i] - ion_scale * kinetics(V + h * dv, y, p, i, i_stim[i], a, b)
            dv_sum += 2.0 * dv
            step = h if stage == 0 else dt
            for k in range(m):
                d = a[k] - b[k] * y[k]
                acc[k] += 2.0 * d
                y[k] = si[k] + step * d
        # stage 4
        dv = i_stim[i] - ion_scale * kinetics(V + dt * dv, y, p, i, i_stim[i], a, b)
        dv_sum += dv
        for k in range(m):
            si[k] = si[k] + dt / 6.0 * (acc[k] + (a[k] - b[k] * y[k]))
        v[i] = V + dt / 6.0 * dv_sum


# ----------------------------------------------------------------------------- fast path
# The same schemes over all nodes at once, for models whose FastPath has a ``kinetics``
# (states stored by state, sT (nstate, n)): each stage is a pass over the nodes that LLVM
# vectorises (the exponential of the gates from cable.kernels.elementary, 1 ulp). The
# signature is that of FastPath.kernel, so the fast time loop runs them unchanged.

def fast_kinetics(v, sT, pT, i_stim, a, b, ion):  # bound by specialise()
    raise NotImplementedError


@jit_inline
def _flow_vector(y, a, b, h):
    """:func:`_flow` with a vectorisable exponential (b >= 0)."""
    z = b * h
    return y + (a - b * y) * ((1.0 - exp_nonpositive(-z)) / b if z > 0.0 else h)


@jit_inline
def _flow_all(out, s, a, b, h):
    for k in range(s.shape[0]):
        ok, sk, ak, bk = out[k], s[k], a[k], b[k]
        for i in range(s.shape[1]):
            ok[i] = _flow_vector(sk[i], ak[i], bk[i], h)


def rush_larsen_2_fast(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):
    """:func:`rush_larsen_2` over all nodes at once (``table`` and ``group`` unused: exact rates)."""
    m, n = sT.shape
    a = np.empty((m, n))
    b = np.empty((m, n))
    y = np.empty((m, n))
    ion = np.empty(n)
    w = np.empty(n)
    h = 0.5 * dt
    fast_kinetics(v, sT, pT, i_stim, a, b, ion)
    _flow_all(y, sT, a, b, h)
    for i in range(n):
        w[i] = v[i] + h * (i_stim[i] - ion_scale * ion[i])
    fast_kinetics(w, y, pT, i_stim, a, b, ion)
    _flow_all(sT, sT, a, b, dt)
    for i in range(n):
        v[i] = v[i] + dt * (i_stim[i] - ion_scale * ion[i])


def heun_fast(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):
    """:func:`heun` over all nodes at once."""
    m, n = sT.shape
    a = np.empty((m, n))
    b = np.empty((m, n))
    y = np.empty((m, n))
    ion = np.empty(n)
    w = np.empty(n)
    fast_kinetics(v, sT, pT, i_stim, a, b, ion)
    for k in range(m):
        yk, sk, ak, bk = y[k], sT[k], a[k], b[k]
        for i in range(n):
            d = ak[i] - bk[i] * sk[i]
            yk[i] = sk[i] + dt * d
            ak[i] = d          # kept: the first stage's derivative
    for i in range(n):
        w[i] = i_stim[i] - ion_scale * ion[i]
    a1 = np.empty((m, n))
    fast_kinetics(v + dt * w, y, pT, i_stim, a1, b, ion)
    for k in range(m):
        sk, ak, a1k, bk, yk = sT[k], a[k], a1[k], b[k], y[k]
        for i in range(n):
            sk[i] = sk[i] + 0.5 * dt * (ak[i] + (a1k[i] - bk[i] * yk[i]))
    for i in range(n):
        v[i] = v[i] + 0.5 * dt * (w[i] + (i_stim[i] - ion_scale * ion[i]))


def rk4_fast(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):
    """:func:`rk4` over all nodes at once."""
    m, n = sT.shape
    a = np.empty((m, n))
    b = np.empty((m, n))
    y = np.empty((m, n))
    acc = np.empty((m, n))
    ion = np.empty(n)
    w = np.empty(n)
    dv_sum = np.empty(n)
    h = 0.5 * dt
    for stage in range(4):
        src = sT if stage == 0 else y
        fast_kinetics(v if stage == 0 else w, src, pT, i_stim, a, b, ion)
        step = dt if stage == 2 else h
        weight = 1.0 if stage == 0 or stage == 3 else 2.0
        for i in range(n):
            dv = i_stim[i] - ion_scale * ion[i]
            dv_sum[i] = weight * dv if stage == 0 else dv_sum[i] + weight * dv
            w[i] = v[i] + step * dv
        for k in range(m):
            yk, sk, ak, bk, ck, rk = y[k], sT[k], a[k], b[k], acc[k], src[k]
            for i in range(n):
                d = ak[i] - bk[i] * rk[i]
                ck[i] = weight * d if stage == 0 else ck[i] + weight * d
                yk[i] = sk[i] + step * d
    for k in range(m):
        sk, ck = sT[k], acc[k]
        for i in range(n):
            sk[i] = sk[i] + dt / 6.0 * ck[i]
    for i in range(n):
        v[i] = v[i] + dt / 6.0 * dv_sum[i]


_TEMPLATES = {"rush-larsen-2": rush_larsen_2, "heun": heun, "rk4": rk4}
_FAST_TEMPLATES = {"rush-larsen-2": rush_larsen_2_fast, "heun": heun_fast, "rk4": rk4_fast}


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


@functools.lru_cache(maxsize=None)
def fast_kernel(model_name: str, scheme: str):
    """The fast kernel of ``scheme`` (signature of ``FastPath.kernel``) for a model whose
    fast path has ``kinetics``; ``"rush-larsen"`` is the model's own fast kernel."""
    from cable.kernels.jit import specialise
    from cable.membrane import get_model

    model = get_model(model_name)
    if scheme == DEFAULT:
        return model.fast.kernel
    return specialise(_FAST_TEMPLATES[scheme], model.name, fast_kinetics=model.fast.kinetics)


def has_fast(model, scheme: str) -> bool:
    """Whether ``scheme`` has a vectorised path for ``model`` (its FastPath supplies kinetics)."""
    if model.fast is None:
        return False
    return scheme == DEFAULT or model.fast.kinetics is not None


def stability_note(model_name: str, scheme: str, dt: float) -> str | None:
    """A warning when ``dt`` [ms] exceeds the measured stability limit of the scheme on the model."""
    limit = STABLE_DT.get((model_name, scheme))
    if limit is None or dt <= limit:
        return None
    return (f"numerics.dt = {dt:g} ms exceeds the largest stable step measured for numerics.reaction = "
            f"\"{scheme}\" on {model_name}, {limit:g} ms (see cable/kernels/schemes.py); the run may blow up "
            f"or give a wrong action potential: reduce dt.")
