"""Luo & Rudy (1991) guinea-pig ventricular action potential (phase-1 model, "LR1").

Luo CH, Rudy Y (1991) A model of the ventricular cardiac action potential.
Depolarization, repolarization, and their interaction. Circ Res 68:1501-1526.

Currents per membrane area (uA/cm^2; inward negative), as the paper gives them with
C_m = 1 uF/cm^2: ``current_basis = "area"``, so dV/dt = -I_ion/C_m and conductances are
in mS/cm^2. At another C_m the same currents charge a larger capacitance (the paper's
per-area reading); the published single-cell values hold at C_m = 1 uF/cm^2::

    I_Na = G_Na m^3 h j (V - E_Na)              fast sodium
    I_si = G_si d f (V - E_si)                  slow inward (calcium)
    I_K  = G_K sqrt(K_o/5.4) X X_i (V - E_K)    time-dependent potassium
    I_K1 = G_K1 sqrt(K_o/5.4) K1_inf (V - E_K1) time-independent potassium
    I_Kp = G_Kp K_p (V - E_Kp)                  plateau potassium
    I_b  = G_b (V - E_b)                        background

with the Nernst potentials at 37 degC (RT/F = 26.71 mV from R = 8314 mJ/(mol K),
T = 310 K, F = 96485 C/mol)::

    E_Na = (RT/F) ln(Na_o/Na_i)
    E_K  = (RT/F) ln((K_o + PR_NaK Na_o)/(K_i + PR_NaK Na_i))
    E_K1 = E_Kp = (RT/F) ln(K_o/K_i)
    E_si = 7.7 - 13.0287 ln(Ca_i)               (Ca_i in mM)

and the intracellular calcium balance dCa_i/dt = -1e-4 I_si + 0.07 (1e-4 - Ca_i) [mM/ms].

``G_K`` and ``G_K1`` are stored as their values at K_o = 5.4 mM (0.282 and 0.6047
mS/cm^2); the kernel applies the paper's sqrt(K_o/5.4) dependence, so changing ``K_o``
alone gives the paper's potassium dependence, and a ``[membrane.scale]`` factor on
either multiplies the maximal value.

Numerics: the gates m, h, j, d, f, X are advanced by Rush-Larsen (gating 0) or forward
Euler (gating 1); Ca_i, a concentration, always by forward Euler. Two removable
singularities of the rate expressions are evaluated by their limits: alpha_m at
V = -47.13 mV (limit 3.2 /ms) and the X_i factor at V = -77 mV. The h and j rates are
the paper's two-branch forms, switching at V = -40 mV (they are discontinuous there, as
published). X_i = 1 for V <= -100 mV, as in the paper.
"""

import math
from dataclasses import replace

import numpy as np

from cable.kernels.jit import jit, jit_inline
from cable.membrane.base import MembraneModel, Parameter, State

#: RT/F at 37 degC [mV]: R = 8314 mJ/(mol K), T = 310 K, F = 96485 C/mol
RT_F = 8314.0 * 310.0 / 96485.0

#: reference extracellular potassium of the sqrt(K_o/5.4) factors [mM]
K_O_REF = 5.4

# parameter indices (order of PARAMETERS)
(G_NA, G_SI, G_K, G_K1, G_KP, G_B, E_B,
 K_O, K_I, NA_O, NA_I, PR_NAK) = range(12)

# state indices (order of the states in MODEL)
S_M, S_H, S_J, S_D, S_F, S_X, S_CA = range(7)

PARAMETERS = (
    Parameter("G_Na", 23.0, "mS/cm^2", "maximal fast sodium conductance", "conductance",
              minimum=0.0),
    Parameter("G_si", 0.09, "mS/cm^2", "maximal slow inward conductance", "conductance",
              minimum=0.0),
    Parameter("G_K", 0.282, "mS/cm^2",
              "maximal time-dependent K conductance at K_o = 5.4 mM (times sqrt(K_o/5.4))",
              "conductance", minimum=0.0),
    Parameter("G_K1", 0.6047, "mS/cm^2",
              "maximal time-independent K conductance at K_o = 5.4 mM (times sqrt(K_o/5.4))",
              "conductance", minimum=0.0),
    Parameter("G_Kp", 0.0183, "mS/cm^2", "plateau K conductance", "conductance", minimum=0.0),
    Parameter("G_b", 0.03921, "mS/cm^2", "background conductance", "conductance", minimum=0.0),
    Parameter("E_b", -59.87, "mV", "background reversal potential", "potential"),
    Parameter("K_o", 5.4, "mM", "extracellular potassium (> 0)", "concentration", minimum=0.0),
    Parameter("K_i", 145.0, "mM", "intracellular potassium (> 0)", "concentration", minimum=0.0),
    Parameter("Na_o", 140.0, "mM", "extracellular sodium (> 0)", "concentration", minimum=0.0),
    Parameter("Na_i", 18.0, "mM", "intracellular sodium (> 0)", "concentration", minimum=0.0),
    Parameter("PR_NaK", 0.01833, "1", "Na/K permeability ratio of I_K", minimum=0.0),
)


