"""ten Tusscher & Panfilov (2006) human ventricular myocyte.

ten Tusscher KHWJ, Panfilov AV (2006) Alternans and spiral breakup in a human ventricular
tissue model. Am J Physiol Heart Circ Physiol 291:H1088-H1100.

Twelve membrane currents (I_Na, I_to, I_Kr, I_Ks, I_K1, I_NaCa, I_NaK, I_pCa, I_pK, I_bNa,
I_bCa and the GHK-type I_CaL driven by the subspace calcium Ca_ss), and four intracellular
fluxes [mM/ms]: SERCA uptake I_up, SR leak I_leak, release I_rel through the four-state
ryanodine-receptor model reduced to the R-bar/O form of the 2006 paper, and the
subspace-to-cytosol transfer I_xfer. Calcium in the cytosol, the SR and the subspace is
buffered instantaneously; the kernel advances each *total* concentration by forward Euler
and recovers the free one from the quadratic (analytic) solution of the buffer equilibrium,
as the paper does. The numpy :func:`reference` returns the equivalent rapid-buffering
derivative d[Ca]/dt = d[Ca]_total/dt / (1 + Buf K / ([Ca] + K)^2), the dt -> 0 limit of
the same update.

Conventions and choices of this implementation
----------------------------------------------
* Currents are per capacitance [pA/pF = uA/uF] (``current_basis = "capacitance"``); the
  ionic fluxes into concentrations use the paper's cell: C_m 0.185 uF, V_c 0.016404,
  V_sr 0.001094, V_ss 0.00005468 (volumes in the paper's units), R 8314.472, T 310 K,
  F 96485.3415. These are module constants, not parameters (no temperature parameter:
  the model has no Q10 factors, and T enters only through RT/F).
* Cell type (``cell_type`` = "epi", "endo" or "mid", stored as its index 0, 1, 2): the
  parameters ``G_to`` and ``G_Ks`` mean the paper's symbols for the chosen cell type; their
  defaults follow it (G_to 0.294 epi and mid, 0.073 endo; G_Ks 0.392 epi and endo, 0.098
  mid; ``Parameter.by_label``), and a value given in a case is used as it is. A
  ``[membrane.scale]`` factor on G_to or G_Ks scales the cell's own value. Endocardial cells also
  use the slower s-gate of I_to (s_inf and tau_s); r is the same in all three types.
* The stimulus (``i_stim`` [mV/ms], positive depolarises, i.e. minus the paper's I_stim
  in pA/pF) is carried by K+, as in the paper's K_i balance, so that long pacing conserves
  charge (without it K_i drifts by about -6e-3 mM per beat at 52 mV/ms x 1 ms).
* Gates (m, h, j, Xr1, Xr2, Xs, r, s, d, f, f2, fCass and R-bar, which is linear in
  itself for fixed Ca_ss and Ca_SR) use Rush-Larsen (``gating = 0``) or forward Euler
  (``gating = 1``); Na_i, K_i and the total calcium concentrations use forward Euler with
  the currents evaluated at the old potential, the updated gates and the old
  concentrations.
* Parameters whose units have no canonical quantity in :mod:`cable.units` (pA/pF, mM/ms,
  the CaL permeability, the RyR rate constants) are declared ``"dimensionless"``: a case
  file gives them as bare numbers in the listed unit. Conductances in nS/pF are declared
  ``"rate"`` (1 nS/pF = 1/ms exactly).
* Initial state: computed, not copied: the end-diastolic state (just before the next
  stimulus) of an epicardial cell paced with this kernel at 1 Hz (52 mV/ms for 1 ms,
  Rush-Larsen, dt 0.02 ms) for 1000 beats, starting near the paper's initial values.
  During that pacing the stimulus charge was added to K_i (as in the paper and the kernel).
"""

import math
from dataclasses import replace

import numpy as np

from cable.kernels.jit import jit, jit_inline
from cable.membrane.base import FastPath, MembraneModel, Parameter, State

# physical constants and cell geometry (ten Tusscher & Panfilov 2006, Table 1)
R_GAS = 8314.472  # [J/(K kmol)] = [mJ/(K mol)], so RT/F is in mV
T_CELL = 310.0  # [K]
FARADAY = 96485.3415  # [C/mol]
C_M = 0.185  # [uF]
V_C = 0.016404  # cytoplasmic volume (paper's units)
V_SR = 0.001094  # SR volume
V_SS = 0.00005468  # subspace volume
RTF = R_GAS * T_CELL / FARADAY  # [mV]
NA_FLUX = C_M / (V_C * FARADAY)  # [mM/ms per pA/pF] into the cytosol
CA_FLUX = C_M / (2.0 * V_C * FARADAY)
CA_SS_FLUX = C_M / (2.0 * V_SS * FARADAY)

CELL_TYPES = ("epi", "endo", "mid")
EPI, ENDO, MID = range(3)
# G_to and G_Ks per cell type [nS/pF] (ten Tusscher & Panfilov 2006, Table 1 and text)
G_TO_BY_TYPE = {"epi": 0.294, "endo": 0.073, "mid": 0.294}
G_KS_BY_TYPE = {"epi": 0.392, "endo": 0.392, "mid": 0.098}

# state indices (order of STATES); the first N_GATES are Hodgkin-Huxley gates
(M, H, J, XR1, XR2, XS, R, S, D, F, F2, FCASS, R_BAR,
 CA_I, CA_SR, CA_SS, NA_I, K_I) = range(18)
N_GATES = 12

# parameter indices (order of PARAMETERS)
(G_NA, G_TO, G_KR, G_KS, P_KNA, G_K1, G_CAL, K_NACA, GAMMA, K_MCA, K_MNAI, K_SAT, ALPHA,
 P_NAK, K_MK, K_MNA, G_PCA, K_PCA, G_PK, G_BNA, G_BCA,
 V_MAXUP, K_UP, V_LEAK, V_REL, V_XFER, K1P, K2P, K3, K4, EC, MAX_SR, MIN_SR,
 BUF_C, K_BUFC, BUF_SR, K_BUFSR, BUF_SS, K_BUFSS, K_O, NA_O, CA_O, CELL_TYPE) = range(43)


def _par(name, default, units, meaning, quantity="dimensionless", **kw):
    kw.setdefault("minimum", 0.0)
    return Parameter(name, default, units, meaning, quantity, **kw)


