"""Hodgkin & Huxley (1952) squid giant axon, modern sign convention.

Hodgkin AL, Huxley AF (1952) A quantitative description of membrane current and its
application to conduction and excitation in nerve. J Physiol 117:500-544.

Potentials are absolute (rest near -65 mV): the paper's reversal potentials relative to
rest (+115, -12, +10.613 mV, Table 3, sign-flipped to the modern convention) become
E_Na = 50, E_K = -77, E_L = -54.387 mV. Rates are the paper's at 6.3 degC, multiplied by
phi = 3^((T - 6.3)/10) (Q10 = 3).

The hand-written model that ``hodgkin-huxley-1952`` was until the package generated it from
its description (cable/membrane/equations/hodgkin_huxley_1952.py): kept here only as a test
oracle (``conftest.oracle("hodgkin-huxley-1952").MODEL``; kernel, numpy reference, currents,
kinetics and the hand-written fast path with its tables and vectorised kinetics).
"""

from dataclasses import replace

import numpy as np

from cable.kernels.elementary import exp as vexp
from cable.kernels.elementary import exp_nonpositive, fma
from cable.kernels.jit import jit, jit_inline
from cable.membrane.base import FastPath, MembraneModel, Parameter, State

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


# ----------------------------------------------------------------------------- fast path
# The same rates in a form with two exponentials and one division per gate, so that the
# node loop vectorises (see cable/membrane/base.py, FastPath). With Y = exp(-(V+65)/80):
# exp(-(V+65)/20) = Y^4 and exp(-(V+a)/10) = Y^8 exp((65-a)/10) for a = 40, 35, 55; only
# exp(-(V+65)/18) needs an exponential of its own. For a gate with rates a = N/D and b,
# y_inf = a/(a+b) and a+b share the reciprocal R = 1/(Q D), Q = N + b D:
# y_inf = N D R, a + b = Q^2 R (one division per gate; one for all three was measured
# slower: the extra products cost more than the divider, which runs alongside).
_E25 = float(np.exp(2.5))
_E30 = float(np.exp(3.0))
_E10 = float(np.exp(1.0))
_LN3_10 = float(np.log(3.0) / 10.0)
#: below this |u| the removable singularity u/(exp(u)-1) is taken from its series
#: 1 - u/2 + u^2/12 (next term u^4/720: below 1e-19 there)
_SERIES = 1e-4


@jit_inline
def _phi(temperature):
    return vexp(_LN3_10 * (temperature - 6.3))


@jit_inline
def _gate_rates(V, phi):
    """(y_inf, a + b) of m, h and n at the potential V (the rates of :func:`_rates`)."""
    w = -(V + 65.0)
    y = vexp(w * 0.0125)
    z = vexp(w * (1.0 / 18.0))
    y2 = y * y
    y4 = y2 * y2
    y8 = y4 * y4
    u = -(V + 40.0) * 0.1
    small = abs(u) < _SERIES
    num = fma(u, fma(u, 1.0 / 12.0, -0.5), 1.0) if small else u
    den = 1.0 if small else fma(y8, _E25, -1.0)
    q = fma(4.0 * z, den, num)
    r = 1.0 / (q * den)
    m_inf = num * den * r
    m_rate = phi * q * q * r
    g = fma(y8, _E30, 1.0)
    a = 0.07 * y4 * g
    q = a + 1.0
    r = 1.0 / (q * g)
    h_inf = a * g * r
    h_rate = phi * q * q * r
    u = -(V + 55.0) * 0.1
    small = abs(u) < _SERIES
    num = 0.1 * (fma(u, fma(u, 1.0 / 12.0, -0.5), 1.0) if small else u)
    den = 1.0 if small else fma(y8, _E10, -1.0)
    q = fma(0.125 * y, den, num)
    r = 1.0 / (q * den)
    n_inf = num * den * r
    n_rate = phi * q * q * r
    return m_inf, m_rate, h_inf, h_rate, n_inf, n_rate


