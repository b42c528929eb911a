"""ten Tusscher & Panfilov (2006) written as equations (the description form of the built-in model).

ten Tusscher KHWJ, Panfilov AV (2006) Alternans and spiral breakup in a human ventricular
tissue model. Am J Physiol Heart Circ Physiol 291:H1088-H1100: the twelve membrane currents,
the four intracellular fluxes (SERCA uptake, SR leak, release through the R-bar/O form of the
ryanodine receptor, subspace-to-cytosol transfer) and the calcium of the cytosol, the SR and
the subspace in rapid equilibrium with their buffers, of the hand-written model it replaced
(tests/membrane/oracles/ten_tusscher_panfilov_2006.py, a test oracle), with the same
parameters, states and initial values (an epicardial cell paced 1000 beats at 1 Hz; see the
oracle's docstring), per capacitance [pA/pF].

How the kernels integrate it (found by the analysis, or declared here where it is a choice):

* the 12 gates and R-bar have derivatives linear in themselves: Rush-Larsen (fCass and R-bar
  with coefficients of Ca_ss and Ca_SR, per node);
* Ca_i, Ca_SR and Ca_ss are ``buffers``: the derivatives below are those of their total
  (free + bound) concentrations, advanced by forward Euler, the free one recovered from the
  quadratic of the buffer equilibrium, as the paper does;
* Na_i and K_i (derivatives not linear in themselves: the Nernst potentials) by forward Euler;
* ``euler_order = "after-gates"``: the concentrations of a step take the currents and fluxes
  with the gates and R-bar already updated, the concentrations as they were (the same I_ion
  as the potential), as the hand-written kernel did;
* the stimulus is carried by K+ (the paper's K_i balance; ``i_stim`` = minus the paper's
  I_stim), so that long pacing conserves charge.

The cell type (``cell_type``: epi, endo or mid, seen by the expressions as 0, 1, 2) sets the
defaults of G_to and G_Ks (``by_label``) and, for endocardial cells, the slower s gate of I_to.
The physical constants and the cell's volumes (the paper's Table 1) are numbers here, not
parameters, as in the hand-written model.
"""

from cable.membrane.equations.description import EqParameter, EqState, Equations

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
ENDO = CELL_TYPES.index("endo")
# G_to and G_Ks per cell type [nS/pF] (ten Tusscher & Panfilov 2006, Table 1 and text)
G_TO_BY_TYPE = {"epi": 0.294, "endo": 0.073, "mid": 0.294}
G_KS_BY_TYPE = {"epi": 0.392, "endo": 0.392, "mid": 0.098}


def _par(name, default, units, meaning, quantity="dimensionless", scalable=False, **kw):
    kw.setdefault("minimum", 0.0)
    return EqParameter(name, default, units, meaning, quantity, scalable, **kw)


def _g(name, default, units, meaning, quantity="rate", **kw):
    return _par(name, default, units, meaning, quantity, True, **kw)


PARAMETERS = (
    _g("G_Na", 14.838, "nS/pF", "fast sodium conductance"),
    _g("G_to", 0.294, "nS/pF", "transient outward conductance of the chosen cell type "
       "(default: epi and mid 0.294, endo 0.073)", by_label=("cell_type", G_TO_BY_TYPE)),
    _g("G_Kr", 0.153, "nS/pF", "rapid delayed rectifier conductance (at K_o 5.4 mM)"),
    _g("G_Ks", 0.392, "nS/pF", "slow delayed rectifier conductance of the chosen cell type "
       "(default: epi and endo 0.392, mid 0.098)", by_label=("cell_type", G_KS_BY_TYPE)),
    _par("p_KNa", 0.03, "1", "Na/K permeability ratio of I_Ks"),
    _g("G_K1", 5.405, "nS/pF", "inward rectifier conductance (at K_o 5.4 mM)"),
    _g("G_CaL", 3.98e-5, "cm/(ms*uF)", "L-type calcium permeability", "dimensionless"),
    _g("k_NaCa", 1000.0, "pA/pF", "maximal Na/Ca exchanger current", "dimensionless"),
    _par("gamma", 0.35, "1", "γ in the paper: voltage-dependence parameter of I_NaCa", maximum=1.0),
    _par("K_mCa", 1.38, "mM", "Ca_o half-saturation of I_NaCa", "concentration"),
    _par("K_mNai", 87.5, "mM", "Na half-saturation of I_NaCa", "concentration"),
    _par("k_sat", 0.1, "1", "saturation factor of I_NaCa"),
    _par("alpha", 2.5, "1", "α in the paper: enhancement factor of the outward mode of I_NaCa"),
    _g("P_NaK", 2.724, "pA/pF", "maximal Na/K pump current", "dimensionless"),
    _par("K_mK", 1.0, "mM", "K_o half-saturation of I_NaK", "concentration"),
    _par("K_mNa", 40.0, "mM", "Na_i half-saturation of I_NaK", "concentration"),
    _g("G_pCa", 0.1238, "pA/pF", "maximal sarcolemmal calcium pump current", "dimensionless"),
    _par("K_pCa", 0.0005, "mM", "half-saturation of I_pCa", "concentration"),
    _g("G_pK", 0.0146, "nS/pF", "plateau potassium conductance"),
    _g("G_bNa", 0.00029, "nS/pF", "background sodium conductance"),
    _g("G_bCa", 0.000592, "nS/pF", "background calcium conductance"),
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
    EqParameter("cell_type", "epi", "1", "transmural cell type: epi, endo or mid (M cell)",
                choices=CELL_TYPES),
)