PARAMETERS = (
    _par("G_Na", 14.838, "nS/pF", "fast sodium conductance", "rate"),
    _par("G_to", 0.294, "nS/pF", "transient outward conductance of the chosen cell type "
         "(default: epi and mid 0.294, endo 0.073)", "rate", by_label=("cell_type", G_TO_BY_TYPE)),
    _par("G_Kr", 0.153, "nS/pF", "rapid delayed rectifier conductance (at K_o 5.4 mM)", "rate"),
    _par("G_Ks", 0.392, "nS/pF", "slow delayed rectifier conductance of the chosen cell type "
         "(default: epi and endo 0.392, mid 0.098)", "rate", by_label=("cell_type", G_KS_BY_TYPE)),
    _par("p_KNa", 0.03, "1", "Na/K permeability ratio of I_Ks"),
    _par("G_K1", 5.405, "nS/pF", "inward rectifier conductance (at K_o 5.4 mM)", "rate"),
    _par("G_CaL", 3.98e-5, "cm/(ms*uF)", "L-type calcium permeability"),
    _par("k_NaCa", 1000.0, "pA/pF", "maximal Na/Ca exchanger current"),
    _par("gamma", 0.35, "1", "γ in the paper: voltage-dependence parameter of I_NaCa", maximum=1.0),
    _par("K_mCa", 1.38, "mM", "Ca_o half-saturation of I_NaCa", "concentration"),
    _par("K_mNai", 87.5, "mM", "Na half-saturation of I_NaCa", "concentration"),
    _par("k_sat", 0.1, "1", "saturation factor of I_NaCa"),
    _par("alpha", 2.5, "1", "α in the paper: enhancement factor of the outward mode of I_NaCa"),
    _par("P_NaK", 2.724, "pA/pF", "maximal Na/K pump current"),
    _par("K_mK", 1.0, "mM", "K_o half-saturation of I_NaK", "concentration"),
    _par("K_mNa", 40.0, "mM", "Na_i half-saturation of I_NaK", "concentration"),
    _par("G_pCa", 0.1238, "pA/pF", "maximal sarcolemmal calcium pump current"),
    _par("K_pCa", 0.0005, "mM", "half-saturation of I_pCa", "concentration"),
    _par("G_pK", 0.0146, "nS/pF", "plateau potassium conductance", "rate"),
    _par("G_bNa", 0.00029, "nS/pF", "background sodium conductance", "rate"),
    _par("G_bCa", 0.000592, "nS/pF", "background calcium conductance", "rate"),
    _par("V_maxup", 0.006375, "mM/ms", "maximal SERCA uptake"),
    _par("K_up", 0.00025, "mM", "half-saturation of I_up", "concentration"),
    _par("V_leak", 0.00036, "1/ms", "SR leak rate", "rate"),
    _par("V_rel", 0.102, "1/ms", "maximal SR release rate", "rate"),
    _par("V_xfer", 0.0038, "1/ms", "subspace-to-cytosol transfer rate", "rate"),
    _par("k1p", 0.15, "1/(mM^2*ms)", "k1' in the paper: R -> O rate constant of the RyR"),
    _par("k2p", 0.045, "1/(mM*ms)", "k2' in the paper: R -> I rate constant of the RyR"),
    _par("k3", 0.060, "1/ms", "O -> R rate constant of the RyR", "rate"),
    _par("k4", 0.005, "1/ms", "recovery from inactivation of the RyR", "rate"),
    _par("EC", 1.5, "mM", "Ca_SR half-saturation of k_casr", "concentration"),
    _par("max_sr", 2.5, "1", "maximum of k_casr"),
    _par("min_sr", 1.0, "1", "minimum of k_casr"),
    _par("Buf_c", 0.2, "mM", "total cytoplasmic buffer", "concentration"),
    _par("K_bufc", 0.001, "mM", "half-saturation of the cytoplasmic buffer", "concentration"),
    _par("Buf_sr", 10.0, "mM", "total SR buffer", "concentration"),
    _par("K_bufsr", 0.3, "mM", "half-saturation of the SR buffer", "concentration"),
    _par("Buf_ss", 0.4, "mM", "total subspace buffer", "concentration"),
    _par("K_bufss", 0.00025, "mM", "half-saturation of the subspace buffer", "concentration"),
    _par("K_o", 5.4, "mM", "extracellular potassium", "concentration"),
    _par("Na_o", 140.0, "mM", "extracellular sodium", "concentration"),
    _par("Ca_o", 2.0, "mM", "extracellular calcium", "concentration"),
    Parameter("cell_type", "epi", "1", "transmural cell type: epi, endo or mid (M cell)",
              choices=CELL_TYPES),
)


@jit
def _x_over_expm1(x):
    # x / (exp(x) - 1), with its limit 1 - x/2 at x = 0 (removable singularity of I_CaL)
    if abs(x) < 1e-6:
        return 1.0 - 0.5 * x
    return x / math.expm1(x)