@jit_inline
def _exact_gates(V, phi, m, h, n, dt, gating):
    """Gates advanced over dt at the potential V (the rates of :func:`_rates`)."""
    m_inf, m_rate, h_inf, h_rate, n_inf, n_rate = _gate_rates(V, phi)
    if gating == 0:
        m = fma(m - m_inf, exp_nonpositive(-dt * m_rate), m_inf)
        h = fma(h - h_inf, exp_nonpositive(-dt * h_rate), h_inf)
        n = fma(n - n_inf, exp_nonpositive(-dt * n_rate), n_inf)
    else:
        m = fma(dt * m_rate, m_inf - m, m)
        h = fma(dt * h_rate, h_inf - h, h)
        n = fma(dt * n_rate, n_inf - n, n)
    return m, h, n


@jit_inline
def _ionic(V, m, h, n, g_na, g_k, g_l, e_na, e_k, e_l):
    n2 = n * n
    return fma(g_na * m * m * m * h, V - e_na, fma(g_k * n2 * n2, V - e_k, g_l * (V - e_l)))


@jit_inline
def _tabulated_gates(table, g, j, f, m, h, n):
    """y <- A + B y with A, B interpolated in row j of group g's table at fraction f (columns A, dA, B, dB)."""
    m = fma(fma(f, table[g, j, 3], table[g, j, 2]), m, fma(f, table[g, j, 1], table[g, j, 0]))
    h = fma(fma(f, table[g, j, 7], table[g, j, 6]), h, fma(f, table[g, j, 5], table[g, j, 4]))
    n = fma(fma(f, table[g, j, 11], table[g, j, 10]), n, fma(f, table[g, j, 9], table[g, j, 8]))
    return m, h, n


@jit_inline
def reaction_fast(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):
    """Fast reaction step (contract: cable.membrane.base.FastPath).

    Inlined into the time loop that calls it (``jit_inline``), so that the loop's cache
    entry, keyed by the sources of this module and of cable.kernels, is never stale.
    """
    nn = v.shape[0]
    ms = sT[0]
    hs = sT[1]
    ns = sT[2]
    if pT.shape[1] == 1:
        # the same parameters at every node
        phi = _phi(pT[TEMPERATURE, 0])
        g_na, g_k, g_l = pT[G_NA, 0], pT[G_K, 0], pT[G_L, 0]
        e_na, e_k, e_l = pT[E_NA, 0], pT[E_K, 0], pT[E_L, 0]
        if table.shape[1] > 1:
            _tabulated_loop(v, ms, hs, ns, table, group, v_lo, inv_dv, pT[TEMPERATURE], dt, gating)
            for i in range(nn):
                V = v[i]
                ion = _ionic(V, ms[i], hs[i], ns[i], g_na, g_k, g_l, e_na, e_k, e_l)
                v[i] = V + dt * (i_stim[i] - ion_scale * ion)
            return
        for i in range(nn):
            V = v[i]
            m, h, n = _exact_gates(V, phi, ms[i], hs[i], ns[i], dt, gating)
            ms[i] = m
            hs[i] = h
            ns[i] = n
            ion = _ionic(V, m, h, n, g_na, g_k, g_l, e_na, e_k, e_l)
            v[i] = V + dt * (i_stim[i] - ion_scale * ion)
        return
    g_na, g_k, g_l = pT[G_NA], pT[G_K], pT[G_L]
    e_na, e_k, e_l = pT[E_NA], pT[E_K], pT[E_L]
    temp = pT[TEMPERATURE]
    if table.shape[1] > 1:
        # each node's table is its temperature's (its table group: see FastPath.table_parameters)
        _tabulated_loop(v, ms, hs, ns, table, group, v_lo, inv_dv, temp, dt, gating)
        for i in range(nn):
            V = v[i]
            ion = _ionic(V, ms[i], hs[i], ns[i], g_na[i], g_k[i], g_l[i], e_na[i], e_k[i], e_l[i])
            v[i] = V + dt * (i_stim[i] - ion_scale * ion)
        return
    for i in range(nn):
        V = v[i]
        m, h, n = _exact_gates(V, _phi(temp[i]), ms[i], hs[i], ns[i], dt, gating)
        ms[i] = m
        hs[i] = h
        ns[i] = n
        ion = _ionic(V, m, h, n, g_na[i], g_k[i], g_l[i], e_na[i], e_k[i], e_l[i])
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