def _gate(y, inf, tau):
    return y, f"({inf} - {y})/{tau}"


def _sigmoid(arg):
    return f"1/(1 + exp({arg}))"


_ENDO = f"Eq(cell_type, {ENDO})"

INTERMEDIATES = (
    ("RTF", repr(RTF)),
    # gates: steady states and time constants [ms] (the paper's equations)
    ("m_inf", f"({_sigmoid('(-56.86 - V)/9.03')})**2"),
    ("tau_m", f"{_sigmoid('(-60 - V)/5')}*(0.1/(1 + exp((V + 35)/5)) + 0.1/(1 + exp((V - 50)/200)))"),
    ("h_inf", f"({_sigmoid('(V + 71.55)/7.43')})**2"),
    ("alpha_h", "Piecewise((0, V >= -40), (0.057*exp(-(V + 80)/6.8), True))"),
    ("beta_h", "Piecewise((0.77/(0.13*(1 + exp(-(V + 10.66)/11.1))), V >= -40),"
               " (2.7*exp(0.079*V) + 3.1e5*exp(0.3485*V), True))"),
    ("alpha_j", "Piecewise((0, V >= -40), ((-2.5428e4*exp(0.2444*V) - 6.948e-6*exp(-0.04391*V))"
                "*(V + 37.78)/(1 + exp(0.311*(V + 79.23))), True))"),
    ("beta_j", "Piecewise((0.6*exp(0.057*V)/(1 + exp(-0.1*(V + 32))), V >= -40),"
               " (0.02424*exp(-0.01052*V)/(1 + exp(-0.1378*(V + 40.14))), True))"),
    ("xr1_inf", _sigmoid("(-26 - V)/7")),
    ("tau_xr1", "450/(1 + exp((-45 - V)/10))*6/(1 + exp((V + 30)/11.5))"),
    ("xr2_inf", _sigmoid("(V + 88)/24")),
    ("tau_xr2", "3/(1 + exp((-60 - V)/20))*1.12/(1 + exp((V - 60)/20))"),
    ("xs_inf", _sigmoid("(-5 - V)/14")),
    ("tau_xs", "1400/sqrt(1 + exp((5 - V)/6))/(1 + exp((V - 35)/15)) + 80"),
    ("r_inf", _sigmoid("(20 - V)/6")),
    ("tau_r", "9.5*exp(-(V + 40)**2/1800) + 0.8"),
    # endocardial cells: the slower s gate of I_to
    ("s_inf", f"Piecewise(({_sigmoid('(V + 28)/5')}, {_ENDO}), ({_sigmoid('(V + 20)/5')}, True))"),
    ("tau_s", f"Piecewise((1000*exp(-(V + 67)**2/1000) + 8, {_ENDO}),"
              " (85*exp(-(V + 45)**2/320) + 5/(1 + exp((V - 20)/5)) + 3, True))"),
    ("d_inf", _sigmoid("(-8 - V)/7.5")),
    ("tau_d", "(1.4/(1 + exp((-35 - V)/13)) + 0.25)*1.4/(1 + exp((V + 5)/5)) + 1/(1 + exp((50 - V)/20))"),
    ("f_inf", _sigmoid("(V + 20)/7")),
    ("tau_f", "1102.5*exp(-(V + 27)**2/225) + 200/(1 + exp((13 - V)/10)) + 180/(1 + exp((V + 30)/10)) + 20"),
    ("f2_inf", "0.67/(1 + exp((V + 35)/7)) + 0.33"),
    ("tau_f2", "600*exp(-(V + 25)**2/170) + 31/(1 + exp((25 - V)/10)) + 16/(1 + exp((V + 30)/10))"),
    ("c2", "(Ca_ss/0.05)**2"),
    ("fcass_inf", "0.6/(1 + c2) + 0.4"),
    ("tau_fcass", "80/(1 + c2) + 2"),
    # reversal potentials [mV]
    ("E_K", "RTF*log(K_o/K_i)"),
    ("E_Na", "RTF*log(Na_o/Na_i)"),
    ("E_Ca", "0.5*RTF*log(Ca_o/Ca_i)"),
    ("E_Ks", "RTF*log((K_o + p_KNa*Na_o)/(K_i + p_KNa*Na_i))"),
    ("root_ko", "sqrt(K_o/5.4)"),
    ("dV_K", "V - E_K"),
    ("alpha_K1", "0.1/(1 + exp(0.06*(dV_K - 200)))"),
    ("beta_K1", "(3*exp(0.0002*(dV_K + 100)) + exp(0.1*(dV_K - 10)))/(1 + exp(-0.5*dV_K))"),
    ("u", "V/RTF"),
    ("x_CaL", "2*(V - 15)/RTF"),
    # the currents [pA/pF]
    ("i_Na", "G_Na*m**3*h*j*(V - E_Na)"),
    ("i_to", "G_to*r*s*dV_K"),
    ("i_Kr", "G_Kr*root_ko*Xr1*Xr2*dV_K"),
    ("i_Ks", "G_Ks*Xs**2*(V - E_Ks)"),
    ("i_K1", "G_K1*root_ko*alpha_K1/(alpha_K1 + beta_K1)*dV_K"),
    ("i_NaCa", "k_NaCa*(exp(gamma*u)*Na_i**3*Ca_o - exp((gamma - 1)*u)*Na_o**3*Ca_i*alpha)"
               "/((K_mNai**3 + Na_o**3)*(K_mCa + Ca_o)*(1 + k_sat*exp((gamma - 1)*u)))"),
    ("i_NaK", "P_NaK*K_o*Na_i/((K_o + K_mK)*(Na_i + K_mNa)*(1 + 0.1245*exp(-0.1*u) + 0.0353*exp(-u)))"),
    ("i_pCa", "G_pCa*Ca_i/(K_pCa + Ca_i)"),
    ("i_pK", "G_pK*dV_K/(1 + exp((25 - V)/5.98))"),
    ("i_bNa", "G_bNa*(V - E_Na)"),
    ("i_bCa", "G_bCa*(V - E_Ca)"),
    # GHK form, G_CaL d f f2 fCass 4 (V - 15) F^2/(RT) (0.25 Ca_ss e^x - Ca_o)/(e^x - 1),
    # x = 2 (V - 15) F/(RT), written as 2 F x/(e^x - 1) (...)
    ("i_CaL", f"G_CaL*d*f*f2*fCass*{2.0 * FARADAY!r}*x_CaL/(exp(x_CaL) - 1)*(0.25*Ca_ss*exp(x_CaL) - Ca_o)"),
    # calcium handling [mM/ms]
    ("k_casr", "max_sr - (max_sr - min_sr)/(1 + (EC/Ca_SR)**2)"),
    ("k1", "k1p/k_casr"),
    ("k2", "k2p*k_casr"),
    ("O", "k1*Ca_ss**2*R_bar/(k3 + k1*Ca_ss**2)"),
    ("I_rel", "V_rel*O*(Ca_SR - Ca_ss)"),
    ("I_up", "V_maxup/(1 + K_up**2/Ca_i**2)"),
    ("I_leak", "V_leak*(Ca_SR - Ca_i)"),
    ("I_xfer", "V_xfer*(Ca_ss - Ca_i)"),
)