@jit
def _kinetics(V, Ca_ss, endo):
    """Steady states and time constants [ms] of the 12 gates, in state order."""
    e = math.exp
    m_inf = 1.0 / (1.0 + e((-56.86 - V) / 9.03)) ** 2
    tau_m = (1.0 / (1.0 + e((-60.0 - V) / 5.0))) * (
        0.1 / (1.0 + e((V + 35.0) / 5.0)) + 0.1 / (1.0 + e((V - 50.0) / 200.0)))
    h_inf = 1.0 / (1.0 + e((V + 71.55) / 7.43)) ** 2
    if V >= -40.0:
        a_h = 0.0
        b_h = 0.77 / (0.13 * (1.0 + e(-(V + 10.66) / 11.1)))
        a_j = 0.0
        b_j = 0.6 * e(0.057 * V) / (1.0 + e(-0.1 * (V + 32.0)))
    else:
        a_h = 0.057 * e(-(V + 80.0) / 6.8)
        b_h = 2.7 * e(0.079 * V) + 3.1e5 * e(0.3485 * V)
        a_j = ((-2.5428e4 * e(0.2444 * V) - 6.948e-6 * e(-0.04391 * V)) * (V + 37.78)
               / (1.0 + e(0.311 * (V + 79.23))))
        b_j = 0.02424 * e(-0.01052 * V) / (1.0 + e(-0.1378 * (V + 40.14)))
    xr1_inf = 1.0 / (1.0 + e((-26.0 - V) / 7.0))
    tau_xr1 = 450.0 / (1.0 + e((-45.0 - V) / 10.0)) * 6.0 / (1.0 + e((V + 30.0) / 11.5))
    xr2_inf = 1.0 / (1.0 + e((V + 88.0) / 24.0))
    tau_xr2 = 3.0 / (1.0 + e((-60.0 - V) / 20.0)) * 1.12 / (1.0 + e((V - 60.0) / 20.0))
    xs_inf = 1.0 / (1.0 + e((-5.0 - V) / 14.0))
    tau_xs = 1400.0 / math.sqrt(1.0 + e((5.0 - V) / 6.0)) / (1.0 + e((V - 35.0) / 15.0)) + 80.0
    r_inf = 1.0 / (1.0 + e((20.0 - V) / 6.0))
    tau_r = 9.5 * e(-(V + 40.0) ** 2 / 1800.0) + 0.8
    if endo:
        s_inf = 1.0 / (1.0 + e((V + 28.0) / 5.0))
        tau_s = 1000.0 * e(-(V + 67.0) ** 2 / 1000.0) + 8.0
    else:
        s_inf = 1.0 / (1.0 + e((V + 20.0) / 5.0))
        tau_s = 85.0 * e(-(V + 45.0) ** 2 / 320.0) + 5.0 / (1.0 + e((V - 20.0) / 5.0)) + 3.0
    d_inf = 1.0 / (1.0 + e((-8.0 - V) / 7.5))
    tau_d = ((1.4 / (1.0 + e((-35.0 - V) / 13.0)) + 0.25) * 1.4 / (1.0 + e((V + 5.0) / 5.0))
             + 1.0 / (1.0 + e((50.0 - V) / 20.0)))
    f_inf = 1.0 / (1.0 + e((V + 20.0) / 7.0))
    tau_f = (1102.5 * e(-(V + 27.0) ** 2 / 225.0) + 200.0 / (1.0 + e((13.0 - V) / 10.0))
             + 180.0 / (1.0 + e((V + 30.0) / 10.0)) + 20.0)
    f2_inf = 0.67 / (1.0 + e((V + 35.0) / 7.0)) + 0.33
    tau_f2 = (600.0 * e(-(V + 25.0) ** 2 / 170.0) + 31.0 / (1.0 + e((25.0 - V) / 10.0))
              + 16.0 / (1.0 + e((V + 30.0) / 10.0)))
    c2 = (Ca_ss / 0.05) ** 2
    fcass_inf = 0.6 / (1.0 + c2) + 0.4
    tau_fcass = 80.0 / (1.0 + c2) + 2.0
    x_inf = (m_inf, h_inf, h_inf, xr1_inf, xr2_inf, xs_inf, r_inf, s_inf, d_inf, f_inf,
             f2_inf, fcass_inf)
    tau = (tau_m, 1.0 / (a_h + b_h), 1.0 / (a_j + b_j), tau_xr1, tau_xr2, tau_xs, tau_r,
           tau_s, tau_d, tau_f, tau_f2, tau_fcass)
    return x_inf, tau


@jit
def _membrane_currents(V, s, p, i):
    """The 12 membrane currents [pA/pF] of node i, in the order of ``current_names``."""
    K_i, Na_i, Ca_i, Ca_ss = s[i, K_I], s[i, NA_I], s[i, CA_I], s[i, CA_SS]
    K_o, Na_o, Ca_o = p[i, K_O], p[i, NA_O], p[i, CA_O]
    E_K = RTF * math.log(K_o / K_i)
    E_Na = RTF * math.log(Na_o / Na_i)
    E_Ca = 0.5 * RTF * math.log(Ca_o / Ca_i)
    E_Ks = RTF * math.log((K_o + p[i, P_KNA] * Na_o) / (K_i + p[i, P_KNA] * Na_i))
    g_to = p[i, G_TO]
    g_ks = p[i, G_KS]
    root_ko = math.sqrt(K_o / 5.4)
    m = s[i, M]
    I_Na = p[i, G_NA] * m * m * m * s[i, H] * s[i, J] * (V - E_Na)
    I_to = g_to * s[i, R] * s[i, S] * (V - E_K)
    I_Kr = p[i, G_KR] * root_ko * s[i, XR1] * s[i, XR2] * (V - E_K)
    I_Ks = g_ks * s[i, XS] * s[i, XS] * (V - E_Ks)
    a_k1 = 0.1 / (1.0 + math.exp(0.06 * (V - E_K - 200.0)))
    b_k1 = ((3.0 * math.exp(0.0002 * (V - E_K + 100.0)) + math.exp(0.1 * (V - E_K - 10.0)))
            / (1.0 + math.exp(-0.5 * (V - E_K))))
    I_K1 = p[i, G_K1] * root_ko * a_k1 / (a_k1 + b_k1) * (V - E_K)
    u = V / RTF
    g = p[i, GAMMA]
    I_NaCa = (p[i, K_NACA] * (math.exp(g * u) * Na_i ** 3 * Ca_o
                              - math.exp((g - 1.0) * u) * Na_o ** 3 * Ca_i * p[i, ALPHA])
              / ((p[i, K_MNAI] ** 3 + Na_o ** 3) * (p[i, K_MCA] + Ca_o)
                 * (1.0 + p[i, K_SAT] * math.exp((g - 1.0) * u))))
    I_NaK = (p[i, P_NAK] * K_o * Na_i / ((K_o + p[i, K_MK]) * (Na_i + p[i, K_MNA])
                                         * (1.0 + 0.1245 * math.exp(-0.1 * u) + 0.0353 * math.exp(-u))))
    I_pCa = p[i, G_PCA] * Ca_i / (p[i, K_PCA] + Ca_i)
    I_pK = p[i, G_PK] * (V - E_K) / (1.0 + math.exp((25.0 - V) / 5.98))
    I_bNa = p[i, G_BNA] * (V - E_Na)
    I_bCa = p[i, G_BCA] * (V - E_Ca)
    # GHK form: G_CaL d f f2 fCass 4 (V-15) F^2/(RT) (0.25 Ca_ss e^x - Ca_o)/(e^x - 1),
    # x = 2 (V-15) F/(RT), written as 2 F x/(e^x - 1) (...)
    x = 2.0 * (V - 15.0) / RTF
    I_CaL = (p[i, G_CAL] * s[i, D] * s[i, F] * s[i, F2] * s[i, FCASS] * 2.0 * FARADAY
             * _x_over_expm1(x) * (0.25 * Ca_ss * math.exp(x) - Ca_o))
    return I_Na, I_to, I_Kr, I_Ks, I_K1, I_NaCa, I_NaK, I_pCa, I_pK, I_bNa, I_bCa, I_CaL