# ---------------------------------------------------------------------------------------
# compiled kernels
# ---------------------------------------------------------------------------------------

@jit
def _alpha_m(V):
    # 0.32 (V + 47.13) / (1 - exp(-0.1 (V + 47.13))), limit 3.2 at V = -47.13
    x = V + 47.13
    if abs(x) < 1e-6:
        return 3.2 * (1.0 + 0.05 * x)
    return 0.32 * x / (-math.expm1(-0.1 * x))


@jit
def _x_i(V):
    # 2.837 (exp(0.04 (V + 77)) - 1) / ((V + 77) exp(0.04 (V + 35))) for V > -100, else 1;
    # limit 2.837 * 0.04 / exp(0.04 (V + 35)) at V = -77
    if V <= -100.0:
        return 1.0
    x = V + 77.0
    if abs(x) < 1e-6:
        ratio = 0.04 * (1.0 + 0.02 * x)
    else:
        ratio = math.expm1(0.04 * x) / x
    return 2.837 * ratio / math.exp(0.04 * (V + 35.0))


@jit
def _rates(V):
    am = _alpha_m(V)
    bm = 0.08 * math.exp(-V / 11.0)
    if V >= -40.0:
        ah = 0.0
        bh = 1.0 / (0.13 * (1.0 + math.exp((V + 10.66) / -11.1)))
        aj = 0.0
        bj = 0.3 * math.exp(-2.535e-7 * V) / (1.0 + math.exp(-0.1 * (V + 32.0)))
    else:
        ah = 0.135 * math.exp((80.0 + V) / -6.8)
        bh = 3.56 * math.exp(0.079 * V) + 3.1e5 * math.exp(0.35 * V)
        aj = ((-1.2714e5 * math.exp(0.2444 * V) - 3.474e-5 * math.exp(-0.04391 * V))
              * (V + 37.78) / (1.0 + math.exp(0.311 * (V + 79.23))))
        bj = 0.1212 * math.exp(-0.01052 * V) / (1.0 + math.exp(-0.1378 * (V + 40.14)))
    ad = 0.095 * math.exp(-0.01 * (V - 5.0)) / (1.0 + math.exp(-0.072 * (V - 5.0)))
    bd = 0.07 * math.exp(-0.017 * (V + 44.0)) / (1.0 + math.exp(0.05 * (V + 44.0)))
    af = 0.012 * math.exp(-0.008 * (V + 28.0)) / (1.0 + math.exp(0.15 * (V + 28.0)))
    bf = 0.0065 * math.exp(-0.02 * (V + 30.0)) / (1.0 + math.exp(-0.2 * (V + 30.0)))
    ax = 0.0005 * math.exp(0.083 * (V + 50.0)) / (1.0 + math.exp(0.057 * (V + 50.0)))
    bx = 0.0013 * math.exp(-0.06 * (V + 20.0)) / (1.0 + math.exp(-0.04 * (V + 20.0)))
    return am, bm, ah, bh, aj, bj, ad, bd, af, bf, ax, bx


@jit
def _gate(y, a, b, dt, gating):
    if gating == 0:
        tau = 1.0 / (a + b)
        yinf = a * tau
        return yinf + (y - yinf) * math.exp(-dt / tau)
    return y + dt * (a * (1.0 - y) - b * y)


@jit
def _i_si(V, d, f, Ca, g_si):
    return g_si * d * f * (V - (7.7 - 13.0287 * math.log(Ca)))