DERIVATIVES = (
    _gate("m", "m_inf", "tau_m"),
    ("h", "(h_inf - h)*(alpha_h + beta_h)"),
    ("j", "(h_inf - j)*(alpha_j + beta_j)"),
    _gate("Xr1", "xr1_inf", "tau_xr1"), _gate("Xr2", "xr2_inf", "tau_xr2"), _gate("Xs", "xs_inf", "tau_xs"),
    _gate("r", "r_inf", "tau_r"), _gate("s", "s_inf", "tau_s"), _gate("d", "d_inf", "tau_d"),
    _gate("f", "f_inf", "tau_f"), _gate("f2", "f2_inf", "tau_f2"), _gate("fCass", "fcass_inf", "tau_fcass"),
    ("R_bar", "-k2*Ca_ss*R_bar + k4*(1 - R_bar)"),
    # totals (free + bound) of the buffered calcium
    ("Ca_i", f"-(i_bCa + i_pCa - 2*i_NaCa)*{CA_FLUX!r} + {V_SR / V_C!r}*(I_leak - I_up) + I_xfer"),
    ("Ca_SR", "I_up - I_leak - I_rel"),
    ("Ca_ss", f"-i_CaL*{CA_SS_FLUX!r} + {V_SR / V_SS!r}*I_rel - {V_C / V_SS!r}*I_xfer"),
    ("Na_i", f"-(i_Na + i_bNa + 3*i_NaK + 3*i_NaCa)*{NA_FLUX!r}"),
    # the stimulus is carried by K+ (ten Tusscher & Panfilov 2006; i_stim = -I_stim)
    ("K_i", f"-(i_K1 + i_to + i_Kr + i_Ks - 2*i_NaK + i_pK - i_stim)*{NA_FLUX!r}"),
)