@jit
def _ryr(Ca_SR, Ca_ss, p, i):
    """k_casr-scaled RyR rates: (k1 [1/(mM^2 ms)], k2 [1/(mM ms)])."""
    max_sr, min_sr = p[i, MAX_SR], p[i, MIN_SR]
    k_casr = max_sr - (max_sr - min_sr) / (1.0 + (p[i, EC] / Ca_SR) ** 2)
    return p[i, K1P] / k_casr, p[i, K2P] * k_casr


@jit
def _buffered(c, d_total, buf, k):
    # free concentration after the total (free + bound) changed by d_total: the positive
    # root of c^2 + b c - cc = 0, in the form without cancellation
    bc = buf - buf * c / (c + k) - d_total - c + k
    cc = k * (buf * c / (c + k) + d_total + c)
    root = math.sqrt(bc * bc + 4.0 * cc)
    if bc >= 0.0:
        return 2.0 * cc / (root + bc)
    return 0.5 * (root - bc)


@jit
def reaction(v, s, p, i_stim, dt, ion_scale, gating):
    """One reaction step of all nodes, in place (contract: :mod:`cable.membrane.base`)."""
    for i in range(v.shape[0]):
        V = v[i]
        Ca_i, Ca_SR, Ca_ss = s[i, CA_I], s[i, CA_SR], s[i, CA_SS]
        x_inf, tau = _kinetics(V, Ca_ss, int(p[i, CELL_TYPE]) == ENDO)
        for k in range(N_GATES):
            if gating == 0:
                s[i, k] = x_inf[k] - (x_inf[k] - s[i, k]) * math.exp(-dt / tau[k])
            else:
                s[i, k] = s[i, k] + dt * (x_inf[k] - s[i, k]) / tau[k]
        k1, k2 = _ryr(Ca_SR, Ca_ss, p, i)
        rate = k2 * Ca_ss + p[i, K4]  # dR/dt = k4 - rate R
        r_inf = p[i, K4] / rate
        if gating == 0:
            s[i, R_BAR] = r_inf - (r_inf - s[i, R_BAR]) * math.exp(-dt * rate)
        else:
            s[i, R_BAR] = s[i, R_BAR] + dt * (p[i, K4] - rate * s[i, R_BAR])
        (I_Na, I_to, I_Kr, I_Ks, I_K1, I_NaCa, I_NaK, I_pCa, I_pK, I_bNa, I_bCa,
         I_CaL) = _membrane_currents(V, s, p, i)
        ion = I_Na + I_to + I_Kr + I_Ks + I_K1 + I_NaCa + I_NaK + I_pCa + I_pK + I_bNa + I_bCa + I_CaL
        # intracellular fluxes [mM/ms] with the updated R-bar and the old concentrations
        O = k1 * Ca_ss * Ca_ss * s[i, R_BAR] / (p[i, K3] + k1 * Ca_ss * Ca_ss)
        I_rel = p[i, V_REL] * O * (Ca_SR - Ca_ss)
        I_up = p[i, V_MAXUP] / (1.0 + (p[i, K_UP] / Ca_i) ** 2)
        I_leak = p[i, V_LEAK] * (Ca_SR - Ca_i)
        I_xfer = p[i, V_XFER] * (Ca_ss - Ca_i)
        d_ca_i = -(I_bCa + I_pCa - 2.0 * I_NaCa) * CA_FLUX + V_SR / V_C * (I_leak - I_up) + I_xfer
        d_ca_sr = I_up - I_leak - I_rel
        d_ca_ss = -I_CaL * CA_SS_FLUX + V_SR / V_SS * I_rel - V_C / V_SS * I_xfer
        s[i, CA_I] = _buffered(Ca_i, dt * d_ca_i, p[i, BUF_C], p[i, K_BUFC])
        s[i, CA_SR] = _buffered(Ca_SR, dt * d_ca_sr, p[i, BUF_SR], p[i, K_BUFSR])
        s[i, CA_SS] = _buffered(Ca_ss, dt * d_ca_ss, p[i, BUF_SS], p[i, K_BUFSS])
        s[i, NA_I] -= dt * (I_Na + I_bNa + 3.0 * I_NaK + 3.0 * I_NaCa) * NA_FLUX
        # the stimulus is carried by K+ (ten Tusscher & Panfilov 2006; i_stim = -I_stim)
        s[i, K_I] -= dt * (I_K1 + I_to + I_Kr + I_Ks - 2.0 * I_NaK + I_pK - i_stim[i]) * NA_FLUX
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


@jit
def currents(v, s, p, out):
    """Fill ``out[n, 12]`` with the membrane currents [pA/pF] named in ``CURRENT_NAMES``."""
    for i in range(v.shape[0]):
        c = _membrane_currents(v[i], s, p, i)
        for k in range(len(c)):
            out[i, k] = c[k]