@jit
def _ionic(V, m, h, j, d, f, X, Ca, p, i):
    # the six currents of node i [uA/cm^2]
    K_o = p[i, K_O]
    K_i = p[i, K_I]
    Na_o = p[i, NA_O]
    Na_i = p[i, NA_I]
    pr = p[i, PR_NAK]
    E_Na = RT_F * math.log(Na_o / Na_i)
    E_K = RT_F * math.log((K_o + pr * Na_o) / (K_i + pr * Na_i))
    E_K1 = RT_F * math.log(K_o / K_i)
    k_factor = math.sqrt(K_o / K_O_REF)

    i_na = p[i, G_NA] * m * m * m * h * j * (V - E_Na)
    i_si = _i_si(V, d, f, Ca, p[i, G_SI])
    i_k = p[i, G_K] * k_factor * X * _x_i(V) * (V - E_K)

    dv = V - E_K1
    a_k1 = 1.02 / (1.0 + math.exp(0.2385 * (dv - 59.215)))
    b_k1 = ((0.49124 * math.exp(0.08032 * (dv + 5.476)) + math.exp(0.06175 * (dv - 594.31)))
            / (1.0 + math.exp(-0.5143 * (dv + 4.753))))
    i_k1 = p[i, G_K1] * k_factor * a_k1 / (a_k1 + b_k1) * dv

    kp = 1.0 / (1.0 + math.exp((7.488 - V) / 5.98))
    i_kp = p[i, G_KP] * kp * dv  # E_Kp = E_K1
    i_b = p[i, G_B] * (V - p[i, E_B])
    return i_na, i_si, i_k, i_k1, i_kp, i_b


@jit
def reaction(v, s, p, i_stim, dt, ion_scale, gating):
    for i in range(v.shape[0]):
        V = v[i]
        am, bm, ah, bh, aj, bj, ad, bd, af, bf, ax, bx = _rates(V)
        d_old = s[i, S_D]
        f_old = s[i, S_F]
        ca_old = s[i, S_CA]
        m = _gate(s[i, S_M], am, bm, dt, gating)
        h = _gate(s[i, S_H], ah, bh, dt, gating)
        j = _gate(s[i, S_J], aj, bj, dt, gating)
        d = _gate(d_old, ad, bd, dt, gating)
        f = _gate(f_old, af, bf, dt, gating)
        X = _gate(s[i, S_X], ax, bx, dt, gating)
        # calcium: forward Euler on the old state, like the gates
        ca = ca_old + dt * (-1e-4 * _i_si(V, d_old, f_old, ca_old, p[i, G_SI])
                            + 0.07 * (1e-4 - ca_old))
        s[i, S_M] = m
        s[i, S_H] = h
        s[i, S_J] = j
        s[i, S_D] = d
        s[i, S_F] = f
        s[i, S_X] = X
        s[i, S_CA] = ca
        i_na, i_si, i_k, i_k1, i_kp, i_b = _ionic(V, m, h, j, d, f, X, ca, p, i)
        ion = i_na + i_si + i_k + i_k1 + i_kp + i_b
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


@jit
def currents(v, s, p, out):
    for i in range(v.shape[0]):
        i_na, i_si, i_k, i_k1, i_kp, i_b = _ionic(
            v[i], s[i, S_M], s[i, S_H], s[i, S_J], s[i, S_D], s[i, S_F], s[i, S_X],
            s[i, S_CA], p, i)
        out[i, 0] = i_na
        out[i, 1] = i_si
        out[i, 2] = i_k
        out[i, 3] = i_k1
        out[i, 4] = i_kp
        out[i, 5] = i_b


# ---------------------------------------------------------------------------------------
# plain-numpy reference (written out again, independently of the kernels above)
# ---------------------------------------------------------------------------------------

def _rates_np(V):
    """The twelve alpha/beta rates [1/ms] at potentials ``V`` [mV] (numpy arrays)."""
    V = np.asarray(V, dtype=float)
    x = V + 47.13
    small = np.abs(x) < 1e-6
    xs = np.where(small, 1.0, x)
    am = np.where(small, 3.2, 0.32 * xs / -np.expm1(-0.1 * xs))
    bm = 0.08 * np.exp(-V / 11.0)
    hi = V >= -40.0
    ah = np.where(hi, 0.0, 0.135 * np.exp((80.0 + V) / -6.8))
    bh = np.where(hi, 1.0 / (0.13 * (1.0 + np.exp((V + 10.66) / -11.1))),
                  3.56 * np.exp(0.079 * V) + 3.1e5 * np.exp(0.35 * V))
    aj = np.where(hi, 0.0,
                  (-1.2714e5 * np.exp(0.2444 * V) - 3.474e-5 * np.exp(-0.04391 * V))
                  * (V + 37.78) / (1.0 + np.exp(0.311 * (V + 79.23))))
    bj = np.where(hi, 0.3 * np.exp(-2.535e-7 * V) / (1.0 + np.exp(-0.1 * (V + 32.0))),
                  0.1212 * np.exp(-0.01052 * V) / (1.0 + np.exp(-0.1378 * (V + 40.14))))
    ad = 0.095 * np.exp(-0.01 * (V - 5.0)) / (1.0 + np.exp(-0.072 * (V - 5.0)))
    bd = 0.07 * np.exp(-0.017 * (V + 44.0)) / (1.0 + np.exp(0.05 * (V + 44.0)))
    af = 0.012 * np.exp(-0.008 * (V + 28.0)) / (1.0 + np.exp(0.15 * (V + 28.0)))
    bf = 0.0065 * np.exp(-0.02 * (V + 30.0)) / (1.0 + np.exp(-0.2 * (V + 30.0)))
    ax = 0.0005 * np.exp(0.083 * (V + 50.0)) / (1.0 + np.exp(0.057 * (V + 50.0)))
    bx = 0.0013 * np.exp(-0.06 * (V + 20.0)) / (1.0 + np.exp(-0.04 * (V + 20.0)))
    return am, bm, ah, bh, aj, bj, ad, bd, af, bf, ax, bx