CURRENTS = tuple((f"I_{n}", f"i_{n}") for n in
                 ("Na", "to", "Kr", "Ks", "K1", "NaCa", "NaK", "pCa", "pK", "bNa", "bCa", "CaL"))

STATES = (
    EqState("m", 0.001647478, "1", "I_Na activation gate"),
    EqState("h", 0.7500859, "1", "I_Na fast inactivation gate"),
    EqState("j", 0.7497071, "1", "I_Na slow inactivation gate"),
    EqState("Xr1", 0.0002063598, "1", "I_Kr activation gate"),
    EqState("Xr2", 0.4731528, "1", "I_Kr inactivation gate"),
    EqState("Xs", 0.003221247, "1", "I_Ks activation gate"),
    EqState("r", 2.341281e-8, "1", "I_to activation gate"),
    EqState("s", 0.9999979, "1", "I_to inactivation gate"),
    EqState("d", 3.287728e-5, "1", "I_CaL activation gate"),
    EqState("f", 0.9772254, "1", "I_CaL slow voltage inactivation gate"),
    EqState("f2", 0.9995015, "1", "I_CaL fast voltage inactivation gate"),
    EqState("fCass", 0.9999728, "1", "I_CaL subspace-calcium inactivation gate"),
    EqState("R_bar", 0.9891751, "1", "R̄ in the paper: fraction of RyR not inactivated"),
    EqState("Ca_i", 0.000104492, "mM", "free cytoplasmic calcium"),
    EqState("Ca_SR", 3.50023, "mM", "free SR calcium"),
    EqState("Ca_ss", 0.0002130736, "mM", "free subspace calcium"),
    EqState("Na_i", 9.782091, "mM", "intracellular sodium"),
    EqState("K_i", 135.7416, "mM", "intracellular potassium"),
)

EQUATIONS = Equations(
    name="ten-tusscher-panfilov-2006",
    citation="ten Tusscher KHWJ, Panfilov AV (2006) Am J Physiol Heart Circ Physiol 291:H1088-H1100",
    summary="human ventricular myocyte (epi, endo, M): 12 currents, SR release via R-bar/O, "
            "buffered Ca in cytosol, SR and subspace",
    resting_potential=-85.42026,
    states=STATES,
    parameters=PARAMETERS,
    intermediates=INTERMEDIATES,
    derivatives=DERIVATIVES,
    currents=CURRENTS,
    current_basis="capacitance",
    threshold=-40.0,
    euler_order="after-gates",
    buffers=(("Ca_i", "Buf_c", "K_bufc"), ("Ca_SR", "Buf_sr", "K_bufsr"), ("Ca_ss", "Buf_ss", "K_bufss")),
    # the names used before the paper's own (read for one release; ten Tusscher & Panfilov 2006,
    # the I_rel equations: R-bar, k1', k2')
    old_names={"R_prime": "R_bar", "k1_prime": "k1p", "k2_prime": "k2p"},
    meanings={"O": "open fraction of the RyR", "I_rel": "SR release [mM/ms]", "I_up": "SERCA uptake [mM/ms]",
              "I_leak": "SR leak [mM/ms]", "I_xfer": "subspace-to-cytosol transfer [mM/ms]",
              "k_casr": "Ca_SR dependence of the RyR rates"},
)