def reference(v, s, p):
    """Plain-numpy derivatives: (None, ds/dt [unit/ms], I_ion [pA/pF]).

    The calcium derivatives are those of the free concentrations under rapid buffering.
    """
    V = np.asarray(v, dtype=float)
    e = np.exp
    (m, h, j, xr1, xr2, xs, r, s_, d, f, f2, fcass, R_bar,
     Ca_i, Ca_SR, Ca_ss, Na_i, K_i) = (s[:, k] for k in range(18))
    P = {name: p[:, k] for k, name in enumerate(p_.name for p_ in PARAMETERS)}
    cell = P["cell_type"].astype(int)
    endo = cell == ENDO
    # gates
    lo = V < -40.0
    Vl = np.minimum(V, -40.0)  # keeps the unused branch finite
    a_h = np.where(lo, 0.057 * e(-(Vl + 80.0) / 6.8), 0.0)
    b_h = np.where(lo, 2.7 * e(0.079 * Vl) + 3.1e5 * e(0.3485 * Vl),
                   0.77 / (0.13 * (1.0 + e(-(V + 10.66) / 11.1))))
    a_j = np.where(lo, (-2.5428e4 * e(0.2444 * Vl) - 6.948e-6 * e(-0.04391 * Vl)) * (Vl + 37.78)
                   / (1.0 + e(0.311 * (Vl + 79.23))), 0.0)
    b_j = np.where(lo, 0.02424 * e(-0.01052 * Vl) / (1.0 + e(-0.1378 * (Vl + 40.14))),
                   0.6 * e(0.057 * V) / (1.0 + e(-0.1 * (V + 32.0))))
    h_inf = 1.0 / (1.0 + e((V + 71.55) / 7.43)) ** 2
    c2 = (Ca_ss / 0.05) ** 2
    gates = [
        (m, 1.0 / (1.0 + e((-56.86 - V) / 9.03)) ** 2,
         1.0 / (1.0 + e((-60.0 - V) / 5.0)) * (0.1 / (1.0 + e((V + 35.0) / 5.0))
                                               + 0.1 / (1.0 + e((V - 50.0) / 200.0)))),
        (h, h_inf, 1.0 / (a_h + b_h)),
        (j, h_inf, 1.0 / (a_j + b_j)),
        (xr1, 1.0 / (1.0 + e((-26.0 - V) / 7.0)),
         450.0 / (1.0 + e((-45.0 - V) / 10.0)) * 6.0 / (1.0 + e((V + 30.0) / 11.5))),
        (xr2, 1.0 / (1.0 + e((V + 88.0) / 24.0)),
         3.0 / (1.0 + e((-60.0 - V) / 20.0)) * 1.12 / (1.0 + e((V - 60.0) / 20.0))),
        (xs, 1.0 / (1.0 + e((-5.0 - V) / 14.0)),
         1400.0 / np.sqrt(1.0 + e((5.0 - V) / 6.0)) / (1.0 + e((V - 35.0) / 15.0)) + 80.0),
        (r, 1.0 / (1.0 + e((20.0 - V) / 6.0)), 9.5 * e(-(V + 40.0) ** 2 / 1800.0) + 0.8),
        (s_, np.where(endo, 1.0 / (1.0 + e((V + 28.0) / 5.0)), 1.0 / (1.0 + e((V + 20.0) / 5.0))),
         np.where(endo, 1000.0 * e(-(V + 67.0) ** 2 / 1000.0) + 8.0,
                  85.0 * e(-(V + 45.0) ** 2 / 320.0) + 5.0 / (1.0 + e((V - 20.0) / 5.0)) + 3.0)),
        (d, 1.0 / (1.0 + e((-8.0 - V) / 7.5)),
         (1.4 / (1.0 + e((-35.0 - V) / 13.0)) + 0.25) * 1.4 / (1.0 + e((V + 5.0) / 5.0))
         + 1.0 / (1.0 + e((50.0 - V) / 20.0))),
        (f, 1.0 / (1.0 + e((V + 20.0) / 7.0)),
         1102.5 * e(-(V + 27.0) ** 2 / 225.0) + 200.0 / (1.0 + e((13.0 - V) / 10.0))
         + 180.0 / (1.0 + e((V + 30.0) / 10.0)) + 20.0),
        (f2, 0.67 / (1.0 + e((V + 35.0) / 7.0)) + 0.33,
         600.0 * e(-(V + 25.0) ** 2 / 170.0) + 31.0 / (1.0 + e((25.0 - V) / 10.0))
         + 16.0 / (1.0 + e((V + 30.0) / 10.0))),
        (fcass, 0.6 / (1.0 + c2) + 0.4, 80.0 / (1.0 + c2) + 2.0),
    ]
    ds = np.empty((V.shape[0], 18))
    for k, (x, x_inf, tau) in enumerate(gates):
        ds[:, k] = (x_inf - x) / tau
    # currents
    K_o, Na_o, Ca_o = P["K_o"], P["Na_o"], P["Ca_o"]
    E_K = RTF * np.log(K_o / K_i)
    E_Na = RTF * np.log(Na_o / Na_i)
    E_Ca = 0.5 * RTF * np.log(Ca_o / Ca_i)
    E_Ks = RTF * np.log((K_o + P["p_KNa"] * Na_o) / (K_i + P["p_KNa"] * Na_i))
    root_ko = np.sqrt(K_o / 5.4)
    a_k1 = 0.1 / (1.0 + e(0.06 * (V - E_K - 200.0)))
    b_k1 = ((3.0 * e(0.0002 * (V - E_K + 100.0)) + e(0.1 * (V - E_K - 10.0)))
            / (1.0 + e(-0.5 * (V - E_K))))
    u = V / RTF
    g = P["gamma"]
    x = 2.0 * (V - 15.0) / RTF
    small = np.abs(x) < 1e-6
    xs_ = np.where(small, 1.0, x)
    ghk = np.where(small, 1.0 - 0.5 * x, xs_ / np.expm1(xs_))
    I = dict(
        I_Na=P["G_Na"] * m ** 3 * h * j * (V - E_Na),
        I_to=P["G_to"] * r * s_ * (V - E_K),
        I_Kr=P["G_Kr"] * root_ko * xr1 * xr2 * (V - E_K),
        I_Ks=P["G_Ks"] * xs ** 2 * (V - E_Ks),
        I_K1=P["G_K1"] * root_ko * a_k1 / (a_k1 + b_k1) * (V - E_K),
        I_NaCa=P["k_NaCa"] * (e(g * u) * Na_i ** 3 * Ca_o - e((g - 1.0) * u) * Na_o ** 3 * Ca_i * P["alpha"])
        / ((P["K_mNai"] ** 3 + Na_o ** 3) * (P["K_mCa"] + Ca_o) * (1.0 + P["k_sat"] * e((g - 1.0) * u))),
        I_NaK=P["P_NaK"] * K_o * Na_i / ((K_o + P["K_mK"]) * (Na_i + P["K_mNa"])
                                         * (1.0 + 0.1245 * e(-0.1 * u) + 0.0353 * e(-u))),
        I_pCa=P["G_pCa"] * Ca_i / (P["K_pCa"] + Ca_i),
        I_pK=P["G_pK"] * (V - E_K) / (1.0 + e((25.0 - V) / 5.98)),
        I_bNa=P["G_bNa"] * (V - E_Na),
        I_bCa=P["G_bCa"] * (V - E_Ca),
        I_CaL=P["G_CaL"] * d * f * f2 * fcass * 2.0 * FARADAY * ghk * (0.25 * Ca_ss * e(x) - Ca_o),
    )
    ion = sum(I[name] for name in CURRENT_NAMES)
    # calcium handling
    k_casr = P["max_sr"] - (P["max_sr"] - P["min_sr"]) / (1.0 + (P["EC"] / Ca_SR) ** 2)
    k1, k2 = P["k1p"] / k_casr, P["k2p"] * k_casr
    ds[:, R_BAR] = -k2 * Ca_ss * R_bar + P["k4"] * (1.0 - R_bar)
    O = k1 * Ca_ss ** 2 * R_bar / (P["k3"] + k1 * Ca_ss ** 2)
    I_rel = P["V_rel"] * O * (Ca_SR - Ca_ss)
    I_up = P["V_maxup"] / (1.0 + P["K_up"] ** 2 / Ca_i ** 2)
    I_leak = P["V_leak"] * (Ca_SR - Ca_i)
    I_xfer = P["V_xfer"] * (Ca_ss - Ca_i)
    for k, total, buf, kb in (
        (CA_I, -(I["I_bCa"] + I["I_pCa"] - 2.0 * I["I_NaCa"]) * CA_FLUX
         + V_SR / V_C * (I_leak - I_up) + I_xfer, P["Buf_c"], P["K_bufc"]),
        (CA_SR, I_up - I_leak - I_rel, P["Buf_sr"], P["K_bufsr"]),
        (CA_SS, -I["I_CaL"] * CA_SS_FLUX + V_SR / V_SS * I_rel - V_C / V_SS * I_xfer,
         P["Buf_ss"], P["K_bufss"]),
    ):
        c = s[:, k]
        ds[:, k] = total / (1.0 + buf * kb / (c + kb) ** 2)
    ds[:, NA_I] = -(I["I_Na"] + I["I_bNa"] + 3.0 * I["I_NaK"] + 3.0 * I["I_NaCa"]) * NA_FLUX
    ds[:, K_I] = -(I["I_K1"] + I["I_to"] + I["I_Kr"] + I["I_Ks"] - 2.0 * I["I_NaK"] + I["I_pK"]) * NA_FLUX
    return None, ds, ion