def _currents_np(V, s, p):
    """The six currents (I_Na, I_si, I_K, I_K1, I_Kp, I_b) [uA/cm^2] (numpy arrays)."""
    V = np.asarray(V, dtype=float)
    m, h, j, d, f, X, Ca = (s[:, k] for k in range(7))
    K_o, K_i, Na_o, Na_i, pr = p[:, K_O], p[:, K_I], p[:, NA_O], p[:, NA_I], p[:, PR_NAK]
    E_Na = RT_F * np.log(Na_o / Na_i)
    E_K = RT_F * np.log((K_o + pr * Na_o) / (K_i + pr * Na_i))
    E_K1 = RT_F * np.log(K_o / K_i)
    E_si = 7.7 - 13.0287 * np.log(Ca)
    k_factor = np.sqrt(K_o / K_O_REF)

    x = V + 77.0
    small = np.abs(x) < 1e-6
    xs = np.where(small, 1.0, x)
    ratio = np.where(small, 0.04, np.expm1(0.04 * xs) / xs)
    x_i = np.where(V > -100.0, 2.837 * ratio / np.exp(0.04 * (V + 35.0)), 1.0)

    dv = V - E_K1
    a_k1 = 1.02 / (1.0 + np.exp(0.2385 * (dv - 59.215)))
    b_k1 = ((0.49124 * np.exp(0.08032 * (dv + 5.476)) + np.exp(0.06175 * (dv - 594.31)))
            / (1.0 + np.exp(-0.5143 * (dv + 4.753))))
    kp = 1.0 / (1.0 + np.exp((7.488 - V) / 5.98))

    i_na = p[:, G_NA] * m**3 * h * j * (V - E_Na)
    i_si = p[:, G_SI] * d * f * (V - E_si)
    i_k = p[:, G_K] * k_factor * X * x_i * (V - E_K)
    i_k1 = p[:, G_K1] * k_factor * a_k1 / (a_k1 + b_k1) * dv
    i_kp = p[:, G_KP] * kp * dv
    i_b = p[:, G_B] * (V - p[:, E_B])
    return i_na, i_si, i_k, i_k1, i_kp, i_b


def reference(v, s, p):
    """Plain-numpy derivatives: (None, ds/dt [1/ms; mM/ms for Ca_i], I_ion [uA/cm^2])."""
    v = np.asarray(v, dtype=float)
    s = np.asarray(s, dtype=float)
    p = np.asarray(p, dtype=float)
    am, bm, ah, bh, aj, bj, ad, bd, af, bf, ax, bx = _rates_np(v)
    i_na, i_si, i_k, i_k1, i_kp, i_b = _currents_np(v, s, p)
    ds = np.empty_like(s)
    for k, (a, b) in enumerate(((am, bm), (ah, bh), (aj, bj), (ad, bd), (af, bf), (ax, bx))):
        ds[:, k] = a * (1.0 - s[:, k]) - b * s[:, k]
    ds[:, S_CA] = -1e-4 * i_si + 0.07 * (1e-4 - s[:, S_CA])
    return None, ds, i_na + i_si + i_k + i_k1 + i_kp + i_b