@jit_inline
def _tabulated_loop(v, ms, hs, ns, table, group, v_lo, inv_dv, temp, dt, gating):
    # rows and fractions first (a vectorised pass), then the gates (a scalar pass: each
    # node reads its own rows); a node outside the table takes the exact rates. Node i's
    # table is table[group[i]] and its temperature temp[i] (one of each: every node's)
    nn = v.shape[0]
    top = table.shape[1] - 1.0
    one = table.shape[0] == 1
    rows = np.empty(nn, dtype=np.int64)
    frac = np.empty(nn)
    inside = True
    for i in range(nn):
        x = (v[i] - v_lo) * inv_dv
        inside = inside & (x >= 0.0) & (x < top)
        j = np.int64(x)
        rows[i] = j
        frac[i] = x - np.float64(j)
    if inside:
        for i in range(nn):
            ms[i], hs[i], ns[i] = _tabulated_gates(table, 0 if one else group[i], rows[i], frac[i], ms[i], hs[i],
                                                   ns[i])
        return
    for i in range(nn):
        V = v[i]
        x = (V - v_lo) * inv_dv
        if x >= 0.0 and x < top:
            m, h, n = _tabulated_gates(table, 0 if one else group[i], rows[i], frac[i], ms[i], hs[i], ns[i])
        else:
            m, h, n = _exact_gates(V, _phi(temp[0 if temp.shape[0] == 1 else i]), ms[i], hs[i], ns[i], dt, gating)
        ms[i] = m
        hs[i] = h
        ns[i] = n


def _rates_numpy(V, phi):
    """The rates of :func:`_rates` on an array of potentials (for the tables) [1/ms]."""
    def trap(x):
        u = x / 10.0
        with np.errstate(invalid="ignore", divide="ignore"):
            out = np.where(np.abs(u) < 1e-8, 1.0 - 0.5 * u, u / np.expm1(u))
        return 10.0 * out

    am = phi * 0.1 * trap(-(V + 40.0))
    bm = phi * 4.0 * np.exp(-(V + 65.0) / 18.0)
    ah = phi * 0.07 * np.exp(-(V + 65.0) / 20.0)
    bh = phi / (1.0 + np.exp(-(V + 35.0) / 10.0))
    an = phi * 0.01 * trap(-(V + 55.0))
    bn = phi * 0.125 * np.exp(-(V + 65.0) / 80.0)
    return (am, bm), (ah, bh), (an, bn)


def build_table(p_row, dt, gating, v_lo, v_hi, dv):
    """Gate coefficients on V = v_lo + j dv (contract: cable.membrane.base.FastPath).

    Columns per gate (m, h, n): A, A(j+1) - A(j), B, B(j+1) - B(j), where the gate
    update over dt is y <- A + B y: Rush-Larsen A = y_inf (1 - E), B = E =
    exp(-dt (a + b)); forward Euler A = dt a, B = 1 - dt (a + b).
    """
    rows = int(round((v_hi - v_lo) / dv)) + 1
    V = v_lo + dv * np.arange(rows)
    phi = 3.0 ** ((p_row[TEMPERATURE] - 6.3) / 10.0)
    table = np.zeros((rows, 12))
    for g, (a, b) in enumerate(_rates_numpy(V, phi)):
        total = a + b
        if gating == 0:
            decay = np.exp(-dt * total)
            coef_a, coef_b = a / total * (1.0 - decay), decay
        else:
            coef_a, coef_b = dt * a, 1.0 - dt * total
        for c, col in enumerate((coef_a, coef_b)):
            table[:, 4 * g + 2 * c] = col
            table[:-1, 4 * g + 2 * c + 1] = np.diff(col)
    return table


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
    fast=FastPath(kernel=reaction_fast, build_table=build_table, table_parameters=("temperature",),
                  v_lo=-150.0, v_hi=100.0, dv=0.05),
)