# ----------------------------------------------------------------------------- fast path
# Tabulated rates (cable.membrane.base.FastPath; common practice in cardiac simulation):
# the update y <- A(V) + B(V) y of the 11 gates that depend on V alone (s in its epi and
# endo forms), and six factors of the currents that depend on V alone (the exponentials
# of I_NaCa, the voltage factors of I_NaK and I_pK, the GHK factors of I_CaL), on a grid
# of V, interpolated linearly. fCass (Ca_ss), R-bar, I_K1 (V - E_K) and everything else
# are computed as in ``reaction``. With no table, the kernel is ``reaction`` itself: the
# exact path is the reference. The table depends on ``gamma`` only (I_NaCa).
_TAB_GATES = (M, H, J, XR1, XR2, XS, R, S, D, F, F2)   # gate states taken from the table
_N_TAB = 12                                             # 11 gates + the endo form of s
S_ENDO_COL = 11                                         # table gate index of endo s
(C_NACA_1, C_NACA_2, C_NAK, C_PK, C_CAL_SS, C_CAL_O) = range(6)
_GATE_COLS = 4 * _N_TAB          # A, dA, B, dB per tabulated gate
_TABLE_COLS = _GATE_COLS + 2 * 6  # then value, difference per current factor


@jit
def _fill_gate_table(V, dt, gating, out):
    for row in range(V.shape[0]):
        for endo in (False, True):
            x_inf, tau = _kinetics(V[row], 0.0, endo)
            for g in range(_N_TAB):
                if endo and g != S_ENDO_COL:
                    continue
                k = S if g == S_ENDO_COL else _TAB_GATES[g]
                if gating == 0:
                    decay = math.exp(-dt / tau[k])
                    a, b = x_inf[k] * (1.0 - decay), decay
                else:
                    a, b = dt * x_inf[k] / tau[k], 1.0 - dt / tau[k]
                out[row, 4 * g] = a
                out[row, 4 * g + 2] = b


def build_table(p_row, dt, gating, v_lo, v_hi, dv):
    """Tabulated gate updates and current factors (contract: cable.membrane.base.FastPath)."""
    rows = int(round((v_hi - v_lo) / dv)) + 1
    V = v_lo + dv * np.arange(rows)
    table = np.zeros((rows, _TABLE_COLS))
    _fill_gate_table(V, float(dt), int(gating), table)
    g = p_row[GAMMA]
    u = V / RTF
    x = 2.0 * (V - 15.0) / RTF
    with np.errstate(invalid="ignore", divide="ignore"):
        ghk = np.where(np.abs(x) < 1e-6, 1.0 - 0.5 * x, x / np.expm1(x))
    factors = (np.exp(g * u), np.exp((g - 1.0) * u),
               1.0 / (1.0 + 0.1245 * np.exp(-0.1 * u) + 0.0353 * np.exp(-u)),
               1.0 / (1.0 + np.exp((25.0 - V) / 5.98)),
               2.0 * FARADAY * ghk * 0.25 * np.exp(x), 2.0 * FARADAY * ghk)
    for c, col in enumerate(factors):
        table[:, _GATE_COLS + 2 * c] = col
    table[:-1, 1::2] = np.diff(table[:, 0::2], axis=0)
    return table


@jit
def _tab(table, j, f, col):
    return table[j, col] + f * table[j, col + 1]


@jit
def _tabulated_currents(V, s, p, i, table, j, f):
    """As :func:`_membrane_currents`, with the V-only factors from the table."""
    K_i, Na_i, Ca_i, Ca_ss = s[i, K_I], s[i, NA_I], s[i, CA_I], s[i, CA_SS]
    K_o, Na_o, Ca_o = p[i, K_O], p[i, NA_O], p[i, CA_O]
    E_K = RTF * math.log(K_o / K_i)
    E_Na = RTF * math.log(Na_o / Na_i)
    E_Ca = 0.5 * RTF * math.log(Ca_o / Ca_i)
    E_Ks = RTF * math.log((K_o + p[i, P_KNA] * Na_o) / (K_i + p[i, P_KNA] * Na_i))
    g_to = p[i, G_TO]
    g_ks = p[i, G_KS]
    root_ko = math.sqrt(K_o / 5.4)
    m = s[i, M]
    I_Na = p[i, G_NA] * m * m * m * s[i, H] * s[i, J] * (V - E_Na)
    I_to = g_to * s[i, R] * s[i, S] * (V - E_K)
    I_Kr = p[i, G_KR] * root_ko * s[i, XR1] * s[i, XR2] * (V - E_K)
    I_Ks = g_ks * s[i, XS] * s[i, XS] * (V - E_Ks)
    a_k1 = 0.1 / (1.0 + math.exp(0.06 * (V - E_K - 200.0)))
    b_k1 = ((3.0 * math.exp(0.0002 * (V - E_K + 100.0)) + math.exp(0.1 * (V - E_K - 10.0)))
            / (1.0 + math.exp(-0.5 * (V - E_K))))
    I_K1 = p[i, G_K1] * root_ko * a_k1 / (a_k1 + b_k1) * (V - E_K)
    e1 = _tab(table, j, f, _GATE_COLS + 2 * C_NACA_1)
    e2 = _tab(table, j, f, _GATE_COLS + 2 * C_NACA_2)
    I_NaCa = (p[i, K_NACA] * (e1 * Na_i ** 3 * Ca_o - e2 * Na_o ** 3 * Ca_i * p[i, ALPHA])
              / ((p[i, K_MNAI] ** 3 + Na_o ** 3) * (p[i, K_MCA] + Ca_o) * (1.0 + p[i, K_SAT] * e2)))
    I_NaK = (p[i, P_NAK] * K_o * Na_i / ((K_o + p[i, K_MK]) * (Na_i + p[i, K_MNA]))
             * _tab(table, j, f, _GATE_COLS + 2 * C_NAK))
    I_pCa = p[i, G_PCA] * Ca_i / (p[i, K_PCA] + Ca_i)
    I_pK = p[i, G_PK] * (V - E_K) * _tab(table, j, f, _GATE_COLS + 2 * C_PK)
    I_bNa = p[i, G_BNA] * (V - E_Na)
    I_bCa = p[i, G_BCA] * (V - E_Ca)
    I_CaL = (p[i, G_CAL] * s[i, D] * s[i, F] * s[i, F2] * s[i, FCASS]
             * (_tab(table, j, f, _GATE_COLS + 2 * C_CAL_SS) * Ca_ss
                - _tab(table, j, f, _GATE_COLS + 2 * C_CAL_O) * Ca_o))
    return I_Na, I_to, I_Kr, I_Ks, I_K1, I_NaCa, I_NaK, I_pCa, I_pK, I_bNa, I_bCa, I_CaL