def resting_state(p):
    """The quiescent fixed point for one parameter vector.

    Gates at their steady states, Ca_i where its uptake balances the window I_si, and V
    the lowest potential above -120 mV where this steady-state ionic current turns from
    inward to outward (a 1 mV scan, then two finer scans of the bracketing interval and
    a linear interpolation).

    Parameters
    ----------
    p : ndarray, shape (nparam,)

    Returns
    -------
    V : float
        Resting potential [mV].
    s : ndarray, shape (7,)
        Resting states (m, h, j, d, f, X, Ca_i).
    """
    p1 = np.asarray(p, dtype=float)

    def steady(V):
        # steady states and current at the potentials V (1-d array)
        pn = np.broadcast_to(p1, (V.shape[0], p1.shape[0]))
        rates = _rates_np(V)
        s = np.empty((V.shape[0], 7))
        for k in range(6):
            a, b = rates[2 * k], rates[2 * k + 1]
            s[:, k] = a / (a + b)
        lo = np.full(V.shape, 1e-9)
        hi = np.ones(V.shape)
        for _ in range(50):  # dCa_i/dt falls as Ca_i rises: bisect on its sign (log scale)
            s[:, S_CA] = np.sqrt(lo * hi)
            up = reference(V, s, pn)[1][:, S_CA] > 0.0
            lo = np.where(up, s[:, S_CA], lo)
            hi = np.where(up, hi, s[:, S_CA])
        s[:, S_CA] = np.sqrt(lo * hi)
        return s, reference(V, s, pn)[2]

    grid = np.arange(-120.0, 0.5, 1.0)
    for _ in range(3):
        _, ion = steady(grid)
        k = np.flatnonzero((ion[:-1] < 0.0) & (ion[1:] >= 0.0))
        if k.size == 0:
            raise ValueError("no resting potential between -120 and 0 mV")
        k = k[0]
        lo, hi = grid[k], grid[k + 1]
        V = lo - ion[k] * (hi - lo) / (ion[k + 1] - ion[k])
        grid = np.linspace(lo, hi, 101)
    s, _ = steady(np.array([V]))
    return float(V), s[0]


_V0, _S0 = resting_state(np.array([q.default for q in PARAMETERS], dtype=float))

MODEL = MembraneModel(
    name="luo-rudy-1991",
    citation="Luo CH, Rudy Y (1991) Circ Res 68:1501-1526",
    summary="guinea-pig ventricular myocyte: I_Na, I_si, I_K, I_K1, I_Kp, I_b and Ca_i",
    resting_potential=_V0,
    states=(
        State("m", _S0[S_M], "1", "I_Na activation gate"),
        State("h", _S0[S_H], "1", "I_Na fast inactivation gate"),
        State("j", _S0[S_J], "1", "I_Na slow inactivation gate"),
        State("d", _S0[S_D], "1", "I_si activation gate"),
        State("f", _S0[S_F], "1", "I_si inactivation gate"),
        State("X", _S0[S_X], "1", "I_K activation gate"),
        State("Ca_i", _S0[S_CA], "mM", "intracellular calcium concentration"),
    ),
    parameters=PARAMETERS,
    conductances=("G_Na", "G_si", "G_K", "G_K1", "G_Kp", "G_b"),
    current_basis="area",
    threshold=-40.0,
    reaction=reaction,
    reference=reference,
    currents=currents,
    current_names=("I_Na", "I_si", "I_K", "I_K1", "I_Kp", "I_b"),
)


# ---------------------------------------------------------------------------------------
# kinetics for the loop's reaction schemes (contract: cable.membrane.base)
# ---------------------------------------------------------------------------------------

@jit_inline
def kinetics(V, y, p, i, istim, a, b):
    """Right-hand side of node i: the six gates as a - b y, Ca_i as its derivative (b = 0)."""
    am, bm, ah, bh, aj, bj, ad, bd, af, bf, ax, bx = _rates(V)
    a[S_M] = am
    b[S_M] = am + bm
    a[S_H] = ah
    b[S_H] = ah + bh
    a[S_J] = aj
    b[S_J] = aj + bj
    a[S_D] = ad
    b[S_D] = ad + bd
    a[S_F] = af
    b[S_F] = af + bf
    a[S_X] = ax
    b[S_X] = ax + bx
    ca = y[S_CA]
    a[S_CA] = -1e-4 * _i_si(V, y[S_D], y[S_F], ca, p[i, G_SI]) + 0.07 * (1e-4 - ca)
    b[S_CA] = 0.0
    i_na, i_si, i_k, i_k1, i_kp, i_b = _ionic(V, y[S_M], y[S_H], y[S_J], y[S_D], y[S_F], y[S_X], ca, p, i)
    return i_na + i_si + i_k + i_k1 + i_kp + i_b


MODEL = replace(MODEL, kinetics=kinetics)