# ----------------------------------------------------------------------------- kinetics
@jit_inline
def kinetics(V, y, p, i, istim, a, b):
    """Right-hand side of node i for the loop's reaction schemes (contract: cable.membrane.base;
    no state carries the stimulus, so ``istim`` is unused)."""
    phi = 3.0 ** ((p[i, TEMPERATURE] - 6.3) / 10.0)
    am, bm, ah, bh, an, bn = _rates(V, phi)
    a[0] = am
    b[0] = am + bm
    a[1] = ah
    b[1] = ah + bh
    a[2] = an
    b[2] = an + bn
    m, h, n = y[0], y[1], y[2]
    n2 = n * n
    return (p[i, G_NA] * m * m * m * h * (V - p[i, E_NA]) + p[i, G_K] * n2 * n2 * (V - p[i, E_K])
            + p[i, G_L] * (V - p[i, E_L]))


MODEL = replace(MODEL, kinetics=kinetics)


# ------------------------------------------------------------------- kinetics, fast path
# The right-hand side of every node at once, states and parameters stored by state and
# parameter (contract: cable.membrane.base.FastPath.kinetics), with the rates of
# _gate_rates (the vectorisable form that _exact_gates also uses).

@jit_inline
def _node_kinetics(V, m, h, n, phi, g_na, g_k, g_l, e_na, e_k, e_l):
    m_inf, m_rate, h_inf, h_rate, n_inf, n_rate = _gate_rates(V, phi)
    return (m_inf * m_rate, m_rate, h_inf * h_rate, h_rate, n_inf * n_rate, n_rate,
            _ionic(V, m, h, n, g_na, g_k, g_l, e_na, e_k, e_l))


@jit_inline
def kinetics_fast(v, sT, pT, i_stim, a, b, ion):
    """a, b (3, n) and I_ion (n) of every node (contract: cable.membrane.base.FastPath.kinetics;
    ``i_stim`` unused)."""
    nn = v.shape[0]
    ms, hs, ns = sT[0], sT[1], sT[2]
    am, ah, an = a[0], a[1], a[2]
    bm, bh, bn = b[0], b[1], b[2]
    if pT.shape[1] == 1:
        # the same parameters at every node (the same arithmetic per node as below)
        phi = _phi(pT[TEMPERATURE, 0])
        g_na, g_k, g_l = pT[G_NA, 0], pT[G_K, 0], pT[G_L, 0]
        e_na, e_k, e_l = pT[E_NA, 0], pT[E_K, 0], pT[E_L, 0]
        for i in range(nn):
            am[i], bm[i], ah[i], bh[i], an[i], bn[i], ion[i] = _node_kinetics(
                v[i], ms[i], hs[i], ns[i], phi, g_na, g_k, g_l, e_na, e_k, e_l)
        return
    temp = pT[TEMPERATURE]
    for i in range(nn):
        am[i], bm[i], ah[i], bh[i], an[i], bn[i], ion[i] = _node_kinetics(
            v[i], ms[i], hs[i], ns[i], _phi(temp[i]), pT[G_NA, i], pT[G_K, i], pT[G_L, i], pT[E_NA, i],
            pT[E_K, i], pT[E_L, i])


MODEL = replace(MODEL, fast=replace(MODEL.fast, kinetics=kinetics_fast))