@jit
def reaction_fast(v, s, p, i_stim, dt, ion_scale, gating, tables, v_lo, inv_dv, group):
    """Reaction step with tabulated rates (contract: cable.membrane.base.FastPath, by node).

    No table: ``reaction``. A node outside the table: ``reaction`` for that node.
    """
    if tables.shape[1] < 2:
        reaction(v, s, p, i_stim, dt, ion_scale, gating)
        return
    top = tables.shape[1] - 1.0
    for i in range(v.shape[0]):
        table = tables[0 if tables.shape[0] == 1 else group[i]]   # the node's table group
        V = v[i]
        x = (V - v_lo) * inv_dv
        if not (x >= 0.0 and x < top):
            reaction(v[i:i + 1], s[i:i + 1], p[i:i + 1], i_stim[i:i + 1], dt, ion_scale, gating)
            continue
        j = np.uint64(x)
        f = x - np.float64(j)
        Ca_i, Ca_SR, Ca_ss = s[i, CA_I], s[i, CA_SR], s[i, CA_SS]
        endo = int(p[i, CELL_TYPE]) == ENDO
        for g in range(11):
            k = _TAB_GATES[g]
            col = 4 * (S_ENDO_COL if (endo and k == S) else g)
            s[i, k] = (table[j, col] + f * table[j, col + 1]) + (table[j, col + 2] + f * table[j, col + 3]) * s[i, k]
        # fCass depends on Ca_ss: computed as in _kinetics
        c2 = (Ca_ss / 0.05) ** 2
        fcass_inf = 0.6 / (1.0 + c2) + 0.4
        tau_fcass = 80.0 / (1.0 + c2) + 2.0
        if gating == 0:
            s[i, FCASS] = fcass_inf - (fcass_inf - s[i, FCASS]) * math.exp(-dt / tau_fcass)
        else:
            s[i, FCASS] = s[i, FCASS] + dt * (fcass_inf - s[i, FCASS]) / tau_fcass
        # the rest as in reaction
        k1, k2 = _ryr(Ca_SR, Ca_ss, p, i)
        rate = k2 * Ca_ss + p[i, K4]
        r_inf = p[i, K4] / rate
        if gating == 0:
            s[i, R_BAR] = r_inf - (r_inf - s[i, R_BAR]) * math.exp(-dt * rate)
        else:
            s[i, R_BAR] = s[i, R_BAR] + dt * (p[i, K4] - rate * s[i, R_BAR])
        (I_Na, I_to, I_Kr, I_Ks, I_K1, I_NaCa, I_NaK, I_pCa, I_pK, I_bNa, I_bCa,
         I_CaL) = _tabulated_currents(V, s, p, i, table, j, f)
        ion = I_Na + I_to + I_Kr + I_Ks + I_K1 + I_NaCa + I_NaK + I_pCa + I_pK + I_bNa + I_bCa + I_CaL
        O = k1 * Ca_ss * Ca_ss * s[i, R_BAR] / (p[i, K3] + k1 * Ca_ss * Ca_ss)
        I_rel = p[i, V_REL] * O * (Ca_SR - Ca_ss)
        I_up = p[i, V_MAXUP] / (1.0 + (p[i, K_UP] / Ca_i) ** 2)
        I_leak = p[i, V_LEAK] * (Ca_SR - Ca_i)
        I_xfer = p[i, V_XFER] * (Ca_ss - Ca_i)
        d_ca_i = -(I_bCa + I_pCa - 2.0 * I_NaCa) * CA_FLUX + V_SR / V_C * (I_leak - I_up) + I_xfer
        d_ca_sr = I_up - I_leak - I_rel
        d_ca_ss = -I_CaL * CA_SS_FLUX + V_SR / V_SS * I_rel - V_C / V_SS * I_xfer
        s[i, CA_I] = _buffered(Ca_i, dt * d_ca_i, p[i, BUF_C], p[i, K_BUFC])
        s[i, CA_SR] = _buffered(Ca_SR, dt * d_ca_sr, p[i, BUF_SR], p[i, K_BUFSR])
        s[i, CA_SS] = _buffered(Ca_ss, dt * d_ca_ss, p[i, BUF_SS], p[i, K_BUFSS])
        s[i, NA_I] -= dt * (I_Na + I_bNa + 3.0 * I_NaK + 3.0 * I_NaCa) * NA_FLUX
        # the stimulus is carried by K+ (ten Tusscher & Panfilov 2006; i_stim = -I_stim)
        s[i, K_I] -= dt * (I_K1 + I_to + I_Kr + I_Ks - 2.0 * I_NaK + I_pK - i_stim[i]) * NA_FLUX
        v[i] = V + dt * (i_stim[i] - ion_scale * ion)


CURRENT_NAMES = ("I_Na", "I_to", "I_Kr", "I_Ks", "I_K1", "I_NaCa", "I_NaK", "I_pCa", "I_pK",
                 "I_bNa", "I_bCa", "I_CaL")

# (name, initial value, units, meaning); initial values: see the module docstring
_STATES = (
    ("m", 0.001647478, "1", "I_Na activation gate"),
    ("h", 0.7500859, "1", "I_Na fast inactivation gate"),
    ("j", 0.7497071, "1", "I_Na slow inactivation gate"),
    ("Xr1", 0.0002063598, "1", "I_Kr activation gate"),
    ("Xr2", 0.4731528, "1", "I_Kr inactivation gate"),
    ("Xs", 0.003221247, "1", "I_Ks activation gate"),
    ("r", 2.341281e-8, "1", "I_to activation gate"),
    ("s", 0.9999979, "1", "I_to inactivation gate"),
    ("d", 3.287728e-5, "1", "I_CaL activation gate"),
    ("f", 0.9772254, "1", "I_CaL slow voltage inactivation gate"),
    ("f2", 0.9995015, "1", "I_CaL fast voltage inactivation gate"),
    ("fCass", 0.9999728, "1", "I_CaL subspace-calcium inactivation gate"),
    ("R_bar", 0.9891751, "1", "R̄ in the paper: fraction of RyR not inactivated"),
    ("Ca_i", 0.000104492, "mM", "free cytoplasmic calcium"),
    ("Ca_SR", 3.50023, "mM", "free SR calcium"),
    ("Ca_ss", 0.0002130736, "mM", "free subspace calcium"),
    ("Na_i", 9.782091, "mM", "intracellular sodium"),
    ("K_i", 135.7416, "mM", "intracellular potassium"),
)
RESTING_POTENTIAL = -85.42026  # [mV]
#: earlier names -> the paper's (ten Tusscher & Panfilov 2006: R-bar, k1', k2' of the I_rel equations)
OLD_NAMES = {"R_prime": "R_bar", "k1_prime": "k1p", "k2_prime": "k2p"}

MODEL = MembraneModel(
    name="ten-tusscher-panfilov-2006",
    citation="ten Tusscher KHWJ, Panfilov AV (2006) Am J Physiol Heart Circ Physiol 291:H1088-H1100",
    summary="human ventricular myocyte (epi, endo, M): 12 currents, SR release via R-bar/O, "
            "buffered Ca in cytosol, SR and subspace",
    resting_potential=RESTING_POTENTIAL,
    states=tuple(State(*row) for row in _STATES),
    parameters=PARAMETERS,
    conductances=("G_Na", "G_to", "G_Kr", "G_Ks", "G_K1", "G_CaL", "k_NaCa", "P_NaK", "G_pCa",
                  "G_pK", "G_bNa", "G_bCa"),
    current_basis="capacitance",
    threshold=-40.0,
    reaction=reaction,
    reference=reference,
    currents=currents,
    current_names=CURRENT_NAMES,
    fast=FastPath(kernel=reaction_fast, build_table=build_table, table_parameters=("gamma",),
                  v_lo=-150.0, v_hi=100.0, dv=0.05, by_state=False),
    # the names used before the paper's own (read for one release)
    old_names=OLD_NAMES,
)


# ----------------------------------------------------------------------------- kinetics
# The right-hand side for the loop's reaction schemes (contract: cable.membrane.base):
# gates and R-bar as a - b y, the free calcium concentrations with the rapid-buffering
# derivative of ``reference`` (the dt -> 0 limit of the buffered update of ``reaction``),
# Na_i and K_i as their derivatives (K_i with the stimulus it carries).

@jit_inline
def kinetics(V, y, p, i, istim, a, b):
    """Right-hand side of node i (contract: cable.membrane.base)."""
    s = y.reshape((1, y.shape[0]))
    q = p[i:i + 1]
    Ca_i, Ca_SR, Ca_ss, R_bar = y[CA_I], y[CA_SR], y[CA_SS], y[R_BAR]
    x_inf, tau = _kinetics(V, Ca_ss, int(p[i, CELL_TYPE]) == ENDO)
    for k in range(N_GATES):
        b[k] = 1.0 / tau[k]
        a[k] = x_inf[k] * b[k]
    k1, k2 = _ryr(Ca_SR, Ca_ss, q, 0)
    a[R_BAR] = p[i, K4]
    b[R_BAR] = k2 * Ca_ss + p[i, K4]
    (I_Na, I_to, I_Kr, I_Ks, I_K1, I_NaCa, I_NaK, I_pCa, I_pK, I_bNa, I_bCa,
     I_CaL) = _membrane_currents(V, s, q, 0)
    O = k1 * Ca_ss * Ca_ss * R_bar / (p[i, K3] + k1 * Ca_ss * Ca_ss)
    I_rel = p[i, V_REL] * O * (Ca_SR - Ca_ss)
    I_up = p[i, V_MAXUP] / (1.0 + (p[i, K_UP] / Ca_i) ** 2)
    I_leak = p[i, V_LEAK] * (Ca_SR - Ca_i)
    I_xfer = p[i, V_XFER] * (Ca_ss - Ca_i)
    d_ca_i = -(I_bCa + I_pCa - 2.0 * I_NaCa) * CA_FLUX + V_SR / V_C * (I_leak - I_up) + I_xfer
    d_ca_sr = I_up - I_leak - I_rel
    d_ca_ss = -I_CaL * CA_SS_FLUX + V_SR / V_SS * I_rel - V_C / V_SS * I_xfer
    kb = p[i, K_BUFC]
    a[CA_I] = d_ca_i / (1.0 + p[i, BUF_C] * kb / ((Ca_i + kb) * (Ca_i + kb)))
    kb = p[i, K_BUFSR]
    a[CA_SR] = d_ca_sr / (1.0 + p[i, BUF_SR] * kb / ((Ca_SR + kb) * (Ca_SR + kb)))
    kb = p[i, K_BUFSS]
    a[CA_SS] = d_ca_ss / (1.0 + p[i, BUF_SS] * kb / ((Ca_ss + kb) * (Ca_ss + kb)))
    a[NA_I] = -(I_Na + I_bNa + 3.0 * I_NaK + 3.0 * I_NaCa) * NA_FLUX
    a[K_I] = -(I_K1 + I_to + I_Kr + I_Ks - 2.0 * I_NaK + I_pK - istim) * NA_FLUX
    for k in range(CA_I, K_I + 1):
        b[k] = 0.0
    return I_Na + I_to + I_Kr + I_Ks + I_K1 + I_NaCa + I_NaK + I_pCa + I_pK + I_bNa + I_bCa + I_CaL


MODEL = replace(MODEL, kinetics=kinetics)
